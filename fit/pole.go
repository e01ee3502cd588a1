package fit

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// PoleFit is a single-pole model of a rejection ratio against frequency,
//
//	|k(f)| = |k_dc|·√(1 + (f/f_p)²)
//	ratio_dB(f) = R_dc − 10·log10(1 + (f/f_p)²)
//
// (a first-order low-pass response of the ratio, i.e. a coefficient rising
// 20 dB per decade above f_p; Sedra & Smith, Microelectronic Circuits,
// single-time-constant networks). RatioDCDB is R_dc, PoleHz is f_p, with
// standard uncertainties URatioDCDB and UPoleHz. When the data do not show
// the corner (the pole lies above the measured frequencies, or its
// uncertainty exceeds its value, or the flat model is not rejected at
// 95 %) Resolved is false and PoleLowerBoundHz is
// the one-sided 95 % lower bound from the profile χ² (Δχ² = 2.706 = z²_0.95;
// Press et al., Numerical Recipes 3rd ed. §15.6.5).
type PoleFit struct {
	RatioDCDB        float64 `json:"ratio_dc_db"`
	URatioDCDB       float64 `json:"u_ratio_dc_db"`
	PoleHz           float64 `json:"pole_hz"`
	UPoleHz          float64 `json:"u_pole_hz"`
	Resolved         bool    `json:"resolved"`
	PoleLowerBoundHz float64 `json:"pole_lower_bound_hz"`
	ChiSquare        float64 `json:"chi_square"`
	DOF              int     `json:"dof"`
	// Birge is √(χ²/DOF); the covariance is multiplied by Birge² when it
	// exceeds 1 (the stated uncertainties did not explain the scatter).
	Birge float64 `json:"birge"`
	// CorrDCPole is the correlation of R_dc and ln f_p.
	CorrDCPole float64 `json:"corr_dc_pole"`
}

// poleDB is 10·log10(1 + (f/f_p)²).
func poleDB(f, fp float64) float64 { return 10 * math.Log10(1+(f/fp)*(f/fp)) }

// deltaChi95 is z²_{0.95} for a one-sided 95 % bound on one parameter.
const deltaChi95 = 2.705543454095404

// deltaChiSig is χ²_{0.95}(1), the 95 % point of chi-square with one degree
// of freedom, for the likelihood-ratio test of the pole against a flat ratio.
const deltaChiSig = 3.841458820694124

