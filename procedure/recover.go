package procedure

import (
	"context"
	"errors"
	"fmt"
	"runtime/debug"
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
