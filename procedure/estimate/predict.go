package estimate

import (
	"nullbench/procedure/plan"

	"fmt"
	"math"
)

// TestPrediction is what check predicts for one [[test]] of the plan.
type TestPrediction struct {
	Test int    // index into Plan.Tests
	Kind string // the test kind
	// UnitSeconds is one unit at one temperature (every repeat's points);
	// Seconds the whole campaign's share (every unit and temperature, with
	// the meter's configuration and the return to nominal).
	UnitSeconds, Seconds float64
	// Points is the number of points one unit's fit has (all repeats),
	// DOF its degrees of freedom (points − parameters).
	Points, DOF int
	// NoiseVolts is the predicted standard deviation of one point (the
	// mean of `readings` readings) at the meter.
	NoiseVolts float64
	// Divisor turns meter volts per stimulus volt into the coefficient:
	// the noise gain K, or the board's gain.
	Divisor float64
	// StdUncUVPerV is the predicted standard uncertainty of the
	// coefficient when it is near zero (Type A of the fit), CoverageK the
	// t factor at 95 %, ExpandedUUVPerV = k·u.
	StdUncUVPerV, CoverageK, ExpandedUUVPerV float64
	// ResolvableDB = 20·log10(10⁶/U): a ratio above it gives a coefficient
	// smaller than its own expanded uncertainty, which the plan cannot
	// tell from zero.
	ResolvableDB float64
	// LimitDB is the plan's limit for this kind (HasLimit false: none).
	LimitDB  float64
	HasLimit bool
}

// Prediction is check's forecast for a plan.
type Prediction struct {
	Timeline     Timeline
	TotalSeconds float64 // bench seconds
	WallSeconds  float64 // TotalSeconds / time_scale
	Tests        []TestPrediction
}

// Warnings lists the tests whose limit is above what the plan resolves.
func (pr Prediction) Warnings() []string {
	var out []string
	for _, t := range pr.Tests {
		if t.HasLimit && t.LimitDB > t.ResolvableDB {
			out = append(out, fmt.Sprintf("%s %s: the limit %g dB is above the %.1f dB the plan resolves (U = %.3g µV/V); use more readings, a longer NPLC, more repeats or wider levels (nullbench size)",
				testKey(t.Test), t.Kind, t.LimitDB, t.ResolvableDB, t.ExpandedUUVPerV))
		}
	}
	return out
}

// Predict forecasts the plan's duration (Figures.Timeline) and, for every
// test, the uncertainty of its coefficient and the largest ratio it can
// resolve, from the meter's noise figures:
//
//	σ_pt² = (noise(NPLC)·range)²/readings + (floor·range)²     one point at the meter
//	        + (K·e_n)²·(f_H + f_c·ln(f_H/f_L))                 the part's noise, f_H = 1/(2·readings·NPLC/f_line),
//	                                                           f_L = 1/(the test's length), f_c = part.flicker_corner_hz
//	u(b)  = σ_pt / √(Σ (x_i − x̄)²)                            slope of a straight-line fit (GUM H.3)
//	u(k)  = 10⁶·u(b) / K                                        µV/V at the input
//	U     = t_0.975(ν)·u(k),  ν = n − p                         (GUM G.3, G.6.4)
//
// with the sum over every level of every repeat (n points), p = 2, plus
// one for a drift term and one for a quadratic term. K is the fixture's
// noise gain, or the board's gain for board tests (board_cmrr: its
// common-mode sweep). Near zero the Type B terms (noise-gain tolerance,
// meter and stimulus gain) vanish because they scale with the coefficient,
// so U is the resolution limit; drift and thermal tails are not counted.
func Predict(p *plan.Plan, f Figures) Prediction {
	tl := f.Timeline(p)
	pr := Prediction{Timeline: tl, TotalSeconds: tl.TotalSeconds, WallSeconds: tl.TotalSeconds}
	if s := p.Bench.TimeScale; s > 0 {
		pr.WallSeconds = tl.TotalSeconds / s
	}
	for i := range p.Tests {
		t := &p.Tests[i]
		tp := TestPrediction{Test: i, Kind: t.Kind, UnitSeconds: tl.TestSeconds[i], Seconds: tl.TestCampaignSeconds[i]}
		tp.Divisor = p.Fixture.NoiseGain
		if p.Fixture.Kind == plan.FixtureBoard {
			tp.Divisor = p.Fixture.BoardGain
		}
		// The fit's points: every level visited (a zigzag or symmetric
		// order visits each twice) of every repeat; board_cmrr's
		// coefficient comes from its common-mode sweep.
		var visited []float64
		for _, sw := range plan.Sweeps(t) {
			if sw.Part == "" || sw.Part == plan.PartCM {
				visited = append(visited, sw.Levels...)
			}
		}
		tp.Points = len(visited) * t.Repeats
		sxx := sumSquaredDeviations(visited) * float64(t.Repeats)
		params := 2
		if t.DriftTerm {
			params++
		}
		if t.QuadraticTerm {
			params++
		}
		tp.DOF = tp.Points - params
		tp.NoiseVolts = pointNoise(p, &f, t, tp.Divisor, tp.UnitSeconds)
		if sxx > 0 && tp.Divisor > 0 && tp.DOF > 0 {
			tp.StdUncUVPerV = 1e6 * tp.NoiseVolts / math.Sqrt(sxx) / math.Abs(tp.Divisor)
			tp.CoverageK = StudentT975(float64(tp.DOF))
			tp.ExpandedUUVPerV = tp.CoverageK * tp.StdUncUVPerV
			tp.ResolvableDB = 20 * math.Log10(1e6/tp.ExpandedUUVPerV)
		}
		tp.LimitDB, tp.HasLimit = p.Limits[t.Kind]
		pr.Tests = append(pr.Tests, tp)
	}
	return pr
}

