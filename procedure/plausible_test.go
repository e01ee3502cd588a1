package procedure

import (
	"context"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"nullbench/instrument"
	"nullbench/instrument/sim"
	"nullbench/procedure/analysis"
	"nullbench/procedure/fault"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// hostileSupply is a small test proxy in front of a real driver on the
// simulated bench: it rewrites chosen read-back answers and can make a set
// command fail after the instrument applied it (a reply lost after the
// change). It records every voltage commanded.
type hostileSupply struct {
	instrument.Supply
	mu        sync.Mutex
	readBacks []float64 // answered in order instead of the instrument's, one per ReadVolts
	sticky    float64   // after failSet fired: every read-back answers this (0: the instrument's)
	failSet   bool      // the next SetVolts is applied, then reported failed
	fired     bool
	sent      []float64
}

func (h *hostileSupply) SetVolts(ctx context.Context, v float64) error {
	h.mu.Lock()
	h.sent = append(h.sent, v)
	fail := h.failSet
	h.failSet = false
	h.mu.Unlock()
	err := h.Supply.SetVolts(ctx, v)
	if fail {
		h.mu.Lock()
		h.fired = true
		h.mu.Unlock()
		return errors.New("hostile proxy: set command reply lost")
	}
	return err
}

func (h *hostileSupply) ReadVolts(ctx context.Context) (float64, error) {
	h.mu.Lock()
	if len(h.readBacks) > 0 {
		v := h.readBacks[0]
		h.readBacks = h.readBacks[1:]
		h.mu.Unlock()
		return v, nil
	}
	if h.fired && h.sticky != 0 {
		v := h.sticky
		h.mu.Unlock()
		return v, nil
	}
	h.mu.Unlock()
	return h.Supply.ReadVolts(ctx)
}

func (h *hostileSupply) commanded() []float64 {
	h.mu.Lock()
	defer h.mu.Unlock()
	return append([]float64(nil), h.sent...)
}

// panicMeter panics on its n-th ReadN.
type panicMeter struct {
	instrument.Meter
	n int
}

func (m *panicMeter) ReadN(ctx context.Context, n int) ([]float64, error) {
	if m.n--; m.n == 0 {
		var s []float64
		_ = s[n+5] // an index out of range, as a bug would
	}
	return m.Meter.ReadN(ctx, n)
}

// leaveBenchOn powers the simulated bench as a kill -9 leaves it: rails at
// ±15 V, outputs on, unit U01's relay closed.
func leaveBenchOn(t *testing.T, su *simSetup) {
	t.Helper()
	ctx := context.Background()
	for _, step := range []func() error{
		func() error { return su.rig.Switch.Close(ctx, "101") },
		func() error { return su.rig.SupplyPos.SetVolts(ctx, 15) },
		func() error { return su.rig.SupplyNeg.SetVolts(ctx, -15) },
		func() error { return su.rig.SupplyPos.SetOutput(ctx, true) },
		func() error { return su.rig.SupplyNeg.SetOutput(ctx, true) },
	} {
		if err := step(); err != nil {
			t.Fatal(err)
		}
	}
	s := su.bench.Inspect()
	if !s.Supply[0].On || len(s.Closed) == 0 {
		t.Fatalf("bench not left on: %+v", s)
	}
}

func runJournalled(t *testing.T, su *simSetup, ctx context.Context, opt RunOptions) (*Outcome, error, *journal.Contents, string) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "hostile.jsonl")
	w, err := journal.Open(path, journal.Header{PlanHash: su.plan.Hash, PlanPath: "loopback.toml", ToolVersion: "test", TimeScale: 1})
	if err != nil {
		t.Fatal(err)
	}
	var log strings.Builder
	opt.Clock, opt.Journal, opt.Log = su.clock, w, &log
	opt.Timing = Timing{SafeCallTimeout: time.Second, SafeStateTimeout: 20 * time.Second}
	out, runErr := Run(ctx, su.plan, su.rig, opt)
	w.Close()
	c, err := journal.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return out, runErr, c, log.String()
}

