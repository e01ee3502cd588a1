package estimate

import (
	"fmt"
	"io"
	"strconv"

	"nullbench/procedure/plan"
)

// WriteCheck prints check's output for p (writeCheck: the step
// table, the power sequence, the hazard and the safety verdict) with the
// forecast from f beside it: each step's bench seconds, each test's time,
// predicted uncertainty and resolvable ratio next to its limit, the
// campaign's duration and the warnings (Prediction.Warnings). It returns
// only write errors.
func WriteCheck(w io.Writer, p *plan.Plan, f Figures) error {
	if plan.Validate(p) != nil {
		return writeCheck(w, p, nil)
	}
	return writeCheck(w, p, newForecast(p, f))
}

// forecast is Predict's result in the shape writeCheck prints.
type forecast struct {
	p         *plan.Plan
	pred      Prediction
	firstPass map[plan.WorkKey]float64
}

func newForecast(p *plan.Plan, f Figures) *forecast {
	fc := &forecast{p: p, pred: Predict(p, f), firstPass: map[plan.WorkKey]float64{}}
	if len(p.Units) > 0 {
		for _, tp := range fc.pred.Timeline.Points {
			if tp.Key.TempIndex == 0 && tp.Key.Unit == p.Units[0].ID && tp.Key.Repeat == 0 {
				fc.firstPass[tp.Key] = tp.Seconds
			}
		}
	}
	return fc
}

func (fc *forecast) StepSeconds(s plan.Step) float64 {
	return fc.firstPass[s.Key(0, firstUnit(fc.p), 0)]
}

func (fc *forecast) WriteTest(w io.Writer, i int) {
	pass := 0.0
	for _, s := range plan.TestSteps(fc.p, i) {
		pass += fc.StepSeconds(s)
	}
	tp := fc.pred.Tests[i]
	fmt.Fprintf(w, "  one pass %s; all repeats %s per unit and temperature; %s in the campaign\n",
		plan.FormatSeconds(pass), plan.FormatSeconds(tp.UnitSeconds), plan.FormatSeconds(tp.Seconds))
	writeTestPrediction(w, tp)
}

func (fc *forecast) WriteSummary(w io.Writer) {
	pred, p := fc.pred, fc.p
	tl := pred.Timeline
	fmt.Fprintf(w, "\nduration (bench time)\n")
	for _, tp := range pred.Tests {
		fmt.Fprintf(w, "  %s %-14s %s\n", testKey(tp.Test), tp.Kind, plan.FormatSeconds(tp.Seconds))
	}
	for i, t := range p.ACTests {
		fmt.Fprintf(w, "  ac_test[%d] %-11s %s (%d frequencies × 3 records of %d; %s per unit and temperature)\n", i+1, t.Kind,
			plan.FormatSeconds(tl.ACTestCampaignSeconds[i]), len(t.Frequencies()), max(t.Records, 1), plan.FormatSeconds(tl.ACTestSeconds[i]))
	}
	fmt.Fprintf(w, "  bench off %s; units connected %s; power up/down %s; chamber ramps and soaks %s; finish %s\n",
		plan.FormatSeconds(tl.BenchOffSeconds), plan.FormatSeconds(tl.ConnectSeconds), plan.FormatSeconds(tl.PowerSeconds),
		plan.FormatSeconds(tl.ChamberSeconds), plan.FormatSeconds(tl.FinishSeconds))
	fmt.Fprintf(w, "  total %s", plan.FormatSeconds(pred.TotalSeconds))
	if p.Bench.TimeScale != 1 {
		fmt.Fprintf(w, "; at time_scale %g about %s of wall time", p.Bench.TimeScale, plan.FormatSeconds(pred.WallSeconds))
	}
	fmt.Fprintf(w, "\n  (every ramp step, dwell, settling reading, read-back, power-up and down, relay, chamber ramp and soak, from the profiles' [figures]; unit swaps by hand not counted)\n")
	if len(p.ACTests) > 0 {
		fmt.Fprintf(w, "  (ac_test: per frequency the noise-floor, through and stimulus records at the coherent sample rate and record length, each after the generator settle; a manual through calibration's prompts not counted)\n")
	}
	if warns := pred.Warnings(); len(warns) > 0 {
		fmt.Fprintf(w, "\nwarnings\n")
		for _, s := range warns {
			fmt.Fprintf(w, "  %s\n", s)
		}
	}
}

func firstUnit(p *plan.Plan) string {
	if len(p.Units) == 0 {
		return ""
	}
	return p.Units[0].ID
}

// testKey names test i as the plan's errors do: "test[1]" for the first.
func testKey(i int) string { return "test[" + strconv.Itoa(i+1) + "]" }

// writeTestPrediction prints a test's predicted uncertainty and the
// largest ratio it resolves, beside its limit.
func writeTestPrediction(w io.Writer, tp TestPrediction) {
	if tp.ExpandedUUVPerV <= 0 {
		fmt.Fprintf(w, "  predicted uncertainty: not available (too few points for the fit, or no gain to refer the meter to the input)\n")
		return
	}
	fmt.Fprintf(w, "  predicted u = %.3g µV/V, U = %.3g µV/V (k = %.2f, ν = %d; meter noise %.3g µV per point, divisor %g)\n",
		tp.StdUncUVPerV, tp.ExpandedUUVPerV, tp.CoverageK, tp.DOF, 1e6*tp.NoiseVolts, tp.Divisor)
	lim := "no limit"
	if tp.HasLimit {
		lim = fmt.Sprintf("limit %g dB", tp.LimitDB)
		if tp.LimitDB > tp.ResolvableDB {
			lim += ": ABOVE what the plan resolves"
		}
	}
	fmt.Fprintf(w, "  %s: resolves up to %.1f dB; %s\n", tp.Kind, tp.ResolvableDB, lim)
}
