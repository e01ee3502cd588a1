package procedure

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"nullbench/instrument"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// runTest runs every repeat of test i for one unit at temperature ti,
// skipping the points the journal already holds, and returns the bench to
// the nominal state. The meter is configured once, before the first point.
func (r *runner) runTest(ctx context.Context, ti int, unit string, i int) error {
	t := &r.p.Tests[i]
	r.at.test, r.at.kind, r.at.part, r.at.atStep = i, t.Kind, "", false
	if r.testFinished(ti, unit, i) {
		return nil
	}
	r.at.stage = stageConfigure
	if err := r.rig.Meter.ConfigureDCVolts(ctx, t.RangeVolts, t.NPLC); err != nil {
		return fmt.Errorf("meter: configure DC volts, range %g V, %g NPLC: %w", t.RangeVolts, t.NPLC, err)
	}
	r.note("unit %s: test[%d] %s (%s order, %d repeat(s))", unit, i+1, t.Kind, t.Order, t.Repeats)
	steps := plan.TestSteps(r.p, i)
	for rep := 0; rep < t.Repeats; rep++ {
		measured := false
		for _, st := range steps {
			key := st.Key(ti, unit, rep)
			if r.done.Has(key) {
				continue
			}
			measured = true
			r.at.part, r.at.repeat, r.at.step, r.at.level, r.at.atStep = st.Part, rep, st.Index, st.LevelVolts, true
			rd, err := r.point(ctx, t, st, key)
			if err != nil {
				return err
			}
			r.at.stage = stageJournal
			if r.jw != nil {
				if err := r.jw.Reading(rd); err != nil {
					return err
				}
			}
			r.record(rd, t, st, len(stepsOfPart(steps, st.Part)))
		}
		r.at.atStep = false
		if measured { // a pass the journal already held is not marked again
			r.mark(func() error { return r.jw.PassDone(plan.WorkKey{TempIndex: ti, Unit: unit, Test: t.Kind, Repeat: rep}) })
		}
	}
	r.mark(func() error { return r.jw.TestDone(plan.WorkKey{TempIndex: ti, Unit: unit, Test: t.Kind}) })
	r.at.stage = stageNominal
	r.at.atStep = false
	return r.moveTo(ctx, plan.NominalState(r.p))
}

// mark writes a pass-done or test-done marker when there is a journal. A
// failure here shows again, and stops the run, at the next reading.
func (r *runner) mark(write func() error) {
	if r.jw != nil {
		if err := write(); err != nil {
			r.logf("journal: %v", err)
		}
	}
}

func stepsOfPart(steps []plan.Step, part string) []plan.Step {
	var out []plan.Step
	for _, s := range steps {
		if s.Part == part {
			out = append(out, s)
		}
	}
	return out
}

// record adds a reading to the outcome and reports progress.
func (r *runner) record(rd journal.Reading, t *plan.Test, st plan.Step, sweepLen int) {
	r.out.Readings = append(r.out.Readings, rd)
	r.out.Measured++
	if len(rd.Flags) > 0 {
		r.out.Flagged++
	}
	r.finished++
	left := r.out.Total - r.finished
	eta := r.eta.Point(journal.KeyOf(rd), r.clk.Now(), left)
	info := PointInfo{Unit: rd.Unit, Test: t.Kind, TestIndex: st.Test, Part: st.Part, TemperatureC: rd.TemperatureC,
		Repeat: rd.Repeat, Step: rd.Step, Steps: sweepLen, LevelVolts: st.LevelVolts,
		Done: r.finished, Total: r.out.Total, Left: eta,
		LeftWall: time.Duration(float64(eta) / timeScale(r.p))}
	r.prog.Point(info)
	flags := ""
	if len(rd.Flags) > 0 {
		flags = fmt.Sprintf(" %v", rd.Flags)
	}
	r.logf("%s %s%s rep %d step %d/%d level %s (read %s): %.9e V sd %.3e V n=%d settle %.2f s, %.2f °C%s",
		rd.Unit, t.Kind, plan.PartSuffix(st.Part), rd.Repeat+1, rd.Step+1, sweepLen, plan.FormatVolts(rd.SetVolts), plan.FormatVolts(rd.ReadVolts),
		rd.MeterVolts, rd.MeterSDVolts, rd.N, rd.SettleSeconds, rd.TemperatureC, flags)
}

