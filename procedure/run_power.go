package procedure

import (
	"context"
	"fmt"
	"math"
	"strings"

	"nullbench/instrument"
	"nullbench/procedure/fault"
	"nullbench/procedure/journal"
	"nullbench/procedure/operator"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// powerUp runs safety.PowerUpOrder: sources off at 0 V, current limits, supplies
// on at 0 V and ramped to nominal, then the sources on at 0 V.
func (r *runner) powerUp(ctx context.Context) error {
	r.at.stage = stagePowerUp
	r.note("unit %s: powering up (V+ %s, V- %s, current limit %g A)", r.at.unit,
		plan.FormatVolts(r.p.Part.NominalPosVolts), plan.FormatVolts(r.p.Part.NominalNegVolts), r.p.Part.CurrentLimitAmps)
	if err := r.execute(ctx, safety.PowerUpOrder(r.p)); err != nil {
		return err
	}
	if err := r.checkSupplyCurrent(ctx); err != nil {
		return err
	}
	r.event(journal.Event{Type: journal.EventPowerUp, Unit: r.at.unit, TempIndex: r.at.tempIndex, TemperatureC: r.at.tempPoint})
	return nil
}

// checkSupplyCurrent reads each rail's current after power-up and stops
// the run when it lies outside part.supply_amps_min … supply_amps_max: an
// empty socket draws nothing (and its flat output would read as an
// unresolved, "passing" rejection), a damaged or latched part draws too
// much. Common practice, no published source.
func (r *runner) checkSupplyCurrent(ctx context.Context) error {
	lo, hi := r.p.Part.SupplyAmpsMin, r.p.Part.SupplyAmpsMax
	if lo <= 0 && hi <= 0 {
		return nil
	}
	for _, rail := range []struct {
		name string
		s    instrument.Supply
	}{{"V+", r.rig.SupplyPos}, {"V-", r.rig.SupplyNeg}} {
		if rail.s == nil {
			continue
		}
		amps, err := rail.s.ReadAmps(ctx)
		if err != nil {
			return fmt.Errorf("read the %s supply current: %w", rail.name, err)
		}
		a := math.Abs(amps)
		switch {
		case lo > 0 && a < lo:
			return fmt.Errorf("unit %s draws %.3g mA from %s, below part.supply_amps_min %.3g mA: is the part in the socket and its contacts closed?",
				r.at.unit, 1e3*a, rail.name, 1e3*lo)
		case hi > 0 && a > hi:
			return fmt.Errorf("unit %s draws %.3g mA from %s, above part.supply_amps_max %.3g mA: the part may be damaged, latched up or inserted the wrong way",
				r.at.unit, 1e3*a, rail.name, 1e3*hi)
		}
	}
	return nil
}

// benchOff switches every output off before the campaign moves a relay or
// asks for a part. The bench's state at the start is not known: a run
// killed outright (kill -9, a crash, a power cut of the computer) leaves
// the outputs as they were. Each source is read back, ramped to 0 V in
// steps of at most safety.ramp_step_volts and switched off; then both
// supplies are read back and ramped down together, taking turns
// (safety.RailsDownFrom), and switched off. The part sees at worst its supplies ramped down
// with its inputs at ground, never an input beyond the rails of an
// unpowered part. An output that cannot be brought down stops the run
// before anything else happens.
func (r *runner) benchOff(ctx context.Context) error {
	r.at.stage = stagePowerDown
	type output interface {
		SetVolts(context.Context, float64) error
		SetOutput(context.Context, bool) error
		ReadVolts(context.Context) (float64, error)
	}
	down := func(role string, o output) error {
		v, ok, how := r.rampStart(ctx, role, o, 0, false)
		if !ok {
			r.note("%s: %s", role, how)
		} else if v != 0 {
			r.note("%s: ramping to 0 V %s", role, how)
		}
		for _, step := range rampTo(v, 0, safety.RampStep(r.p)) {
			if err := o.SetVolts(ctx, step); err != nil {
				return fmt.Errorf("%s: ramp to 0 V before the first unit: %w", role, err)
			}
			if err := r.clk.Sleep(ctx, r.timing.RampDwell); err != nil {
				return err
			}
		}
		if err := o.SetOutput(ctx, false); err != nil {
			return fmt.Errorf("%s: switch off before the first unit: %w", role, err)
		}
		return nil
	}
	if errs := r.generatorsOff(ctx, 0); len(errs) > 0 {
		return fmt.Errorf("before the first unit: %w", errs[0])
	}
	for _, role := range safety.SourceRoles(r.p) {
		if src := r.source(role); src != nil {
			if err := down(role, src); err != nil {
				return err
			}
			r.srcSafe[role] = true
		}
	}
	// The rails together, taking turns (railsdown.go): from shifted rails
	// the far one comes in first, so the inputs at ground keep their
	// common-mode margin while the part is still powered.
	st := r.railStarts(ctx, r.note)
	if err := r.rampRailsDown(ctx, st, func(f func(context.Context) error) error { return f(ctx) }); err != nil {
		return fmt.Errorf("before the first unit: %w", err)
	}
	for _, role := range []string{plan.RoleSupplyNeg, plan.RoleSupplyPos} {
		sup := r.supply(role)
		if sup == nil {
			continue
		}
		if err := sup.SetOutput(ctx, false); err != nil {
			return fmt.Errorf("%s: switch off before the first unit: %w", role, err)
		}
		// Programmed to 0 V too, so the next power-up starts there.
		if err := sup.SetVolts(ctx, 0); err != nil {
			return fmt.Errorf("%s: set 0 V before the first unit: %w", role, err)
		}
	}
	r.state = plan.BenchState{}
	r.powered = false
	r.event(journal.Event{Type: journal.EventBenchOff, TempIndex: -1, Detail: "every output ramped to 0 V and switched off before the first unit"})
	return nil
}

// rampTo lists the set points from v to target in steps of at most step
// volts, ending exactly at target; nothing when v is already there (within
// 1 mV, a supply's resolution).
//
// It never allocates by an instrument's answer: a start that is not finite
// or would take more than maxRampPoints steps returns nothing (callers pass
// starts bounded by the plan; see rampStart).
func rampTo(v, target, step float64) []float64 {
	if !(step > 0) || math.IsInf(step, 0) {
		step = plan.DefaultRampStepVolts
	}
	d := target - v
	if math.IsNaN(d) || math.IsInf(d, 0) || math.Abs(d)/step > maxRampPoints {
		return nil
	}
	if math.Abs(d) < 1e-3 {
		return nil
	}
	n := int(math.Ceil(math.Abs(d)/step - 1e-9))
	out := make([]float64, 0, n)
	for i := 1; i < n; i++ {
		out = append(out, v+d*float64(i)/float64(n))
	}
	return append(out, target)
}

// powerDown runs PowerDownFrom the present state: sources ramped to 0 V
// and off, then the rails ramped down and off.
func (r *runner) powerDown(ctx context.Context) error {
	r.at.stage = stagePowerDown
	if err := r.execute(ctx, safety.PowerDownFrom(r.p, r.state)); err != nil {
		return err
	}
	r.powered = false
	r.event(journal.Event{Type: journal.EventPowerDown, Unit: r.at.unit, TempIndex: r.at.tempIndex, TemperatureC: r.at.tempPoint})
	r.note("unit %s: powered down", r.at.unit)
	return nil
}

// moveTo ramps the bench from its present state to s (Transition checks
// every intermediate state against the plan's absolute maxima).
func (r *runner) moveTo(ctx context.Context, s plan.BenchState) error {
	acts, err := safety.Transition(r.p, r.state, s)
	if err != nil {
		return err
	}
	return r.execute(ctx, acts)
}

// execute carries out actions in order. After each voltage change it lets
// at least Timing.RampDwell of bench time pass from the moment the change
// was sent before the next action: the time the driver already spent (its
// profile's settle wait, the exchange itself) counts towards it, so the
// dwell is a minimum, not an extra wait on top of the driver's. It stops
// at the first error.
func (r *runner) execute(ctx context.Context, acts []safety.PowerAction) error {
	for _, a := range acts {
		sent := r.clk.Now()
		if err := r.do(ctx, a); err != nil {
			return err
		}
		if a.Op == safety.PowerSetVolts {
			if rest := r.timing.RampDwell - (r.clk.Now() - sent); rest > 0 {
				if err := r.clk.Sleep(ctx, rest); err != nil {
					return err
				}
			}
		}
	}
	return nil
}

// do sends one action to its role and tracks the programmed state. The
// error names the role and the action; the driver's error inside names the
// instrument and its command.
func (r *runner) do(ctx context.Context, a safety.PowerAction) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	isSource := a.Role == plan.RoleSourceCM || a.Role == plan.RoleSourceDiff || a.Role == plan.RoleSourceRef
	if isSource && a.Op == safety.PowerSetVolts && a.Volts != 0 {
		// From the moment it is attempted, the source may drive a
		// non-zero voltage until it is set to 0 V or switched off.
		r.srcSafe[a.Role] = false
	}
	if !isSource && a.Op == safety.PowerOutputOn {
		r.powered = true
	}
	var err error
	switch a.Role {
	case plan.RoleSupplyPos, plan.RoleSupplyNeg:
		s := r.supply(a.Role)
		if s == nil {
			return fmt.Errorf("%s: not on this bench", a.Role)
		}
		switch a.Op {
		case safety.PowerCurrentLimit:
			err = s.SetCurrentLimit(ctx, a.Amps)
		case safety.PowerSetVolts:
			err = s.SetVolts(ctx, a.Volts)
		case safety.PowerOutputOn, safety.PowerOutputOff:
			err = s.SetOutput(ctx, a.Op == safety.PowerOutputOn)
		default:
			err = fmt.Errorf("unknown power operation %q", a.Op)
		}
	case plan.RoleSourceCM, plan.RoleSourceDiff, plan.RoleSourceRef:
		s := r.source(a.Role)
		if s == nil {
			return fmt.Errorf("%s: not on this bench", a.Role)
		}
		switch a.Op {
		case safety.PowerSetVolts:
			err = s.SetVolts(ctx, a.Volts)
		case safety.PowerOutputOn, safety.PowerOutputOff:
			err = s.SetOutput(ctx, a.Op == safety.PowerOutputOn)
		default:
			err = fmt.Errorf("%s: a source has no %s", a.Role, a.Op)
		}
	default:
		err = fmt.Errorf("unknown role %q in a power action", a.Role)
	}
	if err != nil {
		if a.Op == safety.PowerSetVolts {
			r.unsure[a.Role] = true
			r.noteTried(a)
		}
		return fmt.Errorf("%s: %w", a, err)
	}
	delete(r.unsure, a.Role)
	r.state = safety.ApplyAction(r.state, a)
	if isSource && (a.Op == safety.PowerOutputOff || (a.Op == safety.PowerSetVolts && a.Volts == 0)) {
		r.srcSafe[a.Role] = true
	}
	return nil
}

