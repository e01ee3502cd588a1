package fit

import (
	"math"

	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"
)

// NoncentralTCDF returns P(T ≤ t) for the non-central t distribution with
// ν > 0 degrees of freedom and non-centrality δ, T = (Z + δ)/√(χ²_ν/ν).
//
// For t ≥ 0 it sums the Poisson mixture of Lenth (1989), "Cumulative
// distribution function of the non-central t distribution", Applied
// Statistics 38, algorithm AS 243:
//
//	F(t; ν, δ) = Φ(−δ) + ½·Σ_{j≥0} [ p_j·I_x(j+½, ν/2) + q_j·I_x(j+1, ν/2) ]
//	x = t²/(t²+ν),  λ = δ²/2,
//	p_j = e^{−λ}·λ^j/j!,  q_j = e^{−λ}·λ^j·δ/(√2·Γ(j+3/2))
//
// where I_x is the regularised incomplete beta function. Unlike AS 243,
// which starts at j = 0 (and underflows e^{−λ} for δ > ~37), the sum starts
// at the Poisson mode j = ⌊λ⌋ and runs outward in both directions, with
// I_x updated by its recurrence I_x(a+1, b) = I_x(a, b) − x^a(1−x)^b/(a·B(a, b)),
// as in Benton & Krishnamoorthy (2003), Computational Statistics & Data
// Analysis 43, 249-267. For t < 0, F(t; ν, δ) = 1 − F(−t; ν, −δ).
// NaN is returned for ν ≤ 0.
func NoncentralTCDF(t, nu, delta float64) float64 {
	if !(nu > 0) || math.IsNaN(t) || math.IsNaN(delta) {
		return math.NaN()
	}
	if t < 0 {
		return 1 - NoncentralTCDF(-t, nu, -delta)
	}
	phi := distuv.UnitNormal.CDF(-delta)
	if t == 0 {
		return phi
	}
	if math.IsInf(t, 1) {
		return 1
	}
	x := t * t / (t*t + nu)
	b := nu / 2
	if delta == 0 {
		return 0.5 + 0.5*mathext.RegIncBeta(0.5, b, x)
	}
	lam := delta * delta / 2
	j0 := math.Floor(lam)
	lnlam := math.Log(lam)
	sign := 1.0
	if delta < 0 {
		sign = -1
	}
	p0 := math.Exp(-lam + j0*lnlam - lgamma(j0+1))
	q0 := sign * math.Exp(-lam+(j0+0.5)*lnlam-lgamma(j0+1.5))
	lx, l1x := math.Log(x), math.Log1p(-x)
	if x == 1 { // t so large that 1−x rounds to 0
		l1x = math.Log(nu / (t * t))
	}
	// Incomplete beta chains at a = j+½ (for p_j) and a = j+1 (for q_j).
	ap, aq := j0+0.5, j0+1
	ip0 := mathext.RegIncBeta(ap, b, x)
	iq0 := mathext.RegIncBeta(aq, b, x)
	// g(a) = x^a (1−x)^b / (a·B(a, b)) = Γ(a+b)/(Γ(a+1)Γ(b)) x^a (1−x)^b.
	gp0 := math.Exp(ap*lx + b*l1x + lgamma(ap+b) - lgamma(ap+1) - lgamma(b))
	gq0 := math.Exp(aq*lx + b*l1x + lgamma(aq+b) - lgamma(aq+1) - lgamma(b))

	const tiny = 1e-18
	const maxTerms = 1 << 20
	sum := 0.0
	// Forward from the mode.
	p, q, ip, iq, gp, gq := p0, q0, ip0, iq0, gp0, gq0
	for j := j0; j < j0+maxTerms; j++ {
		sum += p*ip + q*iq
		if j > j0+1 && p+math.Abs(q) < tiny {
			break
		}
		ip -= gp
		iq -= gq
		a1, a2 := j+0.5, j+1
		gp *= x * (a1 + b) / (a1 + 1)
		gq *= x * (a2 + b) / (a2 + 1)
		p *= lam / (j + 1)
		q *= lam / (j + 1.5)
		ip, iq = math.Max(ip, 0), math.Max(iq, 0)
	}
	// Backward from the mode.
	p, q, ip, iq, gp, gq = p0, q0, ip0, iq0, gp0, gq0
	for j := j0 - 1; j >= 0; j-- {
		a1, a2 := j+0.5, j+1 // a of term j
		// g(a) from g(a+1): g(a) = g(a+1)·(a+1)/(x·(a+b)).
		gp *= (a1 + 1) / (x * (a1 + b))
		gq *= (a2 + 1) / (x * (a2 + b))
		ip = math.Min(ip+gp, 1)
		iq = math.Min(iq+gq, 1)
		p *= (j + 1) / lam
		q *= (j + 1.5) / lam
		sum += p*ip + q*iq
		if p+math.Abs(q) < tiny {
			break
		}
	}
	return math.Min(1, math.Max(0, phi+0.5*sum))
}

