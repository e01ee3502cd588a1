package procedure

import (
	"context"
	"errors"
	"math"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
	"nullbench/instrument/sim"
	"nullbench/internal/simtest"
	"nullbench/procedure/fault"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// These tests run the sequencer against the simulated bench over loopback
// TCP, through the profile-driven drivers, exactly as cmd would. The sim and
// the run share one virtual clock (sim.ManualClock): every dwell, settle
// and soak of the run moves the sim's physics forward at once, so hours of
// bench time take a second and the runs are repeatable. Afterwards the
// sim's Inspect (never reachable over SCPI) says whether any unit was
// damaged and where the outputs were left.

// simPlanRest is everything of an HX-4107 plan (demo lot of the sim) but
// its [bench] section, which the sim writes.
const simPlanRest = `
[campaign]
name = "HX-4107 loopback run"
lot  = "L2611-A"

[fixture]
kind = "nulling_loop"
noise_gain = 1000.0
noise_gain_tolerance = 0.001
common_mode = "%CM%"
max_stimulus_volts = 12.0

` + simtest.PartHX4107 + `cm_margin_volts = 0.5
current_limit_amps = 0.05

[[test]]
kind = "cmrr"
levels = [-10.0, -5.0, 0.0, 5.0, 10.0]
nplc = 1.0
dwell_s = 2.0
settle_volts = 0.0002

[[test]]
kind = "psrr_pos"
levels = [-3.0, 0.0, 3.0]
nplc = 1.0
dwell_s = 2.0
settle_volts = 0.0002

%MORE%

[[unit]]
id = "U01"
channel = "101"

[[unit]]
id = "U02"
channel = "102"

%TEMP%
`

const simMoreTests = `
[[test]]
kind = "psrr_neg"
levels = [-3.0, 0.0, 3.0]
nplc = 1.0
settle_volts = 0.0002

[[test]]
kind = "psrr_sym"
levels = [-4.0, 0.0, 4.0]
nplc = 1.0
settle_volts = 0.0002

[[test]]
kind = "aol"
levels = [-5.0, 0.0, 5.0]
nplc = 1.0
settle_volts = 0.0002
`

const simChamber = `
[temperature]
mode = "chamber"
points_c = [25.0, 40.0]
soak_tolerance_c = 0.5
soak_s = 120.0
soak_timeout_s = 3600.0
ramp_max_c_per_min = 5.0
ambient_c = 25.0
`

type simSetup struct {
	bench *sim.Bench
	plan  *plan.Plan
	rig   *Rig
	clock simtest.Clock
}

func startSim(t *testing.T, commonMode string, full bool, rigTimeout time.Duration) *simSetup {
	t.Helper()
	if testing.Short() {
		t.Skip("loopback run against the simulated bench")
	}
	b := simtest.Start(t, sim.Config{})
	rest := strings.ReplaceAll(simPlanRest, "%CM%", commonMode)
	more, temp := "", ""
	if full {
		more, temp = simMoreTests, simChamber
	}
	rest = strings.ReplaceAll(strings.ReplaceAll(rest, "%MORE%", more), "%TEMP%", temp)
	p := b.Plan(t, rest, "loopback.toml")
	clk := b.RunClock()
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	rig, closeRig, err := OpenRig(ctx, p, RigOptions{Sleep: clk.Sleep, Timeout: rigTimeout})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { closeRig() })
	if len(rig.Identities) != 5 {
		t.Errorf("identities %+v", rig.Identities)
	}
	return &simSetup{bench: b.Bench, plan: p, rig: rig, clock: clk}
}

// checkSimBench fails on a damaged unit; with off it also wants every
// output off and the switch open.
func checkSimBench(t *testing.T, b *sim.Bench, off bool) sim.Snapshot {
	t.Helper()
	s := b.Inspect()
	for _, u := range s.Units {
		if u.Damaged {
			t.Errorf("unit %s damaged at bench %.1f s: %s", u.ID, u.DamagedAtSeconds, u.DamageReason)
		}
	}
	if off {
		for _, c := range append(append([]sim.ChannelSnapshot(nil), s.Supply...), s.Source...) {
			if c.On && c.OutputVolts != 0 {
				t.Errorf("channel %d left on at %g V", c.Channel, c.OutputVolts)
			}
		}
		if len(s.Closed) != 0 {
			t.Errorf("switch channels left closed: %v", s.Closed)
		}
	}
	return s
}

