package main

import (
	"math"
	"testing"

	"nullbench/fit"
	"nullbench/procedure/estimate"
	"nullbench/procedure/plan"
)

// sizeCRBRatio sizes test i of p to target and compares the sized test's
// bench time with the Cramér–Rao minimum for the same noise and safe
// range (fit.SlopeCRBPoints): for every NPLC and readings setting the
// noise per point σ and the bench time per point c come from the same
// model (estimate.PredictTest, its time per point), N_min points of σ at the
// ends of the range reach u = U/1.96, and the minimum over settings of
// N_min·c is the bound. The ratio is sized time / bound (≥ 1).
func sizeCRBRatio(p *plan.Plan, f estimate.Figures, target estimate.SizeTarget, st estimate.SizedTest) float64 {
	half := st.SafeHiVolts
	uStd := target.CoefficientU() / 1.96 // µV/V, k → 1.96 as ν → ∞ (GUM G.3)
	bound := math.Inf(1)
	for _, nplc := range f.NoiseNPLC {
		if nplc < 1 {
			continue // as Size: whole power-line cycles only
		}
		for _, n := range []int{2, 3, 5, 10, 20, 50, 100} {
			tp := estimate.PredictTest(p, f, st.Test, []float64{-half, 0, half}, nplc, n, 1)
			c := tp.UnitSeconds / float64(tp.Points)
			slopeU := uStd * 1e-6 * math.Abs(tp.Divisor) // volts at the meter per volt
			nmin := fit.SlopeCRBPoints(tp.NoiseVolts, half, slopeU)
			bound = math.Min(bound, nmin*c)
		}
	}
	return st.AfterSecs / bound
}

// BenchmarkSizeAgainstCramerRao sizes the shipped lot plan to 0.5 dB at
// 150 dB and reports, per test, the sized time over the Cramér–Rao
// minimum (metric "x-crb-<test>"); the goal is ≤ 1.5.
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
// reaches its predicted target, within 2.2 × the Cramér–Rao minimum time
// (the bound is fit.SlopeCRBPoints). The project's goal is 1.5, NOT met:
// seen 1.88 (aol) to 2.14 (cmrr). What is left: the levels kept to
// centre level a
// valid plan needs, the t factor of few degrees of freedom, whole repeats.
// Held at 2.2 so that it cannot get worse unnoticed.
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
		t.Logf("%s: sized %.1f s per unit, %.2f × the Cramér–Rao minimum", st.Kind, st.AfterSecs, r)
		if !st.Reached {
			t.Errorf("%s does not reach U ≤ %.3g µV/V", st.Kind, target.CoefficientU())
		}
		if r > 2.2 || r < 1 {
			t.Errorf("%s: %.2f × the Cramér–Rao minimum, want 1 … 2.2", st.Kind, r)
		}
	}
}
