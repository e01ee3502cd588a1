package fit

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/dsp/fourier"
)

// SineFit is a sinusoid fitted to a record (t_n, y_n) by IEEE Std 1057-2017
// §4.1.3.1 (three-parameter, known frequency) or §4.1.3.3 (four-parameter,
// iterative):
//
//	y_n = A·cos(ωt_n) + B·sin(ωt_n) + C = R·cos(ωt_n + θ) + C
//	R = √(A² + B²),  θ = atan2(−B, A),  ω = 2π·FrequencyHz
//
// so AmplitudeV is the peak amplitude R, PhaseRad the cosine phase θ at
// t = 0 and OffsetV the constant C. Cov is the covariance of (A, B, C) from
// the least-squares fit, s²·(DᵀD)⁻¹ with s² = Σr²/(N − p) (GUM 4.2 Type A);
// for the four-parameter fit it is the (A, B, C) block of the linearised
// 4×4 covariance at convergence, so it includes the frequency's share.
// UAmplitudeV, UPhaseRad and CovAmpPhase follow by the law of propagation
// of uncertainty (JCGM 100:2008 §5.2.2, eq. 13) with the sensitivities
//
//	∂R/∂A = A/R,  ∂R/∂B = B/R,  ∂θ/∂A = B/R²,  ∂θ/∂B = −A/R².
type SineFit struct {
	FrequencyHz  float64 `json:"frequency_hz"`
	AmplitudeV   float64 `json:"amplitude_v"` // peak
	PhaseRad     float64 `json:"phase_rad"`
	OffsetV      float64 `json:"offset_v"`
	UAmplitudeV  float64 `json:"u_amplitude_v"`
	UPhaseRad    float64 `json:"u_phase_rad"`
	CovAmpPhase  float64 `json:"cov_amp_phase"`
	UOffsetV     float64 `json:"u_offset_v"`
	UFrequencyHz float64 `json:"u_frequency_hz"` // four-parameter fit only (0 when the frequency was given)
	ResidualRMSV float64 `json:"residual_rms_v"` // √(Σr²/N), IEEE 1057 §4.1.3.1
	ResidualSDV  float64 `json:"residual_sd_v"`  // s = √(Σr²/DOF)
	N            int     `json:"n"`
	DOF          int     `json:"dof"` // N − 3 (three-parameter) or N − 4 (four-parameter)
	Iterations   int     `json:"iterations,omitempty"`
	// Cov is the covariance of (A, B, C) in y = A cos(ωt) + B sin(ωt) + C.
	Cov [3][3]float64 `json:"cov"`
	// A, B, C are the fitted linear coefficients themselves.
	A float64 `json:"a"`
	B float64 `json:"b"`
	C float64 `json:"c"`
}

func checkRecord(timesS, volts []float64, p int) error {
	if len(timesS) != len(volts) {
		panic(fmt.Sprintf("fit: %d times, %d volts", len(timesS), len(volts)))
	}
	if len(volts) <= p {
		return fmt.Errorf("fit: sine fit needs more than %d samples, got %d: %w", p, len(volts), ErrTooFewPoints)
	}
	if i := firstNonFinite(timesS); i >= 0 {
		return fmt.Errorf("fit: time[%d] = %v: %w", i, timesS[i], ErrBadInput)
	}
	if i := firstNonFinite(volts); i >= 0 {
		return fmt.Errorf("fit: volts[%d] = %v: %w", i, volts[i], ErrBadInput)
	}
	return nil
}

