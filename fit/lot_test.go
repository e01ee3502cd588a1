package fit

import (
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

func TestLotBasic(t *testing.T) {
	v := []float64{95, 80, 100, 90, 85}
	s, err := Lot(v, 85, LotOptions{Unit: "dB"})
	if err != nil {
		t.Fatal(err)
	}
	sd := math.Sqrt(250.0 / 4)
	if s.N != 5 || s.Mean != 90 || math.Abs(s.SD-sd) > 1e-13 || s.Min != 80 || s.Max != 100 || s.Median != 90 {
		t.Errorf("%+v", s)
	}
	if math.Abs(s.Cpl-5/(3*sd)) > 1e-13 || !s.CplDefined {
		t.Errorf("Cpl %v", s.Cpl)
	}
	// k(n = 5, P = 0.95, γ = 0.95) = 4.203 (Montgomery & Runger Table XII)
	if math.Abs(s.ToleranceK-4.203) > 0.0005 || math.Abs(s.LowerToleranceBound-(90-s.ToleranceK*sd)) > 1e-12 {
		t.Errorf("k %v bound %v", s.ToleranceK, s.LowerToleranceBound)
	}
	if s.PassCount != 4 || s.Yield != 0.8 || len(s.Outliers) != 0 || s.Unit != "dB" || s.OutlierMethod == "" {
		t.Errorf("%+v", s)
	}
	even, _ := Lot([]float64{1, 4, 2, 3}, 0, LotOptions{})
	if even.Median != 2.5 {
		t.Errorf("median %v", even.Median)
	}
	flat, err := Lot([]float64{3, 3, 3}, 1, LotOptions{})
	if err != nil || flat.CplDefined || flat.Cpl != 0 {
		t.Errorf("flat %+v %v", flat, err)
	}
	if _, err := Lot([]float64{1}, 0, LotOptions{}); !errors.Is(err, ErrTooFewPoints) {
		t.Errorf("n=1: %v", err)
	}
	if _, err := Lot([]float64{1, math.NaN()}, 0, LotOptions{}); !errors.Is(err, ErrBadInput) {
		t.Errorf("NaN: %v", err)
	}
}

// TestESDCriticalGrubbs: for i = 1 Rosner's λ is Grubbs' two-sided critical
// value. From memory: Grubbs (1969) table, n = 10, α = 0.05 two-sided:
// 2.290; NIST/SEMATECH e-Handbook §1.3.5.17.1 example, n = 100: 3.384.
func TestESDCriticalGrubbs(t *testing.T) {
	for _, c := range []struct {
		n    int
		want float64
	}{{10, 2.290}, {100, 3.384}} {
		if got := ESDCritical(c.n, 1, 0.05); math.Abs(got-c.want) > 0.0005 {
			t.Errorf("n=%d: %.4f, want %.3f (from memory)", c.n, got, c.want)
		}
	}
	if !math.IsNaN(ESDCritical(3, 2, 0.05)) {
		t.Error("no dof left should give NaN")
	}
}

func TestGeneralizedESDPlanted(t *testing.T) {
	rng := rand.New(rand.NewPCG(42, 1))
	v := make([]float64, 200)
	for i := range v {
		v[i] = 100 + rng.NormFloat64()
	}
	v[17], v[80], v[151] = 110, 91, 108.5
	got := GeneralizedESD(v, 10, 0.05)
	if !slices.Equal(got, []int{17, 80, 151}) {
		t.Errorf("outliers %v, planted [17 80 151]", got)
	}
	s, _ := Lot(v, 95, LotOptions{})
	if !slices.Equal(s.Outliers, []int{17, 80, 151}) {
		t.Errorf("Lot outliers %v", s.Outliers)
	}
	// clean data: none (seeded)
	if got := GeneralizedESD(v[:15], 3, 0.05); len(got) != 0 {
		t.Errorf("clean data flagged %v", got)
	}
	if got := GeneralizedESD([]float64{1, 2}, 1, 0.05); len(got) != 0 {
		t.Errorf("n=2 flagged %v", got)
	}
}
