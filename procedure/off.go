package procedure

import (
	"context"
	"errors"
	"fmt"
	"io"

	"nullbench/procedure/clock"
	"nullbench/procedure/fault"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// OffOptions are the options of Off.
type OffOptions struct {
	Clock  clock.Clock // nil: the plan's scaled wall clock
	Log    io.Writer   // one line per action; nil discards
	Timing Timing      // RampDwell and SafeCallTimeout are used
}

// OffReport says what Off did per role.
type OffReport struct {
	Actions []string // in order, in words
	// Relays says what is known about the switch's relays ("" without a
	// switch); EveryChannelOpen only after an accepted open-all command
	// (instrument.Opening).
	Relays           string
	EveryChannelOpen bool
}

// Off brings a bench left on — by a crash, or by hand — to the plan's safe
// state without measuring: every source the plan binds is read back,
// ramped to 0 V in steps of at most safety.ramp_step_volts and switched
// off, BEFORE the supplies are ramped down and switched off (the order of
// safety.PowerDownOrder: the inputs never stay driven while the rails are
// gone); then the switch opens its relays (every channel with an open-all
// command, else those the plan names: OffReport.Relays says which) and
// the chamber's set point
// returns to temperature.ambient_c. It carries on past a failing
// instrument so that the others still reach their safe state, and returns
// every failure as a *fault.SafeStateError (Hazard when an output may still be
// on). A role the rig lacks is skipped (the plan may bind
// instruments that are not connected now).
func Off(ctx context.Context, p *plan.Plan, rig *Rig, opt OffOptions) (*OffReport, error) {
	if p == nil || rig == nil {
		return nil, errors.New("off: no plan or no bench")
	}
	if err := checkTimeScale(p, rig); err != nil {
		return nil, err
	}
	r := newRunner(p, rig, RunOptions{Clock: opt.Clock, Log: opt.Log, Timing: opt.Timing})
	rep := &OffReport{}
	var errs []error
	var remains []string // outputs that may still be on (fault.SafeStateError.Remains)
	note := func(format string, args ...any) {
		s := fmt.Sprintf(format, args...)
		rep.Actions = append(rep.Actions, s)
		r.logf("%s", s)
	}
	type output interface {
		SetVolts(context.Context, float64) error
		SetOutput(context.Context, bool) error
		ReadVolts(context.Context) (float64, error)
	}
	call := func(f func(context.Context) error) error {
		cctx, cancel := context.WithTimeout(ctx, r.timing.SafeCallTimeout)
		defer cancel()
		return f(cctx)
	}
	down := func(role string, o output) {
		v, ok, how := r.rampStart(ctx, role, o, 0, false)
		var err error
		if !ok {
			// Without a plausible read-back the ramp cannot start from
			// the output's value; switching the output off is still
			// safer than leaving it.
			errs = append(errs, fmt.Errorf("%s: %s", role, how))
		} else {
			if v != 0 {
				note("%s: ramping to 0 V %s", role, how)
			}
			for _, step := range rampTo(v, 0, safety.RampStep(p)) {
				if err = call(func(c context.Context) error { return o.SetVolts(c, step) }); err != nil {
					errs = append(errs, fmt.Errorf("%s: ramp to 0 V at %s: %w", role, plan.FormatVolts(step), err))
					break
				}
				_ = r.clk.Sleep(ctx, r.timing.RampDwell)
			}
			if err == nil {
				note("%s: ramped from %s to 0 V", role, plan.FormatVolts(v))
			}
		}
		if err := call(func(c context.Context) error { return o.SetOutput(c, false) }); err != nil {
			errs = append(errs, fmt.Errorf("%s: switch off: %w", role, err))
			remains = append(remains, role+" may still be on")
			return
		}
		note("%s: output off", role)
	}
	// Generator outputs first: no sine rides on a rail being ramped down.
	for _, ch := range sortedKeys(rig.Generators) {
		g := rig.Generators[ch]
		if err := call(func(c context.Context) error { return g.SetOutput(c, false) }); err != nil {
			errs = append(errs, fmt.Errorf("generator output %s: switch off: %w", ch, err))
			remains = append(remains, "generator output "+ch+" may still be on")
		} else {
			note("generator output %s: off", ch)
		}
	}
	for _, role := range safety.SourceRoles(p) {
		if src := r.source(role); src != nil {
			down(role, src)
		}
	}
	// The rails together, taking turns (railsdown.go), then both off.
	st := r.railStarts(ctx, note)
	if err := r.rampRailsDown(ctx, st, call); err != nil {
		errs = append(errs, err)
	} else {
		for _, rail := range []struct {
			role string
			v    float64
		}{{plan.RoleSupplyPos, st.PosVolts}, {plan.RoleSupplyNeg, st.NegVolts}} {
			if r.supply(rail.role) != nil {
				note("%s: ramped from %s to 0 V", rail.role, plan.FormatVolts(rail.v))
			}
		}
	}
	for _, role := range []string{plan.RoleSupplyNeg, plan.RoleSupplyPos} {
		sup := r.supply(role)
		if sup == nil {
			continue
		}
		if err := call(func(c context.Context) error { return sup.SetOutput(c, false) }); err != nil {
			errs = append(errs, fmt.Errorf("%s: switch off: %w", role, err))
			remains = append(remains, role+" may still be on")
			continue
		}
		note("%s: output off", role)
		if err := call(func(c context.Context) error { return sup.SetVolts(c, 0) }); err != nil {
			errs = append(errs, fmt.Errorf("%s: set 0 V: %w", role, err))
		}
	}
	if rig.Switch != nil {
		var rs relayState
		err := call(func(c context.Context) (err error) { rs, err = openSwitch(c, rig.Switch); return })
		if err != nil {
			errs = append(errs, fmt.Errorf("switch: %w", err))
		}
		rep.Relays, rep.EveryChannelOpen = rs.words, rs.every
		note("switch: %s", rs.words)
	}
	if rig.Chamber != nil && p.Temperature.Mode == plan.TempChamber {
		amb := p.Temperature.AmbientCelsius
		if err := call(func(c context.Context) error { return rig.Chamber.SetPointCelsius(c, amb) }); err != nil {
			errs = append(errs, fmt.Errorf("chamber: set point %g °C: %w", amb, err))
			remains = append(remains, fmt.Sprintf("the chamber's set point was not returned to ambient %g °C (it may be hot or cold)", amb))
		} else {
			note("chamber: set point %g °C", amb)
		}
	}
	if len(errs) == 0 {
		return rep, nil
	}
	// Hazard only when an output may still be on: relays left closed on
	// an unpowered part are said as such (fault.SafeStateError).
	return rep, fault.NewSafeStateError(p, remains, errs, r.redialed)
}
