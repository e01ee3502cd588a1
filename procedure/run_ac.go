package procedure

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sort"
	"time"

	"nullbench/fit"
	"nullbench/instrument"
	"nullbench/procedure/journal"
	"nullbench/procedure/operator"
	"nullbench/procedure/plan"
)

// This file runs the frequency-response tests ([[ac_test]]): for each unit,
// with the part powered at its nominal rails, each test's frequencies in
// turn, each frequency as three records (journal.ACRecords):
//
//  1. floor: the generator output off, a record at the frequency's
//     coherent plan; its sine fit at the frequency is the noise floor;
//  2. through: the through relay closed (or the channel-2 probe moved by
//     the operator), generator on: both channels see the stimulus, so
//     their ratio is the digitizer's own channel mismatch at f;
//  3. stimulus: relay open, generator on: channel 1 the stimulus at the
//     part, channel 2 the fixture output.
//
// Each record of a digitizer is reduced at once to the IEEE Std 1057-2017
// §4.1.3.1 three-parameter sine fit of each channel at the generator's
// frequency, which the journal keeps with its covariance (the samples are
// not journalled: 20 000 samples × 2 channels per record would make a
// campaign's journal tens of megabytes). An AC voltmeter's records are its
// two RMS readings.

// GeneratorLimiter is a Generator that can program its own output limits
// (an instrument-side amplitude/offset limit). The runner sets them from
// the plan's [generator] table before the generator's first output.
type GeneratorLimiter interface {
	SetLimits(ctx context.Context, maxPeakVolts, maxOffsetVolts float64) error
}

// Stages of an AC test, as fault.RunError.Stage names them.
const (
	stageACSetup   = "setting up the generator and digitizer"
	stageACCapture = "capturing a record"
	stageThrough   = "switching the through calibration"
	stageGenOff    = "switching the generator off"
)

// acCount adds the AC records of the plan to count.
func (r *runner) acPoints(ti int, unit string, i int) (total, done int) {
	t := &r.p.ACTests[i]
	for fi := range t.Frequencies() {
		for _, rec := range journal.ACRecords() {
			for rep := 0; rep < t.Records; rep++ {
				total++
				if r.done.Has(acKey(ti, unit, t.Kind, rec, fi, rep)) {
					done++
				}
			}
		}
	}
	return total, done
}

func acKey(ti int, unit, kind, rec string, fi, rep int) plan.WorkKey {
	return journal.ACKeyOf(journal.ACReading{TempIndex: ti, Unit: unit, Test: kind, Record: rec, FreqIndex: fi, Repeat: rep})
}

func (r *runner) acTestFinished(ti int, unit string, i int) bool {
	total, done := r.acPoints(ti, unit, i)
	return done == total
}

func (r *runner) acFreqFinished(ti int, unit string, t *plan.ACTest, fi int) bool {
	for _, rec := range journal.ACRecords() {
		for rep := 0; rep < t.Records; rep++ {
			if !r.done.Has(acKey(ti, unit, t.Kind, rec, fi, rep)) {
				return false
			}
		}
	}
	return true
}

// generatorFor returns the generator output a test drives and its channel
// name.
func (r *runner) generatorFor(t *plan.ACTest) (instrument.Generator, string, error) {
	ch := t.GeneratorChannel
	if ch == "" {
		ch = r.p.Bench.Roles.Generator.Channel
	}
	g := r.rig.Generators[ch]
	if g == nil {
		return nil, ch, fmt.Errorf("generator: output %q is not on the bench (bind it under [bench.roles] generator, or check generator_channel)", ch)
	}
	return g, ch, nil
}

