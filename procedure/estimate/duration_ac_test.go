package estimate

import (
	"math"
	"testing"

	"nullbench/fit"
	"nullbench/procedure/plan"
)

// TestRecordSecondsIsTheRunnersCoherentPlan: the duration model's record
// length is the one the runner's coherent plan takes (fit.CoherentSampling
// at min(max_rate_hz, f·min_samples/min_cycles), procedure/run_ac.go), a
// whole number of cycles M/f (IEEE Std 1241-2010 §4.1.4.5).
func TestRecordSecondsIsTheRunnersCoherentPlan(t *testing.T) {
	cases := []struct {
		name string
		t    plan.ACTest
	}{
		{"defaults", plan.ACTest{MinCycles: plan.DefaultACMinCycles, MinSamples: plan.DefaultACMinSamples, MaxSamples: 262144, MaxRateHz: plan.DefaultACMaxRateHz}},
		{"slow digitizer", plan.ACTest{MinCycles: 8, MinSamples: 2000, MaxSamples: 262144, MaxRateHz: 100e3}},
		{"even cycles", plan.ACTest{MinCycles: 10, MinSamples: 4000, MaxSamples: 262144, MaxRateHz: 1e6}},
	}
	for _, c := range cases {
		for _, f := range []float64{10, 50, 60, 137.3, 1000, 7197, 26830, 100e3} {
			rate := math.Min(c.t.MaxRateHz, f*float64(c.t.MinSamples)/float64(c.t.MinCycles))
			cp, err := fit.CoherentSampling(f, rate, c.t.MinSamples, c.t.MaxSamples)
			if err != nil {
				continue // no plan: the plan's validation refuses the frequency
			}
			if got, want := recordSeconds(&c.t, f), cp.RecordS(); math.Abs(got/want-1) > 1e-9 {
				t.Errorf("%s at %g Hz: model %g s, runner's plan %g s (%d samples, %d cycles at %g Sa/s)", c.name, f, got, want, cp.Samples, cp.Cycles, cp.RateHz)
			}
		}
	}
}