func TestRunOnSimulatedBench(t *testing.T) {
	su := startSim(t, plan.CMBySupplyShift, true, 0)
	path := filepath.Join(t.TempDir(), "loopback.jsonl")
	w, err := journal.Open(path, journal.Header{PlanHash: su.plan.Hash, PlanPath: "loopback.toml", ToolVersion: "test", TimeScale: 1})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	out, err := Run(context.Background(), su.plan, su.rig, RunOptions{Clock: su.clock, Journal: w})
	if err != nil {
		t.Fatal(err)
	}
	// 2 temperatures × 2 units × (10 + 6 + 6 + 6 + 6) points.
	if want := 2 * 2 * 34; len(out.Readings) != want || !out.Complete {
		t.Fatalf("%d readings, complete %v; want %d", len(out.Readings), out.Complete, want)
	}
	s := checkSimBench(t, su.bench, true)
	if s.SetPointC != 25 {
		t.Errorf("chamber left at %g °C, want ambient 25", s.SetPointC)
	}
	// The readings carry the part's physics: with the rails shifted by -L
	// and the inputs and output held at ground, ΔE0 = K·(kc + ko)·L
	// (derived from kc + kp + kn + ko = 0, no published source). Compare
	// the fitted slope at 25 °C with the sim's truth for U01 (K = 1000),
	// within 5 % (noise, drift and thermal tails).
	var tr *sim.UnitTruth
	for _, u := range su.bench.Truth() {
		if u.ID == "U01" {
			u := u
			tr = &u
		}
	}
	var cm []journal.Reading
	for _, r := range out.Readings {
		if r.Unit == "U01" && r.Test == plan.TestCMRR && r.TempIndex == 0 {
			cm = append(cm, r)
			if !r.ReadBack || math.Abs(r.ReadVolts-r.SetVolts) > 0.05 {
				t.Errorf("level %g read back %v %g", r.SetVolts, r.ReadBack, r.ReadVolts)
			}
		}
		if r.TempIndex == 1 && math.Abs(r.TemperatureC-40) > 0.5 {
			t.Errorf("reading at %.2f °C at the 40 °C point", r.TemperatureC)
		}
	}
	if tr == nil {
		t.Fatal("no truth for U01")
	}
	want := 1000 * (tr.KcUVPerV + tr.KoUVPerV) * 1e-6
	if got := fitSlope(cm); math.Abs(got-want) > 0.05*math.Abs(want) {
		t.Errorf("U01 cmrr slope %.4g V/V, truth K·(kc+ko) = %.4g V/V", got, want)
	}
}

// progressHook calls fn after each point.
type progressHook struct {
	NopProgress
	fn func(PointInfo)
}

func (h progressHook) Point(i PointInfo) { h.fn(i) }

func TestRunOnSimulatedBenchFaults(t *testing.T) {
	cases := []struct {
		name       string
		commonMode string
		fault      *sim.Fault
		instrument string
		cancel     bool
		is         error
		left       bool // the supplies stay on: the input source was lost while driving
	}{
		{name: "meter connection dropped", commonMode: plan.CMBySupplyShift, instrument: sim.NameDMM,
			fault: &sim.Fault{Kind: sim.FaultDrop, Match: "READ?"}, is: instrument.ErrClosed},
		{name: "supply stops answering once", commonMode: plan.CMBySupplyShift, instrument: sim.NameSupply,
			fault: &sim.Fault{Kind: sim.FaultNoReply, Match: "MEAS:VOLT?"}, is: instrument.ErrTimeout},
		{name: "ctrl-c", commonMode: plan.CMByInputDrive, instrument: sim.NameDMM, cancel: true, is: context.Canceled},
		{name: "source connection dropped while driving the inputs", commonMode: plan.CMByInputDrive, instrument: sim.NameSource,
			fault: &sim.Fault{Kind: sim.FaultDrop, Match: "VOLT", Persistent: true}, is: instrument.ErrClosed, left: true},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			su := startSim(t, tc.commonMode, false, 500*time.Millisecond)
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			armed := false
			hook := progressHook{fn: func(i PointInfo) {
				// After the cmrr point at +5 V of U01 (the inputs are
				// driven there in input-drive mode; the next step
				// ramps to another level).
				if armed || i.Unit != "U01" || i.Test != plan.TestCMRR || i.LevelVolts != 5 {
					return
				}
				armed = true
				if tc.cancel {
					cancel()
					return
				}
				if err := su.bench.InjectFault(tc.instrument, *tc.fault); err != nil {
					t.Error(err)
				}
			}}
			path := filepath.Join(t.TempDir(), "faulted.jsonl")
			hdr := journal.Header{PlanHash: su.plan.Hash, PlanPath: "loopback.toml", ToolVersion: "test", TimeScale: 1}
			w, err := journal.Open(path, hdr)
			if err != nil {
				t.Fatal(err)
			}
			out, err := Run(ctx, su.plan, su.rig, RunOptions{Clock: su.clock, Progress: hook, Journal: w,
				Timing: Timing{SafeCallTimeout: time.Second, SafeStateTimeout: 20 * time.Second}})
			w.Close()
			var re *fault.RunError
			if !errors.As(err, &re) {
				t.Fatalf("err %v", err)
			}
			if !armed {
				t.Fatal("the fault was never armed")
			}
			if !errors.Is(err, tc.is) {
				t.Errorf("error does not wrap %v: %v", tc.is, err)
			}
			if re.Unit != "U01" || re.Test != plan.TestCMRR || out.Measured == 0 {
				t.Errorf("stopped at unit %q test %q after %d points: %v", re.Unit, re.Test, out.Measured, err)
			}
			s := checkSimBench(t, su.bench, !tc.left)
			if tc.left {
				if re.SafeState == nil || !strings.Contains(err.Error(), "LEFT ON") {
					t.Errorf("want the supplies reported left on: %v", err)
				}
				if !s.Supply[0].On || !s.Supply[1].On {
					t.Errorf("supplies switched off with the input source out of reach: %+v", s.Supply)
				}
			} else if re.SafeState != nil {
				t.Errorf("safe state not reached: %v", re.SafeState)
			}
			t.Logf("%v", err)
			if tc.left {
				return
			}
			// Resume on fresh connections: the campaign completes with
			// every point once.
			su.bench.ClearFaults(tc.instrument)
			octx, ocancel := context.WithTimeout(context.Background(), 10*time.Second)
			defer ocancel()
			rig, closeRig, err := OpenRig(octx, su.plan, RigOptions{Sleep: su.clock.Sleep})
			if err != nil {
				t.Fatal(err)
			}
			defer closeRig()
			w2, c, err := journal.Resume(path, su.plan, hdr)
			if err != nil {
				t.Fatal(err)
			}
			defer w2.Close()
			out2, err := Run(context.Background(), su.plan, rig, RunOptions{Clock: su.clock, Journal: w2, Resume: c})
			if err != nil {
				t.Fatal(err)
			}
			if keys := keySet(t, out2.Readings); len(keys) != out2.Total || out2.Recovered != out.Measured {
				t.Errorf("after resume %d distinct points of %d, %d recovered of %d", len(keys), out2.Total, out2.Recovered, out.Measured)
			}
			checkSimBench(t, su.bench, true)
		})
	}
}