// Scenario 1 of the hostile bench: a supply set command fails (after it
// took effect) and the supply then reads back 1E300. The old safe state
// ramped from the read-back and panicked; now it ramps from the programmed
// value, says so, reaches the safe state and writes the journal's end.
func TestSafeStateAbsurdReadBackAfterFailedSet(t *testing.T) {
	for _, absurd := range []float64{1e300, 1e7, math.NaN(), 30} {
		t.Run(fmt.Sprintf("%g V", absurd), func(t *testing.T) {
			su := startSim(t, plan.CMBySupplyShift, false, 500*time.Millisecond)
			hs := &hostileSupply{Supply: su.rig.SupplyPos, sticky: absurd}
			su.rig.SupplyPos = hs
			armed := false
			hook := progressHook{fn: func(i PointInfo) {
				if !armed && i.Unit == "U01" && i.Test == plan.TestCMRR && i.LevelVolts == 5 {
					armed = true
					hs.mu.Lock()
					hs.failSet = true
					hs.mu.Unlock()
				}
			}}
			_, err, c, log := runJournalled(t, su, context.Background(), RunOptions{Progress: hook})
			var re *fault.RunError
			if !errors.As(err, &re) || !hs.fired {
				t.Fatalf("fired %v, err %v", hs.fired, err)
			}
			if re.SafeState != nil {
				t.Errorf("safe state not reached: %v", re.SafeState)
			}
			checkSimBench(t, su.bench, true)
			if c.End == nil || c.End.Status != journal.EndAborted {
				t.Errorf("journal end %+v", c.End)
			}
			if !strings.Contains(log, "supply_pos ramps down from the programmed") {
				t.Errorf("the log does not say where the ramp started:\n%s", log)
			}
			checkRampDown(t, hs.commanded(), safety.MaxProgrammedVolts(su.plan, plan.RoleSupplyPos), safety.RampStep(su.plan))
		})
	}
}

// checkRampDown checks the commands sent after the last maximum: every
// one within the plan's largest voltage, and the final descent never up
// and in steps no larger than the ramp step.
func checkRampDown(t *testing.T, sent []float64, maxVolts, step float64) {
	t.Helper()
	for _, v := range sent {
		if math.IsNaN(v) || math.Abs(v) > maxVolts+1e-9 {
			t.Errorf("commanded %g V, beyond the plan's largest %g V: %v", v, maxVolts, sent)
		}
	}
	// The last descent to 0 V.
	i := len(sent) - 1
	for i > 0 && math.Abs(sent[i-1]) >= math.Abs(sent[i]) && math.Abs(sent[i-1]-sent[i]) <= step+1e-9 {
		i--
	}
	if i > 0 && math.Abs(sent[i-1]) < math.Abs(sent[i]) {
		// sent[i] started the descent; it must not exceed its predecessor
		// by more than a ramp step (it follows the failed command).
		if d := math.Abs(sent[i]) - math.Abs(sent[i-1]); d > step+1e-9 {
			t.Errorf("the ramp down starts %g V above the previous command: %v", d, sent)
		}
	}
}

