package fit

import (
	"math/rand/v2"
	"testing"
)

// BenchmarkLot10000 analyses a lot of 10 000 parts: per part a 20-reading
// zigzag common-mode sweep with a drift term (Line), its coefficient budget
// with three Type B rows and the dB result (CoefficientRejection), a guarded
// decision, then the lot statistics (Lot: tolerance factor for n = 10 000
// and the generalized ESD test).
func BenchmarkLot10000(b *testing.B) {
	const parts = 10000
	rng := rand.New(rand.NewPCG(3, 4))
	x := zigzag(20, 8, 2)[:20]
	tm := make([]float64, len(x))
	for i := range tm {
		tm[i] = 2 * float64(i)
	}
	ys := make([][]float64, parts)
	for p := range ys {
		k := (3 + rng.Float64()*4) * 1e-6
		ys[p] = make([]float64, len(x))
		for i, v := range x {
			ys[p][i] = 1000*k*v + 1e-3 + 1e-7*tm[i] + 3e-5*rng.NormFloat64()
		}
	}
	in := BudgetInputs{NoiseGain: 1000, NoiseGainTolRel: 0.001, MeterGainPPM: 30, StimulusGainPPM: 500}
	db := make([]float64, parts)
	b.ReportAllocs()
	for b.Loop() {
		for p := range ys {
			f, err := Line(x, ys[p], LineOptions{Time: tm})
			if err != nil {
				b.Fatal(err)
			}
			r, err := CoefficientRejection(f, in)
			if err != nil {
				b.Fatal(err)
			}
			if _, err := DecideRejection(r, 100, RuleGuarded); err != nil {
				b.Fatal(err)
			}
			db[p] = r.LowerBoundDB
			if r.Resolved {
				db[p] = r.RatioDB
			}
		}
		if _, err := Lot(db, 100, LotOptions{Unit: "dB"}); err != nil {
			b.Fatal(err)
		}
	}
}