// simBoardPlan is an HB-220 board plan (the sim's demo board B01).
const simBoardPlan = `
[campaign]
name = "HB-220 loopback run"

[fixture]
kind = "board"
board_gain = 10.0
resistor_tolerance = 0.001
max_stimulus_volts = 12.0

[part]
number = "HB-220"
nominal_pos_volts = 15.0
nominal_neg_volts = -15.0
max_supply_span_volts = 36.0
cm_headroom_pos_volts = 2.5
cm_headroom_neg_volts = 2.5
cm_margin_volts = 0.5
current_limit_amps = 0.1

[[test]]
kind = "board_cmrr"
levels = [-8.0, 0.0, 8.0]
diff_levels = [-0.5, 0.0, 0.5]
nplc = 1.0
range_volts = 10.0
settle_volts = 0.0005

[[test]]
kind = "board_psrr_pos"
levels = [-2.0, 0.0, 2.0]
nplc = 1.0
settle_volts = 0.0005

[[unit]]
id = "B01"
channel = "201"
`

func TestRunBoardOnSimulatedBench(t *testing.T) {
	if testing.Short() {
		t.Skip("loopback run against the simulated bench")
	}
	b := simtest.Start(t, sim.Config{})
	p := b.Plan(t, simBoardPlan, "board-loopback.toml")
	clk := b.RunClock()
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	rig, closeRig, err := OpenRig(ctx, p, RigOptions{Sleep: clk.Sleep})
	if err != nil {
		t.Fatal(err)
	}
	defer closeRig()
	out, err := Run(ctx, p, rig, RunOptions{Clock: clk})
	if err != nil {
		t.Fatal(err)
	}
	checkSimBench(t, b.Bench, true)
	var diff, cm []journal.Reading
	for _, r := range out.Readings {
		switch {
		case r.Test == plan.TestBoardCMRR && r.Part == plan.PartDiff:
			diff = append(diff, r)
		case r.Test == plan.TestBoardCMRR && r.Part == plan.PartCM:
			cm = append(cm, r)
		}
	}
	if len(diff) != 6 || len(cm) != 6 || len(out.Readings) != 18 {
		t.Fatalf("%d diff, %d cm, %d readings", len(diff), len(cm), len(out.Readings))
	}
	var bt *sim.BoardTruth
	for _, u := range b.Truth() {
		if u.ID == "B01" {
			bt = u.Board
		}
	}
	if bt == nil {
		t.Fatal("no truth for B01")
	}
	// The differential sweep's slope against the read-back drive is the
	// board's gain A_d (truth) within 0.1 % (meter noise over ±0.5 V of
	// drive; the meter's gain spec is 35 ppm).
	readBack := func(rs []journal.Reading) []journal.Reading {
		out := append([]journal.Reading(nil), rs...)
		for i := range out {
			if !out[i].ReadBack {
				t.Fatalf("point %+v not read back", journal.KeyOf(out[i]))
			}
			out[i].SetVolts = out[i].ReadVolts
		}
		return out
	}
	g := fitSlope(readBack(diff))
	if math.Abs(g-bt.GainVPerV) > 1e-3*bt.GainVPerV {
		t.Errorf("differential gain %.5f, truth %.5f", g, bt.GainVPerV)
	}
	t.Logf("A_d %.5f against the read-back drive, %.5f against the set drive (truth %.5f); A_cm %.3g (truth %.3g)",
		g, fitSlope(diff), bt.GainVPerV, fitSlope(readBack(cm)), bt.AcmVPerV)
}