// FitPole fits the single-pole model to ratios ratioDB (dB) with standard
// uncertainties uRatioDB at freqHz by weighted nonlinear least squares,
//
//	minimise χ² = Σ_i ((y_i − R_dc + 10·log10(1 + (f_i/f_p)²))/u_i)²
//
// over (R_dc, ln f_p). The start comes from a scan of the profile χ²(f_p)
// (R_dc is linear: for fixed f_p it is the weighted mean of y_i + pole dB)
// over log-spaced f_p from f_min/100 to 100·f_max, then Levenberg–Marquardt
// (Moré, "The Levenberg–Marquardt algorithm: implementation and theory",
// LNM 630, 1978) refines it. The covariance is (JᵀWJ)⁻¹, scaled by χ²/ν
// when that exceeds 1, and u(f_p) = f_p·u(ln f_p).
//
// If the profile minimum lies at the top of the scan (no corner in the
// data), Resolved is false, RatioDCDB is the weighted mean and
// PoleLowerBoundHz the f_p where χ² rises by 2.706 above its value at
// f_p → ∞. If the minimum lies at the bottom (every point above the corner,
// only the −20 dB/decade asymptote is seen) it returns ErrSingular. Needs at
// least 3 points, positive frequencies and uncertainties; mismatched lengths
// panic.
func FitPole(freqHz, ratioDB, uRatioDB []float64) (PoleFit, error) {
	n := len(freqHz)
	if len(ratioDB) != n || len(uRatioDB) != n {
		panic(fmt.Sprintf("fit.FitPole: %d frequencies, %d ratios, %d uncertainties", n, len(ratioDB), len(uRatioDB)))
	}
	if n < 3 {
		return PoleFit{}, fmt.Errorf("fit: pole fit needs at least 3 frequencies, got %d: %w", n, ErrTooFewPoints)
	}
	fmin, fmax := math.Inf(1), 0.0
	for i := range freqHz {
		if !(freqHz[i] > 0) || math.IsInf(freqHz[i], 0) || math.IsNaN(ratioDB[i]) || math.IsInf(ratioDB[i], 0) || !(uRatioDB[i] > 0) || math.IsInf(uRatioDB[i], 0) {
			return PoleFit{}, fmt.Errorf("fit: pole fit point %d (%g Hz, %g dB ± %g): %w", i, freqHz[i], ratioDB[i], uRatioDB[i], ErrBadInput)
		}
		fmin, fmax = math.Min(fmin, freqHz[i]), math.Max(fmax, freqHz[i])
	}
	// Profile χ²(f_p): R_dc at its weighted mean for the given f_p.
	prof := func(fp float64) (chi2, r float64) {
		sw, swy := 0.0, 0.0
		for i, f := range freqHz {
			w := 1 / (uRatioDB[i] * uRatioDB[i])
			add := 0.0
			if !math.IsInf(fp, 1) {
				add = poleDB(f, fp)
			}
			sw += w
			swy += w * (ratioDB[i] + add)
		}
		r = swy / sw
		for i, f := range freqHz {
			add := 0.0
			if !math.IsInf(fp, 1) {
				add = poleDB(f, fp)
			}
			d := (ratioDB[i] - r + add) / uRatioDB[i]
			chi2 += d * d
		}
		return chi2, r
	}
	lo, hi := math.Log(fmin/100), math.Log(fmax*100)
	const steps = 400
	best, bestChi := 0, math.Inf(1)
	for s := 0; s <= steps; s++ {
		c, _ := prof(math.Exp(lo + (hi-lo)*float64(s)/steps))
		if c < bestChi {
			best, bestChi = s, c
		}
	}
	out := PoleFit{DOF: n - 2}
	chiInf, rInf := prof(math.Inf(1))
	if best == steps || chiInf <= bestChi {
		// No corner within reach: flat model.
		out.RatioDCDB = rInf
		sw := 0.0
		for _, u := range uRatioDB {
			sw += 1 / (u * u)
		}
		out.DOF = n - 1
		out.ChiSquare = chiInf
		out.Birge = math.Sqrt(chiInf / float64(out.DOF))
		out.URatioDCDB = math.Sqrt(1/sw) * math.Max(1, out.Birge)
		out.PoleLowerBoundHz = poleLowerBound(prof, chiInf, fmin/1e3, fmax*1e6)
		return out, nil
	}
	if best == 0 {
		return PoleFit{}, fmt.Errorf("fit: every frequency lies above the pole (%g..%g Hz): only the −20 dB/decade asymptote is measured, not R_dc and f_p separately: %w", fmin, fmax, ErrSingular)
	}
	fp0 := math.Exp(lo + (hi-lo)*float64(best)/steps)
	_, r0 := prof(fp0)
	resid := func(p, r []float64) {
		fp := math.Exp(p[1])
		for i, f := range freqHz {
			r[i] = (ratioDB[i] - p[0] + poleDB(f, fp)) / uRatioDB[i]
		}
	}
	jac := func(p []float64, J *mat.Dense) {
		fp := math.Exp(p[1])
		for i, f := range freqHz {
			x := (f / fp) * (f / fp)
			// ∂/∂R_dc of (y − R + 10log10(1+x))/u = −1/u;
			// ∂/∂ln f_p: 10/ln10 · (−2x)/(1+x) / u.
			J.Set(i, 0, -1/uRatioDB[i])
			J.Set(i, 1, -20/math.Ln10*x/(1+x)/uRatioDB[i])
		}
	}
	res, err := levMar(resid, jac, n, []float64{r0, math.Log(fp0)}, 500)
	if err != nil {
		return PoleFit{}, fmt.Errorf("fit: pole fit: %w", err)
	}
	out.ChiSquare = res.RSS
	scale := 1.0
	if out.DOF > 0 {
		out.Birge = math.Sqrt(res.RSS / float64(out.DOF))
		if out.Birge > 1 {
			scale = out.Birge * out.Birge
		}
	}
	out.RatioDCDB = res.Params[0]
	out.PoleHz = math.Exp(res.Params[1])
	out.URatioDCDB = math.Sqrt(scale * res.Cov.At(0, 0))
	ulnfp := math.Sqrt(scale * res.Cov.At(1, 1))
	out.UPoleHz = out.PoleHz * ulnfp
	out.CorrDCPole = res.Cov.At(0, 1) / math.Sqrt(res.Cov.At(0, 0)*res.Cov.At(1, 1))
	// Resolved: the corner is significant (the flat model is rejected by a
	// likelihood-ratio test, Δχ² > χ²_{0.95}(1) = 3.841; Wilks 1938) and
	// determined to better than a factor e (u(ln f_p) < 1).
	out.Resolved = ulnfp < 1 && out.PoleHz < 10*fmax && chiInf-res.RSS > deltaChiSig
	if !out.Resolved {
		out.PoleLowerBoundHz = poleLowerBound(prof, res.RSS, fmin/1e3, out.PoleHz)
	} else {
		out.PoleLowerBoundHz = out.PoleHz * math.Exp(-1.6448536269514722*ulnfp)
	}
	return out, nil
}

