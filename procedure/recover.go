package procedure

import (
	"context"
	"errors"
	"fmt"
	"runtime/debug"

	"nullbench/instrument"
)

// ErrPanic is wrapped by the error of a run step that panicked: the panic
// is recovered, the bench still goes to its safe state and the journal
// still gets its end record.
var ErrPanic = errors.New("internal error (recovered panic)")

// guarded runs f and turns a panic inside it into an error wrapping
// ErrPanic, with the panic value and the stack for a bug report.
func guarded(ctx context.Context, f func(context.Context) error) (err error) {
	defer func() {
		if v := recover(); v != nil {
			err = fmt.Errorf("%w: %v\n%s", ErrPanic, v, debug.Stack())
		}
	}()
	return f(ctx)
}

// safeStateGuarded is safeState with a panic inside it recovered: whatever
// happens, the caller gets an error naming what is still on (or the panic)
// and goes on to write the journal's end record.
func (r *runner) safeStateGuarded(ctx context.Context) error {
	err := guarded(ctx, r.safeState)
	if errors.Is(err, ErrPanic) {
		return fmt.Errorf("the safe state stopped on an internal error; the bench may still be powered (V+ last set to %g V, V- %g V): switch it off by hand or with nullbench off: %w",
			r.state.PosVolts, r.state.NegVolts, err)
	}
	return err
}

// redialOnce dials the instrument behind role again after err, a lost
// connection (instrument.ErrClosed, or a session that could not re-sync
// over it: instrument.ErrOutOfSync), at most once per instrument and run,
// and reports whether the call should be tried again. The safe state uses
// it so that a dropped socket does not leave the supplies on.
func (r *runner) redialOnce(ctx context.Context, role string, err error) bool {
	if !errors.Is(err, instrument.ErrClosed) && !errors.Is(err, instrument.ErrOutOfSync) {
		return false
	}
	var o any
	if isSourceRole(role) {
		o = r.source(role)
	} else {
		o = r.supply(role)
	}
	d, ok := o.(interface{ Session() *instrument.Session })
	if !ok || d.Session() == nil {
		return false
	}
	s := d.Session()
	if r.redialed == nil {
		r.redialed = map[string]bool{}
	}
	if r.redialed[s.Name()] {
		return false
	}
	r.redialed[s.Name()] = true
	cctx, cancel := context.WithTimeout(ctx, r.timing.SafeCallTimeout)
	defer cancel()
	if rerr := s.Redial(cctx); rerr != nil {
		r.note("safe state: %s: connection lost, dialing again failed: %v", role, rerr)
		return false
	}
	r.note("safe state: %s: connection lost, dialed %s again", role, s.Name())
	return true
}