// point measures one point: ramp to the level's bench state, wait the
// dwell, wait for the output to settle, read back the stimulus, average
// the meter, read the temperature.
func (r *runner) point(ctx context.Context, t *plan.Test, st plan.Step, key plan.WorkKey) (journal.Reading, error) {
	r.eta.Begin(key, r.clk.Now())
	r.at.stage = stageLevel
	if err := r.moveTo(ctx, st.State); err != nil {
		return journal.Reading{}, err
	}
	stepAt := r.clk.Now()
	rd := journal.Reading{Unit: key.Unit, Test: key.Test, Part: key.Part, TempIndex: key.TempIndex,
		Repeat: key.Repeat, Step: key.Step, SetVolts: st.LevelVolts, ReadVolts: st.LevelVolts, Session: r.session}

	r.at.stage = stageSettle
	if err := r.clk.Sleep(ctx, seconds(t.DwellSeconds)); err != nil {
		return rd, err
	}
	settled, err := r.settle(ctx, t)
	if err != nil {
		return rd, err
	}
	rd.SettleSeconds = (r.clk.Now() - stepAt).Seconds()
	if !settled {
		rd.Flags = append(rd.Flags, journal.FlagSettleTimeout)
	}

	r.at.stage = stageReadBack
	rv, ok, rails, err := r.readBack(ctx, t, st)
	if err != nil {
		return rd, err
	}
	rd.ReadVolts, rd.ReadBack = rv, ok
	if rails != nil {
		rd.PosRailVolts, rd.NegRailVolts, rd.RailsReadBack = rails[0], rails[1], true
	}

	r.at.stage = stageMeasure
	t0 := r.clk.Now()
	vals, over, bad, err := r.readN(ctx, t.Readings)
	if err != nil {
		return rd, err
	}
	t1 := r.clk.Now()
	rd.Time = time.Now().UTC()
	rd.BenchSeconds = ((t0 + t1) / 2).Seconds() // the middle of the averaging window
	rd.MeterVolts, rd.MeterSDVolts = meanSD(vals)
	rd.N = len(vals)
	if over {
		rd.Flags = append(rd.Flags, journal.FlagOverload)
	}
	if bad != nil {
		if !over {
			rd.Flags = append(rd.Flags, journal.FlagImplausible)
		}
		rd.Problem = bad.Error()
		r.logf("%s %s step %d: %v; the point is journalled and left out of the fit", rd.Unit, t.Kind, rd.Step+1, bad)
	}

	r.at.stage = stageReadTemp
	rd.TemperatureC = r.tempC
	if m := r.p.Temperature.Mode; m == plan.TempChamber || m == plan.TempThermometer {
		c, err := r.rig.thermometer().ReadCelsius(ctx)
		if err != nil {
			return rd, fmt.Errorf("thermometer: read temperature: %w", err)
		}
		rd.TemperatureC = c
	}
	return rd, nil
}

// settle reads the meter until two successive readings, started
// SettleInterval apart, differ by less than settle_volts, or
// settle_timeout_s (counted after the dwell) has passed at a comparison
// that failed; it reports whether the output settled.
//
// Each settling reading is the mean of the test's `readings` values taken
// in one trigger, exactly like the measurement that follows: the check then
// compares values as quiet as the one recorded (√n less noise than single
// readings), and the meter's sample count never changes within a point, so
// no SAMPle:COUNt command and error-queue check are spent switching it back
// and forth. The time a reading takes counts towards the interval.
//
// What the check can and cannot see: for a tail decaying as e^(−t/τ), two
// readings Δ apart differ by (1 − e^(−Δ/τ)) times what is left, so a
// passed check leaves up to settle_volts/(1 − e^(−Δ/τ)) unsettled (2.5 ×
// settle_volts for Δ = 1 s, τ = 2 s), and nothing smaller than the
// readings' noise can be seen at all. A tail that matters below that level
// (the self-heating tail of a part after a supply step) needs a dwell_s of
// several of its time constants.
func (r *runner) settle(ctx context.Context, t *plan.Test) (bool, error) {
	deadline := r.clk.Now() + seconds(t.SettleTimeoutSeconds)
	started := r.clk.Now()
	prev, err := r.readMean(ctx, t.Readings)
	if err != nil {
		return false, err
	}
	for {
		if rest := r.timing.SettleInterval - (r.clk.Now() - started); rest > 0 {
			if err := r.clk.Sleep(ctx, rest); err != nil {
				return false, err
			}
		}
		started = r.clk.Now()
		v, err := r.readMean(ctx, t.Readings)
		if err != nil {
			return false, err
		}
		if math.Abs(v-prev) < t.SettleVolts { // false for overloads (Inf - Inf is NaN)
			return true, nil
		}
		// The time-out ends the wait only after a comparison failed: a
		// point is never flagged unsettled without one (a slow exchange
		// on a time-scaled bench can take the whole time-out).
		if r.clk.Now() >= deadline {
			return false, nil
		}
		prev = v
	}
}

// readMean takes n readings in one trigger (readN) and returns their mean;
// an overload or an implausible answer comes back as +Inf, not an error
// (the settling check then keeps waiting).
func (r *runner) readMean(ctx context.Context, n int) (float64, error) {
	vals, over, bad, err := r.readN(ctx, max(n, 1))
	if err != nil {
		return 0, err
	}
	if over || bad != nil {
		return math.Inf(1), nil
	}
	m, _ := meanSD(vals)
	return m, nil
}

