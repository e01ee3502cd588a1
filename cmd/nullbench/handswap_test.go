package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullbench/instrument/sim"
	"nullbench/internal/simtest"
	"nullbench/procedure/fault"
	"nullbench/procedure/operator"
	"nullbench/procedure/plan"
)

// Units swapped by hand, end to end: a plan whose units have no switch
// channels runs through measure and finish on the simulated bench (its
// hand socket, instrument/sim/socket.go), with a scripted operator that
// plays the person at the bench: at each SwapUnit it takes the part out of
// the socket with bench.Remove and puts the next one in with bench.Insert.

// handSwapPlan is a hand-swap plan (no channels) for the given units on
// the bench: nulling loop (K = 1000), inputs driven in common mode, cmrr
// and psrr_pos, temperature mode none, and the supply-current window
// around the simulated part's 2 mA quiescent current (e2eDUT's [part]).
// The psrr_pos dwell is 8 die time constants (2 s), as the demo plan
// explains (cmd/nullbench/demo/lot.toml).
func handSwapPlan(bench *sim.Bench, ids ...string) string {
	var units strings.Builder
	for _, id := range ids {
		fmt.Fprintf(&units, "\n[[unit]]\nid = %q\nnotes = \"from tray A\"\n", id)
	}
	return fmt.Sprintf(`[campaign]
name     = "HX-4107 hand-swapped lot (test)"
operator = "test"
lot      = "E2E-HAND"

[fixture]
kind = "nulling_loop"
noise_gain = 1000.0
noise_gain_tolerance = 0.001
common_mode = "input_drive"
max_stimulus_volts = 12.0

[decision]
rule = "simple"

[limits]
cmrr = 90.0
psrr_pos = 80.0

[temperature]
mode = "none"
ambient_c = 25.0

[[test]]
kind = "cmrr"
levels = [-10.0, -5.0, 0.0, 5.0, 10.0]
nplc = 1.0
readings = 5
dwell_s = 2.0
settle_volts = 0.0002

[[test]]
kind = "psrr_pos"
levels = [-4.0, -2.0, 0.0, 2.0, 4.0]
nplc = 1.0
readings = 5
dwell_s = 16.0
settle_volts = 0.0002

`+simtest.PartHX4107+`cm_margin_volts = 0.5
current_limit_amps = 0.02
input_beyond_rail_volts = 0.3
supply_amps_min = 0.001
supply_amps_max = 0.004
%s
%s`, units.String(), bench.BenchSection())
}

// swapSeen is the bench as the scripted operator found it at one swap.
type swapSeen struct {
	next     string
	socket   string // the unit in the socket before the swap
	state    sim.SocketState
	maxVolts float64 // the largest output of any supply or source channel
	anyOn    bool    // some output switched on
}

// benchHands is a procedure.Operator that plays the person at the
// simulated bench. forgetAt (1-based swap number, 0 never) is the swap at
// which the person takes the old part out and forgets to put the next one
// in; typeID, if set, is the id the person reports instead of the planned
// one (after inserting that unit).
type benchHands struct {
	bench    *sim.Bench
	forgetAt int
	typeID   map[string]string
	seen     []swapSeen
}

func (h *benchHands) SwapUnit(_ context.Context, next plan.Unit) (string, error) {
	s := h.bench.Inspect()
	seen := swapSeen{next: next.ID, socket: s.Socket, state: h.bench.SocketState()}
	for _, c := range append(append([]sim.ChannelSnapshot(nil), s.Supply...), s.Source...) {
		seen.maxVolts = math.Max(seen.maxVolts, math.Abs(c.OutputVolts))
		seen.anyOn = seen.anyOn || c.On
	}
	h.seen = append(h.seen, seen)
	if s.Socket != "" {
		if err := h.bench.Remove(); err != nil {
			return "", err
		}
	}
	if len(h.seen) == h.forgetAt {
		return next.ID, nil // "done", says the person, with the socket empty
	}
	id := next.ID
	if typed, ok := h.typeID[next.ID]; ok {
		id = typed
	}
	if err := h.bench.Insert(id); err != nil {
		return "", err
	}
	return id, nil
}

func (h *benchHands) Temperature(context.Context, operator.TemperatureRequest) (float64, error) {
	return 0, errors.New("the hand-swap plans here have temperature mode none: no temperature to ask for")
}

// handSwapRun is one hand-swap campaign on a fresh simulated bench.
type handSwapRun struct {
	bench   *sim.Bench
	plan    *plan.Plan
	rec     campaignRecord
	err     error // from measure
	journal string
	out     string // output folder of finish
}