// generatorsOff switches every generator output off, ignoring none: the
// first act of the safe state and of every change of the AC wiring. It
// returns every failure.
func (r *runner) generatorsOff(ctx context.Context, timeout time.Duration) []error {
	var errs []error
	for _, ch := range sortedKeys(r.rig.Generators) {
		g := r.rig.Generators[ch]
		cctx, cancel := ctx, context.CancelFunc(func() {})
		if timeout > 0 {
			cctx, cancel = context.WithTimeout(ctx, timeout)
		}
		err := g.SetOutput(cctx, false)
		cancel()
		if err != nil {
			errs = append(errs, fmt.Errorf("generator output %s: switch off: %w", ch, err))
			continue
		}
		delete(r.genOn, ch)
	}
	return errs
}

// setGenerator programs the sine, refusing anything beyond the plan's
// [generator] limits before it is sent (the plan checks the same, this
// guards the runner's own arithmetic).
func (r *runner) setGenerator(ctx context.Context, g instrument.Generator, ch string, f, peak, offset float64) error {
	lim := r.p.Generator
	if !(peak >= 0) || peak > lim.MaxPeakVolts*(1+1e-12) || math.Abs(offset) > lim.MaxOffsetVolts*(1+1e-12) {
		return fmt.Errorf("generator output %s: %g V peak about %g V is beyond the plan's [generator] max_peak_volts %g V / max_offset_volts %g V; nothing was sent",
			ch, peak, offset, lim.MaxPeakVolts, lim.MaxOffsetVolts)
	}
	if !r.genLimited[ch] {
		if gl, ok := g.(GeneratorLimiter); ok {
			if err := gl.SetLimits(ctx, lim.MaxPeakVolts, lim.MaxOffsetVolts); err != nil {
				return fmt.Errorf("generator output %s: set limits %g V peak, %g V offset: %w", ch, lim.MaxPeakVolts, lim.MaxOffsetVolts, err)
			}
		}
		if r.genLimited == nil {
			r.genLimited = map[string]bool{}
		}
		r.genLimited[ch] = true
	}
	if err := g.SetSine(ctx, f, peak, offset); err != nil {
		return fmt.Errorf("generator output %s: sine %g Hz, %g V peak, offset %g V: %w", ch, f, peak, offset, err)
	}
	return nil
}

func (r *runner) setGeneratorOutput(ctx context.Context, g instrument.Generator, ch string, on bool) error {
	if on {
		if r.genOn == nil {
			r.genOn = map[string]bool{}
		}
		r.genOn[ch] = true // possibly on from here, even if the command fails
	}
	if err := g.SetOutput(ctx, on); err != nil {
		return fmt.Errorf("generator output %s: output %v: %w", ch, onOff(on), err)
	}
	if !on {
		delete(r.genOn, ch)
	}
	return nil
}

func onOff(on bool) string {
	if on {
		return "ON"
	}
	return "OFF"
}

// acRecordPlan is one frequency's record: the coherent plan, or for an AC
// voltmeter only the frequency.
func acRecordPlan(t *plan.ACTest, f float64) (fit.CoherentPlan, error) {
	// At least MinCycles in MinSamples: the rate may not exceed
	// f·MinSamples/MinCycles (IEEE Std 1241-2010 §4.1.4.5: whole cycles).
	rate := math.Min(t.MaxRateHz, f*float64(t.MinSamples)/float64(t.MinCycles))
	return fit.CoherentSampling(f, rate, t.MinSamples, t.MaxSamples)
}

// runACTests runs every [[ac_test]] for one unit (powered, nominal rails).
func (r *runner) runACTests(ctx context.Context, ti int, unit string) error {
	for i := range r.p.ACTests {
		if err := r.runACTest(ctx, ti, unit, i); err != nil {
			return err
		}
	}
	return nil
}

