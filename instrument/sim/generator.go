package sim

import (
	"context"
	"math"
	"strconv"
)

// genDevice is the three-output function generator GEN-3CH (SCPI-99
// SOURce and OUTPut subsystems; the forms are listed in doc.go). Its
// outputs are wired as ac.go describes.
type genDevice struct{ b *Bench }

func (g *genDevice) reset() {
	b := g.b
	b.mu.Lock()
	defer b.mu.Unlock()
	b.m.advance(b.benchSeconds())
	for _, c := range b.m.gen {
		c.reset()
	}
	b.m.checkDamage(b.m.connected())
}

func (g *genDevice) waitPending(context.Context) error { return nil }

// output resolves the SOURce/OUTPut suffix (1 when not sent).
func (g *genDevice) output(c *call, node int) (*genChannel, int, error) {
	n := c.suffixAt(node)
	if n == -1 {
		n = 1
	}
	if n < 1 || n > len(g.b.m.gen) {
		return nil, 0, errf(errSuffixRange, "output %d (1..%d)", n, len(g.b.m.gen))
	}
	return g.b.m.gen[n-1], n - 1, nil
}

// change applies fn to an output with the model advanced to now and the
// limits checked afterwards; a refused change leaves the output as it was.
func (g *genDevice) change(c *call, node int, fn func(ch *genChannel) error) error {
	b := g.b
	b.mu.Lock()
	defer b.mu.Unlock()
	ch, _, err := g.output(c, node)
	if err != nil {
		return err
	}
	b.m.advance(b.benchSeconds())
	saved := *ch
	if err := fn(ch); err != nil {
		*ch = saved
		return err
	}
	if math.Abs(ch.emfOffset())+ch.emfPeak() > genMaxEMFVolts*(1+1e-9) {
		*ch = saved
		return errf(errSettings, "offset and amplitude exceed %g V peak open circuit", genMaxEMFVolts)
	}
	ch.everOn = ch.everOn || ch.on
	b.m.checkDamage(b.m.connected())
	return nil
}

func (g *genDevice) query(c *call, node int, fn func(ch *genChannel) string) (string, error) {
	b := g.b
	b.mu.Lock()
	defer b.mu.Unlock()
	ch, _, err := g.output(c, node)
	if err != nil {
		return "", err
	}
	return fn(ch), nil
}

// freqParam accepts a frequency with an optional HZ, KHZ or MHZ suffix
// (MHZ is megahertz, IEEE 488.2 §7.7.3.5) or MIN|MAX.
func freqParam(p string) (float64, error) {
	switch charParam(p) {
	case "MIN", "MINIMUM":
		return genMinHz, nil
	case "MAX", "MAXIMUM":
		return genMaxHz, nil
	}
	v, err := parseDecimal(p)
	if err != nil {
		return 0, err
	}
	if !(v >= genMinHz && v <= genMaxHz*(1+1e-12)) {
		return 0, errf(errOutOfRange, "%s Hz (%g..%g)", p, genMinHz, genMaxHz)
	}
	return v, nil
}

