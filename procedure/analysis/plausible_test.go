package analysis

import (
	"strings"
	"testing"

	"nullbench/fit"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// A stuck meter (the same value at every point, or at most points once
// it went stale part-way through the sweep) is an error for that result
// with its cause, never a "CMRR ≥ …" ratio (common practice, no
// published source: a real 6½-digit mean carries noise in its last
// digits).
func TestAnalyzeStuckMeterGivesNoRatio(t *testing.T) {
	for _, tc := range []struct {
		name       string
		staleFrom  int // first point returning the stale value
		wantInText string
	}{
		{"stale at every point", 0, "at every one of"},
		{"stale after the first point", 1, "part-way through the sweep"},
		{"stale after the second point", 2, "part-way through the sweep"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
			sim := azNewBench(p, 3, 1e-6)
			rs := sim.opAmpReadings(nil, "U1", 0, 25, azWorked)
			if len(rs) < 6 {
				t.Fatalf("%d readings; the case needs a sweep of at least 6", len(rs))
			}
			for i := tc.staleFrom; i < len(rs); i++ {
				rs[i].MeterVolts = 0.802339 // a stale reading returned every time
			}
			res := azAnalyze(t, p, rs, Inputs{})
			// With no aol test the measured CMRR is reported under
			// ResultCMRRUncorrected; neither name may appear.
			for _, r := range res.Ratios {
				if r.Unit == "U1" && (r.Name == plan.TestCMRR || r.Name == ResultCMRRUncorrected) {
					t.Fatalf("a ratio %s was formed from a stuck meter: %+v", r.Name, r.Rejection)
				}
			}
			found := false
			for _, pr := range res.Problems {
				found = found || (pr.Unit == "U1" && strings.Contains(pr.Problem, "stuck meter") && strings.Contains(pr.Problem, tc.wantInText))
			}
			if !found {
				t.Errorf("no stuck-meter problem saying %q: %+v", tc.wantInText, res.Problems)
			}
		})
	}
}

// A meter whose readings repeat at a few points of a sweep (a coarse
// last digit) but not at most of them still gives a ratio: the stale
// rule needs more than half the points.
func TestPlausibleLeavesAFewRepeatsAlone(t *testing.T) {
	x := []float64{-10, -5, 0, 5, 10, -10, -5, 0, 5, 10}
	y := []float64{1e-3, 1e-3, 1e-3, 2e-3, 3e-3, 4e-3, 5e-3, 6e-3, 7e-3, 8e-3}
	if err := Plausible(x, y); err != nil {
		t.Errorf("Plausible refused 3 repeats of 10: %v", err)
	}
	y[3], y[4] = 1e-3, 1e-3 // 5 of 10: not more than half, still accepted
	if err := Plausible(x, y); err != nil {
		t.Errorf("Plausible refused 5 repeats of 10: %v", err)
	}
	y[5] = 1e-3
	if err := Plausible(x, y); err == nil || !strings.Contains(err.Error(), "6 of 10 points") {
		t.Errorf("Plausible(6 identical of 10) = %v; want refused naming 6 of 10 points", err)
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

// Notes and problems carry read-backs and meter means as a person would
// write them, not as binary64 prints them (GUM 7.2.6: numerical values
// not given with an excessive number of digits): a 2 mV read-back is
// "+0.002 V" (to the µV, plan.FormatVolts), a meter mean has the 7
// significant figures of a 6½-digit reading (common practice, no
// published source), a deviation 3.
func TestNotesRoundTheirFigures(t *testing.T) {
	const readBack = 0.0019999999999997797 // 0.002 V as read back and averaged
	notes := nonlinearityNotes(fit.Nonlinearity{QuadSignificant: true, MaxDeviationUV: 1.23456789, AtStimulusVolts: readBack})
	if len(notes) != 1 || !strings.Contains(notes[0], "1.23 µV at the input, at +0.002 V") {
		t.Errorf("non-linearity notes %q: want the deviation as 1.23 µV at +0.002 V", notes)
	}
	flatX := []float64{readBack, readBack, readBack}
	err := Plausible(flatX, []float64{1e-3, 2e-3, 3e-3})
	if err == nil || !strings.Contains(err.Error(), "every point at +0.002 V") {
		t.Errorf("Plausible(flat stimulus) = %v; want it at +0.002 V", err)
	}
	stale := 0.8023390000000001
	err = Plausible([]float64{-5, 0, 5}, []float64{stale, stale, stale})
	if err == nil || !strings.Contains(err.Error(), "returned 0.802339 V at every one of 3 points") {
		t.Errorf("Plausible(stuck meter) = %v; want the meter value as 0.802339 V", err)
	}
	for _, e := range []error{err, Plausible(flatX, []float64{1e-3, 2e-3, 3e-3})} {
		if e != nil && (strings.Contains(e.Error(), "0.00199999") || strings.Contains(e.Error(), "0.80233900000")) {
			t.Errorf("unrounded figure in %q", e)
		}
	}
}