// safeState brings the bench to its safe state after a fault, with a
// fresh context (the run's may be cancelled) bounded by
// Timing.SafeStateTimeout, each call by Timing.SafeCallTimeout:
//
//  1. every bound source ramped to 0 V and switched off (PowerDownFrom);
//  2. only when every source is known at 0 V or off: both rails ramped
//     down (the span shrinking at every step) and switched off. A source
//     that could not be brought to 0 V or switched off would otherwise
//     drive an input beyond the rails of an unpowered part (latch-up,
//     JEDEC JESD78), so then the supplies are left on and the error
//     says so;
//  3. the chamber set back to ambient (set point at once: the campaign is
//     over, the chamber's own controller ramps);
//  4. the switch opened, when the part is unpowered.
//
// A role that fails is not ramped further, but its output-off is still
// tried; the other roles carry on. It returns nil when every step worked,
// else every problem met.
func (r *runner) safeState(runCtx context.Context) error {
	ctx, cancel := context.WithTimeout(context.WithoutCancel(runCtx), r.timing.SafeStateTimeout)
	defer cancel()
	var errs []error
	failed := map[string]bool{}
	offFailed := map[string]bool{} // roles whose output-off failed: they may still be on
	call := func(a safety.PowerAction) {
		if failed[a.Role] && a.Op == safety.PowerSetVolts {
			return
		}
		cctx, ccancel := context.WithTimeout(ctx, r.timing.SafeCallTimeout)
		err := r.do(cctx, a)
		ccancel()
		if err != nil && r.redialOnce(ctx, a.Role, err) {
			cctx, ccancel = context.WithTimeout(ctx, r.timing.SafeCallTimeout)
			if err = r.do(cctx, a); err != nil {
				err = fmt.Errorf("on a new connection, %w", err)
			}
			ccancel()
		}
		if err != nil {
			failed[a.Role] = true
			if a.Op == safety.PowerOutputOff {
				offFailed[a.Role] = true
			}
			errs = append(errs, err)
			return
		}
		if a.Op == safety.PowerSetVolts {
			// The dwell between ramp steps runs on the fresh context; a
			// failed sleep (deadline) only shortens the ramp.
			_ = r.clk.Sleep(ctx, r.timing.RampDwell)
		}
	}
	// A set command that failed may still have taken effect: start the
	// ramp from what the output reads, so no step exceeds the ramp step.
	// The read-back is checked against what the runner programmed (the
	// last good value and the failed one): an implausible answer is not
	// used, the ramp starts from the programmed value instead (rampStart).
	// Every generator output off FIRST: a sine on an input or a rail must
	// not outlive the rails it rides on.
	errs = append(errs, r.generatorsOff(ctx, r.timing.SafeCallTimeout)...)
	r.resolveUnsure(ctx)
	acts := safety.PowerDownFrom(r.p, r.state)
	i := 0
	for ; i < len(acts) && isSourceRole(acts[i].Role); i++ {
		call(acts[i])
	}
	var live []string
	for _, role := range safety.SourceRoles(r.p) {
		if !r.srcSafe[role] {
			live = append(live, fmt.Sprintf("%s (last set to %s)", role, plan.FormatVolts(safety.SourceVolts(r.state, role))))
		}
	}
	suppliesDown := false
	if len(live) > 0 {
		errs = append(errs, fmt.Errorf("could not bring %s to 0 V or off: the supplies are LEFT ON at V+ %s, V- %s so that no input sits beyond the rails of an unpowered part; switch that source off by hand, then the supplies",
			strings.Join(live, ", "), plan.FormatVolts(r.state.PosVolts), plan.FormatVolts(r.state.NegVolts)))
	} else {
		nerr := len(errs)
		for ; i < len(acts); i++ {
			call(acts[i])
		}
		suppliesDown = len(errs) == nerr
		if suppliesDown {
			r.powered = false
		}
	}
	// What may still be on: generator outputs, sources, supplies.
	var remains []string
	for _, ch := range sortedKeys(r.genOn) {
		remains = append(remains, "generator output "+ch+" may still be on")
	}
	for _, role := range safety.SourceRoles(r.p) {
		if !r.srcSafe[role] {
			remains = append(remains, fmt.Sprintf("%s may still be on (last set to %s)", role, plan.FormatVolts(safety.SourceVolts(r.state, role))))
		}
	}
	for _, role := range []string{plan.RoleSupplyPos, plan.RoleSupplyNeg} {
		if r.supply(role) == nil {
			continue
		}
		v := roleVolts(r.state, role)
		switch {
		case len(live) > 0 || offFailed[role]:
			remains = append(remains, fmt.Sprintf("%s may still be on (last set to %s)", role, plan.FormatVolts(v)))
		case failed[role] && v != 0:
			// Off, but not ramped to 0 V: the rail comes back at this
			// voltage when its output is switched on.
			remains = append(remains, fmt.Sprintf("%s is off but still programmed to %s (its ramp to 0 V failed)", role, plan.FormatVolts(v)))
		}
	}
	if r.chamber && r.rig.Chamber != nil {
		amb := r.p.Temperature.AmbientCelsius
		cctx, ccancel := context.WithTimeout(ctx, r.timing.SafeCallTimeout)
		if err := r.rig.Chamber.SetPointCelsius(cctx, amb); err != nil {
			errs = append(errs, fmt.Errorf("chamber: set point %g °C (ambient): %w", amb, err))
			remains = append(remains, fmt.Sprintf("the chamber's set point was not returned to ambient %g °C (it may be hot or cold)", amb))
		} else {
			r.event(journal.Event{Type: journal.EventTemperatureSet, TemperatureC: amb, Detail: "safe state: chamber set back to ambient"})
		}
		ccancel()
	}
	if suppliesDown && r.rig.Switch != nil && !operator.HandSwap(r.p) {
		cctx, ccancel := context.WithTimeout(ctx, r.timing.SafeCallTimeout)
		rs, err := openSwitch(cctx, r.rig.Switch)
		if err != nil {
			errs = append(errs, fmt.Errorf("switch: open the relays: %w", err))
		}
		r.relays = rs
		ccancel()
	} else if r.rig.Switch != nil && !operator.HandSwap(r.p) {
		r.relays = relayState{words: "not opened: the part may still be powered"}
	}
	if len(errs) == 0 {
		return nil
	}
	return fault.NewSafeStateError(r.p, remains, errs, r.redialed)
}

