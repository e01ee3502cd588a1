package procedure

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"strings"
	"time"

	"nullbench/procedure/clock"
	"nullbench/procedure/estimate"
	"nullbench/procedure/fault"
	"nullbench/procedure/journal"
	"nullbench/procedure/operator"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// RunOptions configure Run. Every field may be left zero.
type RunOptions struct {
	// Journal receives the identities, every reading (flushed before the
	// next step), the events and the end record. cmd opens it with
	// journal.Open, or journal.Resume, and closes it after Run. Nil runs
	// without a journal (dry runs, tests).
	Journal *journal.Writer
	// Resume is the contents of the journal being continued (from
	// journal.Resume); nil starts fresh. Points it holds are skipped
	// exactly and their readings are returned in Outcome.Readings.
	Resume *journal.Contents
	// Clock is the bench time base; nil means clock.NewScaled with the
	// plan's bench.time_scale.
	Clock clock.Clock
	// Operator swaps units by hand and types temperatures. A plan that
	// needs one (operator.NeedsOperator) is refused when it is nil.
	Operator operator.Operator
	// Progress receives progress; nil discards it.
	Progress Progress
	// Log receives one line per event and point, in words; nil discards.
	Log io.Writer
	// Consent is the operator's consent to a hazardous plan
	// (safety.CheckSafetyWith).
	Consent safety.HazardConsent
	// Timing sets the sequencer's own waits; zero fields take defaults.
	Timing Timing
	// Skip leaves units out (unit id → reason: socket empty, part
	// cracked). Each is journalled as a unit-skipped event when the run
	// reaches it, and stays skipped on resume (see skip.go).
	Skip map[string]string
	// Figures are the instruments' timing figures for the remaining-time
	// estimate (cmd fills them from the profiles); nil takes
	// estimate.DefaultFigures.
	Figures *estimate.Figures
}

// Timing holds the waits that are the sequencer's, not the plan's. The
// bench-time ones run on the Clock; the safe-state ones are wall time,
// because the safe state must finish even on a stalled clock.
type Timing struct {
	// RampDwell is the least bench time from sending each ramp step of a
	// supply or source to the next action (steps ≤ 1 V with settling:
	// common practice, no published source); the time the driver spends
	// on the step (its profile's settle wait, the exchange) counts towards
	// it. Default 50 ms.
	RampDwell time.Duration
	// RelaySettle is waited after closing a unit's switch channel: relay
	// operate and bounce time, typically under 10 ms for reed and signal
	// relays (common practice, no published source). Default 50 ms.
	RelaySettle time.Duration
	// SettleInterval separates the starts of the successive readings of
	// the settling check. Default 1 s.
	SettleInterval time.Duration
	// SoakInterval separates the temperature readings while soaking.
	// Default 10 s, at most a fifth of soak_s (but not under 1 s).
	SoakInterval time.Duration
	// ChamberTick is the period of the set-point steps of a chamber ramp:
	// each step is ramp_max_c_per_min × ChamberTick. Default 30 s.
	ChamberTick time.Duration
	// SafeStateTimeout bounds, in wall time, the whole return to the safe
	// state after a fault; SafeCallTimeout bounds each instrument call in
	// it. Defaults 2 min and 10 s.
	SafeStateTimeout, SafeCallTimeout time.Duration
}

func (t Timing) withDefaults() Timing {
	def := func(v *time.Duration, d time.Duration) {
		if *v <= 0 {
			*v = d
		}
	}
	// The defaults are the duration model's (estimate.DefaultSequencerWaits),
	// so that check predicts the waits the runner makes.
	w := estimate.DefaultSequencerWaits()
	def(&t.RampDwell, seconds(w.RampDwellSeconds))
	def(&t.RelaySettle, seconds(w.RelaySettleSeconds))
	def(&t.SettleInterval, seconds(w.SettleIntervalSeconds))
	def(&t.SoakInterval, seconds(w.SoakIntervalSeconds))
	def(&t.ChamberTick, seconds(w.ChamberTickSeconds))
	def(&t.SafeStateTimeout, 2*time.Minute)
	def(&t.SafeCallTimeout, 10*time.Second)
	return t
}

