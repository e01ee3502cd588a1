package plan

import (
	"errors"
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"
	"time"
)

// Step is one point of one pass of a test, as StepTable lays it out.
type Step struct {
	Test       int     // index into Plan.Tests
	Kind       string  // the test kind
	Part       string  // "" or, for board_cmrr, PartCM or PartDiff
	Index      int     // position in the ordered sweep (Reading.Step)
	LevelVolts float64 // the stimulus (see BenchState for its meaning)
	State      BenchState
	Pins       Terminals
	// CMVolts is the inputs' common-mode voltage to ground; CMRelVolts the
	// same relative to the rails' centre (V+ + V-)/2.
	CMVolts    float64
	CMRelVolts float64
	// ToPosVolts = V+ - highest input and ToNegVolts = lowest input - V-:
	// the common mode's distance to each rail (the plan requires at least
	// cm_headroom + cm_margin on each side).
	ToPosVolts       float64
	ToNegVolts       float64
	MaxToGroundVolts float64 // the highest |voltage| any pin or source sees
}

// Key is the work key of this step for one temperature, unit and repeat.
func (s Step) Key(tempIndex int, unit string, repeat int) WorkKey {
	return WorkKey{TempIndex: tempIndex, Unit: unit, Test: s.Kind, Repeat: repeat, Part: s.Part, Step: s.Index}
}

// TestSteps lays out one pass of test i: its sweeps in order, each level in
// the order it is visited.
func TestSteps(p *Plan, i int) []Step {
	t := &p.Tests[i]
	var out []Step
	for _, sw := range Sweeps(t) {
		for j, l := range sw.Levels {
			s := StateAt(p, t, sw.Part, l)
			pins := TerminalsOf(p, s)
			out = append(out, Step{
				Test: i, Kind: t.Kind, Part: sw.Part, Index: j, LevelVolts: l,
				State: s, Pins: pins,
				CMVolts:          (pins.InHighVolts + pins.InLowVolts) / 2,
				CMRelVolts:       (pins.InHighVolts+pins.InLowVolts)/2 - (s.PosVolts+s.NegVolts)/2,
				ToPosVolts:       s.PosVolts - pins.InHighVolts,
				ToNegVolts:       pins.InLowVolts - s.NegVolts,
				MaxToGroundVolts: pins.MaxToGroundVolts(s),
			})
		}
	}
	return out
}

// StepTable lays out one pass of every test, in plan order.
func StepTable(p *Plan) []Step {
	var out []Step
	for i := range p.Tests {
		out = append(out, TestSteps(p, i)...)
	}
	return out
}

// FormatSeconds writes a duration in seconds as "1h02m03s", "2m05s" or
// "4.5s".
func FormatSeconds(sec float64) string {
	if sec < 60 {
		return fmt.Sprintf("%.1fs", sec)
	}
	d := time.Duration(math.Round(sec)) * time.Second
	h := d / time.Hour
	m := (d % time.Hour) / time.Minute
	s := (d % time.Minute) / time.Second
	if h > 0 {
		return fmt.Sprintf("%dh%02dm%02ds", h, m, s)
	}
	return fmt.Sprintf("%dm%02ds", m, s)
}

// describeTest says in words how a test applies its stimulus.
func describeTest(p *Plan, t *Test) string {
	switch t.Kind {
	case TestCMRR:
		if p.Fixture.CommonMode == CMByInputDrive {
			return "common mode driven at the inputs by source_cm; rails nominal; level = V_CM"
		}
		return "both rails shifted by -level, inputs at ground; level = V_CM relative to the rails' centre"
	case TestPSRRPos, TestBoardPSRRPos:
		return "V+ = nominal + level; V- nominal"
	case TestPSRRNeg, TestBoardPSRRNeg:
		return "V- = nominal - level (the rail grows with the level); V+ nominal"
	case TestPSRRSym:
		return "V+ = nominal + level/2, V- = nominal - level/2 (span grows by the level)"
	case TestAOL:
		return "output held at the level by the nulling loop's reference (source_ref)"
	case TestBoardCMRR:
		return "cm: V_CM = level from source_cm; diff: V_d = level from source_diff"
	}
	return ""
}

// CheckForecast is what check prints beside the plan from a model of the
// bench (package estimate): each step's bench seconds, lines under each
// test's table and a section after the tests. The plan itself knows no
// timing or noise figures.
type CheckForecast interface {
	// StepSeconds is step s's bench time on the first unit at the first
	// temperature in the first repeat.
	StepSeconds(s Step) float64
	// WriteTest writes the lines under test i's step table.
	WriteTest(w io.Writer, i int)
	// WriteSummary writes the section after the tests (duration, warnings).
	WriteSummary(w io.Writer)
}

