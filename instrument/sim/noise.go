package sim

import (
	"math"
	"math/rand/v2"
)

// ouProcess is a first-order Gauss–Markov (Ornstein–Uhlenbeck) process with
// stationary standard deviation sigma and correlation time tau (seconds of
// bench time):
//
//	dx = −x/τ dt + σ·√(2/τ) dW
//
// It is advanced exactly for any gap, so the noise a reading sees depends
// only on bench time, not on how often the model was looked at. With
// a = exp(−T/τ), conditional on x(0) (standard results for the OU process):
//
//	x(T)            = a·x(0) + ε1,             Var ε1 = σ²(1 − a²)
//	Y = ∫₀ᵀ x dt    = τ(1 − a)·x(0) + ε2,      Var ε2 = σ²τ²(2T/τ − 3 + 4a − a²)
//	Cov(ε1, ε2)     = σ²τ(1 − a)²
//
// so the mean over a meter's integration window is sampled exactly.
type ouProcess struct {
	sigma float64 // stationary rms
	tau   float64 // seconds
	x     float64
	t     float64 // bench seconds of x
	init  bool
}

// advance moves the process to bench time t (seconds) without averaging.
func (p *ouProcess) advance(rng *rand.Rand, t float64) {
	if !p.init {
		p.x = p.sigma * rng.NormFloat64()
		p.t = t
		p.init = true
		return
	}
	dt := t - p.t
	if dt <= 0 {
		return
	}
	a := math.Exp(-dt / p.tau)
	p.x = a*p.x + p.sigma*math.Sqrt(1-a*a)*rng.NormFloat64()
	p.t = t
}

// windowMean returns the mean of the process over [t0, t1] and leaves the
// process at t1. If the process is already past t0 (a window overlapping a
// previous one), the window starts where the process is.
func (p *ouProcess) windowMean(rng *rand.Rand, t0, t1 float64) float64 {
	p.advance(rng, t0)
	T := t1 - p.t
	if T <= 0 {
		return p.x
	}
	r := T / p.tau
	a := math.Exp(-r)
	s2 := p.sigma * p.sigma
	var1 := s2 * (1 - a*a)
	var ySpan float64
	if r < 1e-4 {
		// Series of 2r − 3 + 4a − a² = (2/3)r³ − (1/2)r⁴ + … for small r.
		ySpan = r * r * r * (2.0/3.0 - r/2)
	} else {
		ySpan = 2*r - 3 + 4*a - a*a
	}
	var2 := s2 * p.tau * p.tau * math.Max(ySpan, 0)
	cov := s2 * p.tau * (1 - a) * (1 - a)
	// Draw (ε1, ε2) with the covariance above (Cholesky of a 2×2 matrix).
	z1, z2 := rng.NormFloat64(), rng.NormFloat64()
	var e1, e2 float64
	if var1 > 0 {
		l11 := math.Sqrt(var1)
		l21 := cov / l11
		l22 := math.Sqrt(math.Max(var2-l21*l21, 0))
		e1 = l11 * z1
		e2 = l21*z1 + l22*z2
	} else {
		e2 = math.Sqrt(var2) * z2
	}
	y := p.tau*(1-a)*p.x + e2
	p.x = a*p.x + e1
	p.t = t1
	return y / T
}

// pinkNoise approximates 1/f noise by a bank of OU processes whose
// correlation times are spaced a decade apart with equal variances. A bank
// with spacing ratio r and per-process variance σ² has the one-sided density
// (sum of Lorentzians, integrated over log τ)
//
//	S(f) ≈ σ² / (f · ln r)
//
// between 1/(2π τ_max) and 1/(2π τ_min); so for a density e_n²·f_c/f
// (white level e_n, 1/f corner f_c) each process gets σ² = e_n²·f_c·ln r.
type pinkNoise struct {
	bank []ouProcess
}

// pinkDecades are the correlation times of the bank, seconds.
var pinkDecades = []float64{0.03, 0.3, 3, 30, 300, 3000}

// newPinkFromDensity builds 1/f noise with density en·√(fc/f) (V/√Hz).
func newPinkFromDensity(en, fc float64) pinkNoise {
	sigma := en * math.Sqrt(fc*math.Ln10)
	return newPinkFromSigma(sigma)
}

// newPinkFromSigma builds a bank whose processes each have rms sigma.
func newPinkFromSigma(sigma float64) pinkNoise {
	p := pinkNoise{bank: make([]ouProcess, len(pinkDecades))}
	for i, tau := range pinkDecades {
		p.bank[i] = ouProcess{sigma: sigma, tau: tau}
	}
	return p
}

// windowMean is the mean of the 1/f noise over [t0, t1] (bench seconds).
func (p *pinkNoise) windowMean(rng *rand.Rand, t0, t1 float64) float64 {
	var s float64
	for i := range p.bank {
		s += p.bank[i].windowMean(rng, t0, t1)
	}
	return s
}

// whiteWindowMean is the mean of white noise of one-sided density en
// (V/√Hz) over a window of T seconds: its rms is en/√(2T), because the
// equivalent noise bandwidth of a T-second average is 1/(2T) Hz.
func whiteWindowMean(rng *rand.Rand, en, T float64) float64 {
	if T <= 0 {
		T = 1e-6
	}
	return en / math.Sqrt(2*T) * rng.NormFloat64()
}
