package safety

import (
	"math"

	"nullbench/procedure/plan"
)

// railsDown moves both rails from s to 0 V in steps of at most step,
// choosing before every step which rail moves: the one whose step leaves
// the inputs the larger common-mode slack (the smaller of V+ − input high −
// (cm_headroom_pos + cm_margin) and input low − V− − (cm_headroom_neg +
// cm_margin), the "cm-pos" and "cm-neg" limits), among the steps that keep
// every hard limit (span, polarity, inputs beyond a rail); on a tie V+
// first. The sources stay as in s (PowerDownFrom brings them to 0 V
// first).
//
// From shifted rails (a common-mode level by supply shift, V+ +5 V and
// V− −25 V around inputs at ground) this brings the far rail in first,
// until the rails are centred on the inputs, then alternates: the inputs
// keep their common-mode margin for as long as the span can hold it,
// where moving both rails in lock-step (as rampRails does between levels)
// would squeeze the input against the near rail while the part is still
// powered at most of the span. Below a span of cm_headroom_pos +
// cm_headroom_neg + 2·cm_margin no placement of the rails keeps the
// margin; the inputs then stay centred, with the most margin the span
// allows. Each step shrinks the span, so the span never exceeds its
// start. (Derived from the plan's own common-mode and span rules; common
// practice, no published source.)
func railsDown(p *plan.Plan, s plan.BenchState, step float64) []PowerAction {
	mustRampable(s.PosVolts, 0, step)
	mustRampable(s.NegVolts, 0, step)
	var cm, hard []safetyLimit
	for _, l := range safetyLimits(p) {
		switch {
		case l.id == "cm-pos" || l.id == "cm-neg":
			cm = append(cm, l)
		case l.hard:
			hard = append(hard, l)
		}
	}
	score := func(t plan.BenchState) (ok bool, slack float64) {
		ok = true
		for _, l := range hard {
			if l.slack(t) < -slackTolerance {
				ok = false
			}
		}
		slack = math.Inf(1)
		for _, l := range cm {
			slack = math.Min(slack, l.slack(t))
		}
		return ok, slack
	}
	var a []PowerAction
	for s.PosVolts != 0 || s.NegVolts != 0 {
		pos, neg := s, s
		pos.PosVolts = StepToward(s.PosVolts, 0, step)
		neg.NegVolts = StepToward(s.NegVolts, 0, step)
		pick := plan.RoleSupplyPos
		switch {
		case s.PosVolts == 0:
			pick = plan.RoleSupplyNeg
		case s.NegVolts == 0:
		default:
			okP, slP := score(pos)
			okN, slN := score(neg)
			if okN && (!okP || slN > slP+slackTolerance) {
				pick = plan.RoleSupplyNeg
			}
		}
		if pick == plan.RoleSupplyPos {
			s = pos
			a = append(a, PowerAction{Op: PowerSetVolts, Role: plan.RoleSupplyPos, Volts: s.PosVolts})
		} else {
			s = neg
			a = append(a, PowerAction{Op: PowerSetVolts, Role: plan.RoleSupplyNeg, Volts: s.NegVolts})
		}
	}
	return a
}

// RailsDownFrom is the rails' part of PowerDownFrom on its own: the set
// points that take V+ and V− from s to 0 V (see railsDown), for a
// switch-off that starts from read-backs (the start of a run or resume,
// nullbench off) rather than from the programmed state. Sources are taken
// at 0 V, as they are by then; a state beyond what the plan programs is
// clamped first (boundedDown).
func RailsDownFrom(p *plan.Plan, s plan.BenchState) []PowerAction {
	s = boundedDown(p, s)
	s.CMVolts, s.DiffVolts, s.RefVolts = 0, 0, 0
	return railsDown(p, s, RampStep(p))
}