func (r *runner) runACTest(ctx context.Context, ti int, unit string, i int) error {
	t := &r.p.ACTests[i]
	r.at.test, r.at.kind, r.at.part, r.at.atStep, r.at.acTest, r.at.acHz = -1, t.Kind, "", false, i, 0
	if r.acTestFinished(ti, unit, i) {
		return nil
	}
	gen, ch, err := r.generatorFor(t)
	if err != nil {
		return err
	}
	freqs := t.Frequencies()
	r.note("unit %s: ac_test[%d] %s at %d frequencies, %g V peak (generator output %s)", unit, i+1, t.Kind, len(freqs), t.PeakVolts, ch)
	for fi, f := range freqs {
		if r.acFreqFinished(ti, unit, t, fi) {
			continue
		}
		r.at.acHz = f
		if err := r.acFrequency(ctx, ti, unit, t, gen, ch, fi, f); err != nil {
			return err
		}
	}
	r.at.stage = stageGenOff
	if err := r.setGeneratorOutput(ctx, gen, ch, false); err != nil {
		return err
	}
	r.mark(func() error { return r.jw.TestDone(plan.WorkKey{TempIndex: ti, Unit: unit, Test: "ac:" + t.Kind}) })
	return nil
}

// acFrequency takes the floor, through and stimulus records of one
// frequency.
func (r *runner) acFrequency(ctx context.Context, ti int, unit string, t *plan.ACTest, gen instrument.Generator, ch string, fi int, f float64) error {
	r.at.stage = stageACSetup
	var cp fit.CoherentPlan
	if r.rig.Digitizer != nil {
		var err error
		if cp, err = acRecordPlan(t, f); err != nil {
			return fmt.Errorf("ac_test %s at %g Hz: %w", t.Kind, f, err)
		}
		if err := r.rig.Digitizer.Configure(ctx, cp.RateHz, cp.Samples, []float64{t.StimulusRangeVolts, t.ResponseRangeVolts}); err != nil {
			return fmt.Errorf("digitizer: configure %g Sa/s, %d samples: %w", cp.RateHz, cp.Samples, err)
		}
	} else {
		for k, m := range r.rig.ACMeters {
			rng := t.StimulusRangeVolts
			if k == 1 {
				rng = t.ResponseRangeVolts
			}
			if err := m.ConfigureACVolts(ctx, rng/math.Sqrt2, f); err != nil {
				return fmt.Errorf("ac_meter input %d: configure %g V rms at %g Hz: %w", k+1, rng/math.Sqrt2, f, err)
			}
		}
	}
	peak, offset := t.GeneratorPeakVolts(), 0.0
	if t.Kind == plan.TestCMRR || t.Kind == plan.TestBoardCMRR {
		offset = t.OffsetVolts
	}
	if err := r.setGenerator(ctx, gen, ch, f, peak, offset); err != nil {
		return err
	}
	settle := seconds(math.Max(float64(t.SettleCycles)/f, t.DwellSeconds))
	through := false
	defer func() {
		if through && t.Through == plan.ThroughSwitch {
			// Best effort on the way out of a failure; the safe state opens
			// every channel too.
			_ = r.rig.Switch.Open(context.WithoutCancel(ctx), t.ThroughChannel)
		}
	}()
	nf := len(t.Frequencies())
	for ri, rec := range journal.ACRecords() {
		r.at.stage = stageACSetup
		switch rec {
		case journal.ACFloor:
			if err := r.setGeneratorOutput(ctx, gen, ch, false); err != nil {
				return err
			}
		case journal.ACThrough:
			r.at.stage = stageThrough
			if err := r.throughOn(ctx, t, unit); err != nil {
				return err
			}
			through = true
			if err := r.setGeneratorOutput(ctx, gen, ch, true); err != nil {
				return err
			}
		case journal.ACStimulus:
			r.at.stage = stageThrough
			if err := r.throughOff(ctx, t, unit); err != nil {
				return err
			}
			through = false
			if err := r.setGeneratorOutput(ctx, gen, ch, true); err != nil {
				return err
			}
		}
		if err := r.clk.Sleep(ctx, settle); err != nil {
			return err
		}
		for rep := 0; rep < t.Records; rep++ {
			key := acKey(ti, unit, t.Kind, rec, fi, rep)
			if r.done.Has(key) {
				continue
			}
			r.at.stage = stageACCapture
			rd := journal.ACReading{Unit: unit, Test: t.Kind, TempIndex: ti, TemperatureC: r.tempC, Session: r.session,
				FreqIndex: fi, FrequencyHz: f, Record: rec, Repeat: rep, GeneratorChannel: ch,
				GeneratorPeakVolts: peak, GeneratorOffsetVolts: offset, GeneratorOn: rec != journal.ACFloor}
			if err := r.acCapture(ctx, t, f, cp, &rd); err != nil {
				return err
			}
			rd.BenchSeconds = r.clk.Now().Seconds()
			r.at.stage = stageJournal
			if r.jw != nil {
				if err := r.jw.ACReading(rd); err != nil {
					return err
				}
			}
			// The test's records in order, for the progress display.
			r.recordAC(rd, (fi*3+ri)*t.Records+rep, nf*3*t.Records)
		}
	}
	if through {
		if err := r.throughOff(ctx, t, unit); err != nil {
			return err
		}
		through = false
	}
	return nil
}