// Scenarios 2 and 3: the bench is left powered (±15 V, relay closed) and
// V+ reads back absurdly at the start. The start-up switch-off must never
// command more than the 15 V programmed, must not panic or allocate by
// the answer, and the run then completes with no unit damaged.
func TestStartupSwitchOffAbsurdReadBack(t *testing.T) {
	cases := []struct {
		name      string
		readBacks []float64
		nominal   bool // the ramp starts from the nominal rail (both answers absurd)
	}{
		{name: "one read-back of 30 V", readBacks: []float64{30}},
		{name: "1E300 twice", readBacks: []float64{1e300, 1e300}, nominal: true},
		{name: "1E7 twice", readBacks: []float64{1e7, 1e7}, nominal: true},
		{name: "NaN then 40 V", readBacks: []float64{math.NaN(), 40}, nominal: true},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			su := startSim(t, plan.CMBySupplyShift, false, 500*time.Millisecond)
			leaveBenchOn(t, su)
			hs := &hostileSupply{Supply: su.rig.SupplyPos, readBacks: tc.readBacks}
			su.rig.SupplyPos = hs
			_, err, c, log := runJournalled(t, su, context.Background(), RunOptions{})
			if err != nil {
				t.Fatalf("run: %v\n%s", err, log)
			}
			checkSimBench(t, su.bench, true)
			if c.End == nil || c.End.Status != journal.EndComplete {
				t.Errorf("journal end %+v", c.End)
			}
			sent := hs.commanded()
			// Up to the first 0 V: the start-up switch-off.
			var off []float64
			for _, v := range sent {
				off = append(off, v)
				if v == 0 {
					break
				}
			}
			if len(off) == 0 || off[0] > 15 || off[0] < 15-safety.RampStep(su.plan)-0.01 {
				t.Errorf("switch-off commands %v: want the first within one ramp step below the 15 V programmed", off)
			}
			for i, v := range off {
				if v > 15 {
					t.Errorf("switch-off commanded %g V, above the 15 V programmed: %v", v, off)
				}
				if i > 0 && (v > off[i-1] || off[i-1]-v > safety.RampStep(su.plan)+1e-9) {
					t.Errorf("switch-off step %g V -> %g V goes up or exceeds the ramp step: %v", off[i-1], v, off)
				}
			}
			want := "from its read-back +15"
			if tc.nominal {
				want = "from the nominal rail +15"
			}
			if !strings.Contains(log, "supply_pos: ramping to 0 V "+want) {
				t.Errorf("the log does not say %q:\n%s", want, log)
			}
		})
	}
}

// A panic inside a run (here the meter driver) is recovered: the bench
// reaches its safe state and the journal gets its end record.
func TestRunRecoversPanic(t *testing.T) {
	su := startSim(t, plan.CMBySupplyShift, false, 500*time.Millisecond)
	su.rig.Meter = &panicMeter{Meter: su.rig.Meter, n: 3}
	_, err, c, _ := runJournalled(t, su, context.Background(), RunOptions{})
	var re *fault.RunError
	if !errors.As(err, &re) || !errors.Is(err, ErrPanic) {
		t.Fatalf("want a RunError wrapping ErrPanic: %v", err)
	}
	if re.SafeState != nil {
		t.Errorf("safe state not reached: %v", re.SafeState)
	}
	checkSimBench(t, su.bench, true)
	if c.End == nil || c.End.Status != journal.EndAborted {
		t.Errorf("journal end %+v", c.End)
	}
}

// ratedSupply is a supply driver stand-in that describes itself as the
// profile-driven driver does (instrument, channel, read command, rating).
type ratedSupply struct {
	instrument.Supply
	info instrument.OutputInfo
}

func (s ratedSupply) Output() instrument.OutputInfo { return s.info }