// Sine3Param fits y = A·cos(2πft) + B·sin(2πft) + C at the known frequency
// freqHz by linear least squares (IEEE Std 1057-2017 §4.1.3.1: x̂ =
// (D₀ᵀD₀)⁻¹D₀ᵀy with rows [cos ωt_n, sin ωt_n, 1], solved here by Householder
// QR with refinement, see Linear). Times need not be uniform. Mismatched
// lengths panic; fewer than 4 samples return ErrTooFewPoints; a frequency
// that is not positive and finite, or NaN data, return ErrBadInput; a record
// that cannot separate cos and sin (e.g. every sample at a zero crossing)
// returns ErrSingular.
func Sine3Param(timesS, volts []float64, freqHz float64) (SineFit, error) {
	if !(freqHz > 0) || math.IsInf(freqHz, 0) {
		return SineFit{}, fmt.Errorf("fit: sine frequency %v Hz must be > 0: %w", freqHz, ErrBadInput)
	}
	if err := checkRecord(timesS, volts, 3); err != nil {
		return SineFit{}, err
	}
	w := 2 * math.Pi * freqHz
	n := len(volts)
	cs, sn := make([]float64, n), make([]float64, n)
	for i, t := range timesS {
		sn[i], cs[i] = math.Sincos(w * t)
	}
	lf, err := Linear(volts, [][]float64{cs, sn}, LinearOptions{Names: []string{"cos", "sin"}})
	if err != nil {
		return SineFit{}, fmt.Errorf("fit: three-parameter sine fit at %g Hz: %w", freqHz, err)
	}
	// Linear orders terms (intercept, cos, sin); SineFit orders (A, B, C).
	idx := [3]int{1, 2, 0}
	var cov [3][3]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			cov[i][j] = lf.Cov[idx[i]][idx[j]]
		}
	}
	out := sineResult(freqHz, lf.Terms[1].Value, lf.Terms[2].Value, lf.Terms[0].Value, cov, lf.RSS, n, lf.DOF)
	return out, nil
}

// sineResult fills a SineFit from (A, B, C) and their covariance.
func sineResult(freqHz, a, b, c float64, cov [3][3]float64, rss float64, n, dof int) SineFit {
	r := math.Hypot(a, b)
	out := SineFit{
		FrequencyHz: freqHz, A: a, B: b, C: c, OffsetV: c,
		AmplitudeV: r, PhaseRad: math.Atan2(-b, a),
		Cov: cov, N: n, DOF: dof,
		ResidualRMSV: math.Sqrt(rss / float64(n)),
		UOffsetV:     math.Sqrt(math.Max(cov[2][2], 0)),
	}
	if dof > 0 {
		out.ResidualSDV = math.Sqrt(rss / float64(dof))
	}
	if r > 0 {
		// Sensitivities of R and θ to (A, B) (JCGM 100 §5.2.2).
		gr := [2]float64{a / r, b / r}
		gt := [2]float64{b / (r * r), -a / (r * r)}
		var vr, vt, crt float64
		for i := 0; i < 2; i++ {
			for j := 0; j < 2; j++ {
				vr += gr[i] * cov[i][j] * gr[j]
				vt += gt[i] * cov[i][j] * gt[j]
				crt += gr[i] * cov[i][j] * gt[j]
			}
		}
		out.UAmplitudeV = math.Sqrt(math.Max(vr, 0))
		out.UPhaseRad = math.Sqrt(math.Max(vt, 0))
		out.CovAmpPhase = crt
	}
	return out
}