// throughOn connects channel 2 to the stimulus: the through relay, or the
// operator moving the probe.
func (r *runner) throughOn(ctx context.Context, t *plan.ACTest, unit string) error {
	if t.Through == plan.ThroughManual {
		op, _ := r.opt.Operator.(operator.ThroughOperator)
		if op == nil {
			return fmt.Errorf("through = \"manual\" needs an operator to move the probe, and there is none")
		}
		return op.MoveProbe(ctx, fmt.Sprintf("unit %s, %s: move the channel-2 probe to the stimulus-sense point (beside the channel-1 probe) for the through calibration", unit, t.Kind))
	}
	if r.rig.Switch == nil {
		return fmt.Errorf("through = \"switch\" needs the switch role for relay %s", t.ThroughChannel)
	}
	if err := r.rig.Switch.Close(ctx, t.ThroughChannel); err != nil {
		return fmt.Errorf("switch: close through relay %s: %w", t.ThroughChannel, err)
	}
	return r.clk.Sleep(ctx, r.timing.RelaySettle)
}

func (r *runner) throughOff(ctx context.Context, t *plan.ACTest, unit string) error {
	if t.Through == plan.ThroughManual {
		op, _ := r.opt.Operator.(operator.ThroughOperator)
		if op == nil {
			return fmt.Errorf("through = \"manual\" needs an operator to move the probe, and there is none")
		}
		return op.MoveProbe(ctx, fmt.Sprintf("unit %s, %s: move the channel-2 probe back to the fixture output", unit, t.Kind))
	}
	if r.rig.Switch == nil {
		return fmt.Errorf("through = \"switch\" needs the switch role for relay %s", t.ThroughChannel)
	}
	if err := r.rig.Switch.Open(ctx, t.ThroughChannel); err != nil {
		return fmt.Errorf("switch: open through relay %s: %w", t.ThroughChannel, err)
	}
	return r.clk.Sleep(ctx, r.timing.RelaySettle)
}

