package fit

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestToleranceFactorTable checks k against the one-sided normal tolerance
// factors of Montgomery & Runger, Applied Statistics and Probability for
// Engineers, 7th ed., Table XII, γ = 0.95 (via the secondary copy named in
// fit/testdata/reference/tolerance_k_onesided_normal.txt), to the 3 decimals the
// table prints.
func TestToleranceFactorTable(t *testing.T) {
	tab := loadRef(t, "tolerance_k_onesided_normal.txt")
	ns, _ := tab.Column("n")
	k95, _ := tab.Column("k_P0.95_g0.95")
	k99, _ := tab.Column("k_P0.99_g0.95")
	if len(ns) < 6 {
		t.Fatalf("only %d rows parsed", len(ns))
	}
	for i, nf := range ns {
		n := int(nf)
		for _, c := range []struct {
			p    float64
			want float64
		}{{0.95, k95[i]}, {0.99, k99[i]}} {
			got := ToleranceFactorLower(n, c.p, 0.95)
			// Montgomery & Runger Table XII (γ = 0.95), 3 decimals.
			if math.Abs(got-c.want) > 0.0005+1e-12 {
				t.Errorf("n=%d P=%.2f: k = %.5f, table %.3f", n, c.p, got, c.want)
			}
		}
	}
}

// TestToleranceFactorComputed checks the extra digits the reference file's
// header quotes as a computed (mpmath) check, not a published value:
// n = 5: 4.20268 (P 0.95), 5.74108 (P 0.99); n = 50: 2.06499, 2.86245.
func TestToleranceFactorComputed(t *testing.T) {
	cases := []struct {
		n       int
		p, want float64
	}{{5, 0.95, 4.20268}, {5, 0.99, 5.74108}, {50, 0.95, 2.06499}, {50, 0.99, 2.86245}}
	for _, c := range cases {
		got := ToleranceFactorLower(c.n, c.p, 0.95)
		if math.Abs(got-c.want) > 0.000005+1e-12 {
			t.Errorf("n=%d P=%v: k = %.6f, computed reference %.5f", c.n, c.p, got, c.want)
		}
	}
}

// TestToleranceFactorLargeN: for large n the factor approaches the
// approximation of Natrella, Experimental Statistics (NBS Handbook 91), as
// restated in the NIST/SEMATECH e-Handbook §7.2.6.3 (from memory):
// k ≈ (z_P + √(z_P² − a·b))/a, a = 1 − z_γ²/(2(n−1)), b = z_P² − z_γ²/n.
// Its error shrinks with n; the tolerances below are loose enough for it.
func TestToleranceFactorLargeN(t *testing.T) {
	for _, c := range []struct {
		n   int
		tol float64
	}{{1000, 5e-4}, {10000, 1e-4}} {
		zp := distuv.UnitNormal.Quantile(0.95)
		zg := zp
		n := float64(c.n)
		a := 1 - zg*zg/(2*(n-1))
		b := zp*zp - zg*zg/n
		approx := (zp + math.Sqrt(zp*zp-a*b)) / a
		got := ToleranceFactorLower(c.n, 0.95, 0.95)
		if math.IsNaN(got) || math.Abs(got-approx) > c.tol {
			t.Errorf("n=%d: k = %v, Natrella approximation %v", c.n, got, approx)
		}
	}
}

// TestNoncentralTCDFCentral: with δ = 0 the CDF is Student's t (gonum's
// distuv.StudentsT, an independent implementation), and at t = 0 it is
// Φ(−δ) (by definition: P(Z + δ ≤ 0)).
func TestNoncentralTCDFCentral(t *testing.T) {
	for _, nu := range []float64{1, 2.5, 9, 40} {
		for _, x := range []float64{-3, -0.5, 0.7, 2, 10} {
			want := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: nu}.CDF(x)
			if got := NoncentralTCDF(x, nu, 0); math.Abs(got-want) > 1e-13 {
				t.Errorf("ν=%v t=%v: %v, Student t %v", nu, x, got, want)
			}
		}
	}
	for _, d := range []float64{-2, 1, 5, 40} {
		if got, want := NoncentralTCDF(0, 7, d), distuv.UnitNormal.CDF(-d); math.Abs(got-want) > 1e-15 {
			t.Errorf("δ=%v t=0: %v, Φ(−δ) %v", d, got, want)
		}
	}
}

// TestNoncentralTCDFMonteCarlo compares the CDF with the fraction of a
// seeded sample of (Z + δ)/√(χ²_ν/ν) below t (4·10⁵ draws, 5σ binomial
// tolerance), including a large δ where AS 243's forward sum would
// underflow.
func TestNoncentralTCDFMonteCarlo(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	const draws = 400000
	cases := []struct{ nu, delta float64 }{{4, 1.5}, {9, -2}, {19, 7.2}, {200, 60}}
	for _, c := range cases {
		chi := distuv.ChiSquared{K: c.nu, Src: rng}
		sample := make([]float64, draws)
		for i := range sample {
			sample[i] = (rng.NormFloat64() + c.delta) / math.Sqrt(chi.Rand()/c.nu)
		}
		for _, q := range []float64{0.05, 0.5, 0.95} {
			x := NoncentralTQuantile(q, c.nu, c.delta)
			cnt := 0
			for _, v := range sample {
				if v <= x {
					cnt++
				}
			}
			frac := float64(cnt) / draws
			sd := math.Sqrt(q * (1 - q) / draws)
			if math.Abs(frac-q) > 5*sd {
				t.Errorf("ν=%v δ=%v: F(%v) = %v by sampling, want %v", c.nu, c.delta, x, frac, q)
			}
			if back := NoncentralTCDF(x, c.nu, c.delta); math.Abs(back-q) > 1e-10 {
				t.Errorf("ν=%v δ=%v: CDF(quantile(%v)) = %v", c.nu, c.delta, q, back)
			}
		}
	}
}

// TestNoncentralTReflection: F(t; ν, δ) = 1 − F(−t; ν, −δ) by symmetry.
func TestNoncentralTReflection(t *testing.T) {
	for _, c := range []struct{ x, nu, d float64 }{{1.3, 5, 0.4}, {3, 12, 2.5}, {0.2, 30, -1}} {
		a := NoncentralTCDF(c.x, c.nu, c.d)
		b := 1 - NoncentralTCDF(-c.x, c.nu, -c.d)
		if math.Abs(a-b) > 1e-14 {
			t.Errorf("%+v: %v vs %v", c, a, b)
		}
		if a <= 0 || a >= 1 {
			t.Errorf("%+v: CDF %v out of (0,1)", c, a)
		}
	}
}
