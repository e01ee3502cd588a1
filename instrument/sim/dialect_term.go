package sim

// terminatorDialects are the instruments that end their messages with
// something other than LF.
func terminatorDialects() []Dialect {
	return []Dialect{
		{Name: "src_eot", Instrument: NameSource,
			Doc: `source that ends every message, both ways, with CR LF EOT ("\r\n\u0004"); a message is complete only at the whole string`,
			apply: func(b *Bench) error {
				b.byName[NameSource].term = TerminatorEOT
				return b.redefine(NameSource, IDNSourceEOT, "src_eot")
			}},
	}
}

// TerminatorEOT ends every message of the src_eot dialect: CR LF then EOT
// (0x04). Invented for the simulated bench, like its identities.
const TerminatorEOT = "\r\n\x04"

// IDNSourceEOT is the identity of the src_eot source.
const IDNSourceEOT = "NULLBENCH-SIM,SRC-3EOT,SIM0051,1.0"