// A supply read-back during a measurement is checked against the channel's
// rating from its profile, the plan's largest voltage for the role and the
// value programmed, before it enters the fit; the error names the
// instrument, channel and command and which bound the value broke. The
// bounds are the project's own (readBackSlack: 0.1 V + 2 %, common
// practice, no published source); the rating is the profile's max_volts.
func TestPlausibleReadBack(t *testing.T) {
	p := &plan.Plan{}
	p.Part.NominalPosVolts, p.Part.NominalNegVolts = 15, -15
	p.Tests = []plan.Test{{Kind: plan.TestPSRRPos, Levels: []float64{-3, 3}}} // V+ reaches 18 V
	rig := &Rig{SupplyPos: ratedSupply{info: instrument.OutputInfo{
		Instrument: "psu", Channel: "1", ReadVolts: "INST:NSEL 1; MEAS:VOLT?", MaxVolts: 40}}}
	r := &runner{p: p, rig: rig}
	cases := []struct {
		name          string
		v, programmed float64
		want          string // "" for plausible, else a part of the message
	}{
		{"plausible at nominal", 15.001, 15, ""},
		{"plausible at the top level", 18.05, 18, ""},
		{"plausible at 0 V", 0.05, 0, ""},
		{"absurd 1E300", 1e300, 15, "beyond the channel's +40 V rating"},
		{"absurd MaxFloat64", math.MaxFloat64, math.MaxFloat64, "beyond the channel's +40 V rating"},
		{"not a number", math.NaN(), 15, "is not a number"},
		{"overload code", math.Inf(1), 15, "is not a number"},
		{"beyond rating", 45, 15, "beyond the channel's +40 V rating (max_volts in its profile)"},
		{"beyond the plan's limit", 30, 15, "exceeds the largest voltage the plan programs on it (+18 V)"},
		{"beyond the plan's limit though programmed", 30, 30, "exceeds the largest voltage the plan programs on it (+18 V)"},
		{"off the programmed value", 15.5, 15, "from the programmed +15 V"},
		{"wrong sign", -15, 15, "from the programmed +15 V"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			err := r.plausibleReadBack(plan.RoleSupplyPos, tc.v, tc.programmed)
			if tc.want == "" {
				if err != nil {
					t.Fatalf("read-back %g V programmed %g V refused: %v", tc.v, tc.programmed, err)
				}
				return
			}
			if err == nil {
				t.Fatalf("read-back %g V programmed %g V accepted", tc.v, tc.programmed)
			}
			if !errors.Is(err, instrument.ErrImplausible) {
				t.Errorf("%v does not wrap ErrImplausible", err)
			}
			msg := err.Error()
			for _, w := range []string{tc.want, "supply_pos", "psu channel 1", `"INST:NSEL 1; MEAS:VOLT?"`} {
				if !strings.Contains(msg, w) {
					t.Errorf("message %q lacks %q", msg, w)
				}
			}
		})
	}
}

// rampTo never allocates by an absurd start.
func TestRampToAbsurdStart(t *testing.T) {
	for _, v := range []float64{1e300, -1e300, 1e7 * 1e6, math.NaN(), math.Inf(1)} {
		if got := rampTo(v, 0, 1); len(got) != 0 {
			t.Errorf("rampTo(%g) returned %d points", v, len(got))
		}
	}
	if got := rampTo(15, 0, 1); len(got) != 15 || got[0] != 14 {
		t.Errorf("rampTo(15, 0, 1) = %v", got)
	}
}

// The supply's connection drops while the rails are shifted: the safe
// state dials the supply again once and still ramps the rails down and
// off, instead of leaving them on.
func TestSafeStateRedialsALostSupply(t *testing.T) {
	su := startSim(t, plan.CMBySupplyShift, false, 500*time.Millisecond)
	armed := false
	hook := progressHook{fn: func(i PointInfo) {
		if !armed && i.Unit == "U01" && i.Test == plan.TestCMRR && i.LevelVolts == 5 {
			armed = true
			if err := su.bench.InjectFault(sim.NameSupply, sim.Fault{Kind: sim.FaultDrop, Match: "VOLT"}); err != nil {
				t.Error(err)
			}
		}
	}}
	_, err, c, log := runJournalled(t, su, context.Background(), RunOptions{Progress: hook})
	var re *fault.RunError
	if !errors.As(err, &re) || !errors.Is(err, instrument.ErrClosed) {
		t.Fatalf("want a lost connection: %v", err)
	}
	if re.SafeState != nil {
		t.Errorf("safe state not reached: %v", re.SafeState)
	}
	checkSimBench(t, su.bench, true)
	if !strings.Contains(log, "connection lost, dialed psu again") {
		t.Errorf("the log does not say the supply was dialed again:\n%s", log)
	}
	if c.End == nil {
		t.Error("no end record")
	}
}

// badMeter is a small test proxy in front of the simulated bench's meter
// driver: while armed it rewrites the driver's answer into what the driver
// returns for a hostile instrument (the value, and an error wrapping the
// driver's sentinel, naming the meter and command).
type badMeter struct {
	instrument.Meter
	mu    sync.Mutex
	armed bool
	value float64 // answered instead of the instrument's reading
	cause error   // instrument.ErrImplausible or instrument.ErrNotANumber
}

