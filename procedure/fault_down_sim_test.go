package procedure

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"
	"time"

	"nullbench/instrument/sim"
	"nullbench/procedure/fault"
	"nullbench/procedure/plan"
)

// simState is the bench state the simulated bench was programmed to after
// a message (its history), in the plan's terms: an output that is off
// counts as 0 V.
func simState(e sim.Sent) plan.BenchState {
	v := func(o sim.OutputState, sign float64) float64 {
		if !o.On {
			return 0
		}
		return sign * o.ProgrammedVolts
	}
	return plan.BenchState{PosVolts: v(e.Supply[0], 1), NegVolts: v(e.Supply[1], -1),
		CMVolts: v(e.Source[0], 1), DiffVolts: v(e.Source[1], 1), RefVolts: v(e.Source[2], 1)}
}

// cmMargin is the inputs' common-mode margin in s: the smaller of V+ −
// input high − (cm_headroom_pos + cm_margin) and input low − V− −
// (cm_headroom_neg + cm_margin), the part's common-mode input range as the
// plan states it; best is the most the same span could leave (rails
// centred on the inputs).
func cmMargin(p *plan.Plan, s plan.BenchState) (margin, best float64) {
	t := plan.TerminalsOf(p, s)
	needP := p.Part.CMHeadroomPosVolts + p.Part.CMMarginVolts
	needN := p.Part.CMHeadroomNegVolts + p.Part.CMMarginVolts
	margin = math.Min(s.PosVolts-t.InHighVolts-needP, t.InLowVolts-s.NegVolts-needN)
	best = ((s.PosVolts - s.NegVolts) - (t.InHighVolts - t.InLowVolts) - needP - needN) / 2
	return margin, best
}

// checkSwitchOff replays the simulated bench's history from entry from
// (the state the switch-off starts in) to the end and checks every step:
// the span never grows nor exceeds part.max_supply_span_volts, no input
// goes beyond a rail by more than part.input_beyond_rail_volts, and the
// common-mode margin never falls below the lesser of where it started and
// the most the span allows, by more than half a ramp step (one rail moves
// per step). It returns the number of supply steps seen and which rail
// moved first.
func checkSwitchOff(t *testing.T, p *plan.Plan, hist []sim.Sent, from int) (steps int, first string) {
	t.Helper()
	s0 := simState(hist[from])
	start, _ := cmMargin(p, s0)
	half := p.Safety.RampStepVolts / 2
	if half <= 0 {
		half = 0.5
	}
	prev := s0
	span := s0.PosVolts - s0.NegVolts
	worst := math.Inf(1)
	for _, e := range hist[from+1:] {
		s := simState(e)
		if s == prev {
			continue
		}
		if s.PosVolts != prev.PosVolts || s.NegVolts != prev.NegVolts {
			steps++
			if first == "" {
				if s.PosVolts != prev.PosVolts {
					first = plan.RoleSupplyPos
				} else {
					first = plan.RoleSupplyNeg
				}
			}
		}
		sp := s.PosVolts - s.NegVolts
		if sp > span+1e-9 || sp > p.Part.MaxSupplySpanVolts {
			t.Errorf("after %q: span %g V (was %g V, rating %g V)", e.Line, sp, span, p.Part.MaxSupplySpanVolts)
		}
		span = sp
		tm := plan.TerminalsOf(p, s)
		if tm.InHighVolts > s.PosVolts+p.Part.InputBeyondRailVolts || tm.InLowVolts < s.NegVolts-p.Part.InputBeyondRailVolts {
			t.Errorf("after %q: inputs %g..%g V beyond the rails %g/%g V", e.Line, tm.InLowVolts, tm.InHighVolts, s.PosVolts, s.NegVolts)
		}
		m, best := cmMargin(p, s)
		worst = math.Min(worst, m-math.Min(start, best))
		if m < math.Min(start, best)-half-1e-9 {
			t.Errorf("after %q (V+ %g V, V- %g V): common-mode margin %.3g V, want at least %.3g V (start %.3g V, best at this span %.3g V, less half a step)",
				e.Line, s.PosVolts, s.NegVolts, m, math.Min(start, best)-half, start, best)
		}
		prev = s
	}
	t.Logf("switch-off from V+ %g V, V- %g V: %d rail steps, %s first, worst margin against the bound %+.3g V", s0.PosVolts, s0.NegVolts, steps, first, worst)
	if prev.PosVolts != 0 || prev.NegVolts != 0 {
		t.Errorf("the switch-off ends at V+ %g V, V- %g V", prev.PosVolts, prev.NegVolts)
	}
	return steps, first
}