func (g *genDevice) commands() []command {
	return []command{
		{pattern: "[SOURce#:]FUNCtion[:SHAPe]", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			return "", g.change(c, 0, func(ch *genChannel) error {
				switch charParam(c.params[0]) {
				case "SIN", "SINUSOID":
					ch.function = "SIN"
				case "DC":
					ch.function = "DC"
				default:
					return errf(errIllegalValue, "function %s (SIN or DC on this generator)", c.params[0])
				}
				return nil
			})
		}},
		{pattern: "[SOURce#:]FUNCtion[:SHAPe]", query: true, fn: func(c *call) (string, error) {
			return g.query(c, 0, func(ch *genChannel) string { return ch.function })
		}},
		{pattern: "[SOURce#:]FREQuency[:CW]", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			f, err := freqParam(c.params[0])
			if err != nil {
				return "", err
			}
			return "", g.change(c, 0, func(ch *genChannel) error {
				ch.retime(g.b.m.t)
				ch.freqHz = f
				return nil
			})
		}},
		{pattern: "[SOURce#:]FREQuency[:CW]", query: true, fn: func(c *call) (string, error) {
			return g.query(c, 0, func(ch *genChannel) string { return nr3(ch.freqHz) })
		}},
		{pattern: "[SOURce#:]VOLTage[:LEVel][:IMMediate][:AMPLitude]", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			v, err := numericParam(c.params[0], 0, 2*genMaxEMFVolts, 0.1)
			if err != nil {
				return "", err
			}
			return "", g.change(c, 0, func(ch *genChannel) error {
				ch.ampl = v
				return nil
			})
		}},
		{pattern: "[SOURce#:]VOLTage[:LEVel][:IMMediate][:AMPLitude]", query: true, fn: func(c *call) (string, error) {
			return g.query(c, 0, func(ch *genChannel) string { return nr3(ch.ampl) })
		}},
		{pattern: "[SOURce#:]VOLTage:UNIT", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			return "", g.change(c, 0, func(ch *genChannel) error {
				u := charParam(c.params[0])
				switch u {
				case "VPP", "VPK", "VRMS":
					// The amplitude keeps its volts: the same number now
					// means another quantity (common practice).
					ch.unit = u
					return nil
				}
				return errf(errIllegalValue, "unit %s (VPP, VPK or VRMS)", c.params[0])
			})
		}},
		{pattern: "[SOURce#:]VOLTage:UNIT", query: true, fn: func(c *call) (string, error) {
			return g.query(c, 0, func(ch *genChannel) string { return ch.unit })
		}},
		{pattern: "[SOURce#:]VOLTage[:LEVel][:IMMediate]:OFFSet", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			v, err := numericParam(c.params[0], -genMaxEMFVolts, genMaxEMFVolts, 0)
			if err != nil {
				return "", err
			}
			return "", g.change(c, 0, func(ch *genChannel) error {
				ch.offset = v
				return nil
			})
		}},
		{pattern: "[SOURce#:]VOLTage[:LEVel][:IMMediate]:OFFSet", query: true, fn: func(c *call) (string, error) {
			return g.query(c, 0, func(ch *genChannel) string { return nr3(ch.offset) })
		}},
		{pattern: "OUTPut#[:STATe]", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			on, err := boolParam(c.params[0])
			if err != nil {
				return "", err
			}
			b := g.b
			b.mu.Lock()
			_, idx, err := g.output(c, 0)
			if err == nil && on {
				if a := b.m.activeGen(); a >= 0 && a != idx {
					err = errf(errSettings, "output %d is on; one output at a time (the stimulus sense follows it)", a+1)
				}
			}
			b.mu.Unlock()
			if err != nil {
				return "", err
			}
			return "", g.change(c, 0, func(x *genChannel) error {
				if on && !x.on {
					x.retime(g.b.m.t)
				}
				x.on = on
				return nil
			})
		}},
		{pattern: "OUTPut#[:STATe]", query: true, fn: func(c *call) (string, error) {
			return g.query(c, 0, func(ch *genChannel) string { return boolResp(ch.on) })
		}},
		{pattern: "OUTPut#:LOAD", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			var ohms float64
			switch charParam(c.params[0]) {
			case "INF", "INFINITY":
				ohms = math.Inf(1)
			default:
				v, err := numericParam(c.params[0], 1, 10e3, 50)
				if err != nil {
					return "", err
				}
				ohms = v
			}
			return "", g.change(c, 0, func(ch *genChannel) error {
				ch.loadOhms = ohms
				return nil
			})
		}},
		{pattern: "OUTPut#:LOAD", query: true, fn: func(c *call) (string, error) {
			return g.query(c, 0, func(ch *genChannel) string {
				if math.IsInf(ch.loadOhms, 1) {
					return "9.9E+37"
				}
				return strconv.FormatFloat(ch.loadOhms, 'E', 6, 64)
			})
		}},
	}
}