// NoncentralTQuantile returns t with NoncentralTCDF(t, ν, δ) = p, found by
// bracketing and Brent's method (Brent 1973, Algorithms for Minimization
// without Derivatives, ch. 4) to a relative tolerance of 1e-12. NaN for p
// outside (0, 1) or ν ≤ 0.
func NoncentralTQuantile(p, nu, delta float64) float64 {
	if !(p > 0 && p < 1) || !(nu > 0) {
		return math.NaN()
	}
	f := func(t float64) float64 { return NoncentralTCDF(t, nu, delta) - p }
	// Normal approximation to start: T ≈ N(δ, 1 + δ²/(2ν)).
	z := distuv.UnitNormal.Quantile(p)
	guess := delta + z*math.Sqrt(1+delta*delta/(2*nu))
	step := math.Max(1, math.Abs(guess)*0.1)
	lo, hi := guess-step, guess+step
	flo, fhi := f(lo), f(hi)
	for i := 0; flo > 0 && i < 200; i++ {
		hi, fhi = lo, flo
		step *= 2
		lo -= step
		flo = f(lo)
	}
	for i := 0; fhi < 0 && i < 200; i++ {
		lo, flo = hi, fhi
		step *= 2
		hi += step
		fhi = f(hi)
	}
	if flo > 0 || fhi < 0 {
		return math.NaN()
	}
	return brent(f, lo, hi, flo, fhi, 1e-12)
}

// brent finds a root of f in [a, b] with f(a)·f(b) ≤ 0 (Brent 1973).
func brent(f func(float64) float64, a, b, fa, fb, rtol float64) float64 {
	if fa == 0 {
		return a
	}
	if fb == 0 {
		return b
	}
	if math.Abs(fa) < math.Abs(fb) {
		a, b, fa, fb = b, a, fb, fa
	}
	c, fc := a, fa
	mflag := true
	var d float64
	for i := 0; i < 200; i++ {
		tol := rtol * math.Max(1, math.Abs(b))
		if fb == 0 || math.Abs(b-a) < tol {
			return b
		}
		var s float64
		if fa != fc && fb != fc {
			s = a*fb*fc/((fa-fb)*(fa-fc)) + b*fa*fc/((fb-fa)*(fb-fc)) + c*fa*fb/((fc-fa)*(fc-fb))
		} else {
			s = b - fb*(b-a)/(fb-fa)
		}
		lo, hi := (3*a+b)/4, b
		if lo > hi {
			lo, hi = hi, lo
		}
		if s < lo || s > hi ||
			(mflag && math.Abs(s-b) >= math.Abs(b-c)/2) ||
			(!mflag && math.Abs(s-b) >= math.Abs(c-d)/2) ||
			(mflag && math.Abs(b-c) < tol) ||
			(!mflag && math.Abs(c-d) < tol) {
			s = (a + b) / 2
			mflag = true
		} else {
			mflag = false
		}
		fs := f(s)
		d, c, fc = c, b, fb
		if fa*fs < 0 {
			b, fb = s, fs
		} else {
			a, fa = s, fs
		}
		if math.Abs(fa) < math.Abs(fb) {
			a, b, fa, fb = b, a, fb, fa
		}
	}
	return b
}

// ToleranceFactorLower returns the one-sided normal tolerance factor k such
// that x̄ − k·s (from n observations) is below at least a proportion
// `coverage` of a normal population with confidence `confidence`:
//
//	k = t'_{γ}(n − 1, δ = z_P·√n) / √n
//
// with t'_γ the γ-quantile of the non-central t distribution (Owen 1963,
// Factors for one-sided tolerance limits and for variables sampling plans,
// Sandia SCR-607; ISO 16269-6). The same k serves an upper bound x̄ + k·s.
// NaN for n < 2 or probabilities outside (0, 1).
func ToleranceFactorLower(n int, coverage, confidence float64) float64 {
	if n < 2 || !(coverage > 0 && coverage < 1) || !(confidence > 0 && confidence < 1) {
		return math.NaN()
	}
	rn := math.Sqrt(float64(n))
	delta := distuv.UnitNormal.Quantile(coverage) * rn
	return NoncentralTQuantile(confidence, float64(n-1), delta) / rn
}

func lgamma(x float64) float64 {
	v, _ := math.Lgamma(x)
	return v
}