// After a fault at a supply-shifted common-mode level (V+ +20 V, V- -10 V
// around inputs at ground: the meter stops answering while the output
// settles at the next level), the safe state ramps the rails down taking
// turns, the far rail first, and every step the simulated bench was sent
// keeps the part's common-mode and span margins (its history).
func TestFaultSwitchOffKeepsCommonModeMarginOnSim(t *testing.T) {
	su := startSim(t, plan.CMBySupplyShift, false, 500*time.Millisecond)
	armed := false
	hook := progressHook{fn: func(i PointInfo) {
		if armed || i.Unit != "U01" || i.Test != plan.TestCMRR || i.LevelVolts != 5 {
			return
		}
		armed = true
		if err := su.bench.InjectFault(sim.NameDMM, sim.Fault{Kind: sim.FaultNoReply, Match: "READ?"}); err != nil {
			t.Error(err)
		}
	}}
	_, err := Run(context.Background(), su.plan, su.rig, RunOptions{Clock: su.clock, Progress: hook,
		Timing: Timing{SafeCallTimeout: time.Second, SafeStateTimeout: 20 * time.Second}})
	var re *fault.RunError
	if !errors.As(err, &re) || re.SafeState != nil {
		t.Fatalf("want a run stopped with the safe state reached: %v", err)
	}
	hist := su.bench.History()
	// The fault: the last READ? the meter got; the switch-off follows.
	at := -1
	for i, e := range hist {
		if e.Instrument == sim.NameDMM && strings.Contains(e.Line, "READ?") {
			at = i
		}
	}
	if at < 0 {
		t.Fatal("no READ? in the history")
	}
	s0 := simState(hist[at])
	if math.Abs(s0.PosVolts+s0.NegVolts) < 10 {
		t.Fatalf("the fault came at V+ %g V, V- %g V; the test wants a level shifted by 5 V or more", s0.PosVolts, s0.NegVolts)
	}
	far := plan.RoleSupplyPos
	if -s0.NegVolts > s0.PosVolts {
		far = plan.RoleSupplyNeg
	}
	steps, first := checkSwitchOff(t, su.plan, hist, at)
	if first != far {
		t.Errorf("%s moved first; from V+ %g V, V- %g V the far rail (%s) must come in first", first, s0.PosVolts, s0.NegVolts, far)
	}
	if want := int(s0.PosVolts - s0.NegVolts); steps < want {
		t.Errorf("%d rail steps from a %g V span in 1 V steps, want at least %d", steps, s0.PosVolts-s0.NegVolts, want)
	}
	checkSimBench(t, su.bench, true)
}

// "off" (and the switch-off at the start of a run or resume) from rails
// left shifted by hand reads them back and ramps them down the same way.
func TestOffKeepsCommonModeMarginOnSim(t *testing.T) {
	su := startSim(t, plan.CMBySupplyShift, false, 500*time.Millisecond)
	for _, a := range []struct {
		role string
		v    float64
	}{{plan.RoleSupplyPos, 5}, {plan.RoleSupplyNeg, -25}} {
		s := su.rig.SupplyPos
		if a.role == plan.RoleSupplyNeg {
			s = su.rig.SupplyNeg
		}
		ctx := context.Background()
		if err := s.SetVolts(ctx, a.v); err != nil {
			t.Fatal(err)
		}
		if err := s.SetOutput(ctx, true); err != nil {
			t.Fatal(err)
		}
	}
	su.bench.Clock().(*sim.ManualClock).Advance(time.Second)
	from := len(su.bench.History()) - 1
	if s := simState(su.bench.History()[from]); s.PosVolts != 5 || s.NegVolts != -25 {
		t.Fatalf("left at %+v", s)
	}
	if _, err := Off(context.Background(), su.plan, su.rig, OffOptions{Clock: su.clock}); err != nil {
		t.Fatal(err)
	}
	_, first := checkSwitchOff(t, su.plan, su.bench.History(), from)
	if first != plan.RoleSupplyNeg {
		t.Errorf("%s moved first; from V+ +5 V, V- -25 V the far rail (V-) must come in first", first)
	}
	checkSimBench(t, su.bench, true)
}
