package sim

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
)

// powerDevice is the 2-channel supply or the 3-channel DC source: the same
// command set (instrument/sim/doc.go), except that only the supply has a current limit
// command. Channels are selected by INST:NSEL or by a SOURn/OUTPn suffix.
type powerDevice struct {
	b        *Bench
	chans    []*outputChannel // owned by the model; touched under b.mu
	isSupply bool
	sel      int        // selected channel, 1-based (instrument mutex)
	rng      *rand.Rand // read-back noise (b.mu)
	// nodeOhms is the load each source channel sees in the fixture (for
	// MEAS:CURR? on the source).
	nodeOhms []float64
	// Dialects (dialect_supply.go): a channel list in each command; the
	// channel (1-based) that is a true negative output, 0 for none.
	chanList bool
	negOut   int
}

// Supply and source limits (common practice for bench units).
const (
	supplyMaxVolts    = 40.0
	supplyMaxAmps     = 3.0
	supplyDefaultAmps = 0.1
	sourceMaxVolts    = 25.0
)

// newChannels draws the fixed programming and read-back errors: gain
// ~0.05 %, offset ~5 mV for programming, different ones for read-back
// (bench supply 0.03–0.1 % + 5–20 mV, resolution 1 mV: common practice,
// no published source). The read-back gain is drawn uniformly within the
// accuracy the built-in profile states for it (supply2 500 ppm, source3
// 300 ppm), the rectangular distribution the uncertainty budget assumes
// (GUM 4.3.7), so that a lot measured on many simulated benches tests
// that budget row.
func newChannels(n int, supply bool, rng *rand.Rand) []*outputChannel {
	out := make([]*outputChannel, n)
	u := func(a float64) float64 { return a * (2*rng.Float64() - 1) }
	rbGain := 3e-4
	if supply {
		rbGain = 5e-4
	}
	for i := range out {
		c := &outputChannel{
			progGain: u(5e-4), progOffset: u(5e-3),
			rbGain: u(rbGain), rbOffset: u(3e-3),
			iGain: u(1e-3), iOffset: u(2e-6),
		}
		if supply {
			c.minV, c.maxV, c.limitAmps = 0, supplyMaxVolts, supplyDefaultAmps
		} else {
			c.minV, c.maxV, c.limitAmps = -sourceMaxVolts, sourceMaxVolts, 0.02
		}
		out[i] = c
	}
	return out
}

func (p *powerDevice) reset() {
	p.sel = 1
	p.b.mu.Lock()
	defer p.b.mu.Unlock()
	p.b.m.advance(p.b.benchSeconds())
	for _, c := range p.chans {
		c.on = false
		c.progVolts = 0
		if p.isSupply {
			c.limitAmps = supplyDefaultAmps
		}
	}
	p.b.m.checkDamage(p.b.m.connected())
}

func (p *powerDevice) waitPending(context.Context) error { return nil }

// channel resolves the channel a command addresses: the suffix on pattern
// node i if sent, else the selected channel.
func (p *powerDevice) channel(c *call, i int) (int, error) {
	s := c.suffixAt(i)
	if s < 0 {
		return p.sel, nil
	}
	if s < 1 || s > len(p.chans) {
		return 0, newErr(errSuffixRange, fmt.Sprintf("channel %d of %d", s, len(p.chans)))
	}
	return s, nil
}

// apply changes the model under its lock at the present bench time.
func (p *powerDevice) apply(f func()) {
	p.b.mu.Lock()
	defer p.b.mu.Unlock()
	p.b.m.advance(p.b.benchSeconds())
	f()
	for _, c := range p.chans {
		c.everOn = c.everOn || c.on
	}
	p.b.m.checkDamage(p.b.m.connected())
}

func quantise(v, step float64) float64 { return math.Round(v/step) * step }

func (p *powerDevice) commands() []command {
	return p.withDialect(p.ownCommands())
}

