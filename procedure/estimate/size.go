package estimate

import (
	"fmt"
	"math"

	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// SizeTarget is what a sized plan must reach: an expanded uncertainty of
// UDB decibels on a ratio of AtDB (the coefficient 10⁶·10^(−AtDB/20)
// µV/V), that is U = k·UDB/(20/ln 10) µV/V on the coefficient (first
// order, ratio to dB as u_dB = 8.686·u_rel).
type SizeTarget struct {
	UDB, AtDB float64
}

// CoefficientU is the target's expanded uncertainty of the coefficient,
// in µV/V.
func (s SizeTarget) CoefficientU() float64 {
	k := 1e6 * math.Pow(10, -s.AtDB/20)
	return k * s.UDB / (20 / math.Ln10)
}

// SizedTest is Size's proposal for one test.
type SizedTest struct {
	Test                     int
	Kind                     string
	Levels                   []float64
	Order                    string
	NPLC                     float64
	Readings, Repeats        int
	Before, After            TestPrediction // the plan's test as written and as sized
	Reached                  bool           // After.ExpandedUUVPerV ≤ the target
	BeforeSecs, AfterSecs    float64        // one unit at one temperature
	SafeLoVolts, SafeHiVolts float64
}

// sizeReadings and sizeRepeats are the settings Size tries (besides every
// NPLC the meter's noise table lists).
var sizeReadings = []int{2, 3, 4, 5, 7, 10, 14, 20, 30, 50, 70, 100} // a standard deviation needs 2

// sizeMaxRepeats is the most repeats Size proposes.
const sizeMaxRepeats = 1000

// Size proposes, for every test, the levels, NPLC, readings and repeats
// that reach target in the least bench time per unit, by the same
// prediction check makes (Predict). Levels: four, at the ends of the
// test's symmetric safe range (SafeLevels, shrunk to 80 %) and at 90 % of
// them, or three, the ends and the centre — a straight-line fit's slope
// variance is least with the points at the ends of the range (the
// Cramér–Rao bound, fit.SlopeCRBPoints), and a plan needs three distinct
// levels at least (Validate). Then every NPLC of the noise table, number of readings
// and of repeats is tried and the quickest that reaches the target kept
// (or, if none does, the one with the least U). Other settings (dwell,
// settle, order) are the plan's.
func Size(p *plan.Plan, f Figures, target SizeTarget) (*plan.Plan, []SizedTest) {
	out := clonePlan(p)
	want := target.CoefficientU()
	before := Predict(singleUnit(p), f)
	var res []SizedTest
	for i := range p.Tests {
		st := SizedTest{Test: i, Kind: p.Tests[i].Kind, Before: before.Tests[i], BeforeSecs: before.Tests[i].UnitSeconds}
		part := ""
		if p.Tests[i].Kind == plan.TestBoardCMRR {
			part = plan.PartCM
		}
		lo, hi, ok := safety.SafeLevels(p, &p.Tests[i], part)
		if !ok {
			res = append(res, st)
			continue
		}
		// 80 % of the safe range: near the edges of the input range an
		// offset bends by far more than the rejection moves it (within
		// ~0.5–1 V of the limit; common practice, no published source).
		half := math.Min(math.Abs(lo), math.Abs(hi)) * 0.8
		// A symmetric range keeps the nominal state in the middle.
		st.SafeLoVolts, st.SafeHiVolts = -half, half
		r3 := func(x float64) float64 { return math.Round(x*1000) / 1000 }
		// Each design in the plan's order and in the symmetric one (a b …
		// b a): both palindromes, so a steady drift cancels, but with the
		// levels at the two ends the symmetric order crosses the range
		// once per half pass where a zigzag crosses it at every point, and
		// each volt of ramp costs its steps' settle and dwell.
		type design struct {
			levels []float64
			order  string
		}
		var designs []design
		for _, levels := range [][]float64{{r3(-half), r3(-0.9 * half), r3(0.9 * half), r3(half)}, {r3(-half), 0, r3(half)}} {
			designs = append(designs, design{levels, p.Tests[i].Order})
			if p.Tests[i].Order != plan.OrderSymmetric {
				designs = append(designs, design{levels, plan.OrderSymmetric})
			}
		}
		bestSecs, bestU := math.Inf(1), math.Inf(1)
		var best SizedTest
		for _, d := range designs {
			levels := d.levels
			for _, nplc := range f.NoiseNPLC {
				if nplc < 1 {
					// Below one power-line cycle the integration no
					// longer rejects mains pickup (normal-mode rejection
					// needs whole cycles: common practice, no published
					// source), which the noise figures do not describe.
					continue
				}
				for _, n := range sizeReadings {
					// One and two repeats predicted in full; more repeats add
					// the same time each and divide u by √repeats (with the t
					// factor of the larger ν), so the bisection below needs no
					// timeline of its own.
					tp1 := predictTest(p, f, i, levels, d.order, nplc, n, 1)
					tp2 := predictTest(p, f, i, levels, d.order, nplc, n, 2)
					params := tp1.Points - tp1.DOF
					t1 := p.Tests[i]
					t1.NPLC, t1.Readings = nplc, n
					quick := func(rep int) float64 {
						dof := tp1.Points*rep - params
						if dof < 1 || !(tp1.StdUncUVPerV > 0) {
							return math.Inf(1)
						}
						secs := tp1.UnitSeconds + float64(rep-1)*(tp2.UnitSeconds-tp1.UnitSeconds)
						scale := pointNoise(p, &f, &t1, tp1.Divisor, secs) / tp1.NoiseVolts
						return StudentT975(float64(dof)) * tp1.StdUncUVPerV * scale / math.Sqrt(float64(rep))
					}
					lo := 1
					for lo < sizeMaxRepeats && quick(lo) > want {
						if quick(sizeMaxRepeats) > want {
							lo = sizeMaxRepeats
							break
						}
						// bisection on [lo, hi]: quick falls with the repeats
						hi := sizeMaxRepeats
						for lo < hi {
							mid := (lo + hi) / 2
							if quick(mid) <= want {
								hi = mid
							} else {
								lo = mid + 1
							}
						}
					}
					var tp TestPrediction
					ok := false
					if quick(lo) <= want {
						// Confirm with the full prediction (its 1/f band
						// depends on the test's length), a few repeats more
						// if needed.
						for try := 0; try < 5 && lo <= sizeMaxRepeats; try++ {
							tp = predictTest(p, f, i, levels, d.order, nplc, n, lo)
							if ok = tp.ExpandedUUVPerV > 0 && tp.ExpandedUUVPerV <= want; ok {
								break
							}
							lo++
						}
					}
					if !ok {
						lo = min(lo, sizeMaxRepeats)
						tp = TestPrediction{Kind: tp1.Kind, Test: i, ExpandedUUVPerV: quick(lo), StdUncUVPerV: tp1.StdUncUVPerV / math.Sqrt(float64(lo)),
							UnitSeconds: tp1.UnitSeconds + float64(lo-1)*(tp2.UnitSeconds-tp1.UnitSeconds)}
						tp.ResolvableDB = 20 * math.Log10(1e6/tp.ExpandedUUVPerV)
					}
					u := tp.ExpandedUUVPerV
					if !(u > 0) {
						continue
					}
					cand := st
					cand.Levels, cand.Order, cand.NPLC, cand.Readings, cand.Repeats, cand.After, cand.AfterSecs, cand.Reached =
						levels, d.order, nplc, n, max(lo, 1), tp, tp.UnitSeconds, ok
					switch {
					case ok && tp.UnitSeconds < bestSecs:
						best, bestSecs, bestU = cand, tp.UnitSeconds, u
					case math.IsInf(bestSecs, 1) && u < bestU:
						best, bestU = cand, u
					}
				}
			}
		}
		if best.Levels != nil {
			st = best
			t := &out.Tests[i]
			t.Levels, t.Order, t.NPLC, t.Readings, t.Repeats = st.Levels, st.Order, st.NPLC, st.Readings, st.Repeats
		}
		res = append(res, st)
	}
	return out, res
}

// clonePlan copies p deeply enough for Size to change its tests.
func clonePlan(p *plan.Plan) *plan.Plan {
	q := *p
	q.Tests = make([]plan.Test, len(p.Tests))
	for i, t := range p.Tests {
		t.Levels = append([]float64(nil), t.Levels...)
		t.DiffLevels = append([]float64(nil), t.DiffLevels...)
		q.Tests[i] = t
	}
	return &q
}

// singleUnit is p with one unit at one temperature.
func singleUnit(p *plan.Plan) *plan.Plan {
	q := clonePlan(p)
	if len(q.Units) > 1 {
		q.Units = q.Units[:1]
	}
	q.Temperature.Mode = plan.TempNone
	q.Temperature.PointsCelsius = nil
	return q
}

// singleTest is singleUnit(p) with test i only.
func singleTest(p *plan.Plan, i int) *plan.Plan {
	q := singleUnit(p)
	q.Tests = []plan.Test{q.Tests[i]}
	q.Tests[0].Levels = append([]float64(nil), p.Tests[i].Levels...)
	return q
}

// String describes a sized test in one line.
func (s SizedTest) String() string {
	verdict := "reaches the target"
	if !s.Reached {
		verdict = "does NOT reach the target (closest shown)"
	}
	return fmt.Sprintf("%s %s: levels %v V in %s order, %g NPLC, %d readings, %d repeat(s): U %.3g µV/V (%.1f dB resolvable), %s per unit (was %s, U %.3g µV/V); %s",
		testKey(s.Test), s.Kind, s.Levels, s.Order, s.NPLC, s.Readings, s.Repeats, s.After.ExpandedUUVPerV, s.After.ResolvableDB,
		plan.FormatSeconds(s.AfterSecs), plan.FormatSeconds(s.BeforeSecs), s.Before.ExpandedUUVPerV, verdict)
}

// PredictTest predicts test i of p for one unit at one temperature with
// the given levels, NPLC, readings and repeats (the rest as written).
func PredictTest(p *plan.Plan, f Figures, i int, levels []float64, nplc float64, readings, repeats int) TestPrediction {
	return predictTest(p, f, i, levels, p.Tests[i].Order, nplc, readings, repeats)
}

// predictTest is PredictTest in the given level order.
func predictTest(p *plan.Plan, f Figures, i int, levels []float64, order string, nplc float64, readings, repeats int) TestPrediction {
	q := singleTest(p, i)
	t := &q.Tests[0]
	t.Levels, t.Order, t.NPLC, t.Readings, t.Repeats = levels, order, nplc, readings, repeats
	tp := Predict(q, f).Tests[0]
	tp.Test = i
	return tp
}
