package safety

import (
	"math"
	"strings"
	"testing"

	"nullbench/procedure/plan"
)

// replayPower follows a list of actions and reports every state it passes
// through, and which outputs are on after each action.
type powerTrace struct {
	states []plan.BenchState
	on     []map[string]bool
}

func replayPower(from plan.BenchState, on map[string]bool, actions []PowerAction) powerTrace {
	var tr powerTrace
	s := from
	cur := map[string]bool{}
	for k, v := range on {
		cur[k] = v
	}
	for _, a := range actions {
		switch a.Op {
		case PowerOutputOn:
			cur[a.Role] = true
		case PowerOutputOff:
			cur[a.Role] = false
		}
		s = ApplyAction(s, a)
		snap := map[string]bool{}
		for k, v := range cur {
			snap[k] = v
		}
		tr.states = append(tr.states, s)
		tr.on = append(tr.on, snap)
	}
	return tr
}

// checkSteps verifies that no supply or source moves by more than step in
// one action.
func checkSteps(t *testing.T, from plan.BenchState, actions []PowerAction, step float64) {
	t.Helper()
	s := from
	for i, a := range actions {
		if a.Op != PowerSetVolts {
			continue
		}
		var prev float64
		switch a.Role {
		case plan.RoleSupplyPos:
			prev = s.PosVolts
		case plan.RoleSupplyNeg:
			prev = s.NegVolts
		default:
			prev = SourceVolts(s, a.Role)
		}
		if d := math.Abs(a.Volts - prev); d > step+1e-12 {
			t.Errorf("action %d (%v) moves %g V, more than the %g V ramp step", i+1, a, d, step)
		}
		s = ApplyAction(s, a)
	}
}

// TestPowerUpOrder: current limits and voltages are set with the outputs
// off, the supplies come on before any source, the rails ramp in steps of
// at most ramp_step_volts, and the inputs are never driven while a rail is
// off (common practice, no published source; JEDEC JESD78 latch-up).
func TestPowerUpOrder(t *testing.T) {
	for _, name := range []string{"lot", "board", "noise_gain"} {
		p := loadExamplePlan(t, name)
		up := PowerUpOrder(p)
		tr := replayPower(plan.BenchState{}, nil, up)
		firstSupplyOn, firstSourceOn, lastLimit := -1, -1, -1
		limits := map[string]float64{}
		for i, a := range up {
			isSupply := a.Role == plan.RoleSupplyPos || a.Role == plan.RoleSupplyNeg
			switch {
			case a.Op == PowerCurrentLimit:
				lastLimit = i
				limits[a.Role] = a.Amps
				if tr.on[i][a.Role] {
					t.Errorf("%s: current limit set with %s on", name, a.Role)
				}
			case a.Op == PowerOutputOn && isSupply && firstSupplyOn < 0:
				firstSupplyOn = i
			case a.Op == PowerOutputOn && !isSupply && firstSourceOn < 0:
				firstSourceOn = i
			case a.Op == PowerSetVolts && !isSupply && a.Volts != 0:
				t.Errorf("%s: power-up drives %s to %g V", name, a.Role, a.Volts)
			}
			if (tr.on[i][plan.RoleSourceCM] || tr.on[i][plan.RoleSourceDiff] || tr.on[i][plan.RoleSourceRef]) &&
				(!tr.on[i][plan.RoleSupplyPos] || !tr.on[i][plan.RoleSupplyNeg] || tr.states[i] != plan.NominalState(p)) {
				t.Errorf("%s: a source is on before the rails are up (action %d)", name, i+1)
			}
		}
		if limits[plan.RoleSupplyPos] != p.Part.CurrentLimitAmps || limits[plan.RoleSupplyNeg] != p.Part.CurrentLimitAmps {
			t.Errorf("%s: current limits %v, want %g A", name, limits, p.Part.CurrentLimitAmps)
		}
		if !(lastLimit < firstSupplyOn && firstSupplyOn < firstSourceOn) {
			t.Errorf("%s: order limit %d, supply on %d, source on %d", name, lastLimit, firstSupplyOn, firstSourceOn)
		}
		if got := tr.states[len(tr.states)-1]; got != plan.NominalState(p) {
			t.Errorf("%s: ends at %+v", name, got)
		}
		checkSteps(t, plan.BenchState{}, up, p.Safety.RampStepVolts)
	}
}

func TestPowerDownOrder(t *testing.T) {
	p := loadExamplePlan(t, "board")
	// From a board's differential step: the drive comes off first.
	from := plan.StateAt(p, &p.Tests[0], plan.PartCM, 8)
	from.DiffVolts = 0.5
	down := PowerDownFrom(p, from)
	on := map[string]bool{plan.RoleSupplyPos: true, plan.RoleSupplyNeg: true, plan.RoleSourceCM: true, plan.RoleSourceDiff: true}
	tr := replayPower(from, on, down)
	for i, a := range down {
		isSupply := a.Role == plan.RoleSupplyPos || a.Role == plan.RoleSupplyNeg
		if isSupply && (tr.on[i][plan.RoleSourceCM] || tr.on[i][plan.RoleSourceDiff]) {
			t.Errorf("action %d (%v) moves a rail while a source is still on", i+1, a)
		}
	}
	end := tr.states[len(tr.states)-1]
	if end != (plan.BenchState{}) {
		t.Errorf("ends at %+v, want all 0 V", end)
	}
	last := tr.on[len(tr.on)-1]
	for r, v := range last {
		if v {
			t.Errorf("%s still on", r)
		}
	}
	if down[len(down)-1].Op != PowerOutputOff || !strings.HasPrefix(down[len(down)-1].Role, "supply") {
		t.Errorf("last action %v, want a supply off", down[len(down)-1])
	}
	checkSteps(t, from, down, p.Safety.RampStepVolts)
	// Span shrinks monotonically while the rails come down.
	prevSpan := from.PosVolts - from.NegVolts
	for _, s := range tr.states {
		if span := s.PosVolts - s.NegVolts; span > prevSpan+1e-12 {
			t.Errorf("span grew to %g during power-down", span)
		} else {
			prevSpan = span
		}
	}
	if len(PowerDownOrder(p)) == 0 {
		t.Error("empty power-down")
	}
}