// readN takes n readings (one trigger, or n of one reading each, as the
// meter's profile says). Overloaded readings (the driver wraps
// instrument.ErrOverload and returns ±Inf) are kept as ±9.9E37, the SCPI
// overload value, so the journal stays finite JSON, the point is flagged
// and bad carries the driver's message (the range too small). An implausible answer (the driver wraps instrument.ErrNotANumber
// for SCPI NaN, instrument.ErrImplausible for a finite value beyond
// 1.2 × range) is a problem of this point, not of the run: bad carries the
// driver's message (instrument and command named), the values are kept
// finite (NaN as 9.91E37) for the journal, and the point is never fitted.
func (r *runner) readN(ctx context.Context, n int) (vals []float64, overload bool, bad error, err error) {
	vals, err = r.rig.Meter.ReadN(ctx, n)
	if err != nil {
		switch {
		case errors.Is(err, instrument.ErrOverload):
			overload, bad = true, err // the driver's message: instrument, command, range too small
		case errors.Is(err, instrument.ErrNotANumber), errors.Is(err, instrument.ErrImplausible):
			bad = err
		default:
			return nil, false, nil, fmt.Errorf("meter: read %d values: %w", n, err)
		}
		if len(vals) == 0 {
			vals = []float64{math.Inf(1)}
		}
	}
	if len(vals) == 0 {
		return nil, false, nil, fmt.Errorf("meter: read %d values: no value returned", n)
	}
	out := make([]float64, len(vals))
	for i, v := range vals {
		switch {
		case math.IsNaN(v):
			out[i] = instrument.NotANumberValue
			if bad == nil {
				bad = fmt.Errorf("meter: read %d values: reading %d is not a number: %w", n, i+1, instrument.ErrNotANumber)
			}
		case math.IsInf(v, 1):
			out[i], overload = instrument.OverloadValue, true
		case math.IsInf(v, -1):
			out[i], overload = -instrument.OverloadValue, true
		default:
			out[i] = v
		}
	}
	return out, overload, bad, nil
}

// readBack reads the voltage of every role the level moves and turns it
// into the stimulus as applied: with slope s_i (volts of role i per volt of
// level, from StateAt) and read-back error e_i = read_i - set_i, the
// least-squares level is
//
//	L_read = L_set + Σ s_i·e_i / Σ s_i²
//
// which is the rail change itself for psrr_pos/psrr_neg, the span change
// for psrr_sym ((e+ - e-) for s = ±½), the mean shift of both rails for a
// supply-shift cmrr, and the source's own reading for the source-driven
// tests. A role whose driver cannot read back (errors.ErrUnsupported)
// leaves ok false and the level as set; any other error stops the run.
// When the level moves both rails, rails holds the two read-backs (V+, V−)
// so that the analysis can use what L_read drops (the span change of a
// supply shift, the mean shift of psrr_sym); it is nil otherwise.
func (r *runner) readBack(ctx context.Context, t *plan.Test, st plan.Step) (float64, bool, *[2]float64, error) {
	rs := stimulusRoles(r.p, t, st.Part)
	if len(rs) == 0 {
		return st.LevelVolts, false, nil, nil
	}
	var rails [2]float64
	var seen [2]bool
	var num, den float64
	for _, x := range rs {
		var v float64
		var err error
		if s := r.supply(x.role); s != nil {
			v, err = s.ReadVolts(ctx)
		} else if s := r.source(x.role); s != nil {
			v, err = s.ReadVolts(ctx)
		} else {
			return st.LevelVolts, false, nil, nil
		}
		if errors.Is(err, errors.ErrUnsupported) {
			return st.LevelVolts, false, nil, nil
		}
		if err != nil {
			return 0, false, nil, fmt.Errorf("%s: read back: %w", x.role, err)
		}
		if err := r.plausibleReadBack(x.role, v, roleVolts(st.State, x.role)); err != nil {
			return 0, false, nil, err
		}
		switch x.role {
		case plan.RoleSupplyPos:
			rails[0], seen[0] = v, true
		case plan.RoleSupplyNeg:
			rails[1], seen[1] = v, true
		}
		num += x.slope * (v - roleVolts(st.State, x.role))
		den += x.slope * x.slope
	}
	if seen[0] && seen[1] {
		return st.LevelVolts + num/den, true, &rails, nil
	}
	return st.LevelVolts + num/den, true, nil, nil
}

// meanSD returns the mean and the sample standard deviation (n - 1 in the
// denominator, GUM 4.2.2; 0 for a single value).
func meanSD(v []float64) (mean, sd float64) {
	for _, x := range v {
		mean += x
	}
	mean /= float64(len(v))
	if len(v) < 2 {
		return mean, 0
	}
	var ss float64
	for _, x := range v {
		ss += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(ss / float64(len(v)-1))
}
