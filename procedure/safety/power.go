package safety

import (
	"fmt"
	"math"
	"strings"

	"nullbench/procedure/plan"
)

// Power operations, in the order the runner carries them out.
const (
	PowerCurrentLimit = "current-limit" // set the channel's current limit (Amps)
	PowerSetVolts     = "set-volts"     // program the channel (Volts: the terminal's real voltage, negative on V-)
	PowerOutputOn     = "output-on"
	PowerOutputOff    = "output-off"
)

// PowerAction is one command to one role. The runner executes a list of
// them in order, waiting the test's dwell after each ramp step it likes;
// the lists come from the plan alone, so they are tested without a bench.
type PowerAction struct {
	Op    string  // PowerCurrentLimit, PowerSetVolts, PowerOutputOn, PowerOutputOff
	Role  string  // RoleSupplyPos, RoleSupplyNeg, RoleSourceCM, RoleSourceDiff, RoleSourceRef
	Volts float64 // for PowerSetVolts
	Amps  float64 // for PowerCurrentLimit
}

func (a PowerAction) String() string {
	switch a.Op {
	case PowerSetVolts:
		return fmt.Sprintf("%s %s %s", a.Role, a.Op, plan.FormatVolts(a.Volts))
	case PowerCurrentLimit:
		return fmt.Sprintf("%s %s %g A", a.Role, a.Op, a.Amps)
	}
	return a.Role + " " + a.Op
}

// SourceRoles lists the bound source roles in power-up order.
func SourceRoles(p *plan.Plan) []string {
	var out []string
	for _, r := range []string{plan.RoleSourceRef, plan.RoleSourceCM, plan.RoleSourceDiff} {
		if p.Bench.Roles.Get(r).Bound() {
			out = append(out, r)
		}
	}
	return out
}

// RampStep is the largest voltage step of any ramp: the plan's
// safety.ramp_step_volts, or DefaultRampStepVolts when it is not set.
func RampStep(p *plan.Plan) float64 {
	if s := p.Safety.RampStepVolts; s > 0 && !math.IsInf(s, 0) {
		return s
	}
	return plan.DefaultRampStepVolts
}

// PowerUpOrder is the power-up sequence (common practice, no published
// source; it keeps the inputs from driving an unpowered part, the latch-up
// trigger that JEDEC JESD78 tests for): every source output off at 0 V;
// each supply's current limit set and its voltage set to 0 V with its
// output off; both supply outputs on; the rails ramped together to nominal
// in steps of at most safety.ramp_step_volts (a soft start: the part never sees a step larger
// than that); then the sources' outputs on at 0 V. The inputs stay at
// ground (or open) until both rails are up; the runner then moves to each
// test state with Transition.
func PowerUpOrder(p *plan.Plan) []PowerAction {
	var a []PowerAction
	for _, r := range SourceRoles(p) {
		a = append(a, PowerAction{Op: PowerOutputOff, Role: r}, PowerAction{Op: PowerSetVolts, Role: r})
	}
	for _, r := range []string{plan.RoleSupplyPos, plan.RoleSupplyNeg} {
		a = append(a,
			PowerAction{Op: PowerOutputOff, Role: r},
			PowerAction{Op: PowerCurrentLimit, Role: r, Amps: p.Part.CurrentLimitAmps},
			PowerAction{Op: PowerSetVolts, Role: r})
	}
	a = append(a, PowerAction{Op: PowerOutputOn, Role: plan.RoleSupplyPos}, PowerAction{Op: PowerOutputOn, Role: plan.RoleSupplyNeg})
	a = append(a, rampRails(0, 0, p.Part.NominalPosVolts, p.Part.NominalNegVolts, RampStep(p))...)
	for _, r := range SourceRoles(p) {
		a = append(a, PowerAction{Op: PowerOutputOn, Role: r})
	}
	return a
}

