package main

import (
	"sort"
	"testing"

	"nullbench/instrument/sim"
	"nullbench/procedure/estimate"
	"nullbench/procedure/plan"
)

// TestSizedPlanReachesTargetOnSimulatedBench sizes the demo lot plan to
// U = 0.5 dB at 125 dB, runs it on the simulated bench (virtual clock,
// 25 °C) and compares the median achieved U of each test kind with the
// target (seen: 0.59 to 1.09 × the target). Straight-line parts as in TestPredictedUncertaintyMatchesAchieved.
func TestSizedPlanReachesTargetOnSimulatedBench(t *testing.T) {
	if testing.Short() {
		t.Skip("runs a campaign on the simulated bench")
	}
	units := e2eLot(4, 125, 135)
	for i := range units {
		units[i].psrrPos, units[i].psrrNeg, units[i].aol = 130, 128, 0
		units[i].extra = "curvature_uv_per_v2 = 0.0\n"
	}
	target := estimate.SizeTarget{UDB: 0.5, AtDB: 125}
	var sized []estimate.SizedTest
	edit := func(b *sim.Bench, text string) string {
		text = e2eOnly25(b, text)
		p, err := plan.Parse([]byte(text), "demo.toml")
		if err != nil {
			t.Fatal(err)
		}
		f, _ := planFigures(p)
		var q *plan.Plan
		q, sized = estimate.Size(p, f, target)
		return rewriteTests(text, q)
	}
	run := runE2E(t, e2eDUT(5, units), edit, nil)
	achieved := map[string][]float64{}
	for _, r := range run.results.Ratios {
		achieved[r.Name] = append(achieved[r.Name], r.Rejection.ExpandedUUVPerV)
	}
	want := target.CoefficientU()
	for _, st := range sized {
		if !st.Reached {
			t.Errorf("%s: size found no setting that reaches the target", st.Kind)
			continue
		}
		name := st.Kind
		if name == plan.TestCMRR && len(achieved["cmrr_uncorrected"]) > 0 {
			name = "cmrr_uncorrected"
		}
		got := append([]float64(nil), achieved[name]...)
		if len(got) == 0 {
			t.Errorf("%s: no result", name)
			continue
		}
		sort.Float64s(got)
		med := got[len(got)/2]
		t.Logf("%s: sized %v V, %g NPLC, %d readings, %d repeats; achieved U %.4g µV/V, target %.4g µV/V", st.Kind, st.Levels, st.NPLC, st.Readings, st.Repeats, med, want)
		// Size reaches the target as predicted; the prediction itself is
		// good to a factor 1.3 (TestPredictedUncertaintyMatchesAchieved),
		// so that is the margin allowed here.
		if med > 1.3*want {
			t.Errorf("%s: achieved U %.4g µV/V above 1.3 × the target %.4g µV/V", st.Kind, med, want)
		}
	}
}
