package procedure

import (
	"context"
	"fmt"
	"math"
	"time"

	"nullbench/procedure/journal"
	"nullbench/procedure/operator"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// enterTemperature brings the campaign to temperature pass ti (point °C):
//
//   - none: nothing; readings carry ambient_c.
//   - chamber: the set point ramps there no faster than
//     ramp_max_c_per_min, then the chamber soaks until its reading has
//     stayed within ±soak_tolerance_c for soak_s (error after
//     soak_timeout_s); readings carry the thermometer's value.
//   - thermometer: with several points the operator brings the bench to
//     each; readings carry the thermometer's value.
//   - manual: the operator brings the bench there and types the
//     temperature, which every reading of the pass carries.
//
// The part is unpowered meanwhile.
func (r *runner) enterTemperature(ctx context.Context, ti int, point float64) error {
	tp := &r.p.Temperature
	r.tempC = point
	switch tp.Mode {
	case plan.TempChamber:
		r.at.stage = stageTemperature
		r.note("temperature %d of %d: chamber to %g °C (at most %g °C/min)", ti+1, len(r.temps), point, tp.RampMaxCPerMinute)
		if err := r.rampChamber(ctx, point); err != nil {
			return err
		}
		r.event(journal.Event{Type: journal.EventTemperatureSet, TempIndex: ti, TemperatureC: point, Detail: "set point reached; soaking"})
		r.at.stage = stageSoak
		return r.soak(ctx, ti, point)
	case plan.TempThermometer:
		if len(tp.PointsCelsius) > 1 {
			r.at.stage = stageTemperature
			if _, err := r.opt.Operator.Temperature(ctx, operator.TemperatureRequest{PointCelsius: point, Index: ti + 1, Of: len(r.temps)}); err != nil {
				return fmt.Errorf("operator: temperature %g °C: %w", point, err)
			}
		}
	case plan.TempManual:
		r.at.stage = stageTemperature
		c, err := r.opt.Operator.Temperature(ctx, operator.TemperatureRequest{PointCelsius: point, Index: ti + 1, Of: len(r.temps), Typed: true})
		if err != nil {
			return fmt.Errorf("operator: temperature %g °C: %w", point, err)
		}
		if math.IsNaN(c) || math.IsInf(c, 0) || c < -273.15 {
			return fmt.Errorf("operator: temperature %v °C is not a temperature", c)
		}
		r.tempC = c
		r.event(journal.Event{Type: journal.EventTemperatureSet, TempIndex: ti, TemperatureC: c, Detail: fmt.Sprintf("typed by the operator (planned %g °C)", point)})
	}
	return nil
}

// rampChamber steps the chamber's set point from the chamber's present
// reading to target, by ramp_max_c_per_min × ChamberTick every ChamberTick,
// waiting before each step, so that over any interval the set point moves
// no faster than the plan allows. A rate of 0 sets the target at once.
func (r *runner) rampChamber(ctx context.Context, target float64) error {
	ch := r.rig.Chamber
	rate := r.p.Temperature.RampMaxCPerMinute
	r.chamber = true
	if !(rate > 0) {
		if err := ch.SetPointCelsius(ctx, target); err != nil {
			return fmt.Errorf("chamber: set point %g °C: %w", target, err)
		}
		return nil
	}
	from, err := ch.ReadCelsius(ctx)
	if err != nil {
		return fmt.Errorf("chamber: read temperature: %w", err)
	}
	tick := r.timing.ChamberTick
	step := rate * tick.Minutes()
	sp := from
	for sp != target {
		if err := r.clk.Sleep(ctx, tick); err != nil {
			return err
		}
		sp = safety.StepToward(sp, target, step)
		if err := ch.SetPointCelsius(ctx, sp); err != nil {
			return fmt.Errorf("chamber: set point %g °C: %w", sp, err)
		}
	}
	// Also when already there: the set point must be the target.
	if sp == from {
		if err := ch.SetPointCelsius(ctx, target); err != nil {
			return fmt.Errorf("chamber: set point %g °C: %w", target, err)
		}
	}
	return nil
}

// soak waits until the temperature has stayed within ±soak_tolerance_c of
// point for soak_s, reading every SoakInterval; after soak_timeout_s it
// gives up with an error (journalled as a soak time-out).
func (r *runner) soak(ctx context.Context, ti int, point float64) error {
	tp := &r.p.Temperature
	th := r.rig.thermometer()
	soak := seconds(tp.SoakSeconds)
	timeout := seconds(tp.SoakTimeoutSeconds)
	poll := r.timing.SoakInterval
	if soak > 0 && poll > soak/5 {
		poll = max(soak/5, time.Second)
	}
	start := r.clk.Now()
	inSince := time.Duration(-1)
	last := math.NaN()
	for {
		c, err := th.ReadCelsius(ctx)
		if err != nil {
			return fmt.Errorf("thermometer: read temperature: %w", err)
		}
		last = c
		now := r.clk.Now()
		if math.Abs(c-point) <= tp.SoakToleranceC {
			if inSince < 0 {
				inSince = now
			}
			if now-inSince >= soak {
				r.tempC = c
				r.event(journal.Event{Type: journal.EventSoakDone, TempIndex: ti, TemperatureC: c,
					Detail: fmt.Sprintf("within ±%g °C of %g °C for %g s (soak took %.0f s)", tp.SoakToleranceC, point, soak.Seconds(), (now - start).Seconds())})
				r.note("soaked at %g °C (reading %.2f °C)", point, c)
				return nil
			}
		} else {
			inSince = -1
		}
		if now-start >= timeout {
			r.event(journal.Event{Type: journal.EventSoakTimeout, TempIndex: ti, TemperatureC: c,
				Detail: fmt.Sprintf("not within ±%g °C of %g °C for %g s after %g s", tp.SoakToleranceC, point, soak.Seconds(), timeout.Seconds())})
			return fmt.Errorf("the chamber did not settle at %g °C: its reading did not stay within ±%g °C for %g s within soak_timeout_s = %g s (last reading %.2f °C); check the chamber, or widen temperature.soak_tolerance_c or raise temperature.soak_timeout_s",
				point, tp.SoakToleranceC, soak.Seconds(), timeout.Seconds(), last)
		}
		if err := r.clk.Sleep(ctx, poll); err != nil {
			return err
		}
	}
}

// connectUnit puts unit u in the fixture, with the bench unpowered: on a
// switch matrix every channel is opened and the unit's closed, then the
// relay settles; otherwise the operator swaps it in by hand.
func (r *runner) connectUnit(ctx context.Context, ti int, u plan.Unit) error {
	if u.Channel != "" {
		r.at.stage = stageSelect
		sw := r.rig.Switch
		if err := sw.OpenAll(ctx); err != nil {
			return fmt.Errorf("switch: open all: %w", err)
		}
		if err := sw.Close(ctx, u.Channel); err != nil {
			return fmt.Errorf("switch: close channel %s: %w", u.Channel, err)
		}
		if err := r.clk.Sleep(ctx, r.timing.RelaySettle); err != nil {
			return err
		}
		r.event(journal.Event{Type: journal.EventUnitSwap, Unit: u.ID, TempIndex: ti, TemperatureC: r.tempC, Detail: "switch channel " + u.Channel + " closed"})
		r.note("unit %s on switch channel %s", u.ID, u.Channel)
		return nil
	}
	r.at.stage = stageSwap
	r.note("bench powered down: insert unit %s", u.ID)
	id, err := r.opt.Operator.SwapUnit(ctx, u)
	if err != nil {
		return fmt.Errorf("operator: swap in unit %s: %w", u.ID, err)
	}
	if id != "" && id != u.ID {
		return fmt.Errorf("the operator reports unit %q in the socket but the plan expects %q next; insert %q (the journal and resume use the plan's unit ids)", id, u.ID, u.ID)
	}
	r.event(journal.Event{Type: journal.EventUnitSwap, Unit: u.ID, TempIndex: ti, TemperatureC: r.tempC, Detail: "swapped in by hand"})
	return nil
}

// seconds converts plan seconds to a duration without overflow: a value
// beyond what a Duration holds (about 292 years; Validate refuses more than
// a week) saturates instead of wrapping to a negative time, and a negative
// or NaN value is 0.
func seconds(s float64) time.Duration {
	const maxSeconds = float64(math.MaxInt64 / int64(time.Second))
	switch {
	case !(s > 0):
		return 0
	case s >= maxSeconds:
		return time.Duration(math.MaxInt64)
	}
	return time.Duration(s * float64(time.Second))
}