// Sine4Param fits y = A·cos(ωt) + B·sin(ωt) + C with ω also unknown by the
// iteration of IEEE Std 1057-2017 §4.1.3.3: starting from a three-parameter
// fit at ω₀, each step solves the linearised model
//
//	y_n ≈ A·cos ω_i t_n + B·sin ω_i t_n + C + Δω·(−A·t_n·sin ω_i t_n + B·t_n·cos ω_i t_n)
//
// for (A, B, C, Δω) by least squares and sets ω_{i+1} = ω_i + Δω, until
// |Δω| < 1e-13·ω (or 100 iterations, then an error). freqGuessHz seeds the
// iteration; if it is ≤ 0 the seed is DFTPeakHz of the record (uniform
// sampling assumed for the seed only). The standard uncertainties come from
// the linearised 4×4 covariance at convergence, DOF = N − 4. The iteration
// needs a start within a fraction of a DFT bin (about 1/(N·Δt)) of the
// optimum; IEEE 1057 recommends an interpolated DFT peak.
func Sine4Param(timesS, volts []float64, freqGuessHz float64) (SineFit, error) {
	if err := checkRecord(timesS, volts, 4); err != nil {
		return SineFit{}, err
	}
	f := freqGuessHz
	if !(f > 0) {
		var err error
		if f, err = DFTPeakHz(timesS, volts); err != nil {
			return SineFit{}, err
		}
	}
	if math.IsInf(f, 0) || math.IsNaN(f) {
		return SineFit{}, fmt.Errorf("fit: frequency guess %v Hz: %w", freqGuessHz, ErrBadInput)
	}
	s3, err := Sine3Param(timesS, volts, f)
	if err != nil {
		return SineFit{}, err
	}
	a, b := s3.A, s3.B
	n := len(volts)
	cs, sn, dw := make([]float64, n), make([]float64, n), make([]float64, n)
	w := 2 * math.Pi * f
	for it := 1; it <= 100; it++ {
		for i, t := range timesS {
			sn[i], cs[i] = math.Sincos(w * t)
			dw[i] = -a*t*sn[i] + b*t*cs[i]
		}
		lf, err := Linear(volts, [][]float64{cs, sn, dw}, LinearOptions{Names: []string{"cos", "sin", "dw"}})
		if err != nil {
			return SineFit{}, fmt.Errorf("fit: four-parameter sine fit, iteration %d at %g Hz: %w", it, w/(2*math.Pi), err)
		}
		a, b = lf.Terms[1].Value, lf.Terms[2].Value
		d := lf.Terms[3].Value
		w += d
		if !(w > 0) {
			return SineFit{}, fmt.Errorf("fit: four-parameter sine fit diverged (ω = %g rad/s) from a guess of %g Hz: %w", w, f, ErrBadInput)
		}
		if math.Abs(d) < 1e-13*w {
			// Final three-parameter estimates at the converged ω, with the
			// uncertainties of the linearised four-parameter model.
			fin, err := Sine3Param(timesS, volts, w/(2*math.Pi))
			if err != nil {
				return SineFit{}, err
			}
			for i, t := range timesS {
				sn[i], cs[i] = math.Sincos(w * t)
				dw[i] = -fin.A*t*sn[i] + fin.B*t*cs[i]
			}
			lf, err = Linear(volts, [][]float64{cs, sn, dw}, LinearOptions{Names: []string{"cos", "sin", "dw"}})
			if err != nil {
				return SineFit{}, err
			}
			idx := [3]int{1, 2, 0}
			var cov [3][3]float64
			for i := 0; i < 3; i++ {
				for j := 0; j < 3; j++ {
					cov[i][j] = lf.Cov[idx[i]][idx[j]]
				}
			}
			rss := 0.0
			for i, t := range timesS {
				s, c := math.Sincos(w * t)
				r := volts[i] - fin.A*c - fin.B*s - fin.C
				rss += r * r
			}
			out := sineResult(w/(2*math.Pi), fin.A, fin.B, fin.C, cov, rss, n, n-4)
			out.UFrequencyHz = math.Sqrt(math.Max(lf.Cov[3][3], 0)) / (2 * math.Pi)
			out.Iterations = it
			return out, nil
		}
	}
	return SineFit{}, fmt.Errorf("fit: four-parameter sine fit did not converge in 100 iterations from %g Hz (start closer, e.g. from DFTPeakHz): %w", f, ErrBadInput)
}

// DFTPeakHz estimates the frequency of the strongest sinusoid in a uniformly
// sampled record, to seed Sine4Param (IEEE Std 1057-2017 §4.1.3.3 asks for
// a starting frequency from the DFT). The mean is removed, a Hann window
// applied, the largest |X_k| for 1 ≤ k < N/2 found by FFT (gonum
// dsp/fourier) and refined by fitting a parabola through ln|X| at the peak
// and its two neighbours (Gaussian interpolation; Gasior & Gonzalez, "Improving
// FFT frequency measurement resolution by parabolic and Gaussian spectrum
// interpolation", AIP Conf. Proc. 732, 2004). The sample interval is
// (t_{N−1} − t_0)/(N − 1). Needs at least 8 samples.
func DFTPeakHz(timesS, volts []float64) (float64, error) {
	if len(timesS) != len(volts) {
		panic(fmt.Sprintf("fit.DFTPeakHz: %d times, %d volts", len(timesS), len(volts)))
	}
	n := len(volts)
	if n < 8 {
		return 0, fmt.Errorf("fit: DFT peak needs at least 8 samples, got %d: %w", n, ErrTooFewPoints)
	}
	dt := (timesS[n-1] - timesS[0]) / float64(n-1)
	if !(dt > 0) || math.IsInf(dt, 0) {
		return 0, fmt.Errorf("fit: sample interval %v s: %w", dt, ErrBadInput)
	}
	m := mean(volts)
	x := make([]float64, n)
	for i, v := range volts {
		x[i] = (v - m) * (0.5 - 0.5*math.Cos(2*math.Pi*float64(i)/float64(n)))
	}
	c := fourier.NewFFT(n).Coefficients(nil, x)
	k := 1
	for i := 2; i < len(c) && 2*i < n; i++ {
		if cabs(c[i]) > cabs(c[k]) {
			k = i
		}
	}
	if cabs(c[k]) == 0 {
		return 0, fmt.Errorf("fit: the record has no sinusoidal component (constant): %w", ErrBadInput)
	}
	delta := 0.0
	if k > 1 && k+1 < len(c) {
		l, p, r := math.Log(cabs(c[k-1])), math.Log(cabs(c[k])), math.Log(cabs(c[k+1]))
		if den := l - 2*p + r; den < 0 {
			delta = 0.5 * (l - r) / den
		}
	}
	return (float64(k) + delta) / (float64(n) * dt), nil
}