func isSourceRole(role string) bool {
	return role == plan.RoleSourceCM || role == plan.RoleSourceDiff || role == plan.RoleSourceRef
}

// supply and source map role names to the rig's roles; a nil interface
// value comes back for a role the rig lacks.
func (r *runner) supply(role string) interface {
	SetVolts(context.Context, float64) error
	SetCurrentLimit(context.Context, float64) error
	SetOutput(context.Context, bool) error
	ReadVolts(context.Context) (float64, error)
} {
	switch role {
	case plan.RoleSupplyPos:
		if r.rig.SupplyPos != nil {
			return r.rig.SupplyPos
		}
	case plan.RoleSupplyNeg:
		if r.rig.SupplyNeg != nil {
			return r.rig.SupplyNeg
		}
	}
	return nil
}

func (r *runner) source(role string) interface {
	SetVolts(context.Context, float64) error
	SetOutput(context.Context, bool) error
	ReadVolts(context.Context) (float64, error)
} {
	switch role {
	case plan.RoleSourceCM:
		if r.rig.SourceCM != nil {
			return r.rig.SourceCM
		}
	case plan.RoleSourceDiff:
		if r.rig.SourceDiff != nil {
			return r.rig.SourceDiff
		}
	case plan.RoleSourceRef:
		if r.rig.SourceRef != nil {
			return r.rig.SourceRef
		}
	}
	return nil
}