func (p *powerDevice) ownCommands() []command {
	maxV, minV := sourceMaxVolts, -sourceMaxVolts
	if p.isSupply {
		maxV, minV = supplyMaxVolts, 0
	}
	cmds := []command{
		{pattern: "INSTrument:NSELect", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			v, err := numericParam(c.params[0], 1, float64(len(p.chans)), 1)
			if err != nil {
				return "", err
			}
			p.sel = int(math.Round(v))
			return "", nil
		}},
		{pattern: "INSTrument:NSELect", query: true, fn: func(*call) (string, error) {
			return nr1(p.sel), nil
		}},
		{pattern: "INSTrument[:SELect]", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			s := charParam(c.params[0])
			for _, pre := range []string{"CH", "OUTPUT", "OUTP", "OUT"} {
				if strings.HasPrefix(s, pre) {
					n, err := strconv.Atoi(s[len(pre):])
					if err == nil && n >= 1 && n <= len(p.chans) {
						p.sel = n
						return "", nil
					}
				}
			}
			return "", newErr(errIllegalValue, c.params[0])
		}},
		{pattern: "INSTrument[:SELect]", query: true, fn: func(*call) (string, error) {
			return "CH" + nr1(p.sel), nil
		}},
		{pattern: "[SOURce#:]VOLTage[:LEVel][:IMMediate][:AMPLitude]", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			ch, err := p.channel(c, 0)
			if err != nil {
				return "", err
			}
			v, err := numericParam(c.params[0], minV, maxV, 0)
			if err != nil {
				return "", err
			}
			p.apply(func() { p.chans[ch-1].progVolts = quantise(v, 1e-3) })
			return "", nil
		}},
		{pattern: "[SOURce#:]VOLTage[:LEVel][:IMMediate][:AMPLitude]", query: true, maxParams: 1, fn: func(c *call) (string, error) {
			ch, err := p.channel(c, 0)
			if err != nil {
				return "", err
			}
			if len(c.params) == 1 {
				switch charParam(c.params[0]) {
				case "MIN", "MINIMUM":
					return nr3(minV), nil
				case "MAX", "MAXIMUM":
					return nr3(maxV), nil
				default:
					return "", newErr(errIllegalValue, c.params[0])
				}
			}
			p.b.mu.Lock()
			defer p.b.mu.Unlock()
			return nr3(p.chans[ch-1].progVolts), nil
		}},
		{pattern: "OUTPut#[:STATe]", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			ch, err := p.channel(c, 0)
			if err != nil {
				return "", err
			}
			on, err := boolParam(c.params[0])
			if err != nil {
				return "", err
			}
			p.apply(func() { p.chans[ch-1].on = on })
			return "", nil
		}},
		{pattern: "OUTPut#[:STATe]", query: true, fn: func(c *call) (string, error) {
			ch, err := p.channel(c, 0)
			if err != nil {
				return "", err
			}
			p.b.mu.Lock()
			defer p.b.mu.Unlock()
			return boolResp(p.chans[ch-1].on), nil
		}},
		{pattern: "MEASure[:SCALar]:VOLTage[:DC]", query: true, fn: func(c *call) (string, error) {
			ch, err := p.channel(c, 0)
			if err != nil {
				return "", err
			}
			p.b.mu.Lock()
			defer p.b.mu.Unlock()
			p.b.m.advance(p.b.benchSeconds())
			k := p.chans[ch-1]
			v := k.volts*(1+k.rbGain) + k.rbOffset + 0.2e-3*p.rng.NormFloat64()
			return nr3(quantise(v, 1e-3)), nil
		}},
		{pattern: "MEASure[:SCALar]:CURRent[:DC]", query: true, fn: func(c *call) (string, error) {
			ch, err := p.channel(c, 0)
			if err != nil {
				return "", err
			}
			p.b.mu.Lock()
			defer p.b.mu.Unlock()
			m := p.b.m
			m.advance(p.b.benchSeconds())
			k := p.chans[ch-1]
			var i float64
			if p.isSupply {
				vp, vn := m.rails()
				i = m.loadAmps(math.Max(vp-vn, 0), m.connected())
			} else {
				i = k.volts / p.nodeOhms[ch-1]
			}
			i = i*(1+k.iGain) + k.iOffset + 1e-6*p.rng.NormFloat64()
			return nr3(quantise(i, 1e-6)), nil
		}},
	}
	if p.isSupply {
		cmds = append(cmds,
			command{pattern: "[SOURce#:]CURRent[:LEVel][:IMMediate][:AMPLitude]", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
				ch, err := p.channel(c, 0)
				if err != nil {
					return "", err
				}
				v, err := numericParam(c.params[0], 0, supplyMaxAmps, supplyDefaultAmps)
				if err != nil {
					return "", err
				}
				p.apply(func() { p.chans[ch-1].limitAmps = quantise(v, 1e-6) })
				return "", nil
			}},
			command{pattern: "[SOURce#:]CURRent[:LEVel][:IMMediate][:AMPLitude]", query: true, fn: func(c *call) (string, error) {
				ch, err := p.channel(c, 0)
				if err != nil {
					return "", err
				}
				p.b.mu.Lock()
				defer p.b.mu.Unlock()
				return nr3(p.chans[ch-1].limitAmps), nil
			}},
		)
	}
	return cmds
}

// switchDevice is the relay matrix: bank 1 (101..140) holds the op-amps of
// the lot, bank 2 (201..240) the boards.
type switchDevice struct {
	b         *Bench
	noOpenAll bool // dialect mux_noopenall (dialect_switch.go)
}

func validSwitchChannel(ch int) bool {
	return (ch >= opampBankFirst && ch <= opampBankLast) || (ch >= boardBankFirst && ch <= boardBankLast) || ch == ThroughChannel
}

func switchList(p string) ([]int, error) {
	chs, err := channelList(p, opampBankFirst, boardBankLast)
	if err != nil {
		return nil, err
	}
	for _, ch := range chs {
		if !validSwitchChannel(ch) {
			return nil, newErr(errOutOfRange, fmt.Sprintf("channel %d (banks %d..%d and %d..%d, through relay %d)", ch, opampBankFirst, opampBankLast, boardBankFirst, boardBankLast, ThroughChannel))
		}
	}
	return chs, nil
}