// TestTransitionShrinkFirst: between any two steps every move is at most
// the ramp step, each rail moves monotonically, the span never exceeds the
// larger of its start and end values, and when both rails shift up V-
// moves first (derived from the span rating: shifting up, raise V- first;
// no published source).
func TestTransitionShrinkFirst(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	p.Safety.RampStepVolts = 0.7 // not a divisor of the distances: the last step must land exactly
	var all []plan.BenchState
	for _, s := range plan.StepTable(p) {
		all = append(all, s.State)
	}
	all = append(all, plan.NominalState(p))
	for i, from := range all {
		for j, to := range all {
			if i == j {
				continue
			}
			acts, err := Transition(p, from, to)
			if err != nil {
				t.Fatalf("%+v -> %+v: %v", from, to, err)
			}
			checkSteps(t, from, acts, 0.7)
			tr := replayPower(from, nil, acts)
			maxSpan := math.Max(from.PosVolts-from.NegVolts, to.PosVolts-to.NegVolts)
			for _, s := range tr.states {
				if s.PosVolts-s.NegVolts > maxSpan+1e-9 {
					t.Fatalf("%+v -> %+v: span %g above %g", from, to, s.PosVolts-s.NegVolts, maxSpan)
				}
				if !between(s.PosVolts, from.PosVolts, to.PosVolts) || !between(s.NegVolts, from.NegVolts, to.NegVolts) {
					t.Fatalf("%+v -> %+v: a rail left its path at %+v", from, to, s)
				}
			}
			if len(acts) > 0 && tr.states[len(tr.states)-1] != to {
				t.Fatalf("%+v -> %+v: ends at %+v", from, to, tr.states[len(tr.states)-1])
			}
			firstRail := ""
			for _, a := range acts {
				if a.Role == plan.RoleSupplyPos || a.Role == plan.RoleSupplyNeg {
					firstRail = a.Role
					break
				}
			}
			if to.PosVolts > from.PosVolts && to.NegVolts > from.NegVolts && firstRail != plan.RoleSupplyNeg {
				t.Fatalf("shifting up from %+v: first rail %s, want V- first", from, firstRail)
			}
			if to.PosVolts < from.PosVolts && to.NegVolts < from.NegVolts && firstRail != plan.RoleSupplyPos {
				t.Fatalf("shifting down from %+v: first rail %s, want V+ first", from, firstRail)
			}
		}
	}
}

func between(v, a, b float64) bool {
	lo, hi := math.Min(a, b), math.Max(a, b)
	return v >= lo-1e-9 && v <= hi+1e-9
}

// TestTransitionSourcesAroundRails: a source moving towards 0 V moves
// before the rails, one moving away after them.
func TestTransitionSourcesAroundRails(t *testing.T) {
	p := loadExamplePlan(t, "board")
	cm := plan.StateAt(p, &p.Tests[0], plan.PartCM, 8)
	psrr := plan.StateAt(p, &p.Tests[1], "", 2)
	acts, err := Transition(p, cm, psrr)
	if err != nil {
		t.Fatal(err)
	}
	if acts[0].Role != plan.RoleSourceCM || acts[len(acts)-1].Role != plan.RoleSupplyPos {
		t.Errorf("cm -> psrr: %s", FormatActions(acts))
	}
	acts, err = Transition(p, psrr, cm)
	if err != nil {
		t.Fatal(err)
	}
	if acts[0].Role != plan.RoleSupplyPos || acts[len(acts)-1].Role != plan.RoleSourceCM {
		t.Errorf("psrr -> cm: %s", FormatActions(acts))
	}
}

// TestTransitionRefusesUnsafeTarget: a target beyond the absolute maxima is
// refused before any action is given.
func TestTransitionRefusesUnsafeTarget(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	to := plan.NominalState(p)
	to.PosVolts = 35 // span 50 V > 36 V
	acts, err := Transition(p, plan.NominalState(p), to)
	if err == nil || acts != nil || !strings.Contains(err.Error(), "exceeds the part's absolute maximum 36 V") {
		t.Fatalf("got %v, %v", acts, err)
	}
	to = plan.NominalState(p)
	to.RefVolts = 13 // above max_stimulus_volts 12
	if _, err := Transition(p, plan.NominalState(p), to); err == nil || !strings.Contains(err.Error(), "source_ref") {
		t.Fatalf("source above max stimulus: %v", err)
	}
}

func TestRampPanicsOnUncheckedValues(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("no panic for an infinite ramp")
		}
	}()
	rampOne(plan.RoleSourceCM, 0, math.Inf(1), 1)
}

func TestPowerActionString(t *testing.T) {
	cases := map[string]PowerAction{
		"supply_neg set-volts -15 V":      {Op: PowerSetVolts, Role: plan.RoleSupplyNeg, Volts: -15},
		"supply_pos current-limit 0.05 A": {Op: PowerCurrentLimit, Role: plan.RoleSupplyPos, Amps: 0.05},
		"source_cm output-off":            {Op: PowerOutputOff, Role: plan.RoleSourceCM},
	}
	for want, a := range cases {
		if got := a.String(); got != want {
			t.Errorf("%q, want %q", got, want)
		}
	}
}
