package freq

import (
	"math"
	"strings"
	"testing"

	"nullbench/fit"
	"nullbench/procedure/analysis"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// chFit is a channel fit of y = a·cos(ωt + φ) (A = a·cos φ, B = −a·sin φ)
// with independent standard uncertainties u on A and B.
func chFit(f, a, phiDeg, u float64) journal.ACChannelFit {
	phi := phiDeg * math.Pi / 180
	var cov [3][3]float64
	cov[0][0], cov[1][1], cov[2][2] = u*u, u*u, u*u
	return journal.ACChannelFit{FrequencyHz: f, A: a * math.Cos(phi), B: -a * math.Sin(phi), Cov: cov, N: 2000, DOF: 1997}
}

func acRec(kind, rec string, fi int, f float64, ch1, ch2 journal.ACChannelFit) journal.ACReading {
	return journal.ACReading{Unit: "N01", Test: kind, FreqIndex: fi, FrequencyHz: f, Record: rec, GeneratorOn: rec != journal.ACFloor,
		Channels: []journal.ACChannelFit{ch1, ch2}}
}

func freqTestPlan() *plan.Plan {
	return &plan.Plan{
		Fixture: plan.Fixture{Kind: plan.FixtureNullingLoop, NoiseGain: 1000, NoiseGainTolerance: 0.001},
		Part:    plan.Part{GBWHz: 1e6, GBWTolerance: 0.1},
		ACTests: []plan.ACTest{{Kind: plan.TestCMRR, FrequenciesHz: []float64{1e3}, LimitsDB: []float64{100}}},
	}
}

// TestFreqPointWorkedExample checks the chain H = R/S, G = H/M,
// k = G/K(f), K(f) = K/(1 + j·f·K/GBW) on exact fits, worked by hand:
// S = 1 V ∠0°, R = 2 mV ∠−30°, through M = 1.1 ∠2°, K = 1000, GBW = 1 MHz,
// f = 1 kHz: K(f) = 1000/(1 + j) = 707.107 ∠−45°, so |k| = 2e-3/1.1/707.107
// = 2.5713e-6, −20·log10|k| = 111.797 dB, arg k = −30° − 2° + 45° = 13°.
func TestFreqPointWorkedExample(t *testing.T) {
	p := freqTestPlan()
	f := 1e3
	recs := []journal.ACReading{
		acRec(plan.TestCMRR, journal.ACFloor, 0, f, chFit(f, 1e-7, 0, 1e-7), chFit(f, 1e-8, 10, 1e-7)),
		acRec(plan.TestCMRR, journal.ACThrough, 0, f, chFit(f, 1, 0, 1e-6), chFit(f, 1.1, 2, 1e-6)),
		acRec(plan.TestCMRR, journal.ACStimulus, 0, f, chFit(f, 1, 0, 1e-6), chFit(f, 2e-3, -30, 1e-7)),
	}
	res, probs, err := AnalyzeFreq(p, recs, FreqInputs{})
	if err != nil || len(probs) > 0 || len(res) != 1 || len(res[0].Points) != 1 {
		t.Fatalf("%v %+v %+v", err, probs, res)
	}
	pt := res[0].Points[0]
	if math.Abs(pt.Rejection.RatioDB-111.797) > 0.001 || math.Abs(pt.PhaseDeg-13) > 1e-6 {
		t.Errorf("ratio %.4f dB phase %.4f°, want 111.797 dB, 13°", pt.Rejection.RatioDB, pt.PhaseDeg)
	}
	if math.Abs(pt.FixtureGainDB-20*math.Log10(707.107)) > 1e-4 || math.Abs(pt.ThroughGainDB-20*math.Log10(1.1)) > 1e-9 {
		t.Errorf("fixture %.5f dB, through %.5f dB", pt.FixtureGainDB, pt.ThroughGainDB)
	}
	// Budget rows: the fits' Type A (stimulus, through), the fixture gain
	// tolerance ±0.1 % → 8.686·0.001/√3 = 0.005015 dB, the GBW ±10 % at
	// x = 1: 8.686·(1/2)·0.1/√3 = 0.2507 dB (GUM 4.3.7, worked by hand).
	rows := map[string]float64{}
	for _, r := range pt.Rejection.Budget.Rows {
		rows[strings.SplitN(r.Name, " ", 3)[0]+" "+strings.SplitN(r.Name, " ", 3)[1]] = r.Contribution
	}
	if u := rows["fixture gain"]; math.Abs(u-0.0050148) > 1e-6 {
		t.Errorf("fixture gain row %.7f dB, want 0.0050148", u)
	}
	if u := rows["fixture roll-off"]; math.Abs(u-0.25074) > 1e-4 {
		t.Errorf("roll-off row %.5f dB, want 0.25074", u)
	}
	if !pt.Rejection.Resolved || !pt.Judged || pt.Decision.State != fit.StatePass {
		t.Errorf("resolved %v judged %v decision %+v", pt.Rejection.Resolved, pt.Judged, pt.Decision)
	}
}

// TestFreqNoiseFloorLowerBound: a response within k standard
// uncertainties of the floor is reported as the one-sided bound
// ratio ≥ −20·log10((R + k·u_R)/(S·|M|·|K(f)|)), u_R = √(u_fit² + floor²)
// (EURACHEM/CITAC CG4 Appendix F, as at DC), never judged "fail"
// (ILAC-G8 with no upper bound: DecideRejection).
func TestFreqNoiseFloorLowerBound(t *testing.T) {
	p := freqTestPlan()
	p.Part.GBWHz = 0 // flat fixture: |K(f)| = 1000
	f := 1e3
	floor := 3e-6
	recs := []journal.ACReading{
		acRec(plan.TestCMRR, journal.ACFloor, 0, f, chFit(f, 1e-7, 0, 1e-7), chFit(f, floor, 40, 1e-6)),
		acRec(plan.TestCMRR, journal.ACThrough, 0, f, chFit(f, 1, 0, 1e-6), chFit(f, 1, 0, 1e-6)),
		acRec(plan.TestCMRR, journal.ACStimulus, 0, f, chFit(f, 1, 0, 1e-6), chFit(f, 2e-6, 70, 1e-6)),
	}
	res, _, err := AnalyzeFreq(p, recs, FreqInputs{})
	if err != nil {
		t.Fatal(err)
	}
	pt := res[0].Points[0]
	if pt.Rejection.Resolved {
		t.Fatalf("2 µV under a 3 µV floor resolved: %+v", pt.Rejection)
	}
	// u_fit(R) = 1 µV (both quadratures 1 µV), so u_R = √(1 + 9) µV.
	uR := math.Sqrt(10) * 1e-6
	k := pt.Rejection.CoverageK
	want := -20 * math.Log10((2e-6+k*uR)/1000)
	if math.Abs(pt.Rejection.LowerBoundDB-want) > 1e-6 {
		t.Errorf("lower bound %.4f dB, want %.4f", pt.Rejection.LowerBoundDB, want)
	}
	if floorDB := -20 * math.Log10(k*uR/1000); math.Abs(pt.NoiseFloorDB-floorDB) > 1e-6 || pt.Rejection.LowerBoundDB > pt.NoiseFloorDB {
		t.Errorf("noise floor %.3f dB (want %.3f), bound %.3f dB", pt.NoiseFloorDB, floorDB, pt.Rejection.LowerBoundDB)
	}
	if !pt.Judged || pt.Decision.State == fit.StateFail || !pt.Decision.JudgedOnLowerBound {
		t.Errorf("decision %+v", pt.Decision)
	}
	v, lb := pt.ValueDB()
	if !lb || v != pt.Rejection.LowerBoundDB {
		t.Errorf("ValueDB %g %v", v, lb)
	}
	// The same response 1000 times larger stands clear of the floor.
	recs[2] = acRec(plan.TestCMRR, journal.ACStimulus, 0, f, chFit(f, 1, 0, 1e-6), chFit(f, 2e-3, 70, 1e-6))
	res, _, _ = AnalyzeFreq(p, recs, FreqInputs{})
	if pt := res[0].Points[0]; !pt.Rejection.Resolved || math.Abs(pt.Rejection.RatioDB-113.979) > 0.001 {
		t.Errorf("2 mV response: resolved %v, %.4f dB, want 113.979 dB (−20·log10(2e-3/1000))", pt.Rejection.Resolved, pt.Rejection.RatioDB)
	}
}

// TestFreqACMeterWiderNoPhase: the AC voltmeter's RMS readings give the
// ratio of the worked example's magnitudes, without a phase, and its
// budget carries the meter's accuracy on both inputs (at levels decades
// apart it does not cancel; figures below are the built-in acvm's).
func TestFreqACMeterWiderNoPhase(t *testing.T) {
	p := freqTestPlan()
	f := 1e3
	rms := func(rec string, v1, v2 float64) journal.ACReading {
		return journal.ACReading{Unit: "N01", Test: plan.TestCMRR, FrequencyHz: f, Record: rec, RMSVolts: []float64{v1, v2}}
	}
	var recs []journal.ACReading
	for i, r := range []struct{ v1, v2 float64 }{{0.7071, 1.414e-3}, {0.7072, 1.415e-3}, {0.7070, 1.413e-3}} {
		x := rms(journal.ACStimulus, r.v1, r.v2)
		x.Repeat = i
		recs = append(recs, x)
	}
	recs = append(recs, rms(journal.ACThrough, 0.7071, 0.7071), rms(journal.ACFloor, 1e-7, 1e-7))
	am := &ACFigures{AmplitudeAccuracyPct: 0.1, Hz: []float64{20, 1e3, 2e4}, FlatnessDB: []float64{0.05, 0.01, 0.03}}
	res, probs, err := AnalyzeFreq(p, recs, FreqInputs{ACMeter: am})
	if err != nil || len(probs) > 0 {
		t.Fatal(err, probs)
	}
	pt := res[0].Points[0]
	if pt.HasPhase || pt.Instrument != "ac_meter" || pt.Records != 3 {
		t.Errorf("ac meter point %+v", pt)
	}
	// ratio 2e-3 (input 2/input 1), K(f) = 707.107: 20·log10(707.107/2e-3) = 110.969 dB.
	if math.Abs(pt.Rejection.RatioDB-110.969) > 0.01 {
		t.Errorf("ratio %.4f dB, want 110.969", pt.Rejection.RatioDB)
	}
	// The accuracy row alone: √2·8.686·0.001/√3 = 0.00709 dB.
	found := false
	for _, r := range pt.Rejection.Budget.Rows {
		if strings.HasPrefix(r.Name, "AC voltmeter accuracy") {
			found = math.Abs(r.Contribution-0.0070922) < 1e-6
		}
	}
	if !found {
		t.Errorf("no accuracy row of 0.00709 dB: %+v", pt.Rejection.Budget.Rows)
	}
}

// TestFreqPoleAndDCCheck: ratios on an exact single pole (R_dc = 100 dB,
// f_p = 300 Hz) fit back to it, and the low-frequency ratio is checked
// against the unit's DC result: consistent at 100.0 dB, not at 103 dB.
func TestFreqPoleAndDCCheck(t *testing.T) {
	mk := func(dcDB float64) *FreqResponse {
		fr := &FreqResponse{Unit: "N01", Test: plan.TestCMRR}
		for _, f := range plan.LogSpaced(10, 1e5, 8) {
			db := 100 - 10*math.Log10(1+(f/300)*(f/300))
			fr.Points = append(fr.Points, FreqPoint{FrequencyHz: f, Rejection: fit.Rejection{Resolved: true, RatioDB: db, StdUncDB: 0.05}})
		}
		dc := &analysis.Results{Ratios: []analysis.RatioResult{{Unit: "N01", Name: plan.TestCMRR, Rejection: fit.Rejection{Resolved: true, RatioDB: dcDB, ExpandedUDB: 0.2}}}}
		polePlusDC(fr, dc, 0.95)
		return fr
	}
	fr := mk(100)
	if fr.Pole == nil || math.Abs(fr.Pole.PoleHz-300) > 0.01 || math.Abs(fr.Pole.RatioDCDB-100) > 1e-4 {
		t.Fatalf("pole %+v (%s)", fr.Pole, fr.PoleNote)
	}
	if !fr.DCChecked || !fr.DCConsistent {
		t.Errorf("DC 100 dB: checked %v consistent %v (%s)", fr.DCChecked, fr.DCConsistent, fr.DCNote)
	}
	if fr := mk(103); !fr.DCChecked || fr.DCConsistent || !strings.Contains(fr.DCNote, "differs") {
		t.Errorf("DC 103 dB: checked %v consistent %v (%s)", fr.DCChecked, fr.DCConsistent, fr.DCNote)
	}
}

// TestFreqMethodTextNamesWhatTheCodeDoes: the frequency method statement
// names the constants and forms the code uses; a change that is not
// carried to the text fails here.
func TestFreqMethodTextNamesWhatTheCodeDoes(t *testing.T) {
	text := strings.Join(FreqMethodText(), "\n")
	for _, want := range []string{"three-parameter", "K/(1 + j·f·K/GBW)", "(1 + G)", "a tenth", analysis.ResultCMRRUncorrected, "10·log10(1 + (f/f_p)²)", "zero sensitivity"} {
		if !strings.Contains(text, want) {
			t.Errorf("method text lacks %q", want)
		}
	}
	if CalibrationResidualFraction != 0.1 {
		t.Errorf("the text says a tenth, the code uses %g", CalibrationResidualFraction)
	}
}

// Frequencies in notes, problems and budget rows are given to 4
// significant figures in plain decimal (GUM 7.2.6: no excessive number
// of digits); the log-spaced points are plan.LogSpaced's, whose binary
// digits would otherwise all be printed.
func TestHzTextRoundsToFourFigures(t *testing.T) {
	for _, tc := range []struct {
		f    float64
		want string
	}{
		{37.275937203149404, "37.28 Hz"},
		{26834.9, "26830 Hz"},
		{1000, "1000 Hz"},
		{0.5, "0.5 Hz"},
		{99999, "100000 Hz"},
		{123456789, "123500000 Hz"},
		{0.0123456, "0.01235 Hz"},
	} {
		if got := hzText(tc.f); got != tc.want {
			t.Errorf("hzText(%v) = %q, want %q", tc.f, got, tc.want)
		}
	}
	for _, f := range plan.LogSpaced(10, 1e5, 13) {
		if s := hzText(f); len(s) > len("100000 Hz") {
			t.Errorf("hzText(%v) = %q: more digits than 4 significant figures need", f, s)
		}
	}
}
