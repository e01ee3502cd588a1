package procedure

import (
	"context"
	"fmt"
	"math"

	"nullbench/instrument"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// Read-backs are never trusted blindly. A supply or source answers with
// the voltage at its terminals; a working one stays within its set-point
// accuracy of the programmed value (a few mV for a bench supply). The
// runner refuses any read-back that is not finite or lies further than
// readBackSlackVolts + readBackSlackRel·|programmed| from the programmed
// value, or beyond the largest voltage the plan could have programmed on
// that role. The bounds are generous on purpose (common practice, no
// published source): they catch a transport or instrument fault (1E300,
// 30 V from a 15 V rail), not an accuracy problem.
const (
	readBackSlackVolts = 0.1
	readBackSlackRel   = 0.02
)

// readBackSlack is the allowed distance of a read-back from bound.
func readBackSlack(bound float64) float64 {
	return readBackSlackVolts + readBackSlackRel*math.Abs(bound)
}

// outputDescriber is a supply or source driver that can say which
// instrument, channel and read-back command it is, and the channel's
// rating from its profile (instrument.SupplyDriver, SourceDriver).
type outputDescriber interface {
	Output() instrument.OutputInfo
}

// outputInfo describes the output behind role; ok is false when the
// driver cannot (a test fake), and then only the role is named.
func (r *runner) outputInfo(role string) (instrument.OutputInfo, bool) {
	if r.rig == nil {
		return instrument.OutputInfo{}, false
	}
	var o any
	if isSourceRole(role) {
		o = r.source(role)
	} else {
		o = r.supply(role)
	}
	if d, ok := o.(outputDescriber); ok {
		return d.Output(), true
	}
	return instrument.OutputInfo{}, false
}

// readBackWhere names role with its instrument, channel and read-back
// command where the driver knows them: `supply_pos (psu channel 1,
// "INST:NSEL 1; MEAS:VOLT?")`.
func (r *runner) readBackWhere(role string) string {
	if oi, ok := r.outputInfo(role); ok {
		return fmt.Sprintf("%s (%s channel %s, %q)", role, oi.Instrument, oi.Channel, oi.ReadVolts)
	}
	return role
}

// plausibleReadBack checks a read-back v of role, in this order, against:
//
//   - being a finite number (NaN, ±Inf, the overload code are refused);
//   - the channel's voltage rating from its profile (max_volts), plus
//     readBackSlack: no working channel reads beyond what it can make;
//   - the largest voltage the plan programs on the role
//     (plan.MaxProgrammedVolts), plus readBackSlack;
//   - the value the runner programmed, within readBackSlack.
//
// The error names the role, the instrument, channel and command, the
// value and the bound it broke; it wraps instrument.ErrImplausible.
func (r *runner) plausibleReadBack(role string, v, programmed float64) error {
	where := r.readBackWhere(role)
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Errorf("%s: read-back %g V is not a number: %w", where, v, instrument.ErrImplausible)
	}
	if oi, ok := r.outputInfo(role); ok && oi.MaxVolts > 0 && math.Abs(v) > oi.MaxVolts+readBackSlack(oi.MaxVolts) {
		return fmt.Errorf("%s: read-back %s is beyond the channel's %s rating (max_volts in its profile): %w",
			where, plan.FormatVolts(v), plan.FormatVolts(oi.MaxVolts), instrument.ErrImplausible)
	}
	if lim := safety.MaxProgrammedVolts(r.p, role); math.Abs(v) > lim+readBackSlack(lim) {
		return fmt.Errorf("%s: read-back %s exceeds the largest voltage the plan programs on it (%s): %w",
			where, plan.FormatVolts(v), plan.FormatVolts(lim), instrument.ErrImplausible)
	}
	if d := math.Abs(v - programmed); d > readBackSlack(programmed) {
		return fmt.Errorf("%s: read-back %s is %.3g V from the programmed %s (more than %.3g V): %w",
			where, plan.FormatVolts(v), d, plan.FormatVolts(programmed), readBackSlack(programmed), instrument.ErrImplausible)
	}
	return nil
}

// plausibleLimit is the largest read-back magnitude accepted on role:
// lim (from the plan) and, where the profile states one, the channel's
// rating, whichever is smaller.
func (r *runner) plausibleLimit(role string, lim float64) float64 {
	if oi, ok := r.outputInfo(role); ok && oi.MaxVolts > 0 {
		return math.Min(lim, oi.MaxVolts)
	}
	return lim
}

// voltReader is the read-back half of a supply or source.
type voltReader interface {
	ReadVolts(context.Context) (float64, error)
}

