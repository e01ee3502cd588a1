package procedure

import (
	"context"
	"fmt"

	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// railStarts reads both supplies back, as a switch-off from an unknown
// state does (rampStart), and returns the state to ramp down from, with
// the sources at 0 V (they come down first).
func (r *runner) railStarts(ctx context.Context, note func(format string, args ...any)) plan.BenchState {
	var st plan.BenchState
	for _, role := range []string{plan.RoleSupplyPos, plan.RoleSupplyNeg} {
		sup := r.supply(role)
		if sup == nil {
			continue
		}
		v, ok, how := r.rampStart(ctx, role, sup, 0, false)
		if !ok {
			note("%s: %s", role, how)
		} else if v != 0 {
			note("%s: ramping to 0 V %s", role, how)
		}
		if role == plan.RoleSupplyPos {
			st.PosVolts = v
		} else {
			st.NegVolts = v
		}
	}
	return st
}

// rampRailsDown ramps both rails from st to 0 V together, the rails taking
// turns so that the inputs keep their common-mode margin as long as the
// span allows (safety.RailsDownFrom), each call through call, with the
// ramp dwell after each step. It stops at the first failure and returns
// it, naming the rail and the step; the caller still switches both
// outputs off.
func (r *runner) rampRailsDown(ctx context.Context, st plan.BenchState, call func(func(context.Context) error) error) error {
	for _, a := range safety.RailsDownFrom(r.p, st) {
		sup := r.supply(a.Role)
		if sup == nil {
			continue
		}
		v := a.Volts
		if err := call(func(c context.Context) error { return sup.SetVolts(c, v) }); err != nil {
			return fmt.Errorf("%s: ramp to 0 V at %s: %w", a.Role, plan.FormatVolts(v), err)
		}
		if err := r.clk.Sleep(ctx, r.timing.RampDwell); err != nil {
			return err
		}
	}
	return nil
}
