package analysis

import (
	"fmt"

	"nullbench/procedure/plan"
)

// fewValidPoints says why result r may not be judged for lack of valid
// points, or "" when it may: a sweep it is formed from has fewer points
// used in the fit (overloaded and refused points left out) than its
// test's min_valid_points. A derived result answers for its sources:
// psrr_worst for both psrr_pos and psrr_neg, an A_OL-corrected cmrr for
// its cmrr and aol sweeps.
func (a *analyzer) fewValidPoints(r *RatioResult) string {
	type source struct {
		test   string
		points int
	}
	var srcs []source
	other := func(test string) {
		if i := a.findIndex(r.Unit, test, r.Condition); i >= 0 {
			srcs = append(srcs, source{test, a.res.Ratios[i].Points})
		}
	}
	switch {
	case r.Name == plan.PsrrWorst:
		other(plan.TestPSRRPos)
		other(plan.TestPSRRNeg)
	case r.Name == ResultCMRRUncorrected:
		srcs = append(srcs, source{plan.TestCMRR, r.Points})
	case r.Name == plan.TestCMRR && r.AOLCorrected:
		srcs = append(srcs, source{plan.TestCMRR, r.Points})
		other(plan.TestAOL)
	default:
		srcs = append(srcs, source{r.Name, r.Points})
	}
	for _, s := range srcs {
		if m := a.p.MinValidPointsFor(s.test); m > 0 && s.points < m {
			return fmt.Sprintf("%d valid point(s) in the %s sweep, fewer than the plan's min_valid_points %d", s.points, s.test, m)
		}
	}
	return ""
}
