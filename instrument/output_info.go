package instrument

// OutputInfo describes one supply or source channel for plausibility
// checks and messages: which instrument and channel it is, the command
// that reads its voltage back (as sent, after the channel select), and
// the channel's voltage rating from the profile.
type OutputInfo struct {
	Instrument string  // the instrument's name in the plan
	Channel    string  // the channel as the profile names it
	ReadVolts  string  // the read-back command, e.g. "INST:NSEL 2; MEAS:VOLT?"
	MaxVolts   float64 // the channel's rating in magnitude (max_volts); 0: not stated
}

// Output describes the supply channel (see OutputInfo).
func (d *SupplyDriver) Output() OutputInfo {
	return d.outputInfo(d.cmds.ReadVolts, d.cmds.MaxVolts)
}

// Output describes the source channel (see OutputInfo).
func (d *SourceDriver) Output() OutputInfo {
	return d.outputInfo(d.cmds.ReadVolts, d.cmds.MaxVolts)
}

func (c *channelBase) outputInfo(readTpl string, maxVolts float64) OutputInfo {
	cmd, err := c.expand(readTpl, "", "")
	if err != nil {
		cmd = readTpl
	}
	if c.sel != "" {
		if sel, err := c.expand(c.sel, "", ""); err == nil {
			cmd = sel + "; " + cmd
		}
	}
	return OutputInfo{Instrument: c.s.Name(), Channel: c.channel, ReadVolts: cmd, MaxVolts: maxVolts}
}
