package estimate

import (
	"math"

	"nullbench/procedure/plan"
)

// recordSeconds is the length of one record at f: the runner's coherent
// plan (fit.CoherentSampling at the rate min(max_rate_hz,
// f·min_samples/min_cycles)) takes N = min_samples samples and the
// smallest M ≥ f·N/rate cycles with gcd(M, N) = 1, so M/f seconds (IEEE
// Std 1241-2010 §4.1.4.5). The same search, kept here because this
// package imports no fitting code; a test holds it to fit's.
func recordSeconds(t *plan.ACTest, f float64) float64 {
	n := max(t.MinSamples, 4)
	cycles := max(t.MinCycles, 1)
	if !(f > 0) {
		return 0
	}
	rate := float64(n) * f / float64(cycles)
	if t.MaxRateHz > 0 {
		rate = math.Min(rate, t.MaxRateHz)
	}
	m := max(int(math.Ceil(f*float64(n)/rate*(1-1e-12)-1e-9)), 1)
	for ; 2*m < n; m++ {
		if gcdInt(m, n) == 1 {
			return float64(m) / f
		}
	}
	return float64(n) / rate
}

func gcdInt(a, b int) int {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}
