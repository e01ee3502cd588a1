package fit

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestSlopeCRBPointsMonteCarlo: with N_min points split between the two
// ends of the range, the least-squares slope's scatter over repeated
// simulated fits equals the target u (seeded Monte Carlo; the bound is
// the Cramér–Rao bound of the linear Gaussian model, Kay 1993 §3.5).
func TestSlopeCRBPointsMonteCarlo(t *testing.T) {
	const sigma, half, u = 2.0, 5.0, 0.05
	n := SlopeCRBPoints(sigma, half, u) // (2/(5·0.05))² = 64, worked by hand
	if math.Abs(n-64) > 1e-9 {
		t.Fatalf("N_min = %g, want 64", n)
	}
	rng := rand.New(rand.NewPCG(1, 2))
	var s, ss float64
	const trials = 4000
	for range trials {
		var sx, sy, sxx, sxy float64
		for i := range 64 {
			x := half
			if i%2 == 1 {
				x = -half
			}
			y := 0.3*x + 1 + sigma*rng.NormFloat64()
			sx, sy, sxx, sxy = sx+x, sy+y, sxx+x*x, sxy+x*y
		}
		b := (64*sxy - sx*sy) / (64*sxx - sx*sx)
		s += b
		ss += b * b
	}
	mean := s / trials
	sd := math.Sqrt(ss/trials - mean*mean)
	if math.Abs(sd/u-1) > 0.05 {
		t.Errorf("slope scatter %g, want %g within 5 %%", sd, u)
	}
	if !math.IsInf(SlopeCRBPoints(1, 0, 1), 1) {
		t.Error("a zero range must need infinitely many points")
	}
}