// rampStart decides where a ramp of role to 0 V starts, with no value from
// the instrument used unchecked:
//
//   - known true (the runner programmed the role; programmed is the
//     largest magnitude it may have set, a failed set command included):
//     the read-back when it is within readBackSlack of programmed or
//     below it in magnitude with the same sign, else programmed itself;
//   - known false (the bench as a crash left it): the read-back when it
//     is finite, of the rail's sign (a supply) and within the plan's
//     largest voltage for the role (for a source: or the part's maximum
//     supply span) and the channel's rating (max_volts). An
//     implausible answer is read once more (a transient glitch); when it
//     stays implausible a supply starts from its nominal rail — the level
//     the bench rests at between tests, never more than the plan
//     programs — and a source is switched off without a ramp (ok false).
//
// how says which value was used, in words for the log and journal. The
// start is always finite and within what the plan could program, so the
// ramp's length is bounded by the plan, never by an answer.
func (r *runner) rampStart(ctx context.Context, role string, o voltReader, programmed float64, known bool) (start float64, ok bool, how string) {
	lim := safety.MaxProgrammedVolts(r.p, role)
	if !known && isSourceRole(role) {
		// A source the operator left on by hand may sit at a level the
		// plan never programs; it is plausible up to the part's supply
		// span (no input can be further from ground on a powered part).
		lim = math.Max(lim, r.p.Part.MaxSupplySpanVolts)
	}
	lim = r.plausibleLimit(role, lim)
	accept := func(v float64) bool {
		if math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) > lim+readBackSlack(lim) {
			return false
		}
		// A rail never reads the other sign: V+ below 0 V or V- above it
		// (beyond the slack of an output at 0 V) is a faulty answer.
		if (role == plan.RoleSupplyPos && v < -readBackSlack(0)) || (role == plan.RoleSupplyNeg && v > readBackSlack(0)) {
			return false
		}
		if !known {
			return true
		}
		if math.Abs(v-programmed) <= readBackSlack(programmed) {
			return true
		}
		// Between 0 V and the programmed value: a set command that half
		// worked, or an output already coming down.
		return v*programmed >= 0 && math.Abs(v) <= math.Abs(programmed)
	}
	var why string
	tries := 2
	if known {
		tries = 1
	}
	for range tries {
		cctx, cancel := context.WithTimeout(ctx, r.timing.SafeCallTimeout)
		v, err := o.ReadVolts(cctx)
		cancel()
		if err != nil && r.redialOnce(ctx, role, err) {
			cctx, cancel = context.WithTimeout(ctx, r.timing.SafeCallTimeout)
			v, err = o.ReadVolts(cctx)
			cancel()
		}
		switch {
		case err != nil:
			why = fmt.Sprintf("read-back failed: %v", err)
		case accept(v):
			return v, true, "from its read-back " + plan.FormatVolts(v)
		default:
			why = fmt.Sprintf("%s: read-back %g V implausible (largest accepted %s)", r.readBackWhere(role), v, plan.FormatVolts(lim))
		}
	}
	if known {
		return programmed, true, fmt.Sprintf("from the programmed %s (%s)", plan.FormatVolts(programmed), why)
	}
	switch role {
	case plan.RoleSupplyPos:
		v := math.Min(math.Abs(r.p.Part.NominalPosVolts), lim)
		return v, true, fmt.Sprintf("from the nominal rail %s (%s)", plan.FormatVolts(v), why)
	case plan.RoleSupplyNeg:
		v := -math.Min(math.Abs(r.p.Part.NominalNegVolts), lim)
		return v, true, fmt.Sprintf("from the nominal rail %s (%s)", plan.FormatVolts(v), why)
	}
	return 0, false, "switched off without a ramp (" + why + ")"
}

// maxRampPoints bounds a ramp built by rampTo; starts come from rampStart,
// bounded by the plan, so a longer ramp means an unchecked value.
const maxRampPoints = 100000

// noteTried records the voltage of a failed set command: the instrument
// may have applied it, so the safe state treats the larger of it and the
// last good value as programmed.
func (r *runner) noteTried(a safety.PowerAction) {
	if r.tried == nil {
		r.tried = map[string]float64{}
	}
	if old, ok := r.tried[a.Role]; !ok || math.Abs(a.Volts) > math.Abs(old) {
		r.tried[a.Role] = a.Volts
	}
}

// resolveUnsure sets the programmed state of every role whose last set
// command failed to where its ramp down starts (rampStart with the
// programmed value known), and notes which value it used.
func (r *runner) resolveUnsure(ctx context.Context) {
	for _, role := range []string{plan.RoleSourceRef, plan.RoleSourceCM, plan.RoleSourceDiff, plan.RoleSupplyPos, plan.RoleSupplyNeg} {
		if !r.unsure[role] {
			continue
		}
		var o voltReader
		if isSourceRole(role) {
			if src := r.source(role); src != nil {
				o = src
			}
		} else if sup := r.supply(role); sup != nil {
			o = sup
		}
		if o == nil {
			continue
		}
		programmed := roleVolts(r.state, role)
		if t, ok := r.tried[role]; ok && math.Abs(t) > math.Abs(programmed) {
			programmed = t
		}
		v, _, how := r.rampStart(ctx, role, o, programmed, true)
		r.note("safe state: %s ramps down %s", role, how)
		r.state = safety.ApplyAction(r.state, safety.PowerAction{Op: safety.PowerSetVolts, Role: role, Volts: v})
		delete(r.unsure, role)
		delete(r.tried, role)
	}
}