func cabs(z complex128) float64 { return math.Hypot(real(z), imag(z)) }

// SineRatio is the complex ratio response/stimulus of two sine fits at one
// frequency: Magnitude = R_resp/R_stim, PhaseRad = θ_resp − θ_stim wrapped to
// (−π, π], DB = 20·log10(Magnitude), with standard uncertainties by the law
// of propagation (JCGM 100:2008 §5.1.2, the two fits independent) applied
// to the bivariate output (magnitude, phase) as in JCGM 102:2011 §6.2:
//
//	(u(M)/M)² = (u(R_r)/R_r)² + (u(R_s)/R_s)²
//	u(φ)² = u(θ_r)² + u(θ_s)²
//	cov(M, φ) = M·(cov(R_r, θ_r)/R_r + cov(R_s, θ_s)/R_s)
//	u(dB) = (20/ln 10)·u(M)/M
//
// DOF is the Welch–Satterthwaite effective degrees of freedom (GUM G.2b) of
// the magnitude from the two fits' N − p.
type SineRatio struct {
	Magnitude   float64 `json:"magnitude"`
	UMagnitude  float64 `json:"u_magnitude"`
	PhaseRad    float64 `json:"phase_rad"`
	UPhaseRad   float64 `json:"u_phase_rad"`
	DB          float64 `json:"db"`
	UDB         float64 `json:"u_db"`
	DOF         float64 `json:"dof"`
	CovMagPhase float64 `json:"cov_mag_phase"`
	PhaseDOF    float64 `json:"phase_dof"`
}

// RatioOfSines returns response/stimulus as a SineRatio. A stimulus of zero
// amplitude gives a ratio of +Inf (and NaN uncertainties); callers check
// the stimulus first.
func RatioOfSines(response, stimulus SineFit) SineRatio {
	rr, rs := response.AmplitudeV, stimulus.AmplitudeV
	m := rr / rs
	ur, us := relOrZero(response.UAmplitudeV, rr), relOrZero(stimulus.UAmplitudeV, rs)
	urel := math.Hypot(ur, us)
	ph := wrapPi(response.PhaseRad - stimulus.PhaseRad)
	out := SineRatio{
		Magnitude:  m,
		UMagnitude: m * urel,
		PhaseRad:   ph,
		UPhaseRad:  math.Hypot(response.UPhaseRad, stimulus.UPhaseRad),
		DB:         20 * math.Log10(m),
		UDB:        dBPerRel * urel,
	}
	out.CovMagPhase = m * (relOrZero(response.CovAmpPhase, rr) + relOrZero(stimulus.CovAmpPhase, rs))
	dofs := []DOF{dofOf(response.DOF), dofOf(stimulus.DOF)}
	out.DOF = float64(WelchSatterthwaite([]float64{ur, us}, dofs))
	out.PhaseDOF = float64(WelchSatterthwaite([]float64{response.UPhaseRad, stimulus.UPhaseRad}, dofs))
	return out
}

func relOrZero(u, v float64) float64 {
	if u == 0 {
		return 0
	}
	return u / v
}

func dofOf(d int) DOF {
	if d <= 0 {
		return InfDOF
	}
	return DOF(d)
}

// wrapPi wraps an angle to (−π, π].
func wrapPi(a float64) float64 {
	a = math.Mod(a, 2*math.Pi)
	if a <= -math.Pi {
		a += 2 * math.Pi
	} else if a > math.Pi {
		a -= 2 * math.Pi
	}
	return a
}