// PowerDownOrder is the power-down sequence from the nominal state:
// PowerDownFrom(p, NominalState(p)).
func PowerDownOrder(p *plan.Plan) []PowerAction { return PowerDownFrom(p, plan.NominalState(p)) }

// PowerDownFrom is the reverse of power-up from any state (an abort
// mid-test): each source ramped to 0 V in steps ≤ ramp_step_volts and
// switched off (inputs first: common practice, no published source; JEDEC
// JESD78 latch-up); then both rails ramped to 0 V, the span shrinking at
// every step and the rails taking turns so that the inputs keep their
// common-mode margin as long as the span allows (railsDown: from shifted
// rails the far rail comes in first); then the supply outputs off.
//
// A state beyond what the plan could program (a bad read-back) is first
// clamped to it (boundedDown): the list never panics and never commands
// more than the plan's largest voltage on a role.
func PowerDownFrom(p *plan.Plan, from plan.BenchState) []PowerAction {
	from = boundedDown(p, from)
	step := RampStep(p)
	var a []PowerAction
	srcs := SourceRoles(p)
	for i := len(srcs) - 1; i >= 0; i-- {
		r := srcs[i]
		a = append(a, rampOne(r, SourceVolts(from, r), 0, step)...)
		a = append(a, PowerAction{Op: PowerOutputOff, Role: r})
	}
	rails := from
	rails.CMVolts, rails.DiffVolts, rails.RefVolts = 0, 0, 0
	a = append(a, railsDown(p, rails, step)...)
	a = append(a, PowerAction{Op: PowerOutputOff, Role: plan.RoleSupplyNeg}, PowerAction{Op: PowerOutputOff, Role: plan.RoleSupplyPos})
	return a
}

// Transition returns the actions that take the bench from one state to
// another with every supply and source moving in steps of at most
// safety.ramp_step_volts: sources moving towards 0 V first, then the
// rails, then sources moving away from 0 V. The rails move alternately,
// each round first the rail whose move shrinks the span (when shifting up,
// V- rises first), so the span never exceeds the larger of its start and
// end values (derived from the span rating; no published source). Every
// intermediate state is checked against the
// absolute maxima (span, rail polarity, inputs beyond the rails, source
// size); a violation is returned as an error and no actions.
func Transition(p *plan.Plan, from, to plan.BenchState) ([]PowerAction, error) {
	step := RampStep(p)
	var a []PowerAction
	towardZero := func(r string) bool {
		f, t := SourceVolts(from, r), SourceVolts(to, r)
		return f != t && (math.Abs(t) < math.Abs(f) || t*f < 0)
	}
	srcs := SourceRoles(p)
	for _, r := range srcs {
		if towardZero(r) {
			a = append(a, rampOne(r, SourceVolts(from, r), SourceVolts(to, r), step)...)
		}
	}
	a = append(a, rampRails(from.PosVolts, from.NegVolts, to.PosVolts, to.NegVolts, step)...)
	for _, r := range srcs {
		if !towardZero(r) && SourceVolts(from, r) != SourceVolts(to, r) {
			a = append(a, rampOne(r, SourceVolts(from, r), SourceVolts(to, r), step)...)
		}
	}
	if err := checkRamp(p, from, a); err != nil {
		return nil, err
	}
	return a, nil
}

// checkRamp replays actions from a state and checks the hard limits after
// each one.
func checkRamp(p *plan.Plan, s plan.BenchState, actions []PowerAction) error {
	var hard []safetyLimit
	for _, l := range safetyLimits(p) {
		if l.hard {
			hard = append(hard, l)
		}
	}
	for i, act := range actions {
		s = ApplyAction(s, act)
		for _, l := range hard {
			if l.slack(s) < -slackTolerance {
				return fmt.Errorf("ramp step %d (%s) is unsafe: %s; %s", i+1, act, l.problem(s), l.fix)
			}
		}
	}
	return nil
}