// poleLowerBound finds by bisection on ln f_p the f_p in [lo, hi] where the
// profile χ² equals chiMin + Δχ²_{0.95}; lo if χ² stays below it.
func poleLowerBound(prof func(float64) (float64, float64), chiMin, lo, hi float64) float64 {
	target := chiMin + deltaChi95
	if c, _ := prof(lo); c <= target {
		return lo
	}
	a, b := math.Log(lo), math.Log(hi)
	for i := 0; i < 200 && b-a > 1e-10; i++ {
		m := (a + b) / 2
		if c, _ := prof(math.Exp(m)); c > target {
			a = m
		} else {
			b = m
		}
	}
	return math.Exp(b)
}

// lmResult is the outcome of levMar.
type lmResult struct {
	Params     []float64
	RSS        float64
	Cov        *mat.Dense // (JᵀJ)⁻¹ of the weighted residuals (unscaled)
	Iterations int
}

// levMar minimises Σ r_i(p)² by Levenberg–Marquardt with Marquardt's
// diagonal scaling (Moré 1978; Marquardt, SIAM J. Appl. Math. 11, 1963):
//
//	(JᵀJ + λ·diag(JᵀJ))·δ = −Jᵀr
//
// λ divided by 10 after an accepted step, multiplied by 10 after a rejected
// one; it stops when the relative change of every parameter is below 1e-12
// or the RSS stops falling in relative terms (1e-15). resid fills r (length
// m), jac fills the m×p Jacobian of r. Cov is (JᵀJ)⁻¹ at the solution: the
// parameter covariance when r are residuals divided by their standard
// uncertainties. Checked against the NIST StRD nonlinear datasets.
func levMar(resid func(p, r []float64), jac func(p []float64, J *mat.Dense), m int, p0 []float64, maxIter int) (lmResult, error) {
	np := len(p0)
	p := append([]float64(nil), p0...)
	r := make([]float64, m)
	rt := make([]float64, m)
	pt := make([]float64, np)
	J := mat.NewDense(m, np, nil)
	rss := func(r []float64) float64 {
		s := 0.0
		for _, v := range r {
			s += v * v
		}
		return s
	}
	resid(p, r)
	cur := rss(r)
	if math.IsNaN(cur) || math.IsInf(cur, 0) {
		return lmResult{}, fmt.Errorf("residuals not finite at the start %v: %w", p0, ErrBadInput)
	}
	lambda := 1e-3
	var JtJ mat.SymDense
	g := mat.NewVecDense(np, nil)
	// try solves the damped normal equations at the current λ and returns
	// whether the step lowered the RSS, and whether it was negligible.
	try := func() (accepted, converged bool) {
		A := mat.NewDense(np, np, nil)
		for i := 0; i < np; i++ {
			for j := 0; j < np; j++ {
				A.Set(i, j, JtJ.At(i, j))
			}
			d := JtJ.At(i, i)
			if d == 0 {
				d = 1e-300
			}
			A.Set(i, i, JtJ.At(i, i)+lambda*d)
		}
		var delta mat.VecDense
		if err := delta.SolveVec(A, g); err != nil {
			return false, false
		}
		for i := range p {
			pt[i] = p[i] - delta.AtVec(i)
		}
		resid(pt, rt)
		next := rss(rt)
		if !(next <= cur) {
			return false, false
		}
		small := true
		for i := range p {
			if math.Abs(pt[i]-p[i]) > 1e-12*(math.Abs(p[i])+1e-30) {
				small = false
			}
		}
		relDrop := (cur - next) / math.Max(cur, 1e-300)
		copy(p, pt)
		copy(r, rt)
		cur = next
		return true, small || relDrop < 1e-15
	}
	it := 1
	for ; it <= maxIter; it++ {
		jac(p, J)
		JtJ.SymOuterK(1, J.T())
		g.MulVec(J.T(), mat.NewVecDense(m, r))
		accepted, converged := false, false
		for !accepted && lambda <= 1e16 {
			if accepted, converged = try(); !accepted {
				lambda *= 10
			}
		}
		if !accepted || converged {
			// No step lowers the RSS even with heavy damping: a minimum
			// to working precision.
			break
		}
		lambda = math.Max(lambda/10, 1e-15)
	}
	if it > maxIter {
		return lmResult{}, fmt.Errorf("Levenberg–Marquardt did not converge in %d iterations (RSS %g at %v): %w", maxIter, cur, p, ErrBadInput)
	}
	jac(p, J)
	JtJ.SymOuterK(1, J.T())
	var inv mat.Dense
	if err := inv.Inverse(&JtJ); err != nil {
		return lmResult{}, fmt.Errorf("JᵀJ singular at the solution %v: %w", p, ErrSingular)
	}
	return lmResult{Params: p, RSS: cur, Cov: &inv, Iterations: it}, nil
}
