package procedure

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"testing"

	"nullbench/procedure/fault"
	"nullbench/procedure/plan"
)

// A bench left on (supplies at their rails, the common-mode source at
// +5 V, the switch closed on a unit) is brought to the safe state: sources
// ramped and off before the supplies move, every step within the ramp
// step (the fake records a violation otherwise, and one for an input left
// beyond a rail), switch open. Nothing is measured.
func TestOffBringsALiveBenchToItsSafeState(t *testing.T) {
	p := testPlan()
	fb := newFakeBench(p)
	fb.out[plan.RoleSupplyPos] = &fakeOutput{volts: p.Part.NominalPosVolts, on: true}
	fb.out[plan.RoleSupplyNeg] = &fakeOutput{volts: p.Part.NominalNegVolts, on: true}
	fb.out[plan.RoleSourceCM] = &fakeOutput{volts: 5, on: true}
	fb.closed["101"] = true
	rep, err := Off(context.Background(), p, fb.rig(), OffOptions{Clock: fb.clk})
	if err != nil {
		t.Fatal(err)
	}
	noViolations(t, fb)
	for role, o := range fb.out {
		if o.on || o.volts != 0 && !isSourceRole(role) {
			t.Errorf("%s left at %g V, on %v", role, o.volts, o.on)
		}
	}
	if len(fb.closed) != 0 {
		for ch, c := range fb.closed {
			if c {
				t.Errorf("switch channel %s still closed", ch)
			}
		}
	}
	lastSourceOff, firstSupplyMove := -1, -1
	for i, c := range fb.callsSnapshot() {
		switch {
		case c.Op == "read-n" || c.Op == "read":
			t.Fatalf("off measured: %v", c)
		case isSourceRole(c.Role) && c.Op == "output" && !c.On:
			lastSourceOff = i
		case (c.Role == plan.RoleSupplyPos || c.Role == plan.RoleSupplyNeg) && (c.Op == "set-volts" || c.Op == "output") && firstSupplyMove < 0:
			firstSupplyMove = i
		}
	}
	if lastSourceOff < 0 || firstSupplyMove < 0 || lastSourceOff > firstSupplyMove {
		t.Errorf("sources off at call %d, supplies first moved at call %d: sources must be off first", lastSourceOff, firstSupplyMove)
	}
	if !strings.Contains(strings.Join(rep.Actions, "\n"), "source_cm: ramped from +5 V to 0 V") {
		t.Errorf("actions:\n%s", strings.Join(rep.Actions, "\n"))
	}
}

// A failing supply does not stop the others from reaching their safe state.
func TestOffCarriesOnPastAFailingInstrument(t *testing.T) {
	p := testPlan()
	fb := newFakeBench(p)
	fb.out[plan.RoleSupplyPos] = &fakeOutput{volts: p.Part.NominalPosVolts, on: true}
	fb.out[plan.RoleSupplyNeg] = &fakeOutput{volts: p.Part.NominalNegVolts, on: true}
	fb.fault = func(c fakeCall) error {
		if c.Role == plan.RoleSupplyPos {
			return errLost
		}
		return nil
	}
	_, err := Off(context.Background(), p, fb.rig(), OffOptions{Clock: fb.clk})
	if err == nil || !errors.Is(err, errLost) || !strings.Contains(err.Error(), "supply_pos") {
		t.Fatalf("err %v", err)
	}
	if fb.out[plan.RoleSupplyNeg].on {
		t.Error("the negative supply was left on because the positive one failed")
	}
}

// Off says SAFE STATE NOT REACHED only when an output may still be on: a
// supply that cannot be switched off is a hazard; a switch that cannot be
// opened, with every output off, is said as it is.
func TestOffSaysNotReachedOnlyForAHazard(t *testing.T) {
	for _, tc := range []struct {
		name   string
		fail   func(c fakeCall) bool
		hazard bool
	}{
		{"supply cannot be switched off", func(c fakeCall) bool { return c.Role == plan.RoleSupplyPos && c.Op == "output" }, true},
		{"switch cannot open", func(c fakeCall) bool { return c.Role == plan.RoleSwitch }, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := testPlan()
			fb := newFakeBench(p)
			fb.out[plan.RoleSupplyPos] = &fakeOutput{volts: p.Part.NominalPosVolts, on: true}
			fb.out[plan.RoleSupplyNeg] = &fakeOutput{volts: p.Part.NominalNegVolts, on: true}
			fb.closed["101"] = true
			fb.fault = func(c fakeCall) error {
				if tc.fail(c) {
					return fmt.Errorf("%s: %w", c, errLost)
				}
				return nil
			}
			_, err := Off(context.Background(), p, fb.rig(), OffOptions{Clock: fb.clk})
			var se *fault.SafeStateError
			if !errors.As(err, &se) {
				t.Fatalf("err %T %v, want a *fault.SafeStateError", err, err)
			}
			msg := err.Error()
			if se.Hazard != tc.hazard || strings.Contains(msg, "SAFE STATE NOT REACHED") != tc.hazard {
				t.Errorf("hazard %v, want %v:\n%s", se.Hazard, tc.hazard, msg)
			}
			if tc.hazard && !strings.Contains(msg, "supply_pos may still be on") {
				t.Errorf("does not name the supply left on:\n%s", msg)
			}
			if !tc.hazard && !strings.Contains(msg, "the part is unpowered") {
				t.Errorf("does not say the part is unpowered:\n%s", msg)
			}
			// The fake agrees: with the hazard the supply is still on.
			if on := fb.out[plan.RoleSupplyPos].on; on != tc.hazard {
				t.Errorf("supply_pos on = %v on the fake bench", on)
			}
		})
	}
}

// off sets a chamber plan's chamber back to temperature.ambient_c
// (SAFETY.md: "sets the chamber back to ambient_c").
func TestOffSetsTheChamberToAmbient(t *testing.T) {
	p := withChamber(testPlan(), 25, 60)
	fb := newFakeBench(p)
	fb.sp, fb.air = 60, 60 // left hot by the run a kill stopped
	fb.out[plan.RoleSupplyPos] = &fakeOutput{volts: p.Part.NominalPosVolts, on: true}
	_, _ = Off(context.Background(), p, fb.rig(), OffOptions{Clock: fb.clk})
	if len(fb.setPoints) == 0 || fb.setPoints[len(fb.setPoints)-1].c != p.Temperature.AmbientCelsius {
		t.Errorf("chamber set points %+v, want the last at ambient %g °C", fb.setPoints, p.Temperature.AmbientCelsius)
	}
}
