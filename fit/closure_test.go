package fit

import (
	"math"
	"testing"
)

// worked example of fit/doc.go (invented numbers): k_c = +10, k_p = +4,
// k_o = +0.01 µV/V → k_n = −14.01; CMRR 100.00 dB, PSRR+ 107.96 dB,
// PSRR− 97.07 dB, A_OL 160 dB; supply shift reads 99.99 dB; symmetric
// supply change 9.005 µV/V.
func TestFourCoefficientWorkedExample(t *testing.T) {
	kc, kp, ko := 10.0, 4.0, 0.01
	kn := FourthCoefficient(kc, kp, ko)
	if math.Abs(kn-(-14.01)) > 1e-12 {
		t.Fatalf("k_n = %v, the identity derived in fit/doc.go −14.01", kn)
	}
	for _, c := range []struct {
		name  string
		uv    float64
		want  float64
		digit float64
	}{
		{"CMRR", kc, 100.00, 0.005}, {"PSRR+", kp, 107.96, 0.005}, {"PSRR−", kn, 97.07, 0.005}, {"A_OL", ko, 160, 0.5},
	} {
		if got := DBFromUVPerV(c.uv); math.Abs(got-c.want) > c.digit {
			t.Errorf("%s %.4f dB, the identity derived in fit/doc.go %v", c.name, got, c.want)
		}
	}
	if got := SymmetricSupplyUVPerV(kp, kn); math.Abs(got-9.005) > 1e-12 {
		t.Errorf("symmetric supply %v µV/V, the identity derived in fit/doc.go 9.005", got)
	}
	shift := kp + kn // = −(kc + ko) = −10.01
	sc, err := CorrectShift(Quantity{Value: shift, StdUnc: 0.01, DOF: 30}, Quantity{Value: ko, StdUnc: 0.001, DOF: 30}, 0)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(sc.Uncorrected.RatioDB-99.99) > 0.005 { // the identity derived in fit/doc.go: supply shift reads 99.99 dB
		t.Errorf("uncorrected %.4f dB", sc.Uncorrected.RatioDB)
	}
	if math.Abs(sc.Corrected.RatioDB-100.00) > 0.005 { // the identity derived in fit/doc.go: CMRR 100.00 dB
		t.Errorf("corrected %.4f dB", sc.Corrected.RatioDB)
	}
	if sc.Corrected.StdUncUVPerV <= sc.Uncorrected.StdUncUVPerV || math.Abs(sc.Corrected.StdUncUVPerV-math.Hypot(0.01, 0.001)) > 1e-15 {
		t.Errorf("corrected u %v, uncorrected %v", sc.Corrected.StdUncUVPerV, sc.Uncorrected.StdUncUVPerV)
	}
	if sc.AOLTermUVPerV != -ko || len(sc.Corrected.Budget.Rows) != 2 {
		t.Errorf("%+v", sc)
	}
}

func TestCheckClosure(t *testing.T) {
	cases := []struct {
		name         string
		shift, p, n  Quantity
		wantClosure  float64
		wantMismatch bool
	}{
		// superposition holds: −10.01 = 4 + (−14.01), small noise
		{"holds", Quantity{-10.0, 0.05, 20}, Quantity{4.02, 0.05, 20}, Quantity{-14.0, 0.05, 20}, -0.02, false},
		// a thermal tail adds 1 µV/V to the shift step only
		{"broken", Quantity{-9.01, 0.05, 20}, Quantity{4.0, 0.05, 20}, Quantity{-14.01, 0.05, 20}, 1.0, true},
	}
	for _, c := range cases {
		r, err := CheckClosure(c.shift, c.p, c.n, 0)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(r.ClosureUVPerV-c.wantClosure) > 1e-9 || r.Mismatch != c.wantMismatch {
			t.Errorf("%s: %+v", c.name, r)
		}
		// u = √3·0.05; ν_eff = (3u²)²/(3u⁴/20) = 60 → k = t_0.975(60) = 2.000 (NIST/SEMATECH t table)
		if math.Abs(r.StdUncUVPerV-0.05*math.Sqrt(3)) > 1e-15 || math.Abs(float64(r.EffectiveDOF)-60) > 1e-9 || math.Abs(r.CoverageK-2.000) > 0.0005 {
			t.Errorf("%s: u %v ν %v k %v", c.name, r.StdUncUVPerV, float64(r.EffectiveDOF), r.CoverageK)
		}
	}
}
