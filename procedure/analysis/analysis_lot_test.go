package analysis

import (
	"fmt"
	"math"
	"testing"

	"nullbench/fit"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// azLot builds a lot of five op-amps measured at −40, 25 and 85 °C with
// three repeats each. Unit u (0..4) has CMRR = 96 + 2u dB at 25 °C,
// changing by slopeDBPerC; repeat r adds δ_r ∈ {−0.1, 0, +0.1} µV/V to
// k_c, so the repeats of every unit have an SD of exactly 0.1 µV/V.
func azLot(t *testing.T, slopeDBPerC float64, limits plan.Limits) (*plan.Plan, *Results) {
	t.Helper()
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	p.Tests[0].Repeats = 3
	p.Temperature.Mode = plan.TempChamber
	p.Temperature.PointsCelsius = []float64{-40, 25, 85}
	p.Limits = limits
	p.Units = nil
	for u := 0; u < 5; u++ {
		p.Units = append(p.Units, plan.Unit{ID: fmt.Sprintf("U%d", u+1), Channel: fmt.Sprintf("10%d", u+1)})
	}
	delta := []float64{-0.1e-6, 0, 0.1e-6}
	sim := azNewBench(p, 31, 0.2e-6)
	var rs []journal.Reading
	for ti, tc := range p.Temperature.PointsCelsius {
		for u, unit := range p.Units {
			db := 96 + 2*float64(u) + slopeDBPerC*(tc-25)
			kc := math.Pow(10, -db/20)
			rs = sim.run(rs, unit.ID, plan.TestCMRR, ti, tc, func(rep int, s plan.BenchState) float64 {
				return azOpAmp{vos: 50e-6, kc: kc + delta[rep], kp: 2e-6}.meter(p, s)
			})
		}
	}
	return p, azAnalyze(t, p, rs, Inputs{})
}

// TestAnalyzeLot checks the lot statistics, temperature coefficients,
// repeatability and verdict summary against the values built into azLot.
func TestAnalyzeLot(t *testing.T) {
	const slope = -0.05 // dB/°C
	_, res := azLot(t, slope, plan.Limits{plan.TestCMRR: 98.5})

	// Lot at 25 °C (condition 1): values 96, 98, 100, 102, 104 dB.
	var lot *LotResult
	for i := range res.Lot {
		if res.Lot[i].Name == plan.TestCMRR && res.Lot[i].Condition == 1 {
			lot = &res.Lot[i]
		}
	}
	if lot == nil || len(res.Lot) != 3 {
		t.Fatalf("lot results %+v", res.Lot)
	}
	st := lot.Stats
	// Mean 100, SD = √10 = 3.162 (n − 1 divisor), median 100, 3 of 5 ≥ 98.5.
	if st.N != 5 || math.Abs(st.Mean-100) > 0.01 || math.Abs(st.SD-math.Sqrt(10)) > 0.01 ||
		math.Abs(st.Median-100) > 0.01 || math.Abs(st.Min-96) > 0.01 || math.Abs(st.Max-104) > 0.01 {
		t.Errorf("lot stats %+v", st)
	}
	if !lot.HasLimit || st.LowerLimit != 98.5 || st.PassCount != 3 || math.Abs(st.Cpl-(100-98.5)/(3*math.Sqrt(10))) > 0.005 {
		t.Errorf("limit %v %g, pass %d, Cpl %g", lot.HasLimit, st.LowerLimit, st.PassCount, st.Cpl)
	}
	if lot.Units[0] != "U1" || lot.Units[4] != "U5" || lot.Verdicts.Pass != 3 || lot.Verdicts.Fail != 2 {
		t.Errorf("units %v verdicts %+v", lot.Units, lot.Verdicts)
	}

	// Temperature: every unit changes by −0.05 dB/°C exactly (noise
	// aside), so the common slope and each unit's slope are −0.05.
	if len(res.Temperature) != 1 {
		t.Fatalf("temperature results %+v", res.Temperature)
	}
	tf := res.Temperature[0].Fit
	if !res.Temperature[0].HasLotFit || math.Abs(tf.Common.SlopeDBPerC-slope) > 1e-4 || tf.UnitsFitted != 5 || res.Temperature[0].Points != 15 {
		t.Errorf("temperature fit %+v", tf)
	}
	for _, u := range tf.PerUnit {
		if !u.Fitted || math.Abs(u.SlopeDBPerC-slope) > 1e-4 {
			t.Errorf("unit %s slope %g", u.Unit, u.SlopeDBPerC)
		}
	}

	// Repeatability: SD of {−0.1, 0, +0.1} µV/V = 0.1 µV/V in every unit;
	// pooled over 5 units, ν = 5·2 = 10 (GUM 4.2.8).
	if len(res.Repeatability) != 3 {
		t.Fatalf("repeatability %+v", res.Repeatability)
	}
	for _, rr := range res.Repeatability {
		pc := rr.CoefficientUVPerV
		if math.Abs(pc.SD-0.1) > 0.001 || pc.DOF != 10 || pc.Groups != 5 || !rr.HasRatioDB || rr.RatioDB.SD <= 0 {
			t.Errorf("repeatability at %g °C: %+v", rr.TemperatureC, rr)
		}
	}

	// Verdicts (TL = 98.5 dB, U ≪ 0.1 dB): CMRR in dB per unit at
	// −40/25/85 °C is 96+2u + 3.25, 96+2u, 96+2u − 3:
	// U1 99.25 96 93; U2 101.25 98 95; U3 103.25 100 97; U4 105.25 102 99;
	// U5 107.25 104 101 → 10 pass, 5 fail; units U1-U3 fail, U4-U5 pass.
	s := res.Summary
	if s.Results.Pass != 10 || s.Results.Fail != 5 || s.Results.Total() != 15 {
		t.Errorf("result verdicts %+v", s.Results)
	}
	if s.Units.Pass != 2 || s.Units.Fail != 3 {
		t.Errorf("unit verdicts %+v", s.Units)
	}
	for i, want := range []fit.State{fit.StateFail, fit.StateFail, fit.StateFail, fit.StatePass, fit.StatePass} {
		if u := s.PerUnit[i]; u.State != want || !u.Judged {
			t.Errorf("unit %s: %q, want %q", u.Unit, u.State, want)
		}
	}
	// Worst three: U1 at 85 °C (93), U2 at 85 °C (95), U1 at 25 °C (96).
	if len(s.PerTest) != 1 || len(s.PerTest[0].Worst) != 3 {
		t.Fatalf("per test %+v", s.PerTest)
	}
	for i, want := range []struct {
		unit string
		c    float64
		db   float64
	}{{"U1", 85, 93}, {"U2", 85, 95}, {"U1", 25, 96}} {
		w := s.PerTest[0].Worst[i]
		if w.Unit != want.unit || w.TemperatureC != want.c || math.Abs(w.ValueDB-want.db) > 0.01 {
			t.Errorf("worst %d: %+v, want %s at %g °C, %g dB", i, w, want.unit, want.c, want.db)
		}
	}
}

// TestAnalyzeLotWithoutLimit: lot statistics are still formed, with the
// limit-dependent figures left zero, and nothing is judged.
func TestAnalyzeLotWithoutLimit(t *testing.T) {
	_, res := azLot(t, 0, nil)
	if len(res.Lot) != 3 {
		t.Fatalf("%d lot results", len(res.Lot))
	}
	for _, l := range res.Lot {
		if l.HasLimit || l.Stats.Yield != 0 || l.Stats.CplDefined || math.Abs(l.Stats.Mean-100) > 0.01 {
			t.Errorf("lot without limit: %+v", l)
		}
	}
	if res.Summary.Results.NotJudged != 15 || res.Summary.Units.NotJudged != 5 {
		t.Errorf("summary %+v", res.Summary)
	}
	// Zero slope: the common temperature coefficient is zero within its
	// standard error.
	if tf := res.Temperature[0].Fit.Common; math.Abs(tf.SlopeDBPerC) > 3*tf.SlopeStdErrDBPerC+1e-6 {
		t.Errorf("slope %g ± %g dB/°C, want 0", tf.SlopeDBPerC, tf.SlopeStdErrDBPerC)
	}
}

// TestAnalyzeTwoTemperatures: with two temperatures per unit the lot slope
// still fits (ν = N − units − 1) and each unit gets a two-point slope whose
// uncertainty is √(u₁² + u₂²)/ΔT.
func TestAnalyzeTwoTemperatures(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	p.Fixture.NoiseGainTolerance = 0.01
	p.Temperature.Mode = plan.TempChamber
	p.Temperature.PointsCelsius = []float64{25, 85}
	p.Units = []plan.Unit{{ID: "U1"}, {ID: "U2"}, {ID: "U3"}}
	sim := azNewBench(p, 33, 0.2e-6)
	var rs []journal.Reading
	for ti, tc := range p.Temperature.PointsCelsius {
		for u, unit := range p.Units {
			db := 110 + float64(u) - 0.1*(tc-25) // −0.1 dB/°C
			rs = sim.opAmpReadings(rs, unit.ID, ti, tc, azOpAmp{kc: math.Pow(10, -db/20)})
		}
	}
	res := azAnalyze(t, p, rs, Inputs{})
	if len(res.Temperature) != 1 {
		t.Fatalf("temperature %+v", res.Temperature)
	}
	tr := res.Temperature[0]
	if !tr.HasLotFit || math.Abs(tr.Fit.Common.SlopeDBPerC+0.1) > 1e-4 || tr.Fit.Common.DOF != 2 {
		t.Errorf("lot fit %+v", tr.Fit.Common)
	}
	if len(tr.TwoPoint) != 3 {
		t.Fatalf("two-point slopes %+v", tr.TwoPoint)
	}
	for i, tp := range tr.TwoPoint {
		u1 := azRatio(t, res, tp.Unit, plan.TestCMRR, 0).Rejection.StdUncDB
		u2 := azRatio(t, res, tp.Unit, plan.TestCMRR, 1).Rejection.StdUncDB
		if tp.Unit != p.Units[i].ID || tp.LowC != 25 || tp.HighC != 85 || math.Abs(tp.SlopeDBPerC+0.1) > 1e-4 ||
			math.Abs(tp.SlopeStdUncDBPerC-math.Hypot(u1, u2)/60) > 1e-12 || tp.SlopeStdUncDBPerC == 0 {
			t.Errorf("two-point %+v", tp)
		}
	}
}
