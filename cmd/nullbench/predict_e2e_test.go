package main

import (
	"math"
	"sort"
	"testing"

	"nullbench/instrument/sim"
	"nullbench/procedure/estimate"
	"nullbench/procedure/plan"
)

// TestPredictedUncertaintyMatchesAchieved runs the demo lot plan at 25 °C
// on the simulated bench (virtual clock) over 12 units and compares, per
// test kind, the expanded uncertainty check predicted with the root mean
// square of the achieved ones. The bar is a factor 1.3 either way (the
// project's requirement; no published source). The units' ratios are high
// (120 dB and up) so that the Type B terms, which scale with the
// coefficient, stay small beside the noise: the prediction is the
// resolution limit. Seen (seed 11): cmrr 1.04, psrr_pos 0.84, psrr_neg
// 1.07, psrr_sym 0.91, aol 1.04; seeds 12 and 13 within 0.94 … 1.08.
func TestPredictedUncertaintyMatchesAchieved(t *testing.T) {
	if testing.Short() {
		t.Skip("runs a campaign on the simulated bench")
	}
	units := e2eLot(12, 125, 135)
	for i := range units {
		// A_OL left to the sim, which derives it from kc + kp + kn + ko = 0.
		units[i].psrrPos, units[i].psrrNeg, units[i].aol = 130, 128, 0
		// A straight-line part: the prediction covers noise, not the
		// lack of fit a curved transfer adds to the residuals.
		units[i].extra = "curvature_uv_per_v2 = 0.0\n"
	}
	run := runE2E(t, e2eDUT(11, units), e2eOnly25, nil)
	f, problems := planFigures(run.plan)
	if len(problems) > 0 {
		t.Fatal(problems)
	}
	// The virtual clock moves only with the waits: exchanges take no
	// bench time, as in estimate.DefaultFigures.
	f.Roles = estimate.DefaultFigures().Roles
	pred := estimate.Predict(run.plan, f)
	// The demo lot plan's duration against the bench time the run took
	// (±15 %, the project's requirement; the clock starts at the bench
	// epoch when the bench starts).
	measured := run.clock.Now().Sub(sim.NewManualClock().Now()).Seconds()
	if r := pred.TotalSeconds / measured; r < 0.85 || r > 1.15 {
		t.Errorf("demo lot plan: predicted %.0f s, took %.0f s (ratio %.3f)", pred.TotalSeconds, measured, r)
	} else {
		t.Logf("demo lot plan: predicted %.0f s, took %.0f s (ratio %.3f)", pred.TotalSeconds, measured, r)
	}
	achieved := map[string][]float64{}
	for _, r := range run.results.Ratios {
		achieved[r.Name] = append(achieved[r.Name], r.Rejection.ExpandedUUVPerV)
	}
	for _, tp := range pred.Tests {
		name := tp.Kind
		if tp.Kind == plan.TestCMRR && len(achieved["cmrr_uncorrected"]) > 0 {
			name = "cmrr_uncorrected" // the test's own coefficient, before the A_OL correction
		}
		got := achieved[name]
		if len(got) == 0 {
			t.Errorf("%s: no achieved result (have %v)", name, keys(achieved))
			continue
		}
		// The root mean square over the units: each achieved u² estimates
		// σ² without bias (ν = 7 each), their mean with ν = 7 × units (a
		// relative scatter of 1/√(2ν), 8 % for 12 units; the median of a
		// few units scatters by 20 % or more).
		ss := 0.0
		for _, u := range got {
			ss += u * u
		}
		rms := math.Sqrt(ss / float64(len(got)))
		r := rms / tp.ExpandedUUVPerV
		t.Logf("%-16s predicted U %.4g µV/V, achieved rms %.4g µV/V (ratio %.2f over %d units)", tp.Kind, tp.ExpandedUUVPerV, rms, r, len(got))
		const bar = 1.3
		if r > bar || r < 1/bar {
			t.Errorf("%s: achieved/predicted U = %.2f, outside 1/%g … %g", tp.Kind, r, bar, bar)
		}
	}
}

func keys(m map[string][]float64) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}
