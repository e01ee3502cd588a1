package sim

import (
	"context"
	"sync"
	"time"
)

// Clock is the bench's time base. Every dynamic of the simulated bench
// (meter integration, supply settling, relay tails, thermal lags, drift,
// 1/f noise) follows Now, never the wall clock directly, so the same physics
// runs at any time scale.
//
// Now returns bench time; Sleep waits d of bench time (or until ctx ends).
// The shape matches the Clock the procedure takes, so an in-process run may
// share one clock between the tool and the bench.
type Clock interface {
	Now() time.Time
	Sleep(ctx context.Context, d time.Duration) error
}

// benchEpoch is the bench time at which every clock of this package starts.
// Only differences of bench time matter to the physics; a fixed epoch keeps
// runs repeatable.
var benchEpoch = time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)

// ScaledClock runs bench time N times faster than the wall clock:
//
//	bench time = epoch + N × (wall time − wall time at start)
//
// and Sleep(d) waits d/N of wall time (common practice for simulated clocks).
type ScaledClock struct {
	scale     float64
	wallStart time.Time
	wallNow   func() time.Time
	wallSleep func(ctx context.Context, d time.Duration) error
}

// NewScaledClock returns a clock whose bench time runs scale times faster
// than the wall clock. A scale <= 0 is taken as 1.
func NewScaledClock(scale float64) *ScaledClock {
	return newScaledClockWith(scale, time.Now, sleepWall)
}

// newScaledClockWith lets tests drive the wall clock by hand.
func newScaledClockWith(scale float64, now func() time.Time, sleep func(context.Context, time.Duration) error) *ScaledClock {
	if !(scale > 0) {
		scale = 1
	}
	return &ScaledClock{scale: scale, wallStart: now(), wallNow: now, wallSleep: sleep}
}

// Scale returns N.
func (c *ScaledClock) Scale() float64 { return c.scale }

// Now returns the bench time.
func (c *ScaledClock) Now() time.Time {
	wall := c.wallNow().Sub(c.wallStart)
	return benchEpoch.Add(time.Duration(float64(wall) * c.scale))
}

// Sleep waits d of bench time, that is d/N of wall time.
func (c *ScaledClock) Sleep(ctx context.Context, d time.Duration) error {
	if d <= 0 {
		return ctx.Err()
	}
	return c.wallSleep(ctx, time.Duration(float64(d)/c.scale))
}

func sleepWall(ctx context.Context, d time.Duration) error {
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-ctx.Done():
		return ctx.Err()
	case <-t.C:
		return nil
	}
}

// ManualClock is a virtual bench clock: time stands still until Advance or
// Sleep moves it, and Sleep returns at once after moving it. Tests use it to
// run hours of bench time in milliseconds, repeatably; an in-process demo may
// share it with the procedure to run a plan as fast as the CPU allows.
//
// Sleep(d) moves the clock to max(now, now_at_call + d), so concurrent
// sleepers do not add their waits together more than a single caller would.
type ManualClock struct {
	mu  sync.Mutex
	now time.Time
}

// NewManualClock returns a virtual clock at the bench epoch.
func NewManualClock() *ManualClock { return &ManualClock{now: benchEpoch} }

// Now returns the virtual bench time.
func (c *ManualClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.now
}

// Advance moves the virtual time forward by d (d <= 0 does nothing).
func (c *ManualClock) Advance(d time.Duration) {
	if d <= 0 {
		return
	}
	c.mu.Lock()
	c.now = c.now.Add(d)
	c.mu.Unlock()
}

// Sleep advances the virtual time by d and returns at once.
func (c *ManualClock) Sleep(ctx context.Context, d time.Duration) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	c.Advance(d)
	return nil
}

// sleepUntil waits until the clock reads at least t.
func sleepUntil(ctx context.Context, c Clock, t time.Time) error {
	for {
		d := t.Sub(c.Now())
		if d <= 0 {
			return ctx.Err()
		}
		if err := c.Sleep(ctx, d); err != nil {
			return err
		}
	}
}