// stimulusRoles returns the roles whose voltage a test's level moves, with
// the volts each moves per volt of level (from StateAt, so the run agrees
// with the safety check on what a level means).
func stimulusRoles(p *plan.Plan, t *plan.Test, part string) []roleSlope {
	s0, s1 := plan.StateAt(p, t, part, 0), plan.StateAt(p, t, part, 1)
	var out []roleSlope
	add := func(role string, a, b float64) {
		if d := b - a; math.Abs(d) > 1e-12 {
			out = append(out, roleSlope{role: role, slope: d})
		}
	}
	add(plan.RoleSupplyPos, s0.PosVolts, s1.PosVolts)
	add(plan.RoleSupplyNeg, s0.NegVolts, s1.NegVolts)
	add(plan.RoleSourceCM, s0.CMVolts, s1.CMVolts)
	add(plan.RoleSourceDiff, s0.DiffVolts, s1.DiffVolts)
	add(plan.RoleSourceRef, s0.RefVolts, s1.RefVolts)
	return out
}

type roleSlope struct {
	role  string
	slope float64 // volts of the role per volt of level
}

// roleVolts is the programmed voltage of a role in s.
func roleVolts(s plan.BenchState, role string) float64 {
	switch role {
	case plan.RoleSupplyPos:
		return s.PosVolts
	case plan.RoleSupplyNeg:
		return s.NegVolts
	}
	return safety.SourceVolts(s, role)
}
