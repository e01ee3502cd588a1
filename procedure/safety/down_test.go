package safety

import (
	"math"
	"strings"
	"testing"

	"nullbench/procedure/plan"
)

// cmSlack is the inputs' common-mode margin left in s: the smaller of
// V+ − input high − (cm_headroom_pos + cm_margin) and input low − V− −
// (cm_headroom_neg + cm_margin), from the plan's part ratings (the
// common-mode input range rule of the part's data sheet, as the plan
// states it). bestSlack is the most any placement of the rails with the
// same span could leave (rails centred on the inputs).
func cmSlack(p *plan.Plan, s plan.BenchState) (slack, best float64) {
	t := plan.TerminalsOf(p, s)
	needP := p.Part.CMHeadroomPosVolts + p.Part.CMMarginVolts
	needN := p.Part.CMHeadroomNegVolts + p.Part.CMMarginVolts
	slack = math.Min(s.PosVolts-t.InHighVolts-needP, t.InLowVolts-s.NegVolts-needN)
	best = ((s.PosVolts - s.NegVolts) - (t.InHighVolts - t.InLowVolts) - needP - needN) / 2
	return slack, best
}

// marginKept checks every state of a switch-off: the common-mode margin
// never drops below the lesser of where it started and the most the span
// allows, by more than half a ramp step (one rail moves per step), and the
// span never grows. It returns the worst shortfall.
func marginKept(p *plan.Plan, from plan.BenchState, acts []PowerAction) (worst float64) {
	s := from
	start, _ := cmSlack(p, s)
	half := RampStep(p) / 2
	span := s.PosVolts - s.NegVolts
	for _, a := range acts {
		s = ApplyAction(s, a)
		if sp := s.PosVolts - s.NegVolts; sp > span+1e-9 {
			return math.Inf(1)
		} else {
			span = sp
		}
		slack, best := cmSlack(p, s)
		if short := math.Min(start, best) - half - slack; short > worst {
			worst = short
		}
	}
	return worst
}

// From every level of every test of the example plans, the power-down
// after a fault keeps the inputs' common-mode margin as long as the span
// allows it, steps of at most the ramp step, the span never growing and
// no hard limit broken. The lock-step ramp used between levels
// (rampRails) does not, from a supply-shifted common-mode level: that is
// what the alternating descent is for.
func TestPowerDownKeepsTheCommonModeMargin(t *testing.T) {
	for _, name := range []string{"lot", "lot input_drive", "board", "noise_gain"} {
		file, mode, _ := strings.Cut(name, " ")
		p := loadExamplePlan(t, file)
		if mode != "" {
			p.Fixture.CommonMode = mode
		}
		for i := range p.Tests {
			test := &p.Tests[i]
			for _, part := range sweepParts(test) {
				levels := test.Levels
				if part == plan.PartDiff {
					levels = test.DiffLevels
				}
				for _, lvl := range levels {
					from := plan.StateAt(p, test, part, lvl)
					down := PowerDownFrom(p, from)
					checkSteps(t, from, down, p.Safety.RampStepVolts)
					if err := checkRamp(p, from, down); err != nil {
						t.Errorf("%s test[%d] %s level %g: %v", name, i+1, test.Kind, lvl, err)
					}
					// Every action, the sources' ramps included.
					if w := marginKept(p, from, down); w > 1e-9 {
						t.Errorf("%s test[%d] %s level %g: the common-mode margin falls %.3g V short on the way down", name, i+1, test.Kind, lvl, w)
					}
				}
			}
		}
	}
	// In input-drive mode the common-mode source holds the level and
	// comes down first (the check above covered its steps too).
	pi := loadExamplePlan(t, "lot")
	pi.Fixture.CommonMode = plan.CMByInputDrive
	if s := plan.StateAt(pi, &pi.Tests[0], "", 10); s.CMVolts != 10 || s.PosVolts != 15 {
		t.Errorf("lot test[1] by input drive at +10 V: %+v, want the source at 10 V and V+ at 15 V", s)
	}
	// The case that needs it: CMRR by supply shift at +10 V (V+ +5 V,
	// V− −25 V: the inputs at ground sit 10 V above the rails' middle;
	// lot.toml test[1]).
	p := loadExamplePlan(t, "lot")
	from := plan.StateAt(p, &p.Tests[0], "", 10)
	if from.PosVolts != 5 || from.NegVolts != -25 {
		t.Fatalf("lot test[1] at +10 V: %+v, want V+ 5 V, V- -25 V", from)
	}
	if w := marginKept(p, from, rampRails(from.PosVolts, from.NegVolts, 0, 0, RampStep(p))); w <= 0 {
		t.Errorf("the lock-step ramp keeps the margin too (shortfall %g): the test cannot tell the two apart", w)
	}
	down := RailsDownFrom(p, from)
	if len(down) == 0 || down[0].Role != plan.RoleSupplyNeg {
		t.Errorf("from V+ +5 V, V- -25 V the far rail (V-) must come in first: %v", down[:min(3, len(down))])
	}
	if w := marginKept(p, from, down); w > 1e-9 {
		t.Errorf("RailsDownFrom falls %g V short", w)
	}
}

// From the nominal rails the descent alternates, V+ first: the sequence
// a symmetric power-down always had.
func TestPowerDownFromNominalAlternates(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	n := plan.NominalState(p)
	got := railsDown(p, n, RampStep(p))
	want := rampRails(n.PosVolts, n.NegVolts, 0, 0, RampStep(p))
	if FormatActions(got) != FormatActions(want) {
		t.Errorf("from nominal:\n%s\nwant\n%s", FormatActions(got), FormatActions(want))
	}
}