// WriteCheck prints what a run of the plan would do, without touching an
// instrument: for each test and level the stimulus, the rails, the common
// mode and its distance to each rail and the highest voltage any terminal
// sees; then the power sequence, the hazard assessment and the safety
// verdict (CheckSafety's refusals, if any). An invalid plan gets its
// validation errors instead. It returns only write errors: the caller asks
// CheckSafety for the verdict that sets the exit status. fc, if not nil,
// adds each step's time and the predictions (estimate.WriteCheck passes
// its forecast); nil prints the plan alone.
func WriteCheck(w io.Writer, p *Plan, fc CheckForecast) error {
	ew := &checkWriter{w: w}
	pf := ew.printf
	if err := Validate(p); err != nil {
		pf("plan      %s\ninvalid, nothing to lay out:\n", p.Source)
		for _, line := range strings.Split(err.Error(), "\n") {
			pf("  %s\n", line)
		}
		return ew.err
	}
	pt := &p.Part
	fx := &p.Fixture
	pf("plan      %s\n", p.Source)
	pf("sha256    %s\n", p.Hash)
	if c := p.Campaign; c.Name != "" || c.Lot != "" {
		pf("campaign  %s", c.Name)
		if c.Lot != "" {
			pf("; lot %s", c.Lot)
		}
		if c.Operator != "" {
			pf("; operator %s", c.Operator)
		}
		pf("\n")
	}
	pf("part      %s: nominal %s / %s; max span %g V; common-mode headroom %g V (V+) / %g V (V-) + margin %g V; inputs ≤ %g V beyond a rail; current limit %g A\n",
		pt.Number, FormatVolts(pt.NominalPosVolts), FormatVolts(pt.NominalNegVolts), pt.MaxSupplySpanVolts,
		pt.CMHeadroomPosVolts, pt.CMHeadroomNegVolts, pt.CMMarginVolts, pt.InputBeyondRailVolts, pt.CurrentLimitAmps)
	if pt.SupplyAmpsMin > 0 || pt.SupplyAmpsMax > 0 {
		pf("presence  each rail must draw %g … %g mA after power-up (0: unchecked), or the run stops before measuring\n",
			1e3*pt.SupplyAmpsMin, 1e3*pt.SupplyAmpsMax)
	}
	switch fx.Kind {
	case FixtureBoard:
		pf("fixture   board, gain %g, resistor tolerance %g; max stimulus %g V\n", fx.BoardGain, fx.ResistorTolerance, fx.MaxStimulusVolts)
	default:
		pf("fixture   %s, K = %g ± %g (relative); common mode by %s; max stimulus %g V\n",
			fx.Kind, fx.NoiseGain, fx.NoiseGainTolerance, fx.CommonMode, fx.MaxStimulusVolts)
	}
	pf("units     %d (%s)\n", len(p.Units), describeUnits(p))
	pf("temps     %s\n", describeTemps(p))
	pf("decision  %s\n", p.Decision.Rule)
	pf("limits    %s\n", describeLimits(p))

	for i := range p.Tests {
		t := &p.Tests[i]
		pf("\n%s %s: %s\n", testKey(i), t.Kind, describeTest(p, t))
		pf("  order %s, %d repeat(s), %d readings at %g NPLC on the %g V range, dwell %g s, settle %g V (time-out %g s)\n",
			t.Order, t.Repeats, t.Readings, t.NPLC, t.RangeVolts, t.DwellSeconds, t.SettleVolts, t.SettleTimeoutSeconds)
		for _, part := range sweepParts(t) {
			lo, hi, ok := SafeLevels(p, t, part)
			label := ""
			if part != "" {
				label = " (" + part + ")"
			}
			if ok {
				pf("  safe levels%s %s … %s\n", label, FormatVolts(lo), FormatVolts(hi))
			} else {
				pf("  safe levels%s: none\n", label)
			}
		}
		tw := tabwriter.NewWriter(ew, 0, 0, 2, ' ', tabwriter.AlignRight)
		head := "  step\tpart\tlevel V\tV+ V\tV- V\tVcm V\tto V+ V\tto V- V\tmax|V|\t"
		if fc != nil {
			head += "time s\t"
		}
		fmt.Fprintf(tw, "%s\n", head)
		for _, s := range TestSteps(p, i) {
			part := s.Part
			if part == "" {
				part = "-"
			}
			fmt.Fprintf(tw, "  %d\t%s\t%+.3f\t%+.3f\t%+.3f\t%+.3f\t%.3f\t%.3f\t%.3f\t",
				s.Index, part, noNegZero(s.LevelVolts), noNegZero(s.State.PosVolts), noNegZero(s.State.NegVolts), noNegZero(s.CMVolts),
				noNegZero(s.ToPosVolts), noNegZero(s.ToNegVolts), noNegZero(s.MaxToGroundVolts))
			if fc != nil {
				fmt.Fprintf(tw, "%.2f\t", fc.StepSeconds(s))
			}
			fmt.Fprintf(tw, "\n")
		}
		if err := tw.Flush(); err != nil {
			return err
		}
		if fc != nil {
			fc.WriteTest(ew, i)
		}
	}
	writeACTests(pf, p)

	if fc != nil {
		fc.WriteSummary(ew)
	}

	up := PowerUpOrder(p)
	pf("\npower-up   %d actions: sources off at 0 V; current limits %g A; supplies on at 0 V; rails ramped to %s / %s in steps ≤ %g V; then sources on\n",
		len(up), pt.CurrentLimitAmps, FormatVolts(pt.NominalPosVolts), FormatVolts(pt.NominalNegVolts), p.Safety.RampStepVolts)
	pf("power-down %d actions: sources ramped to 0 V and off; rails ramped to 0 V; supplies off\n", len(PowerDownOrder(p)))

	h := AssessHazard(p)
	verdict := "below"
	if h.Hazardous {
		verdict = "ABOVE"
	}
	pf("\nhazard    highest %s to ground, %s across the bench: %s the %g V DC limit (SELV/ES1)\n",
		fmtMag(h.MaxToGroundVolts), fmtMag(h.MaxAcrossVolts), verdict, HazardousVolts)
	err := CheckSafety(p)
	var se *SafetyError
	switch {
	case err == nil:
		pf("safety    OK: every step is inside the part's and the fixture's limits\n")
	case errors.As(err, &se):
		pf("safety    REFUSED (%d):\n", len(se.Refusals))
		for _, r := range se.Refusals {
			pf("  %s\n", r.Error())
		}
	default:
		pf("safety    not checked: %v\n", err)
	}
	return ew.err
}