func (m *badMeter) ReadN(ctx context.Context, n int) ([]float64, error) {
	vals, err := m.Meter.ReadN(ctx, n)
	m.mu.Lock()
	defer m.mu.Unlock()
	if !m.armed || err != nil {
		return vals, err
	}
	for i := range vals {
		vals[i] = m.value
	}
	return vals, fmt.Errorf("meter: %q: %d of %d readings refused (%g): %w", "READ?", n, n, m.value, m.cause)
}

// An implausible meter answer (a finite value far beyond 1.2 × range, or
// SCPI NaN 9.91E37; IEEE 488.2/SCPI-99 vol. 1 §7.2.1.5 for the NaN code)
// or an overload (9.9E37)
// is an error of that point: the run goes on, the point is journalled
// with the flag and the driver's message, and the fit leaves it out with
// a note.
func TestImplausibleMeterAnswerIsAPointError(t *testing.T) {
	for _, tc := range []struct {
		name  string
		value float64
		cause error
		flag  string
	}{
		{"beyond range", 5e3, instrument.ErrImplausible, journal.FlagImplausible},
		{"scpi nan", math.NaN(), instrument.ErrNotANumber, journal.FlagImplausible},
		// SCPI overload 9.9E37 (SCPI-99 vol. 1 §7.2.1.5): the range too small.
		{"scpi overload", math.Inf(1), instrument.ErrOverload, journal.FlagOverload},
	} {
		t.Run(tc.name, func(t *testing.T) {
			su := startSim(t, plan.CMBySupplyShift, false, 500*time.Millisecond)
			bm := &badMeter{Meter: su.rig.Meter, value: tc.value, cause: tc.cause}
			su.rig.Meter = bm
			reports := 0
			hook := progressHook{fn: func(i PointInfo) {
				bm.mu.Lock()
				defer bm.mu.Unlock()
				bm.armed = false
				if i.Unit == "U01" && i.Test == plan.TestCMRR && reports == 0 {
					bm.armed = true // the next point answers badly
					reports++
				}
			}}
			_, err, c, log := runJournalled(t, su, context.Background(), RunOptions{Progress: hook})
			if err != nil {
				t.Fatalf("the run stopped on a point error: %v", err)
			}
			checkSimBench(t, su.bench, true)
			var bad []journal.Reading
			for _, r := range c.Readings {
				if slices.Contains(r.Flags, tc.flag) {
					bad = append(bad, r)
				}
			}
			if len(bad) != 1 {
				t.Fatalf("%d readings flagged %q, want 1", len(bad), tc.flag)
			}
			if tc.flag == journal.FlagOverload && slices.Contains(bad[0].Flags, journal.FlagImplausible) {
				t.Errorf("an overload flagged %v: it is not an implausible answer", bad[0].Flags)
			}
			if !strings.Contains(bad[0].Problem, "meter") || !strings.Contains(bad[0].Problem, "READ?") {
				t.Errorf("the problem does not name the instrument and command: %q", bad[0].Problem)
			}
			if math.IsNaN(bad[0].MeterVolts) || math.IsInf(bad[0].MeterVolts, 0) {
				t.Errorf("journalled a non-finite meter value %g", bad[0].MeterVolts)
			}
			if !strings.Contains(log, "left out of the fit") {
				t.Errorf("the console log does not report the point:\n%s", log)
			}
			res, err := analysis.Analyze(su.plan, c.Readings, analysis.Inputs{})
			if err != nil {
				t.Fatal(err)
			}
			noted := false
			for _, r := range res.Ratios {
				if r.Unit == bad[0].Unit && r.ExcludedPoints == 1 {
					for _, n := range r.Notes {
						noted = noted || strings.Contains(n, "left out")
					}
				}
			}
			if !noted {
				t.Errorf("no result of %s %s notes the excluded point", bad[0].Unit, bad[0].Test)
			}
		})
	}
}