// PointNoiseVolts is the standard deviation of the mean of n readings at
// nplc on rangeVolts: the white part averages as 1/√n, the low-frequency
// floor does not (GUM 4.2.3 for the mean of independent readings; the
// floor's behaviour is common practice, no published source).
func (f *Figures) PointNoiseVolts(nplc, rangeVolts float64, n int) float64 {
	rel := f.noiseRelAt(nplc)
	white := rel * rangeVolts
	floor := f.FloorRelOfRange * rangeVolts
	return math.Sqrt(white*white/float64(max(n, 1)) + floor*floor)
}

// noiseRelAt is the figure of the nearest noise setting at or above nplc
// (meters round an integration time up to a setting they offer).
func (f *Figures) noiseRelAt(nplc float64) float64 {
	for i, n := range f.NoiseNPLC {
		if n >= nplc*(1-1e-9) {
			return f.NoiseRelOfRange[i]
		}
	}
	if len(f.NoiseRelOfRange) == 0 {
		return 0
	}
	return f.NoiseRelOfRange[len(f.NoiseRelOfRange)-1]
}

func sumSquaredDeviations(x []float64) float64 {
	if len(x) == 0 {
		return 0
	}
	var m float64
	for _, v := range x {
		m += v
	}
	m /= float64(len(x))
	var s float64
	for _, v := range x {
		s += (v - m) * (v - m)
	}
	return s
}

// StudentT975 is the 0.975 quantile of Student's t with nu degrees of
// freedom (the two-sided 95 % coverage factor of GUM G.3), by the
// Cornish–Fisher expansion about the normal quantile z = 1.959964
// (Abramowitz & Stegun, Handbook of Mathematical Functions, 26.7.5):
//
//	t ≈ z + g1/ν + g2/ν² + g3/ν³ + g4/ν⁴
//
// within 0.002 of the exact value from ν = 4 up; ν ≤ 3 (rounded) gets the
// exact values 12.706205, 4.302653 and 3.182446 (the same reference's
// table to three decimals; the further digits from memory).
func StudentT975(nu float64) float64 {
	switch {
	case !(nu > 0):
		return math.NaN()
	case nu < 1.5:
		return 12.706205
	case nu < 2.5:
		return 4.302653
	case nu < 3.5:
		return 3.182446
	}
	const z = 1.959963984540054
	z2 := z * z
	z3, z5, z7, z9 := z*z2, z*z2*z2, z*z2*z2*z2, z*z2*z2*z2*z2
	g1 := (z3 + z) / 4
	g2 := (5*z5 + 16*z3 + 3*z) / 96
	g3 := (3*z7 + 19*z5 + 17*z3 - 15*z) / 384
	g4 := (79*z9 + 776*z7 + 1482*z5 - 1920*z3 - 945*z) / 92160
	return z + g1/nu + g2/(nu*nu) + g3/(nu*nu*nu) + g4/(nu*nu*nu*nu)
}

// pointNoise is the predicted standard deviation of one point of t at the
// meter, for a test lasting testSeconds (the low end of the 1/f band):
// the meter's noise and floor (PointNoiseVolts) and the part's input noise
// gained by divisor. The part's white noise is averaged over the point's
// integration time n·NPLC/f_line, a boxcar with noise bandwidth 1/(2T)
// (a standard result, e.g. Horowitz & Hill, The Art of Electronics, 3rd
// ed., §8.1; from memory); its 1/f part adds e_n²·f_c·ln(f_H/f_L) between
// f_L = 1/testSeconds and f_H = 1/(2T) (Motchenbacher & Connelly,
// Low-Noise Electronic System Design, Wiley 1993, ch. 1; from memory).
func pointNoise(p *plan.Plan, f *Figures, t *plan.Test, divisor, testSeconds float64) float64 {
	v := f.PointNoiseVolts(t.NPLC, t.RangeVolts, t.Readings)
	en := p.Part.NoiseNVPerRtHz
	if !(en > 0) || !(divisor > 0) {
		return v
	}
	hz := f.LineHz
	if !(hz > 0) {
		hz = LineFrequencyHz
	}
	T := float64(max(t.Readings, 1)) * t.NPLC / hz
	fh := 1 / (2 * T)
	band := fh
	if fc := p.Part.FlickerCornerHz; fc > 0 && testSeconds > 0 {
		if fl := 1 / testSeconds; fh > fl {
			band += fc * math.Log(fh/fl)
		}
	}
	return math.Hypot(v, math.Abs(divisor)*en*1e-9*math.Sqrt(band))
}