// noNegZero turns a negative zero into zero, so that tables never print "-0.000".
func noNegZero(x float64) float64 {
	if math.Abs(x) < 5e-10 {
		return 0
	}
	return x
}

func sweepParts(t *Test) []string {
	if t.Kind == TestBoardCMRR {
		return []string{PartCM, PartDiff}
	}
	return []string{""}
}

func describeUnits(p *Plan) string {
	if len(p.Units) == 0 {
		return "none"
	}
	if p.Units[0].Channel == "" {
		if len(p.Units) == 1 {
			return "fixed in the fixture"
		}
		return "swapped by hand"
	}
	return fmt.Sprintf("switch channels %s … %s", p.Units[0].Channel, p.Units[len(p.Units)-1].Channel)
}

func describeTemps(p *Plan) string {
	t := &p.Temperature
	pts := make([]string, len(t.PointsCelsius))
	for i, c := range t.PointsCelsius {
		pts[i] = fmt.Sprintf("%g", c)
	}
	switch t.Mode {
	case TempNone:
		return fmt.Sprintf("none (ambient %g °C)", t.AmbientCelsius)
	case TempChamber:
		return fmt.Sprintf("chamber set points %s °C; soak %g s within ±%g °C (time-out %g s); ramp ≤ %g °C/min",
			strings.Join(pts, ", "), t.SoakSeconds, t.SoakToleranceC, t.SoakTimeoutSeconds, t.RampMaxCPerMinute)
	}
	if len(pts) == 0 {
		return t.Mode
	}
	return fmt.Sprintf("%s at %s °C; soak %g s", t.Mode, strings.Join(pts, ", "), t.SoakSeconds)
}

// checkWriter keeps the first write error and drops later writes.
type checkWriter struct {
	w   io.Writer
	err error
}

func (e *checkWriter) Write(b []byte) (int, error) {
	if e.err != nil {
		return 0, e.err
	}
	n, err := e.w.Write(b)
	e.err = err
	return n, err
}

func (e *checkWriter) printf(format string, args ...any) {
	fmt.Fprintf(e, format, args...)
}

// describeLimits lists the limits, each with its full-range value when the
// plan states one: "cmrr ≥ 100 dB at 25 °C, ≥ 96 dB over the full range".
func describeLimits(p *Plan) string {
	var out []string
	for _, n := range LimitNames() {
		room, hasRoom := p.Limits[n]
		full, hasFull := p.LimitsFullRange[n]
		switch {
		case hasRoom && hasFull:
			out = append(out, fmt.Sprintf("%s ≥ %g dB at 25 °C, ≥ %g dB over the full range", n, room, full))
		case hasRoom:
			out = append(out, fmt.Sprintf("%s ≥ %g dB", n, room))
		case hasFull:
			out = append(out, fmt.Sprintf("%s ≥ %g dB over the full range", n, full))
		}
	}
	if len(out) == 0 {
		return "none: every result is reported, not judged"
	}
	return strings.Join(out, "; ")
}
