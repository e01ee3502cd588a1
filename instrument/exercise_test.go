package instrument_test

import (
	"context"
	"strconv"
	"strings"
	"testing"

	"nullbench/instrument"
	"nullbench/instrument/sim"
)

// TestExerciseNeverPowers runs the dry exercise of every role's built-in
// profile against the simulated bench and then asks the simulation itself
// (not the instruments over SCPI) whether any supply or source output was
// ever on or any relay ever closed. The rule checked is the tool's own
// safety rule (probe must not energise a part); common practice, no
// published source.
func TestExerciseNeverPowers(t *testing.T) {
	fb := startFreqBench(t, sim.Config{})
	ctx := context.Background()
	roles := map[string]bool{}
	for _, ep := range fb.b.Endpoints() {
		p, err := instrument.ResolveProfile(ep.Profile)
		if err != nil {
			t.Fatal(err)
		}
		var o instrument.ExerciseOptions
		if ep.Role == "switch" {
			o.Channel = strconv.Itoa(sim.ThroughChannel)
		}
		r, err := instrument.ExerciseAt(ctx, ep.Address, p, o)
		if err != nil {
			t.Fatalf("%s: %v\n%s", ep.Name, err, r)
		}
		if testing.Verbose() {
			t.Log(r)
		}
		if len(r.Steps) == 0 {
			t.Errorf("%s: nothing exercised", ep.Name)
		}
		if rej := r.Rejected(); len(rej) > 0 {
			t.Errorf("%s: the simulated instrument rejected its own built-in profile's %v:\n%s", ep.Name, rej, r)
		}
		roles[ep.Role] = true
	}
	for _, want := range []string{"meter", "supply", "source", "switch", "chamber", "generator", "digitizer", "ac_meter"} {
		if !roles[want] {
			t.Errorf("no %s on the simulated bench to exercise", want)
		}
	}
	snap := fb.b.Inspect()
	for _, c := range append(snap.Supply, snap.Source...) {
		if c.EverOn || c.On {
			t.Errorf("an output (channel %d) was turned on during the exercise: %+v", c.Channel, c)
		}
	}
	if len(snap.EverClosed) > 0 {
		t.Errorf("relays %v were closed during the exercise", snap.EverClosed)
	}
	if len(snap.GeneratorEverOn) == 0 {
		t.Error("no generator outputs in the snapshot")
	}
	for i, on := range snap.GeneratorEverOn {
		if on {
			t.Errorf("generator output %d was turned on during the exercise", i+1)
		}
	}
}

// TestExerciseInspectionSeesOutputs shows the inspection above can fail:
// an output switched on and a relay closed on purpose are both seen.
func TestExerciseInspectionSeesOutputs(t *testing.T) {
	fb := startFreqBench(t, sim.Config{})
	ctx := context.Background()
	for _, cmd := range []string{"INST:NSEL 1", "OUTP ON", "OUTP OFF"} {
		if err := fb.ins[sim.NameSupply].Session.Write(ctx, cmd); err != nil {
			t.Fatal(err)
		}
	}
	for _, cmd := range []string{"OUTP2 ON", "OUTP2 OFF"} {
		if err := fb.ins[sim.NameGen].Session.Write(ctx, cmd); err != nil {
			t.Fatal(err)
		}
	}
	if err := fb.ins[sim.NameSwitch].Session.Write(ctx, "ROUT:CLOS (@101)"); err != nil {
		t.Fatal(err)
	}
	if err := fb.ins[sim.NameSwitch].Session.Write(ctx, "ROUT:OPEN:ALL"); err != nil {
		t.Fatal(err)
	}
	snap := fb.b.Inspect()
	if !snap.Supply[0].EverOn || snap.Supply[0].On {
		t.Errorf("supply channel 1 after ON then OFF: %+v", snap.Supply[0])
	}
	if g := snap.GeneratorEverOn; len(g) != 3 || g[0] || !g[1] || g[2] {
		t.Errorf("generator outputs ever on after OUTP2 ON then OFF: %v", g)
	}
	if len(snap.EverClosed) != 1 || snap.EverClosed[0] != 101 || len(snap.Closed) != 0 {
		t.Errorf("relays after close and open-all: ever %v, now %v", snap.EverClosed, snap.Closed)
	}
}

// TestExerciseRejectsBadTemplate: a template the instrument does not know
// is reported as rejected, with the error-queue entry the instrument gave
// (SCPI-99 §21.8.9: -113 "Undefined header" for an unknown header).
func TestExerciseRejectsBadTemplate(t *testing.T) {
	fb := startFreqBench(t, sim.Config{})
	ctx := context.Background()
	p, err := instrument.ResolveProfile("dmm")
	if err != nil {
		t.Fatal(err)
	}
	bad := *p
	m := *p.Meter
	m.Configure = "CONF:VOLT:DCX {range}"
	bad.Meter = &m
	var addr string
	for _, ep := range fb.b.Endpoints() {
		if ep.Role == "meter" {
			addr = ep.Address
		}
	}
	r, err := instrument.ExerciseAt(ctx, addr, &bad, instrument.ExerciseOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if rej := r.Rejected(); len(rej) != 1 || rej[0] != "meter.configure" {
		t.Fatalf("rejected %v, want [meter.configure]:\n%s", rej, r)
	}
	text := r.String()
	for _, want := range []string{"CONF:VOLT:DCX 10", "error -113", "rejected:  meter.configure"} {
		if !strings.Contains(text, want) {
			t.Errorf("report lacks %q:\n%s", want, text)
		}
	}
	checkGolden(t, "exercise_bad_template.golden", text)
}

// TestExerciseSupplyGolden pins the text of a supply's and a switch's
// exercise.
func TestExerciseSupplyGolden(t *testing.T) {
	fb := startFreqBench(t, sim.Config{})
	for _, ep := range fb.b.Endpoints() {
		if ep.Role != "supply" && ep.Role != "switch" {
			continue
		}
		p, err := instrument.ResolveProfile(ep.Profile)
		if err != nil {
			t.Fatal(err)
		}
		var o instrument.ExerciseOptions
		if ep.Role == "switch" {
			o.Channel = strconv.Itoa(sim.ThroughChannel)
		}
		r, err := instrument.ExerciseAt(context.Background(), ep.Address, p, o)
		if err != nil {
			t.Fatal(err)
		}
		checkGolden(t, "exercise_"+ep.Role+".golden", r.String())
	}
}

// TestExerciseSwitchesOutputsOff: outputs found on are switched off, on
// every channel the profile lists, not only the one exercised.
func TestExerciseSwitchesOutputsOff(t *testing.T) {
	fb := startFreqBench(t, sim.Config{})
	ctx := context.Background()
	for _, cmd := range []string{"INST:NSEL 2", "OUTP ON"} {
		if err := fb.ins[sim.NameSupply].Session.Write(ctx, cmd); err != nil {
			t.Fatal(err)
		}
	}
	if s := fb.b.Inspect().Supply; !s[1].On {
		t.Fatalf("supply channel 2 not on before the exercise: %+v", s[1])
	}
	for _, ep := range fb.b.Endpoints() {
		if ep.Role != "supply" {
			continue
		}
		p, err := instrument.ResolveProfile(ep.Profile)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := instrument.ExerciseAt(ctx, ep.Address, p, instrument.ExerciseOptions{}); err != nil {
			t.Fatal(err)
		}
	}
	for _, c := range fb.b.Inspect().Supply {
		if c.On || c.ProgrammedVolts != 0 {
			t.Errorf("supply channel %d after the exercise: %+v", c.Channel, c)
		}
	}
}
