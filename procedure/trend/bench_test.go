package trend

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// BenchmarkBuild50000 builds the trend of 50 000 results: 1 000 campaigns
// (lots) of 10 units × 5 tests, a fifth of the units measured again on a
// second bench, i.e. the trend query of the archive's benchmark.
func BenchmarkBuild50000(b *testing.B) {
	rng := rand.New(rand.NewPCG(5, 6))
	tests := []string{"cmrr", "psrr_pos", "psrr_neg", "cmrr_hi", "psrr_sym"}
	var rows []Row
	for lot := range 1000 {
		for u := range 10 {
			for _, test := range tests {
				r := Row{Part: "HX4107", Lot: fmt.Sprintf("L%04d", lot), Unit: fmt.Sprintf("u%d", u), Test: test,
					TemperatureC: 25, Bench: "bench-A", Value: 120 + rng.NormFloat64(), ValueUnit: UnitDB,
					Decision: "pass", Limit: 110, Date: day0.AddDate(0, 0, lot)}
				rows = append(rows, r)
				if u < 2 {
					r.Bench, r.Value = "bench-B", 120+rng.NormFloat64()
					rows = append(rows, r)
				}
			}
		}
	}
	rows = rows[:50000]
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		tr, err := Build(rows, Options{})
		if err != nil || len(tr.Charts) != 5 || math.IsNaN(tr.Charts[0].SigmaHat) {
			b.Fatal(err)
		}
	}
}