// acCapture takes one record and reduces it: a digitizer record to one
// sine fit per channel, an AC voltmeter to its two readings.
func (r *runner) acCapture(ctx context.Context, t *plan.ACTest, f float64, cp fit.CoherentPlan, rd *journal.ACReading) error {
	ranges := []float64{t.StimulusRangeVolts, t.ResponseRangeVolts}
	if r.rig.Digitizer == nil {
		for k, m := range r.rig.ACMeters {
			v, err := m.ReadRMS(ctx)
			if err != nil {
				return fmt.Errorf("ac_meter input %d: read at %g Hz: %w", k+1, f, err)
			}
			rd.RMSVolts = append(rd.RMSVolts, v)
			if v*math.Sqrt2 > ranges[k]*instrument.MeterOverRangeFactor {
				rd.Flags = appendFlag(rd.Flags, journal.FlagOverload)
			}
		}
		return nil
	}
	wf, err := r.rig.Digitizer.Capture(ctx)
	switch {
	case err != nil && errors.Is(err, instrument.ErrClipped) && len(wf) >= 2:
		// A clipped record is journalled, flagged and left out of the
		// analysis; the run goes on (the plan's range is too small for
		// this frequency, which the report says).
		rd.Flags = appendFlag(rd.Flags, journal.FlagOverload)
		rd.Problem = err.Error()
	case err != nil:
		return fmt.Errorf("digitizer: capture %d samples at %g Sa/s: %w", cp.Samples, cp.RateHz, err)
	}
	if len(wf) < 2 {
		return fmt.Errorf("digitizer: capture returned %d channel(s), the frequency response needs 2 (stimulus, response)", len(wf))
	}
	rd.Samples, rd.Cycles = cp.Samples, cp.Cycles
	rd.RateHz = wf[0].RateHz
	for k := 0; k < 2; k++ {
		w := wf[k]
		if !(w.RateHz > 0) || len(w.Volts) < 4 {
			return fmt.Errorf("digitizer: channel %d record of %d samples at %g Sa/s is not usable", k+1, len(w.Volts), w.RateHz)
		}
		times := make([]float64, len(w.Volts))
		peakAbs := 0.0
		for n := range times {
			times[n] = float64(n) / w.RateHz
			peakAbs = math.Max(peakAbs, math.Abs(w.Volts[n]))
		}
		sf, err := fit.Sine3Param(times, w.Volts, f)
		if err != nil {
			// A record that cannot be fitted is journalled, flagged, and
			// left out of the analysis (like an implausible DC reading).
			rd.Flags = appendFlag(rd.Flags, journal.FlagImplausible)
			rd.Problem = fmt.Sprintf("digitizer channel %d: sine fit at %g Hz: %v", k+1, f, err)
			rd.Channels = append(rd.Channels, journal.ACChannelFit{FrequencyHz: f, N: len(w.Volts), RangeVolts: ranges[k], PeakAbsVolts: peakAbs})
			continue
		}
		if peakAbs > ranges[k] {
			rd.Flags = appendFlag(rd.Flags, journal.FlagOverload)
		}
		rd.Channels = append(rd.Channels, journal.ACChannelFit{FrequencyHz: f, A: sf.A, B: sf.B, C: sf.C, Cov: sf.Cov,
			N: sf.N, DOF: sf.DOF, ResidualSDV: sf.ResidualSDV, RangeVolts: ranges[k], PeakAbsVolts: peakAbs})
	}
	return nil
}

func appendFlag(flags []string, f string) []string {
	for _, x := range flags {
		if x == f {
			return flags
		}
	}
	return append(flags, f)
}

// recordAC counts an AC record in the outcome and the progress.
func (r *runner) recordAC(rd journal.ACReading, step, steps int) {
	r.out.ACReadings = append(r.out.ACReadings, rd)
	r.out.Measured++
	if len(rd.Flags) > 0 {
		r.out.Flagged++
	}
	r.finished++
	r.prog.Point(PointInfo{Unit: rd.Unit, Test: "ac " + rd.Test, TestIndex: -1, TemperatureC: rd.TemperatureC,
		Repeat: rd.Repeat, Step: step, Steps: steps, Done: r.finished, Total: r.out.Total})
	amp := func(k int) float64 {
		if k < len(rd.Channels) {
			return math.Hypot(rd.Channels[k].A, rd.Channels[k].B)
		}
		if k < len(rd.RMSVolts) {
			return rd.RMSVolts[k] * math.Sqrt2
		}
		return math.NaN()
	}
	flags := ""
	if len(rd.Flags) > 0 {
		flags = fmt.Sprintf(" %v", rd.Flags)
	}
	r.logf("%s ac %s %g Hz %s rec %d: ch1 %.6e V pk, ch2 %.6e V pk%s", rd.Unit, rd.Test, rd.FrequencyHz, rd.Record, rd.Repeat+1, amp(0), amp(1), flags)
}

// sortedKeys returns m's keys in order (the generator outputs are switched
// in a fixed order, so logs and tests repeat).
func sortedKeys[V any](m map[string]V) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}
