package analysis

import (
	"math"
	"strings"
	"testing"

	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// A result fitted from fewer valid points than the plan's
// min_valid_points is never judged (never a pass, even far above its
// limit) and is listed as a problem with the reason; with enough valid
// points the same result is judged. The counts are the plan's own
// (min_valid_points), not a published figure.
func TestMinValidPoints(t *testing.T) {
	for _, tc := range []struct {
		name      string
		min       int
		overloads int // points of U1's psrr_pos flagged overloaded (left out of the fit)
		judged    bool
	}{
		{"no minimum set", 0, 4, true},
		{"enough valid points", 8, 2, true},
		{"fewer valid points than the minimum", 8, 3, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR, plan.TestPSRRPos, plan.TestPSRRNeg)
			for i := range p.Tests {
				p.Tests[i].MinValidPoints = tc.min
			}
			// A limit the unit passes by far (its PSRR+ is 108 dB).
			p.Limits = plan.Limits{plan.TestPSRRPos: 60, plan.PsrrWorst: 60}
			sim := azNewBench(p, 7, 1e-6)
			rs := sim.opAmpReadings(nil, "U1", 0, 25, azWorked)
			n := 0
			for i := range rs {
				if rs[i].Test == plan.TestPSRRPos && n < tc.overloads {
					rs[i].Flags = append(rs[i].Flags, journal.FlagOverload)
					rs[i].MeterVolts = 9.9e37
					n++
				}
			}
			res := azAnalyze(t, p, rs, Inputs{})
			for _, name := range []string{plan.TestPSRRPos, plan.PsrrWorst} {
				r := azRatio(t, res, "U1", name, 0)
				if r.Points != 10-tc.overloads && name == plan.TestPSRRPos {
					t.Fatalf("%s fitted %d points, want %d", name, r.Points, 10-tc.overloads)
				}
				if r.Judged != tc.judged {
					t.Errorf("%s judged %v, want %v (points %d, notes %q)", name, r.Judged, tc.judged, r.Points, r.Notes)
				}
				if tc.judged {
					continue
				}
				if !azHasNote(r, "fewer than the plan's min_valid_points 8") {
					t.Errorf("%s notes %q do not give the reason", name, r.Notes)
				}
				found := false
				for _, pr := range res.Problems {
					found = found || (pr.Unit == "U1" && pr.Test == name && strings.Contains(pr.Problem, "7 valid point(s) in the psrr_pos sweep"))
				}
				if !found {
					t.Errorf("no problem for %s: %+v", name, res.Problems)
				}
			}
			// psrr_neg is untouched: judged whatever the minimum.
			if r := azRatio(t, res, "U1", plan.TestPSRRNeg, 0); math.IsNaN(r.Rejection.CoefficientUVPerV) {
				t.Errorf("psrr_neg not formed")
			}
		})
	}
}
