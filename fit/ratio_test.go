package fit

import (
	"errors"
	"math"
	"testing"
)

func TestRatioWorkedExamples(t *testing.T) {
	cases := []struct {
		name       string
		stim, dvos float64
		wantDB     float64
		tol        float64
	}{
		{"5 V / 0.5 mV", 5, 0.5e-3, 80.0, 0.05},  // JEDEC JESD99B worked example [sec]: 10⁴ = 80.0 dB
		{"20 V / 20 µV", 20, 20e-6, 120.0, 0.05}, // JEDEC JESD99B worked example: 120.0 dB
		{"negative offset step keeps magnitude", 20, -20e-6, 120.0, 0.05},
	}
	for _, c := range cases {
		r, err := RatioFromSteps(c.stim, c.dvos)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if math.Abs(r.RatioDB-c.wantDB) > c.tol {
			t.Errorf("%s: %.3f dB, want %.1f", c.name, r.RatioDB, c.wantDB)
		}
		if math.Signbit(r.CoefficientVPerV) != math.Signbit(c.dvos) {
			t.Errorf("%s: sign lost: %v", c.name, r.CoefficientVPerV)
		}
	}
}

// PSRR in µV/V ↔ dB: JEDEC JESD99B (k_SVS/k_SVR):
// 1 / 10 / 31.6 / 100 µV/V = 120 / 100 / 90.0 / 80 dB.
func TestPSRRUVPerV(t *testing.T) {
	for _, c := range []struct{ uv, db, tol float64 }{{1, 120, 1e-9}, {10, 100, 1e-9}, {31.6, 90.0, 0.05}, {100, 80, 1e-9}} {
		if got := DBFromUVPerV(c.uv); math.Abs(got-c.db) > c.tol {
			t.Errorf("%v µV/V → %.4f dB, JEDEC JESD99B %v", c.uv, got, c.db)
		}
		r, err := RatioFromCoefficient(-c.uv * 1e-6)
		if err != nil || math.Abs(r.RatioDB-c.db) > c.tol || math.Abs(r.CoefficientUVPerV+c.uv) > 1e-12*c.uv {
			t.Errorf("%v µV/V: %+v %v", c.uv, r, err)
		}
		if back := UVPerVFromDB(DBFromUVPerV(c.uv)); math.Abs(back-c.uv) > 1e-12*c.uv {
			t.Errorf("round trip %v → %v", c.uv, back)
		}
	}
	if math.Abs(RatioFromDB(DBFromRatio(12345))-12345) > 1e-8 {
		t.Error("ratio/dB round trip")
	}
}

// MIL-M-38510/114 Table III: E1 − E2 = 0.300 V is 1000·ΔV_IO
// for ΔV_CM = 30 V → CMR = 20·log10(3×10⁴/0.300) = 100.0 dB;
// 1.687 V → 85.0 dB; supply: E3 − E15 = 0.100 V for 10 V → 100.0 dB.
func TestMIL38510NullLoop(t *testing.T) {
	for _, c := range []struct{ stim, dE0, want float64 }{{30, 0.300, 100.0}, {30, 1.687, 85.0}, {10, 0.100, 100.0}} {
		r, err := RatioFromNullLoop(c.stim, c.dE0, 1000)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(r.RatioDB-c.want) > 0.05 {
			t.Errorf("ΔE0 %v V over %v V: %.3f dB, MIL-M-38510/114 %.1f", c.dE0, c.stim, r.RatioDB, c.want)
		}
	}
}

// A general-purpose op-amp: about 90 dB, i.e. 31.6 µV/V (common practice,
// no published source). Through a noise gain of 1000 the meter sees
// 31.6 mV per volt of common mode.
func TestGeneralPurposeOpAmp(t *testing.T) {
	k, err := InputReferred(31.62e-3, 1000)
	if err != nil {
		t.Fatal(err)
	}
	r, _ := RatioFromCoefficient(k)
	if math.Abs(r.RatioDB-90) > 0.01 || math.Abs(r.CoefficientUVPerV-31.62) > 1e-9 {
		t.Errorf("%+v", r)
	}
	if _, err := InputReferred(1, 0); !errors.Is(err, ErrBadInput) {
		t.Errorf("zero gain: %v", err)
	}
}

// An inverting stage has both inputs at ground, so its common-mode stimulus
// is zero and it has no common-mode error to measure (common practice, no
// published source). The functions must refuse rather than divide.
func TestInvertingStageZeroSpan(t *testing.T) {
	if _, err := RatioFromSteps(0, 1e-6); !errors.Is(err, ErrZeroSpan) {
		t.Errorf("RatioFromSteps(0, …) err = %v", err)
	}
	x := []float64{0, 0, 0, 0, 0}
	y := []float64{1e-6, 2e-6, 1e-6, 0, 3e-6}
	if _, err := Line(x, y, LineOptions{}); !errors.Is(err, ErrZeroSpan) {
		t.Errorf("Line with zero span err = %v", err)
	}
	if _, err := RatioFromCoefficient(0); !errors.Is(err, ErrBadInput) {
		t.Errorf("zero coefficient err = %v", err)
	}
}

// TestBoardCMRR: CMRR = A_d/A_cm (JESD99B; Sedra & Smith). A_d = 100,
// A_cm = 0.01 → 10⁴ = 80 dB; relative uncertainties 0.3 % and 4 % give
// u_rel = √(0.003² + 0.04²) (GUM 5.1.6).
func TestBoardCMRR(t *testing.T) {
	br, err := BoardCMRR(Quantity{Value: 100, StdUnc: 0.3, DOF: 20}, Quantity{Value: -0.01, StdUnc: 0.0004, DOF: 10}, 0)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(br.Ratio-1e4) > 1e-8 || math.Abs(br.Rejection.RatioDB-80) > 1e-9 {
		t.Errorf("ratio %v, %v dB", br.Ratio, br.Rejection.RatioDB)
	}
	urel := math.Hypot(0.003, 0.04)
	if got := br.Rejection.StdUncUVPerV / math.Abs(br.Rejection.CoefficientUVPerV); math.Abs(got-urel) > 1e-12 {
		t.Errorf("u_rel %v, want %v", got, urel)
	}
	if math.Abs(br.Rejection.CoefficientUVPerV+100) > 1e-12 {
		t.Errorf("signed coefficient %v µV/V", br.Rejection.CoefficientUVPerV)
	}
	// ν_eff by Welch–Satterthwaite: (0.003²+0.04²)²/(0.003⁴/20 + 0.04⁴/10).
	wantNu := math.Pow(urel, 4) / (math.Pow(0.003, 4)/20 + math.Pow(0.04, 4)/10)
	if math.Abs(float64(br.Rejection.EffectiveDOF)-wantNu) > 1e-9*wantNu {
		t.Errorf("ν_eff %v want %v", float64(br.Rejection.EffectiveDOF), wantNu)
	}
	// A common-mode gain within its uncertainty of zero: lower bound only.
	br, err = BoardCMRR(Quantity{Value: 100, StdUnc: 0.1, DOF: 20}, Quantity{Value: 1e-6, StdUnc: 2e-6, DOF: 20}, 0)
	if err != nil {
		t.Fatal(err)
	}
	if br.Rejection.Resolved || br.Rejection.LowerBoundDB < 140 || br.Rejection.LowerBoundDB > 160 {
		t.Errorf("unresolved board: %+v", br.Rejection)
	}
	if _, err := BoardCMRR(Quantity{}, Quantity{Value: 1}, 0); !errors.Is(err, ErrBadInput) {
		t.Errorf("zero A_d: %v", err)
	}
}
