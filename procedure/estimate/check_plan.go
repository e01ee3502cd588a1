package estimate

import (
	"errors"
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"

	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// describeTest says in words how a test applies its stimulus.
func describeTest(p *plan.Plan, t *plan.Test) string {
	switch t.Kind {
	case plan.TestCMRR:
		if p.Fixture.CommonMode == plan.CMByInputDrive {
			return "common mode driven at the inputs by source_cm; rails nominal; level = V_CM"
		}
		return "both rails shifted by -level, inputs at ground; level = V_CM relative to the rails' centre"
	case plan.TestPSRRPos, plan.TestBoardPSRRPos:
		return "V+ = nominal + level; V- nominal"
	case plan.TestPSRRNeg, plan.TestBoardPSRRNeg:
		return "V- = nominal - level (the rail grows with the level); V+ nominal"
	case plan.TestPSRRSym:
		return "V+ = nominal + level/2, V- = nominal - level/2 (span grows by the level)"
	case plan.TestAOL:
		return "output held at the level by the nulling loop's reference (source_ref)"
	case plan.TestBoardCMRR:
		return "cm: V_CM = level from source_cm; diff: V_d = level from source_diff"
	}
	return ""
}

// writeCheck prints what a run of the plan would do, without touching an
// instrument: for each test and level the stimulus, the rails, the common
// mode and its distance to each rail and the highest voltage any terminal
// sees; then the power sequence, the hazard assessment and the safety
// verdict (CheckSafety's refusals, if any). An invalid plan gets its
// validation errors instead. It returns only write errors: the caller asks
// CheckSafety for the verdict that sets the exit status. fc, if not nil,
// adds each step's time and the predictions (WriteCheck passes its
// forecast); nil prints the plan alone.
func writeCheck(w io.Writer, p *plan.Plan, fc *forecast) error {
	ew := &checkWriter{w: w}
	pf := ew.printf
	if err := plan.Validate(p); err != nil {
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
		pt.Number, plan.FormatVolts(pt.NominalPosVolts), plan.FormatVolts(pt.NominalNegVolts), pt.MaxSupplySpanVolts,
		pt.CMHeadroomPosVolts, pt.CMHeadroomNegVolts, pt.CMMarginVolts, pt.InputBeyondRailVolts, pt.CurrentLimitAmps)
	if pt.SupplyAmpsMin > 0 || pt.SupplyAmpsMax > 0 {
		pf("presence  each rail must draw %g … %g mA after power-up (0: unchecked), or the run stops before measuring\n",
			1e3*pt.SupplyAmpsMin, 1e3*pt.SupplyAmpsMax)
	}
	switch fx.Kind {
	case plan.FixtureBoard:
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
			lo, hi, ok := safety.SafeLevels(p, t, part)
			label := ""
			if part != "" {
				label = " (" + part + ")"
			}
			if ok {
				pf("  safe levels%s %s … %s\n", label, plan.FormatVolts(lo), plan.FormatVolts(hi))
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
		for _, s := range plan.TestSteps(p, i) {
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

	up := safety.PowerUpOrder(p)
	pf("\npower-up   %d actions: sources off at 0 V; current limits %g A; supplies on at 0 V; rails ramped to %s / %s in steps ≤ %g V; then sources on\n",
		len(up), pt.CurrentLimitAmps, plan.FormatVolts(pt.NominalPosVolts), plan.FormatVolts(pt.NominalNegVolts), p.Safety.RampStepVolts)
	pf("power-down %d actions: sources ramped to 0 V and off; rails ramped to 0 V; supplies off\n", len(safety.PowerDownOrder(p)))

	h := safety.AssessHazard(p)
	verdict := "below"
	if h.Hazardous {
		verdict = "ABOVE"
	}
	pf("\nhazard    highest %s to ground, %s across the bench: %s the %g V DC limit (SELV/ES1)\n",
		plan.FormatMag(h.MaxToGroundVolts), plan.FormatMag(h.MaxAcrossVolts), verdict, safety.HazardousVolts)
	err := safety.CheckSafety(p)
	var se *safety.SafetyError
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

func sweepParts(t *plan.Test) []string {
	if t.Kind == plan.TestBoardCMRR {
		return []string{plan.PartCM, plan.PartDiff}
	}
	return []string{""}
}

func describeUnits(p *plan.Plan) string {
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

func describeTemps(p *plan.Plan) string {
	t := &p.Temperature
	pts := make([]string, len(t.PointsCelsius))
	for i, c := range t.PointsCelsius {
		pts[i] = fmt.Sprintf("%g", c)
	}
	switch t.Mode {
	case plan.TempNone:
		return fmt.Sprintf("none (ambient %g °C)", t.AmbientCelsius)
	case plan.TempChamber:
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
func describeLimits(p *plan.Plan) string {
	var out []string
	for _, n := range plan.LimitNames() {
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

// writeACTests adds the [[ac_test]] tables to check's output: per
// frequency the limit, the generator setting, the sine's extremes at the
// part and the bench time of its three records (floor, through, stimulus).
func writeACTests(pf func(format string, args ...any), p *plan.Plan) {
	for i := range p.ACTests {
		t := &p.ACTests[i]
		how := "common-mode node"
		if t.IsPSRR() {
			how = fmt.Sprintf("rail through a %s, coupling gain %g", t.Injection, t.CouplingGain)
		}
		ch := t.GeneratorChannel
		if ch == "" {
			ch = p.Bench.Roles.Generator.Channel
		}
		pf("\n%s %s: sine %s peak about %s on the %s (generator output %s at %s peak); through calibration by %s %s; %d record(s) per point\n",
			plan.ACTestKey(i), t.Kind, plan.FormatMag(t.PeakVolts), plan.FormatVolts(t.OffsetVolts), how, ch, plan.FormatMag(t.GeneratorPeakVolts()), t.Through, t.ThroughChannel, t.Records)
		peaks := plan.ACPeakStates(p, t)
		pf("  at the peaks: V+ %s … %s, V- %s … %s, common mode %s … %s\n",
			plan.FormatVolts(peaks[1].PosVolts), plan.FormatVolts(peaks[0].PosVolts), plan.FormatVolts(peaks[1].NegVolts), plan.FormatVolts(peaks[0].NegVolts),
			plan.FormatVolts(peaks[1].CMVolts), plan.FormatVolts(peaks[0].CMVolts))
		total := 0.0
		for fi, f := range t.Frequencies() {
			lim := "not judged"
			if l, ok := t.LimitAtDB(fi); ok {
				lim = fmt.Sprintf("≥ %g dB", l)
			}
			sec := 3 * (plan.ACSettleSeconds(t, f) + float64(t.Records)*plan.ACRecordSeconds(t, f))
			total += sec
			pf("  %10.4g Hz  limit %-12s record %s, with settling %s\n", f, lim, plan.FormatSeconds(plan.ACRecordSeconds(t, f)), plan.FormatSeconds(sec))
		}
		pf("  about %s of bench time per unit and temperature (records and settling only)\n", plan.FormatSeconds(total))
	}
}
