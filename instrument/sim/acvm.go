package sim

import (
	"context"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"time"
)

// The AC voltmeter ACV-2: a true-RMS, AC-coupled voltmeter with a
// two-input scanner (ROUTe:CLOSe (@1) or (@2)): input 1 is wired to the
// stimulus-sense line, input 2 to the fixture output (ac.go). Magnitude
// only. Its errors are those of a 6½-digit meter's AC function (typical
// data-sheet figures, common practice): ±0.06 % of reading gain error,
// a 300 kHz bandwidth and a low-frequency corner a decade below the
// detector bandwidth setting (3, 20 or 200 Hz), noise of 1e-5 of range and everything in
// its bandwidth added in power.

var (
	acvmRanges = []float64{0.1, 1, 10, 100}
	acvmDetHz  = []float64{3, 20, 200}
)

const (
	acvmGainTolerance = 6e-4
	acvmBandwidthHz   = 300e3
	acvmNoiseRel      = 1e-5
	acvmOverload      = 1.2
)

type acvm struct {
	b   *Bench
	rng *rand.Rand // guarded by b.mu

	gain [2]float64 // fixed per input (seeded)

	input    int // 0 or 1
	rangeIdx int
	detIdx   int
}

func newACVM(b *Bench, rng *rand.Rand) *acvm {
	a := &acvm{b: b, rng: rng}
	for i := range a.gain {
		a.gain[i] = acvmGainTolerance * (2*rng.Float64() - 1)
	}
	a.reset()
	return a
}

func (a *acvm) reset() { a.input, a.rangeIdx, a.detIdx = 0, 2, 1 }

func (a *acvm) waitPending(context.Context) error { return nil }

// read integrates over 10 periods of the detector's corner (at least
// 0.1 s of bench time) and returns the RMS of the AC part of the input.
func (a *acvm) read(ctx context.Context) (float64, error) {
	b := a.b
	det := acvmDetHz[a.detIdx]
	dur := time.Duration(math.Max(0.1, 10/det) * float64(time.Second))
	if err := sleepUntil(ctx, b.clock, b.clock.Now().Add(dur)); err != nil {
		return 0, err
	}
	b.mu.Lock()
	defer b.mu.Unlock()
	b.m.advance(b.benchSeconds())
	s := b.m.acSense(2 * acvmBandwidthHz)
	f := s.f
	resp := complex(1+a.gain[a.input], 0) / complex(1, f/acvmBandwidthHz)
	if f > 0 {
		// The detector's high-pass corner sits a decade below its
		// bandwidth setting.
		hp := det / 10
		resp *= complex(0, f/hp) / complex(1, f/hp)
	}
	sig := cmplx.Abs(s.ph[a.input]*resp) / math.Sqrt2
	if f == 0 {
		sig = 0
	}
	rng := acvmRanges[a.rangeIdx]
	v := math.Sqrt(sig*sig + s.noise[a.input]*s.noise[a.input])
	v = math.Abs(v + acvmNoiseRel*rng*a.rng.NormFloat64())
	if v > acvmOverload*rng {
		return math.Inf(1), nil
	}
	res := acvmNoiseRel * rng / 10
	return math.Round(v/res) * res, nil
}

func (a *acvm) commands() []command {
	conf := func(c *call) (string, error) {
		if len(c.params) == 0 {
			return "", nil
		}
		v, err := numericParam(c.params[0], 0, acvmRanges[len(acvmRanges)-1], 10)
		if err != nil {
			return "", err
		}
		for i, r := range acvmRanges {
			if v <= r*(1+1e-9) {
				a.rangeIdx = i
				return "", nil
			}
		}
		return "", errf(errOutOfRange, "%s V", c.params[0])
	}
	return []command{
		{pattern: "CONFigure:VOLTage:AC", maxParams: 2, fn: conf},
		{pattern: "[SENSe:]VOLTage:AC:RANGe[:UPPer]", minParams: 1, maxParams: 1, fn: conf},
		{pattern: "[SENSe:]VOLTage:AC:RANGe[:UPPer]", query: true, fn: func(*call) (string, error) {
			return nr3(acvmRanges[a.rangeIdx]), nil
		}},
		// The detector bandwidth: the lowest signal frequency expected;
		// the meter picks the widest filter at or below it.
		{pattern: "[SENSe:]DETector:BANDwidth", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			v, err := numericParam(c.params[0], 1, 10e6, 20)
			if err != nil {
				return "", err
			}
			a.detIdx = 0
			for i, d := range acvmDetHz {
				if d <= v*(1+1e-9) {
					a.detIdx = i
				}
			}
			return "", nil
		}},
		{pattern: "[SENSe:]DETector:BANDwidth", query: true, fn: func(*call) (string, error) {
			return nr3(acvmDetHz[a.detIdx]), nil
		}},
		{pattern: "ROUTe:CLOSe", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			chs, err := channelList(c.params[0], 1, 2)
			if err != nil {
				return "", err
			}
			if len(chs) != 1 {
				return "", errf(errSettings, "close one input")
			}
			a.input = chs[0] - 1
			return "", nil
		}},
		{pattern: "ROUTe:CLOSe", query: true, minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			chs, err := channelList(c.params[0], 1, 2)
			if err != nil || len(chs) != 1 {
				return "", errf(errIllegalValue, "one input")
			}
			return boolResp(a.input == chs[0]-1), nil
		}},
		{pattern: "READ", query: true, fn: func(c *call) (string, error) {
			v, err := a.read(c.ctx)
			if err != nil {
				return "", err
			}
			return nr3(v), nil
		}},
	}
}