// runHandSwap starts a bench of the units (e2eDUT, on a shared virtual
// clock as runE2E does), writes handSwapPlan for them, and runs it through
// measure with the operator hands.
func runHandSwap(t *testing.T, units []e2eUnit, hands *benchHands) *handSwapRun {
	t.Helper()
	dir := t.TempDir()
	dut, err := sim.ParseDUT([]byte(e2eDUT(6607, units)), "handswap-dut.toml")
	if err != nil {
		t.Fatal(err)
	}
	ctx, sb := startVirtualBench(t, sim.Config{DUT: dut}, 2*time.Minute)
	bench := sb.Bench
	hands.bench = bench
	ids := make([]string, len(units))
	for i, u := range units {
		ids[i] = u.id
	}
	path := filepath.Join(dir, "handswap.toml")
	if err := os.WriteFile(path, []byte(handSwapPlan(bench, ids...)), 0o644); err != nil {
		t.Fatal(err)
	}
	p, err := plan.Load(path)
	if err != nil {
		t.Fatalf("plan: %v", err)
	}
	if why := operator.NeedsOperator(p); !strings.Contains(why, "by hand") {
		t.Fatalf("the plan is not a hand-swap plan: NeedsOperator says %q", why)
	}
	r := &handSwapRun{bench: bench, plan: p, journal: filepath.Join(dir, "out", "journal.jsonl"), out: filepath.Join(dir, "out")}
	// No terminal: the scripted operator stands in for the person.
	std := streams{In: strings.NewReader(""), Out: io.Discard, Err: io.Discard}
	r.rec, _, r.err = measure(ctx, std, measureOptions{Plan: p, JournalPath: r.journal,
		Clock: sb.RunClock(), Operator: hands})
	return r
}

// checkSafe checks the bench after a run: every output off or at 0 V (the
// runner's safe state), the socket dead, no unit damaged.
func (r *handSwapRun) checkSafe(t *testing.T) {
	t.Helper()
	s := r.bench.Inspect()
	for _, c := range append(append([]sim.ChannelSnapshot(nil), s.Supply...), s.Source...) {
		if c.On || math.Abs(c.OutputVolts) > 0.01 {
			t.Errorf("channel %d left on (%v) at %.3f V", c.Channel, c.On, c.OutputVolts)
		}
	}
	if st := r.bench.SocketState(); st.Live {
		t.Errorf("the socket is live after the run: %s", st.Contacts)
	}
	for _, u := range s.Units {
		if u.Damaged {
			t.Errorf("unit %s damaged: %s", u.ID, u.DamageReason)
		}
	}
}

// checkSwapsDead checks that every swap found the bench powered down: no
// output on, none above 10 mV (the supply's programming offset at 0 V is
// ≤ 5 mV, the low end of typical bench-supply specifications; common
// practice, no published source), the socket dead.
func checkSwapsDead(t *testing.T, seen []swapSeen) {
	t.Helper()
	for i, s := range seen {
		if s.anyOn || s.maxVolts > 0.01 || s.state.Live {
			t.Errorf("swap %d (to %s): outputs on %v, largest %.3f V, socket live %v (%s)", i+1, s.next, s.anyOn, s.maxVolts, s.state.Live, s.state.Contacts)
		}
	}
}

// handSwapLot: three units whose CMRRs lie 10 dB apart (100, 110,
// 120 dB), so a unit measured in another's place could not pass for it.
func handSwapLot() []e2eUnit {
	units := e2eLot(3, 100, 120)
	for i := range units {
		units[i].id = fmt.Sprintf("H%02d", i+1)
	}
	return units
}

