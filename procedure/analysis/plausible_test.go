package analysis

import (
	"strings"
	"testing"

	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// A stuck meter (the same value at every point) is an error for that
// result with its cause, never a "CMRR ≥ …" ratio.
func TestAnalyzeStuckMeterGivesNoRatio(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	sim := azNewBench(p, 3, 1e-6)
	rs := sim.opAmpReadings(nil, "U1", 0, 25, azWorked)
	for i := range rs {
		rs[i].MeterVolts = 0.802339 // a stale reading returned every time
	}
	res := azAnalyze(t, p, rs, Inputs{})
	for _, r := range res.Ratios {
		if r.Unit == "U1" && r.Name == plan.TestCMRR {
			t.Fatalf("a ratio was formed from a stuck meter: %+v", r.Rejection)
		}
	}
	found := false
	for _, pr := range res.Problems {
		found = found || (pr.Unit == "U1" && strings.Contains(pr.Problem, "stuck meter"))
	}
	if !found {
		t.Errorf("no stuck-meter problem: %+v", res.Problems)
	}
}

// A board position with no board (differential gain ≈ 0: the meter sees
// only noise) is "no part / no gain", not a conditional fail at some dB.
func TestAnalyzeBoardPositionWithoutBoard(t *testing.T) {
	p := azBoardPlan(plan.TestBoardCMRR)
	p.Limits = plan.Limits{plan.TestBoardCMRR: 66}
	empty := azBoard{gain: 1e-4, acm: 1e-6} // leakage only
	sim := azNewBench(p, 21, 2e-6)
	var rs []journal.Reading
	rs = sim.run(rs, "B1", plan.TestBoardCMRR, 0, 25, func(_ int, s plan.BenchState) float64 { return empty.meter(p, s) })
	res := azAnalyze(t, p, rs, Inputs{})
	for _, r := range res.Ratios {
		if r.Unit == "B1" {
			t.Fatalf("a ratio was formed for an empty position: %s %+v", r.Name, r.Rejection)
		}
	}
	found := false
	for _, pr := range res.Problems {
		found = found || (pr.Unit == "B1" && strings.Contains(pr.Problem, "no part / no gain"))
	}
	if !found {
		t.Errorf("no 'no part / no gain' problem: %+v", res.Problems)
	}
}