// Outcome is what a run measured, also when it stopped early.
type Outcome struct {
	// Readings holds every point of the campaign so far: those recovered
	// from the journal (in journal order), then those of this run, in the
	// order measured. KeyOf gives each one's work key.
	Readings []journal.Reading
	// ACReadings are the frequency-response records, recovered then
	// measured, like Readings.
	ACReadings []journal.ACReading
	Recovered  int // readings that came from the journal
	Measured   int // readings taken by this run
	Flagged    int // readings of this run carrying a flag
	Total      int // points the plan asks for
	Complete   bool
	// BenchSeconds is the bench time when the run stopped.
	BenchSeconds float64
}

// Run executes a plan on the bench: for each temperature (chamber set
// point and soak, thermometer, or operator), each unit (switch channel or
// hand swap) and each test, it powers the part up, steps the stimulus
// through the ordered levels (OrderLevels) for every repeat, lets each point
// settle, averages the meter and reads back the stimulus, journals the
// reading, and powers the part down again.
//
// Before any instrument contact it re-runs safety.CheckSafetyWith (with
// opt.Consent), checks that the rig has every role the plan needs and that
// an Operator is there when the plan needs one, and, when resuming, that
// the journal belongs to this plan. A refusal returns (nil, err) and
// touches nothing.
//
// On any failure — an instrument error, a lost connection, a time-out, a
// soak time-out, or ctx cancelled (Ctrl-C) — Run brings the bench to the
// safe state with a fresh context of its own deadline: every source ramped
// to 0 V and switched off BEFORE the supplies ramp down and switch off,
// the chamber set back to ambient, the switch opened; it carries on past
// individual instrument errors and reports them. The failure and the safe
// state are journalled, and the error is a *fault.RunError naming the
// temperature, unit, test, repeat, step and level, and the instrument
// command that failed. The Outcome returned with it holds every reading
// taken so far.
func Run(ctx context.Context, p *plan.Plan, rig *Rig, opt RunOptions) (*Outcome, error) {
	if p == nil {
		return nil, errors.New("run: no plan")
	}
	if err := safety.CheckSafetyWith(p, opt.Consent); err != nil {
		return nil, err
	}
	if err := rig.check(p); err != nil {
		return nil, err
	}
	if err := checkTimeScale(p, rig); err != nil {
		return nil, err
	}
	if why := operator.NeedsOperator(p); why != "" && opt.Operator == nil {
		return nil, fmt.Errorf("%s, but there is no operator to ask (run it from an interactive terminal)", why)
	}
	if operator.NeedsOperator(p) != "" && opt.Operator != nil {
		for i, t := range p.ACTests {
			if _, ok := opt.Operator.(operator.ThroughOperator); t.Through == plan.ThroughManual && !ok {
				return nil, fmt.Errorf("ac_test[%d] has through = \"manual\", but the operator cannot be asked to move a probe", i+1)
			}
		}
	}
	if opt.Resume != nil {
		if err := journal.CheckPlanMatch(p, opt.Resume); err != nil {
			return nil, err
		}
	}
	r := newRunner(p, rig, opt)
	return r.run(ctx)
}

// Stages of a run, as fault.RunError.Stage names them.
const (
	stagePowerUp     = "powering up"
	stagePowerDown   = "powering down"
	stageSelect      = "connecting the unit on the switch"
	stageSwap        = "waiting for the operator to swap the unit"
	stageTemperature = "setting the temperature"
	stageSoak        = "soaking"
	stageConfigure   = "configuring the meter"
	stageLevel       = "setting the level"
	stageSettle      = "waiting for the output to settle"
	stageReadBack    = "reading back the stimulus"
	stageMeasure     = "measuring"
	stageReadTemp    = "reading the temperature"
	stageJournal     = "writing the journal"
	stageNominal     = "returning to the nominal rails"
	stageAmbient     = "returning the chamber to ambient"
	stageOpenSwitch  = "opening the switch"
)

// position is where the runner is, for errors and events.
type position struct {
	stage     string
	tempIndex int
	tempPoint float64
	unit      string
	test      int
	kind      string
	part      string
	repeat    int
	step      int
	level     float64
	atStep    bool
	// acTest is the [[ac_test]] index (-1 outside one) and acHz its
	// frequency (0 before the first).
	acTest int
	acHz   float64
}

