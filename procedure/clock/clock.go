// Package clock is the runner's time base: bench time, which on a real
// bench is wall time and against a simulated bench started with
// --time-scale N runs N times faster (NewScaled); Manual only moves when
// told, for tests and dry runs; Offset continues a resumed run's
// bench-time axis. It imports nothing of ours.
package clock

import (
	"context"
	"sync"
	"time"
)

// Clock is the sequencer's sense of bench time. Every wait of a plan
// (dwell, settling, soak, chamber ramp) and every Reading.BenchSeconds is
// bench time. On a real bench it is wall time; against a simulated bench
// started with --time-scale N the bench runs N times faster, so a Clock
// whose Now advances N times faster and whose Sleep(d) lasts d/N keeps the
// tool and the simulation on the same time base (package instrument/sim,
// "Time").
type Clock interface {
	// Now is the bench time elapsed since the clock started.
	Now() time.Duration
	// Sleep waits d of bench time, or until ctx is done (then it returns
	// ctx's error).
	Sleep(ctx context.Context, d time.Duration) error
}

// NewScaled returns a Clock on wall time multiplied by scale: Now
// advances scale times faster than the wall clock and Sleep(d) sleeps d/scale
// of wall time. A scale ≤ 0 (or NaN) means 1, a real bench.
func NewScaled(scale float64) Clock {
	if !(scale > 0) {
		scale = 1
	}
	return &scaledClock{start: time.Now(), scale: scale}
}

type scaledClock struct {
	start time.Time
	scale float64
}

func (c *scaledClock) Now() time.Duration {
	return time.Duration(float64(time.Since(c.start)) * c.scale)
}

func (c *scaledClock) Sleep(ctx context.Context, d time.Duration) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	if d <= 0 {
		return nil
	}
	t := time.NewTimer(time.Duration(float64(d) / c.scale))
	defer t.Stop()
	select {
	case <-t.C:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

// offsetClock shifts another clock by a fixed bench time, so that a resumed
// run continues the bench-time axis of the run it resumes (the drift term
// of the fit needs one time axis per test).
type offsetClock struct {
	Clock
	offset time.Duration
}

// Offset returns c shifted by offset of bench time.
func Offset(c Clock, offset time.Duration) Clock { return offsetClock{Clock: c, offset: offset} }

func (c offsetClock) Now() time.Duration { return c.Clock.Now() + c.offset }

// Manual is a Clock that only moves when told: Sleep advances it
// instantly by d. It serves tests and dry runs (an estimate of the
// duration of a plan against fake instruments). It is safe for concurrent
// use.
type Manual struct {
	mu  sync.Mutex
	now time.Duration
}

// Now returns the bench time reached so far.
func (c *Manual) Now() time.Duration {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.now
}

// Sleep advances the clock by d at once (negative d does nothing); it
// returns ctx's error, without advancing, when ctx is already done.
func (c *Manual) Sleep(ctx context.Context, d time.Duration) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	c.Advance(d)
	return nil
}

// Advance moves the clock forward by d (negative d does nothing), as an
// instrument exchange that takes time would.
func (c *Manual) Advance(d time.Duration) {
	if d <= 0 {
		return
	}
	c.mu.Lock()
	c.now += d
	c.mu.Unlock()
}
