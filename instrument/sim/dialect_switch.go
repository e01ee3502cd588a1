package sim

// Switch dialects: relay multiplexers that open differently. The relays,
// their paths and the damage rules are the same in all of them.
//
//	(none)         ROUT:OPEN:ALL opens every relay
//	mux_noopenall  no open-all command: each relay is opened by ROUT:OPEN (@ch);
//	               ROUT:CLOS? (@ch) still reports it
func switchDialects() []Dialect {
	return []Dialect{{
		Name: "mux_noopenall", Instrument: NameSwitch,
		Doc: "relay switch with single-channel open and no open-all command (ROUT:OPEN:ALL is an undefined header)",
		apply: func(b *Bench) error {
			sw, ok := b.byName[NameSwitch].dev.(*switchDevice)
			if !ok {
				return errNotDevice(NameSwitch)
			}
			sw.noOpenAll = true
			return b.redefine(NameSwitch, IDNSwitchNoOpenAll, "mux_noopenall")
		},
	}}
}

// IDNSwitchNoOpenAll is the identity of the mux_noopenall switch (invented).
const IDNSwitchNoOpenAll = "NULLBENCH-SIM,MUX-40S,SIM0031,1.0"

// withDialect edits the switch's command set for its dialect.
func (s *switchDevice) withDialect(cmds []command) []command {
	if !s.noOpenAll {
		return cmds
	}
	var out []command
	for _, c := range cmds {
		if c.pattern == "ROUTe:OPEN:ALL" {
			continue
		}
		out = append(out, c)
	}
	return out
}