// runner carries one run's state.
type runner struct {
	// session numbers the journal's runs: 0 fresh, n on the n-th resume
	// (journal.Reading.Session).
	session int

	p      *plan.Plan
	rig    *Rig
	opt    RunOptions
	timing Timing
	clk    clock.Clock
	log    io.Writer
	prog   Progress
	jw     *journal.Writer
	done   journal.WorkSet
	out    *Outcome
	temps  []float64

	state   plan.BenchState // as programmed (the last value each channel accepted)
	srcSafe map[string]bool // source role -> known at 0 V or off
	// unsure holds the roles whose last set command failed: the instrument
	// may have applied it all the same (a reply lost after the change), so
	// the safe state reads them back before ramping down.
	unsure map[string]bool
	tried  map[string]float64 // role -> largest magnitude of a failed set command (plausible.go)
	// genOn holds the generator outputs that may be on; genLimited those
	// whose limits were checked and set (run_ac.go).
	genOn, genLimited map[string]bool
	redialed          map[string]bool // sessions the safe state dialed again (recover.go)
	relays            relayState      // what the last opening of the switch found (relays.go)
	powered           bool            // a supply output may be on
	chamber           bool            // the chamber's set point was changed
	at                position
	tempC             float64 // temperature recorded with readings when not read per point
	eta               *estimate.Remaining
	finished          int // points done, recovered included
	// skipped holds the units skipped so far (journalled), pending the
	// ones asked for in RunOptions.Skip that the run has not reached yet.
	skipped, pending map[string]string
}

func newRunner(p *plan.Plan, rig *Rig, opt RunOptions) *runner {
	r := &runner{p: p, rig: rig, opt: opt, timing: opt.Timing.withDefaults(),
		clk: opt.Clock, log: opt.Log, prog: opt.Progress, jw: opt.Journal,
		out: &Outcome{}, temps: p.TemperaturePoints(), srcSafe: map[string]bool{}, unsure: map[string]bool{}}
	if r.clk == nil {
		r.clk = clock.NewScaled(p.Bench.TimeScale)
	}
	if r.log == nil {
		r.log = io.Discard
	}
	figs := estimate.DefaultFigures()
	if opt.Figures != nil {
		figs = *opt.Figures
	}
	t := r.timing
	figs.Waits = estimate.SequencerWaits{RampDwellSeconds: t.RampDwell.Seconds(), RelaySettleSeconds: t.RelaySettle.Seconds(),
		SettleIntervalSeconds: t.SettleInterval.Seconds(), SoakIntervalSeconds: t.SoakInterval.Seconds(), ChamberTickSeconds: t.ChamberTick.Seconds()}
	r.eta = estimate.NewRemaining(figs.Timeline(p))
	if r.prog == nil {
		r.prog = NopProgress{}
	}
	for _, role := range safety.SourceRoles(p) {
		r.srcSafe[role] = true // untouched: its output is as the operator left it; safety.PowerUpOrder switches it off first
	}
	if c := opt.Resume; c != nil {
		r.done = c.Done()
		r.session = len(c.Resumes) + 1
		r.out.Readings = append(r.out.Readings, c.Readings...)
		r.out.ACReadings = append(r.out.ACReadings, c.ACReadings...)
		r.out.Recovered = len(c.Readings) + len(c.ACReadings)
		// Continue the bench-time axis of the journal: its last bench time
		// plus the wall time since, in bench time. A drift term fitted
		// across the break then sees one time axis.
		var last journal.Reading
		for _, x := range c.Readings {
			if x.BenchSeconds >= last.BenchSeconds {
				last = x
			}
		}
		if len(c.Readings) > 0 {
			off := time.Duration(last.BenchSeconds * float64(time.Second))
			if gap := time.Since(last.Time); gap > 0 && !last.Time.IsZero() {
				off += time.Duration(float64(gap) * timeScale(p))
			}
			r.clk = clock.Offset(r.clk, off)
		}
	} else {
		r.done = (&journal.Contents{}).Done()
	}
	r.initSkips()
	r.at = position{tempIndex: -1, test: -1, acTest: -1}
	return r
}

func timeScale(p *plan.Plan) float64 {
	if s := p.Bench.TimeScale; s > 0 && !math.IsInf(s, 0) {
		return s
	}
	return 1
}