// ApplyAction returns the state after a PowerSetVolts action (other
// actions leave the programmed state as it is).
func ApplyAction(s plan.BenchState, a PowerAction) plan.BenchState {
	if a.Op != PowerSetVolts {
		return s
	}
	switch a.Role {
	case plan.RoleSupplyPos:
		s.PosVolts = a.Volts
	case plan.RoleSupplyNeg:
		s.NegVolts = a.Volts
	case plan.RoleSourceCM:
		s.CMVolts = a.Volts
	case plan.RoleSourceDiff:
		s.DiffVolts = a.Volts
	case plan.RoleSourceRef:
		s.RefVolts = a.Volts
	}
	return s
}

// SourceVolts is the voltage a source role has in state s (0 V for a role
// that is not a source).
func SourceVolts(s plan.BenchState, role string) float64 {
	switch role {
	case plan.RoleSourceCM:
		return s.CMVolts
	case plan.RoleSourceDiff:
		return s.DiffVolts
	case plan.RoleSourceRef:
		return s.RefVolts
	}
	return 0
}

// rampOne moves one role from f to t in steps of at most step, ending
// exactly on t.
func rampOne(role string, f, t, step float64) []PowerAction {
	mustRampable(f, t, step)
	var a []PowerAction
	for f != t {
		f = StepToward(f, t, step)
		a = append(a, PowerAction{Op: PowerSetVolts, Role: role, Volts: f})
	}
	return a
}

// maxRampSteps bounds a ramp; a longer one means an unchecked plan.
const maxRampSteps = 1000000

// mustRampable panics on a ramp that would not end or would take absurdly
// many steps: plans reach here only after Validate and CheckSafety, which
// refuse non-finite and oversized voltages, so this is a programming error.
func mustRampable(f, t, step float64) {
	if math.IsNaN(f) || math.IsNaN(t) || math.IsInf(f, 0) || math.IsInf(t, 0) || !(step > 0) || math.Abs(t-f)/step > maxRampSteps {
		panic(fmt.Sprintf("plan: cannot ramp from %g V to %g V in %g V steps; check the plan with CheckSafety first", f, t, step))
	}
}

// StepToward is one ramp step from f toward t: t itself when it is within
// step of f, else f moved by step toward t.
func StepToward(f, t, step float64) float64 {
	if math.Abs(t-f) <= step {
		return t
	}
	if t > f {
		return f + step
	}
	return f - step
}

// rampRails moves V+ from p0 to p1 and V- from n0 to n1 in rounds: each
// round moves by at most step first each rail whose move shrinks the span
// (V+ falling, V- rising), then each rail whose move grows it. While both
// rails still move, every grow step is preceded by a shrink step at least
// as large, so the span stays at or below max(start span, end span).
func rampRails(p0, n0, p1, n1, step float64) []PowerAction {
	mustRampable(p0, p1, step)
	mustRampable(n0, n1, step)
	var a []PowerAction
	pv, nv := p0, n0
	movePos := func() {
		pv = StepToward(pv, p1, step)
		a = append(a, PowerAction{Op: PowerSetVolts, Role: plan.RoleSupplyPos, Volts: pv})
	}
	moveNeg := func() {
		nv = StepToward(nv, n1, step)
		a = append(a, PowerAction{Op: PowerSetVolts, Role: plan.RoleSupplyNeg, Volts: nv})
	}
	for pv != p1 || nv != n1 {
		posShrinks := p1 < pv
		negShrinks := n1 > nv
		if pv != p1 && posShrinks {
			movePos()
		}
		if nv != n1 && negShrinks {
			moveNeg()
		}
		if pv != p1 && !posShrinks {
			movePos()
		}
		if nv != n1 && !negShrinks {
			moveNeg()
		}
	}
	return a
}

// FormatActions writes a list of actions one per line (for logs and tests).
func FormatActions(actions []PowerAction) string {
	var b strings.Builder
	for _, a := range actions {
		b.WriteString(a.String())
		b.WriteByte('\n')
	}
	return b.String()
}
