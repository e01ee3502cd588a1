package main

import (
	"math"
	"testing"

	"nullbench/fit"
	"nullbench/procedure/estimate"
	"nullbench/procedure/plan"
)

// sizeCRBRatio compares the sized test's bench time with the Cramér–Rao
// minimum for the same noise and safe range (fit.SlopeCRBPoints): for
// every NPLC and readings setting the noise per point σ and the bench
// time per point c come from the same model (estimate.PredictTest), N_min
// points of σ at the ends of the range reach u = U/1.96 (k at ν → ∞, no
// whole repeats, no level kept off the ends), and the minimum over
// settings of N_min·c is the bound. The model's σ grows with the test's
// length (its 1/f band reaches down to 1/length), so σ is taken at the
// bound's own length (iterated from one repeat): the same noise the sized
// test is predicted with at its length. The ratio is sized time / bound.
func sizeCRBRatio(p *plan.Plan, f estimate.Figures, target estimate.SizeTarget, st estimate.SizedTest) float64 {
	half := st.SafeHiVolts
	uStd := target.CoefficientU() / 1.96 // µV/V, k → 1.96 as ν → ∞ (GUM G.3)
	bound := math.Inf(1)
	for _, nplc := range f.NoiseNPLC {
		if nplc < 1 {
			continue // as Size: whole power-line cycles only
		}
		for _, n := range []int{2, 3, 5, 10, 20, 50, 100} {
			// The model's noise per point grows with the test's length
			// (its 1/f band reaches down to 1/length): σ is taken at the
			// bound's own length, found by iterating from one repeat.
			reps := 1
			var nmin, c float64
			var tp estimate.TestPrediction
			for range 6 {
				tp = estimate.PredictTest(p, f, st.Test, []float64{-half, 0, half}, nplc, n, reps)
				c = tp.UnitSeconds / float64(tp.Points)
				slopeU := uStd * 1e-6 * math.Abs(tp.Divisor) // volts at the meter per volt
				nmin = fit.SlopeCRBPoints(tp.NoiseVolts, half, slopeU)
				reps = max(1, int(math.Round(nmin/float64(tp.Points/reps))))
			}
			bound = math.Min(bound, nmin*c)
		}
	}
	return st.AfterSecs / bound
}

// BenchmarkSizeAgainstCramerRao sizes the shipped lot plan to 0.5 dB at
// 150 dB and reports, per test, the sized time over the Cramér–Rao
// minimum (metric "x-crb-<test>"); the goal is ≤ 1.5. Seen: cmrr 1.21,
// psrr_pos/neg/sym 1.16, aol 1.39 (with σ at the bound's own length; with
// σ of a one-repeat test, as before: 1.47, 1.99, 1.70).
func BenchmarkSizeAgainstCramerRao(b *testing.B) {
	p, err := plan.Load("../../testdata/plans/lot.toml")
	if err != nil {
		b.Fatal(err)
	}
	f := estimate.DefaultFigures()
	target := estimate.SizeTarget{UDB: 0.5, AtDB: 150}
	var tests []estimate.SizedTest
	for b.Loop() {
		_, tests = estimate.Size(p, f, target)
	}
	for _, st := range tests {
		b.ReportMetric(sizeCRBRatio(p, f, target, st), "x-crb-"+st.Kind)
	}
}

// TestSizeReachesTargetNearCramerRao: every test of the sized lot plan
// reaches its predicted target, within 1.5 × the Cramér–Rao minimum time
// (the project's goal; the bound is fit.SlopeCRBPoints, see
// sizeCRBRatio). Seen 1.16 (psrr) … 1.39 (aol): what is left is the t
// factor of few degrees of freedom, whole repeats (8 points each) and the
// inner levels at 90 % a valid plan needs.
func TestSizeReachesTargetNearCramerRao(t *testing.T) {
	if testing.Short() {
		t.Skip("sizes every test of the lot plan")
	}
	p, err := plan.Load("../../testdata/plans/lot.toml")
	if err != nil {
		t.Fatal(err)
	}
	f := estimate.DefaultFigures()
	target := estimate.SizeTarget{UDB: 0.5, AtDB: 150}
	_, tests := estimate.Size(p, f, target)
	for _, st := range tests {
		r := sizeCRBRatio(p, f, target, st)
		t.Logf("%s: sized %.1f s per unit, %.2f × the Cramér–Rao minimum (%v V %s, %g NPLC, %d readings, %d repeats)",
			st.Kind, st.AfterSecs, r, st.Levels, st.Order, st.NPLC, st.Readings, st.Repeats)
		if !st.Reached {
			t.Errorf("%s does not reach U ≤ %.3g µV/V", st.Kind, target.CoefficientU())
		}
		if r > 1.5 || r < 1 {
			t.Errorf("%s: %.2f × the Cramér–Rao minimum, want 1 … 1.5", st.Kind, r)
		}
	}
}