func (r *runner) run(ctx context.Context) (*Outcome, error) {
	total, done := r.count()
	r.out.Total = total
	r.finished = done
	r.prog.Begin(total, done)
	defer r.prog.End()
	if r.opt.Resume != nil {
		r.logf("resuming: %d of %d points already in the journal", done, total)
	}
	// Every step runs guarded (recover.go): a panic becomes an error, so
	// the bench still reaches its safe state and the journal its end.
	err := r.journalIdentities()
	if err == nil {
		err = guarded(ctx, r.benchOff)
	}
	if err == nil {
		err = guarded(ctx, r.campaign)
	}
	if err == nil {
		err = guarded(ctx, r.finish)
	}
	r.out.BenchSeconds = r.clk.Now().Seconds()
	if err != nil {
		return r.out, r.abort(ctx, err)
	}
	r.out.Complete = true
	r.journalEnd(journal.End{Status: journal.EndComplete})
	r.logf("campaign complete: %d points measured, %d recovered, %d flagged", r.out.Measured, r.out.Recovered, r.out.Flagged)
	return r.out, nil
}

// count returns the points the plan asks for and how many the journal
// already holds.
func (r *runner) count() (total, done int) {
	for ti := range r.temps {
		for _, u := range r.p.Units {
			if _, skip := r.skipped[u.ID]; skip {
				continue
			}
			for i := range r.p.Tests {
				steps := plan.TestSteps(r.p, i)
				for rep := 0; rep < r.p.Tests[i].Repeats; rep++ {
					for _, st := range steps {
						total++
						if r.done.Has(st.Key(ti, u.ID, rep)) {
							done++
						}
					}
				}
			}
			for i := range r.p.ACTests {
				t, d := r.acPoints(ti, u.ID, i)
				total += t
				done += d
			}
		}
	}
	return total, done
}

// unitFinished reports whether the journal holds every point of unit at
// temperature ti; tempFinished the same for every unit.
func (r *runner) unitFinished(ti int, unit string) bool {
	if _, skip := r.skipped[unit]; skip {
		return true
	}
	for i := range r.p.Tests {
		if !r.testFinished(ti, unit, i) {
			return false
		}
	}
	for i := range r.p.ACTests {
		if !r.acTestFinished(ti, unit, i) {
			return false
		}
	}
	return true
}

func (r *runner) tempFinished(ti int) bool {
	for _, u := range r.p.Units {
		if !r.unitFinished(ti, u.ID) {
			return false
		}
	}
	return true
}

func (r *runner) testFinished(ti int, unit string, i int) bool {
	steps := plan.TestSteps(r.p, i)
	for rep := 0; rep < r.p.Tests[i].Repeats; rep++ {
		for _, st := range steps {
			if !r.done.Has(st.Key(ti, unit, rep)) {
				return false
			}
		}
	}
	return true
}

// campaign is the loop over temperatures, units and tests. The bench is
// powered only while one unit is measured: units are switched or swapped
// and the chamber ramps with the part unpowered.
func (r *runner) campaign(ctx context.Context) error {
	for ti, point := range r.temps {
		if r.tempFinished(ti) {
			continue
		}
		r.at = position{tempIndex: ti, tempPoint: point, test: -1, acTest: -1}
		if err := r.enterTemperature(ctx, ti, point); err != nil {
			return err
		}
		for _, u := range r.p.Units {
			if r.skipNow(ti, u.ID) || r.unitFinished(ti, u.ID) {
				continue
			}
			r.at.unit, r.at.test, r.at.atStep = u.ID, -1, false
			if err := r.connectUnit(ctx, ti, u); err != nil {
				if reason, ok := operator.SkipReason(err); ok {
					r.skipUnit(ti, u.ID, reason)
					continue
				}
				return err
			}
			if err := r.powerUp(ctx); err != nil {
				return err
			}
			for i := range r.p.Tests {
				if err := r.runTest(ctx, ti, u.ID, i); err != nil {
					return err
				}
			}
			r.at.test, r.at.atStep = -1, false
			if err := r.runACTests(ctx, ti, u.ID); err != nil {
				return err
			}
			r.at.acTest, r.at.acHz, r.at.kind = -1, 0, ""
			if err := r.powerDown(ctx); err != nil {
				return err
			}
		}
	}
	return nil
}