func (s *switchDevice) reset() {
	s.b.mu.Lock()
	defer s.b.mu.Unlock()
	s.b.m.advance(s.b.benchSeconds())
	s.b.m.closed = map[int]bool{}
}

func (s *switchDevice) waitPending(context.Context) error { return nil }

func (s *switchDevice) setState(chs []int, closed bool) {
	b := s.b
	b.mu.Lock()
	defer b.mu.Unlock()
	m := b.m
	m.advance(b.benchSeconds())
	for _, ch := range chs {
		if closed && !m.closed[ch] {
			m.closed[ch] = true
			m.everClosed[ch] = true
			rp := m.paths[ch]
			if rp == nil {
				rp = newRelayPath(m.seed, ch)
				m.paths[ch] = rp
			}
			rp.closedAt = m.t
		} else if !closed {
			delete(m.closed, ch)
		}
	}
	m.mostClosed = max(m.mostClosed, len(m.closed))
	m.checkDamage(m.connected())
}

func (s *switchDevice) commands() []command {
	state := func(c *call, want bool) (string, error) {
		chs, err := switchList(c.params[0])
		if err != nil {
			return "", err
		}
		s.b.mu.Lock()
		defer s.b.mu.Unlock()
		out := make([]string, len(chs))
		for i, ch := range chs {
			out[i] = boolResp(s.b.m.closed[ch] == want)
		}
		return strings.Join(out, ","), nil
	}
	return s.withDialect([]command{
		{pattern: "ROUTe:CLOSe", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			chs, err := switchList(c.params[0])
			if err != nil {
				return "", err
			}
			s.setState(chs, true)
			return "", nil
		}},
		{pattern: "ROUTe:CLOSe", query: true, minParams: 1, maxParams: 1, fn: func(c *call) (string, error) { return state(c, true) }},
		{pattern: "ROUTe:OPEN", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			chs, err := switchList(c.params[0])
			if err != nil {
				return "", err
			}
			s.setState(chs, false)
			return "", nil
		}},
		{pattern: "ROUTe:OPEN", query: true, minParams: 1, maxParams: 1, fn: func(c *call) (string, error) { return state(c, false) }},
		{pattern: "ROUTe:OPEN:ALL", fn: func(*call) (string, error) {
			s.reset()
			return "", nil
		}},
		{pattern: "ROUTe:CLOSe:STATe", query: true, fn: func(*call) (string, error) {
			s.b.mu.Lock()
			defer s.b.mu.Unlock()
			var chs []int
			for ch := range s.b.m.closed {
				chs = append(chs, ch)
			}
			sortInts(chs)
			parts := make([]string, len(chs))
			for i, ch := range chs {
				parts[i] = nr1(ch)
			}
			return "(@" + strings.Join(parts, ",") + ")", nil
		}},
	})
}

func sortInts(a []int) {
	for i := 1; i < len(a); i++ {
		for j := i; j > 0 && a[j] < a[j-1]; j-- {
			a[j], a[j-1] = a[j-1], a[j]
		}
	}
}

// chamberDevice is the temperature chamber; it also serves the
// thermometer role (its air sensor).
type chamberDevice struct{ b *Bench }

// Chamber limits and dynamics (common practice for bench chambers).
const (
	chamberMinC       = -40.0
	chamberMaxC       = 150.0
	chamberTauSeconds = 240.0      // air follows the set point, first order
	chamberRampCPerS  = 5.0 / 60.0 // at most 5 °C/min
)

func (d *chamberDevice) reset() {
	d.b.mu.Lock()
	defer d.b.mu.Unlock()
	d.b.m.advance(d.b.benchSeconds())
	d.b.m.chamber.setC = d.b.m.ambientC
}

func (d *chamberDevice) waitPending(context.Context) error { return nil }

func (d *chamberDevice) commands() []command {
	return []command{
		{pattern: "[SOURce:]TEMPerature[:SPOint]", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			v, err := numericParam(c.params[0], chamberMinC, chamberMaxC, d.b.m.ambientC)
			if err != nil {
				return "", err
			}
			d.b.mu.Lock()
			defer d.b.mu.Unlock()
			d.b.m.advance(d.b.benchSeconds())
			d.b.m.chamber.setC = v
			return "", nil
		}},
		{pattern: "[SOURce:]TEMPerature[:SPOint]", query: true, fn: func(*call) (string, error) {
			d.b.mu.Lock()
			defer d.b.mu.Unlock()
			return nr3(d.b.m.chamber.setC), nil
		}},
		{pattern: "MEASure[:SCALar]:TEMPerature", query: true, fn: func(*call) (string, error) {
			d.b.mu.Lock()
			defer d.b.mu.Unlock()
			m := d.b.m
			m.advance(d.b.benchSeconds())
			v := m.chamber.airC + 0.01*m.chamber.rng.NormFloat64()
			return nr3(quantise(v, 0.01)), nil
		}},
	}
}
