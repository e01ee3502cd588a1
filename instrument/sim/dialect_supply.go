package sim

import (
	"fmt"
	"strings"
	"time"
)

// Supply dialects: the common ways a bench supply is told which output a
// command is for, how its negative rail is made, and how fast it takes
// commands. The outputs, their errors and the parts' physics are the same
// in all of them, so the same plan must measure the same results.
//
//	(none)        INST:NSEL n selects the channel; V- is channel 2 wired floating,
//	              + terminal on ground, programmed with the magnitude
//	psu_chanlist  no INST:NSEL: every channel command ends with a channel list,
//	              e.g. VOLT 15,(@2), OUTP ON,(@1), MEAS:VOLT? (@2)
//	psu_single    two single-output supplies: psu makes V+, psu2 (a second
//	              instrument) makes V- wired floating
//	psu_negout    channel 2 is a true negative output: VOLT -15 programs it,
//	              MEAS:VOLT? reads -15
//	psu_slow      CR terminator; after a set command the supply is busy for
//	              3 ms (wall clock) and loses any message but *OPC? sent then
//	              (-363 Input buffer overrun); *OPC? waits until it is ready
func supplyDialects() []Dialect {
	return []Dialect{
		{Name: "psu_chanlist", Instrument: NameSupply,
			Doc: "supply addressed by a channel list in each command: VOLT 15,(@2); MEAS:VOLT? (@2) (no INST:NSEL)",
			apply: func(b *Bench) error {
				p, err := benchSupply(b)
				if err != nil {
					return err
				}
				p.chanList = true
				return b.redefine(NameSupply, IDNSupplyChanList, "psu_chanlist")
			}},
		{Name: "psu_single", Instrument: NameSupply,
			Doc:   "two single-output supplies, psu for V+ and psu2 for V- (wired floating, + terminal on ground)",
			apply: applySingleSupplies},
		{Name: "psu_negout", Instrument: NameSupply,
			Doc: "supply whose channel 2 is a true negative output programmed with a negative value (VOLT -15)",
			apply: func(b *Bench) error {
				p, err := benchSupply(b)
				if err != nil {
					return err
				}
				p.negOut = 2
				b.supplyNegRole = `{ instrument = "psu", channel = "2", negative = true }`
				return b.redefine(NameSupply, IDNSupplyNegOut, "psu_negout")
			}},
		{Name: "psu_slow", Instrument: NameSupply,
			Doc: "supply with a CR terminator that loses messages sent within 3 ms of a set command; needs *OPC? (or a wait) after each set",
			apply: func(b *Bench) error {
				in := b.byName[NameSupply]
				in.term, in.busyFor = "\r", slowSupplyBusy
				return b.redefine(NameSupply, IDNSupplySlow, "psu_slow")
			}},
	}
}

// slowSupplyBusy is how long the psu_slow supply is deaf after a set command.
const slowSupplyBusy = 3 * time.Millisecond

// Identities of the supply dialects (invented, like the rest of the bench).
const (
	IDNSupplyChanList = "NULLBENCH-SIM,PSU-2CL,SIM0041,1.0"
	IDNSupplySingle   = "NULLBENCH-SIM,PSU-1CH,SIM0042,1.0"
	IDNSupplySingle2  = "NULLBENCH-SIM,PSU-1CH,SIM0043,1.0"
	IDNSupplyNegOut   = "NULLBENCH-SIM,PSU-2NO,SIM0044,1.0"
	IDNSupplySlow     = "NULLBENCH-SIM,PSU-2SL,SIM0045,1.0"
)

// NameSupply2 is the second supply of the psu_single dialect.
const NameSupply2 = "psu2"

func benchSupply(b *Bench) (*powerDevice, error) {
	p, ok := b.byName[NameSupply].dev.(*powerDevice)
	if !ok {
		return nil, errNotDevice(NameSupply)
	}
	return p, nil
}

// applySingleSupplies splits the two-channel supply into two instruments
// of one output each, over the same model channels.
func applySingleSupplies(b *Bench) error {
	p, err := benchSupply(b)
	if err != nil {
		return err
	}
	if len(p.chans) != 2 {
		return fmt.Errorf("the supply has %d channels, want 2", len(p.chans))
	}
	pos := &powerDevice{b: b, chans: p.chans[:1], isSupply: true, sel: 1, rng: p.rng}
	neg := &powerDevice{b: b, chans: p.chans[1:], isSupply: true, sel: 1, rng: p.rng}
	b.byName[NameSupply].dev = pos
	if err := b.redefine(NameSupply, IDNSupplySingle, "psu_single"); err != nil {
		return err
	}
	in := newInstrument(NameSupply2, "supply", "psu_single", IDNSupplySingle2, neg).withSystem()
	b.insts = append(b.insts, in)
	b.byName[NameSupply2] = in
	b.supplyPosRole = `{ instrument = "psu", channel = "1" }`
	b.supplyNegRole = `{ instrument = "psu2", channel = "1", negative = true }`
	return nil
}

// withDialect edits the supply's command set for its dialect.
func (p *powerDevice) withDialect(cmds []command) []command {
	if !p.chanList && p.negOut == 0 {
		return cmds
	}
	var out []command
	for _, c := range cmds {
		if p.chanList {
			if strings.HasPrefix(c.pattern, "INSTrument") {
				continue
			}
			c = p.channelListed(c)
		}
		if p.negOut > 0 {
			c = p.negativeOutput(c)
		}
		out = append(out, c)
	}
	return out
}

// channelListed makes a command take its channel from a last parameter
// "(@n)" (SCPI-99 vol. 1 §8.3.2, channel lists; one channel here), which
// is required.
func (p *powerDevice) channelListed(c command) command {
	fn := c.fn
	c.minParams++
	c.maxParams++
	c.fn = func(cl *call) (string, error) {
		last := cl.params[len(cl.params)-1]
		if !strings.HasPrefix(strings.TrimSpace(last), "(@") {
			return "", newErr(errMissingParam, "channel list (@n) expected last")
		}
		chs, err := channelList(last, 1, len(p.chans))
		if err != nil {
			return "", err
		}
		if len(chs) != 1 {
			return "", newErr(errOutOfRange, "one channel per command")
		}
		p.sel = chs[0]
		cl.params = cl.params[:len(cl.params)-1]
		return fn(cl)
	}
	return c
}

// negativeOutput makes channel negOut a true negative output at the SCPI
// boundary: it is programmed with −40..0 V and reports negative volts,
// while the model keeps the magnitude as for the floating rail.
func (p *powerDevice) negativeOutput(c command) command {
	fn := c.fn
	isVolt := strings.Contains(c.pattern, "VOLTage")
	if !isVolt {
		return c
	}
	c.fn = func(cl *call) (string, error) {
		ch, err := p.channel(cl, 0)
		if err != nil || ch != p.negOut {
			return fn(cl)
		}
		switch {
		case !c.query:
			v, err := numericParam(cl.params[0], -supplyMaxVolts, 0, 0)
			if err != nil {
				return "", err
			}
			cl.params = []string{nr3(-v)}
			return fn(cl)
		case len(cl.params) == 1:
			switch charParam(cl.params[0]) {
			case "MIN", "MINIMUM":
				return nr3(-supplyMaxVolts), nil
			case "MAX", "MAXIMUM":
				return nr3(0), nil
			}
		}
		r, err := fn(cl)
		if err != nil {
			return r, err
		}
		var v float64
		if _, err := fmt.Sscan(r, &v); err != nil {
			return r, nil
		}
		return nr3(-v), nil
	}
	return c
}