// finish ends a complete campaign: the chamber back to ambient at the ramp
// limit, the switch opened.
func (r *runner) finish(ctx context.Context) error {
	r.at.unit, r.at.test, r.at.atStep = "", -1, false
	if r.chamber && r.p.Temperature.Mode == plan.TempChamber {
		r.at.stage = stageAmbient
		amb := r.p.Temperature.AmbientCelsius
		if err := r.rampChamber(ctx, amb); err != nil {
			return err
		}
		r.event(journal.Event{Type: journal.EventTemperatureSet, TemperatureC: amb, Detail: "campaign over: chamber set back to ambient"})
	}
	if r.rig.Switch != nil && !operator.HandSwap(r.p) {
		r.at.stage = stageOpenSwitch
		rs, err := openSwitch(ctx, r.rig.Switch)
		if err != nil {
			return fmt.Errorf("switch: %w", err)
		}
		r.relays = rs
		r.note("switch: %s", rs.words)
	}
	return nil
}

// abort brings the bench to the safe state after err and returns the
// fault.RunError that tells the user what happened.
func (r *runner) abort(ctx context.Context, err error) error {
	at := r.at
	e := &fault.RunError{Stage: at.stage, TempIndex: at.tempIndex, TemperatureC: at.tempPoint, Unit: at.unit,
		TestIndex: at.test, Test: at.kind, Part: at.part, Repeat: at.repeat, Step: at.step,
		LevelVolts: at.level, AtStep: at.atStep, Err: err, ACTest: at.acTest, FrequencyHz: at.acHz}
	if at.test < 0 && at.acTest < 0 {
		e.Test, e.Part = "", ""
	}
	e.PlanFile = r.p.Source
	switch {
	case at.test >= 0:
		e.TestLine = r.p.TestLine(at.test)
	case at.acTest >= 0:
		e.TestLine = r.p.ACTestLine(at.acTest)
	}
	e.Cause = fault.Describe(r.p, err)
	if r.p.Temperature.Mode == plan.TempNone {
		e.TempIndex = -1 // one ambient pass: not worth naming
	}
	e.Interrupted = ctx.Err() != nil
	if e.Interrupted && !errors.Is(err, ctx.Err()) {
		e.Err = fmt.Errorf("%w (%v)", ctx.Err(), err)
	}
	// Before the safe state: only the cause and where (Error would speak
	// of a safe state not yet tried).
	head, _, _ := strings.Cut(e.Error(), "\n  the bench is in its safe state")
	r.logf("STOP: %s", head)
	r.prog.Note("stopping: bringing the bench to its safe state")
	r.event(journal.Event{Type: journal.EventAbort, Reason: fmt.Sprintf("%s: %v", at.stage, e.Err), Unit: at.unit,
		TempIndex: max(at.tempIndex, 0), TemperatureC: at.tempPoint})
	e.SafeState = r.safeStateGuarded(ctx)
	e.Relays = r.relays.words
	detail := "reached: sources at 0 V and off, then supplies ramped down and off"
	if e.SafeState != nil {
		detail = "NOT reached: " + e.SafeState.Error()
	}
	r.event(journal.Event{Type: journal.EventSafeState, Reason: "abort", Detail: detail, Unit: at.unit, TempIndex: max(at.tempIndex, 0)})
	status := journal.EndAborted
	if e.Interrupted {
		status = journal.EndInterrupted
	}
	r.journalEnd(journal.End{Status: status, Reason: e.Error()})
	// The caller prints the error itself (cmd does); the progress display
	// only says that the run stopped, so the cause is stated once.
	if fault.Hazard(e.SafeState) {
		r.prog.Note("stopped: SAFE STATE NOT REACHED (see below)")
	} else {
		r.prog.Note("stopped: the bench is unpowered (see below)")
	}
	return e
}

func (r *runner) logf(format string, args ...any) {
	fmt.Fprintf(r.log, "[bench %9.2f s] %s\n", r.clk.Now().Seconds(), fmt.Sprintf(format, args...))
}

// note logs an event and shows it on the progress display.
func (r *runner) note(format string, args ...any) {
	msg := fmt.Sprintf(format, args...)
	r.logf("%s", msg)
	r.prog.Note(msg)
}
