package plan

import "fmt"

// MinFitPoints is the fewest points a straight-line fit with an
// uncertainty takes: two for the line, one left for the residual
// (n − 2 ≥ 1 degrees of freedom, as in the straight-line calibration
// example of GUM H.3; clause from memory).
const MinFitPoints = 3

// PlannedSweepPoints is the number of points the smallest sweep of test t
// takes over all its passes: the levels (as ordered) times the repeats.
func PlannedSweepPoints(t *Test) int {
	n := -1
	for _, sw := range Sweeps(t) {
		if k := len(sw.Levels) * max(t.Repeats, 1); n < 0 || k < n {
			n = k
		}
	}
	return max(n, 0)
}

// MinValidPointsFor is the plan's min_valid_points for the test of kind
// kind, 0 when the plan has no such test or does not set it.
func (p *Plan) MinValidPointsFor(kind string) int {
	for i := range p.Tests {
		if p.Tests[i].Kind == kind {
			return p.Tests[i].MinValidPoints
		}
	}
	return 0
}

// minValidPoints checks every test's min_valid_points: unset (0), or
// from MinFitPoints to the points its smallest sweep plans, so that a
// complete run can meet it.
func (c *planChecker) minValidPoints() {
	for i := range c.p.Tests {
		t := &c.p.Tests[i]
		m := t.MinValidPoints
		if m == 0 {
			continue
		}
		key := testKey(i) + ".min_valid_points"
		planned := PlannedSweepPoints(t)
		switch {
		case m < MinFitPoints:
			c.add(key, fmt.Sprintf("give at least %d (a line with an uncertainty needs 3 points), or leave it out", MinFitPoints),
				"min_valid_points %d is below the fit's minimum", m)
		case m > planned:
			c.add(key, fmt.Sprintf("give at most %d, or plan more levels or repeats", planned),
				"min_valid_points %d is more than the %d points the test plans per sweep (levels × repeats)", m, planned)
		}
	}
}
