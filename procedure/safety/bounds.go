package safety

import (
	"math"

	"nullbench/procedure/plan"
)

// MaxProgrammedVolts is the largest magnitude the plan ever programs on a
// supply or source role: over the nominal state and every level of every
// test (StateAt). A switch-off or safe state never commands more than this
// on the role, whatever an instrument answers.
func MaxProgrammedVolts(p *plan.Plan, role string) float64 {
	m := math.Abs(roleOf(plan.NominalState(p), role))
	for i := range p.Tests {
		t := &p.Tests[i]
		for _, sw := range plan.Sweeps(t) {
			for _, l := range sw.Levels {
				if v := math.Abs(roleOf(plan.StateAt(p, t, sw.Part, l), role)); v > m && !math.IsInf(v, 0) {
					m = v
				}
			}
		}
	}
	return m
}

func roleOf(s plan.BenchState, role string) float64 {
	switch role {
	case plan.RoleSupplyPos:
		return s.PosVolts
	case plan.RoleSupplyNeg:
		return s.NegVolts
	}
	return SourceVolts(s, role)
}

// boundedDown returns s with every role brought within what the plan could
// have programmed: a non-finite value becomes the role's largest voltage
// with the rail's sign (0 V for a source, whose sign is not known), a
// larger one is clamped to it. PowerDownFrom ramps from the result, so a
// ramp's length is bounded by the plan and never panics.
func boundedDown(p *plan.Plan, s plan.BenchState) plan.BenchState {
	clamp := func(v float64, role string, sign float64) float64 {
		lim := MaxProgrammedVolts(p, role)
		switch {
		case math.IsNaN(v):
			return sign * lim
		case v > lim:
			return lim
		case v < -lim:
			return -lim
		}
		return v
	}
	s.PosVolts = clamp(s.PosVolts, plan.RoleSupplyPos, 1)
	s.NegVolts = clamp(s.NegVolts, plan.RoleSupplyNeg, -1)
	s.CMVolts = clamp(s.CMVolts, plan.RoleSourceCM, 0)
	s.DiffVolts = clamp(s.DiffVolts, plan.RoleSourceDiff, 0)
	s.RefVolts = clamp(s.RefVolts, plan.RoleSourceRef, 0)
	return s
}