// The whole hand-swap campaign: three swaps, each with the bench powered
// down and the socket dead, in the plan's order (the first finds the
// socket empty, each later one the unit before); each unit's cmrr and
// psrr_pos match its own truth within twice the stated expanded
// uncertainty (GUM, JCGM 100:2008, 6.2: U at 95 % coverage; 2U leaves room
// for the 5 % of honest misses in a test that must not flake), and lie
// nearer their own unit's truth than any other unit's. finish writes the
// workbook and the run passes its limits; nothing was damaged.
func TestHandSwapCampaign(t *testing.T) {
	units := handSwapLot()
	hands := &benchHands{}
	r := runHandSwap(t, units, hands)
	if r.err != nil {
		t.Fatalf("run: %v", r.err)
	}
	if len(hands.seen) != len(units) {
		t.Fatalf("%d swaps, want %d", len(hands.seen), len(units))
	}
	for i, s := range hands.seen {
		before := ""
		if i > 0 {
			before = units[i-1].id
		}
		if s.next != units[i].id || s.socket != before {
			t.Errorf("swap %d: to %s with %q in the socket, want to %s with %q", i+1, s.next, s.socket, units[i].id, before)
		}
	}
	checkSwapsDead(t, hands.seen)
	r.checkSafe(t)
	data, err := os.ReadFile(r.journal)
	if err != nil {
		t.Fatal(err)
	}
	if n := bytes.Count(data, []byte(`swapped in by hand`)); n != len(units) {
		t.Errorf("the journal records %d swaps by hand, want %d", n, len(units))
	}

	res, err := analyse(r.plan, r.rec.Readings)
	if err != nil {
		t.Fatal(err)
	}
	truth := map[string]sim.UnitTruth{}
	for _, u := range r.bench.Truth() {
		truth[u.ID] = u
	}
	checks := compareWithTruth(t, &e2eRun{results: res, truth: truth})
	if want := 2 * len(units); len(checks) != want {
		t.Fatalf("compared %d results with the truth, want %d (cmrr and psrr_pos per unit); problems %v", len(checks), want, res.Problems)
	}
	logCoverage(t, checks)
	for _, rt := range res.Ratios {
		tr, ok := truth[rt.Unit]
		if !ok {
			continue
		}
		_, kTrue, ok := e2eTruthOf(tr, rt.Name)
		if !ok {
			continue
		}
		rj := rt.Rejection
		if !rj.Resolved || !(rj.ExpandedUUVPerV > 0) {
			t.Errorf("%s %s: resolved %v, U %g µV/V", rt.Unit, rt.Name, rj.Resolved, rj.ExpandedUUVPerV)
			continue
		}
		if d := math.Abs(rj.CoefficientUVPerV - kTrue); d > 2*rj.ExpandedUUVPerV {
			t.Errorf("%s %s: %+.4f µV/V, truth %+.4f, |Δ| %.4f > 2U = %.4f", rt.Unit, rt.Name, rj.CoefficientUVPerV, kTrue, d, 2*rj.ExpandedUUVPerV)
		}
		for _, other := range units {
			if other.id == rt.Unit || rt.Name != plan.TestCMRR {
				continue
			}
			_, kOther, _ := e2eTruthOf(truth[other.id], rt.Name)
			if math.Abs(rj.CoefficientUVPerV-kOther) <= math.Abs(rj.CoefficientUVPerV-kTrue) {
				t.Errorf("%s cmrr %+.4f µV/V is nearer %s's truth %+.4f than its own %+.4f", rt.Unit, rj.CoefficientUVPerV, other.id, kOther, kTrue)
			}
		}
	}

	var errBuf bytes.Buffer
	err = finish(streams{Out: io.Discard, Err: &errBuf}, outputOptions{Out: r.out, NoCharts: true}, nil, r.rec)
	if err != nil {
		t.Fatalf("finish: %v\n%s", err, errBuf.String())
	}
	results, err := os.ReadFile(filepath.Join(r.out, "results.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	if lines := cliJSONLines(t, string(results)); len(lines) != 2*len(units) {
		t.Errorf("results.jsonl has %d results, want %d", len(lines), 2*len(units))
	}
}

// A person who takes the first part out and forgets to put the second in:
// the run stops at the second unit's power-up with the supply-current
// check's question, the bench in its safe state and the socket dead; the
// first unit's readings are kept.
func TestHandSwapForgottenPart(t *testing.T) {
	units := handSwapLot()[:2]
	hands := &benchHands{forgetAt: 2}
	r := runHandSwap(t, units, hands)
	if r.err == nil {
		t.Fatal("the run went on with an empty socket")
	}
	msg := r.err.Error()
	t.Logf("the run says: %s", msg)
	for _, want := range []string{"unit " + units[1].id, "while powering up", "below part.supply_amps_min", "is the part in the socket", "the bench is in its safe state"} {
		if !strings.Contains(msg, want) {
			t.Errorf("the error does not say %q:\n%s", want, msg)
		}
	}
	var re *fault.RunError
	if !errors.As(r.err, &re) || re.SafeState != nil {
		t.Errorf("want a RunError with the safe state reached, got %#v", r.err)
	}
	if got := r.bench.Socket(); got != "" {
		t.Errorf("the socket holds %q, want it empty", got)
	}
	checkSwapsDead(t, hands.seen)
	r.checkSafe(t)
	var first, second int
	for _, x := range r.rec.Readings {
		switch x.Unit {
		case units[0].id:
			first++
		case units[1].id:
			second++
		}
	}
	if first == 0 || second != 0 {
		t.Errorf("readings: %d of %s, %d of %s; want the first unit's only", first, units[0].id, second, units[1].id)
	}
}

// The person reports an id other than the planned one (and put that unit
// in): the runner refuses before powering up, saying which unit it
// expects, and the bench stays safe.
func TestHandSwapWrongID(t *testing.T) {
	units := handSwapLot()
	hands := &benchHands{typeID: map[string]string{units[1].id: units[2].id}}
	r := runHandSwap(t, units, hands)
	if r.err == nil {
		t.Fatal("the run accepted another unit than planned")
	}
	msg := r.err.Error()
	t.Logf("the run says: %s", msg)
	want := fmt.Sprintf("the operator reports unit %q in the socket but the plan expects %q next", units[2].id, units[1].id)
	for _, w := range []string{want, "waiting for the operator to swap the unit", "the bench is in its safe state"} {
		if !strings.Contains(msg, w) {
			t.Errorf("the error does not say %q:\n%s", w, msg)
		}
	}
	if n := len(hands.seen); n != 2 {
		t.Errorf("%d swaps, want 2 (the run stops at the second)", n)
	}
	for _, x := range r.rec.Readings {
		if x.Unit != units[0].id {
			t.Errorf("a reading of %s after the refused swap", x.Unit)
			break
		}
	}
	checkSwapsDead(t, hands.seen)
	r.checkSafe(t)
}
