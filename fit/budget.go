package fit

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// DefaultCoverage is the two-sided coverage probability used when none is
// given (GUM 6.2.2; ILAC-G8 assumes 95 %).
const DefaultCoverage = 0.95

// dBPerRel is 20/ln10 = 8.6859, the dB change per unit relative change of
// a ratio (first order): u_dB = (20/ln 10)·u_rel (JCGM 100:2008 (GUM), derived).
var dBPerRel = 20 / math.Ln10

// Distribution names for budget rows.
const (
	DistNormal      = "normal"
	DistRectangular = "rectangular"
	DistT           = "t"
)

// StudentTQuantile returns t_p(ν), the value with P(T ≤ t) = p for
// Student's t with ν degrees of freedom (real ν > 0 allowed; ν = ∞ gives the
// normal quantile z_p). It uses gonum's distuv.StudentsT (inverse regularised
// incomplete beta). It returns NaN for ν ≤ 0 or p outside (0, 1).
func StudentTQuantile(p float64, nu DOF) float64 {
	if !(p > 0 && p < 1) || !(nu > 0) {
		return math.NaN()
	}
	if nu.IsInf() || nu > 1e10 {
		return distuv.UnitNormal.Quantile(p)
	}
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(nu)}.Quantile(p)
}

// CoverageFactor returns k = t_{(1+p)/2}(ν), the two-sided coverage factor
// for coverage probability p and ν effective degrees of freedom (GUM G.3.4,
// G.6.4; k = 1.96 for p = 0.95 and ν = ∞). ν need not be an integer: the t
// quantile is evaluated at the real ν_eff rather than truncated (GUM G.6.4
// permits interpolation).
func CoverageFactor(nu DOF, p float64) float64 {
	return StudentTQuantile((1+p)/2, nu)
}

// WelchSatterthwaite returns the effective degrees of freedom
//
//	ν_eff = u_c⁴ / Σ_i (u_i⁴/ν_i),   u_i = |c_i|·u(x_i)
//
// (GUM eq. G.2b). Terms with ν_i = ∞ add nothing to the denominator; if all
// are infinite (or u_c = 0) the result is InfDOF.
func WelchSatterthwaite(contributions []float64, dofs []DOF) DOF {
	if len(contributions) != len(dofs) {
		panic(fmt.Sprintf("fit.WelchSatterthwaite: %d contributions, %d dofs", len(contributions), len(dofs)))
	}
	uc2, den := 0.0, 0.0
	for _, u := range contributions {
		uc2 += u * u
	}
	if uc2 == 0 {
		return InfDOF
	}
	// Normalise by u_c² to avoid overflow/underflow of fourth powers.
	for i, u := range contributions {
		if dofs[i].IsInf() {
			continue
		}
		r := u * u / uc2
		den += r * r / float64(dofs[i])
	}
	if den == 0 {
		return InfDOF
	}
	return DOF(1 / den)
}

// Combine forms the combined standard uncertainty of a measurand from its
// budget rows,
//
//	u_c² = Σ_i (c_i·u(x_i))²                   (GUM 5.1.2, uncorrelated inputs)
//	ν_eff = u_c⁴ / Σ_i (c_i·u(x_i))⁴/ν_i       (GUM G.2b, Welch–Satterthwaite)
//	k = t_{(1+p)/2}(ν_eff),  U = k·u_c          (GUM G.6.4, 6.2.1)
//
// Each row's Contribution is recomputed as |c_i|·u(x_i). coverage is the
// two-sided probability p (0 means DefaultCoverage). Rows with a negative or
// non-finite uncertainty, or ν ≤ 0, return ErrBadInput naming the row.
func Combine(measurand, unit string, value float64, rows []BudgetRow, coverage float64) (Budget, error) {
	if coverage == 0 {
		coverage = DefaultCoverage
	}
	if !(coverage > 0 && coverage < 1) {
		return Budget{}, fmt.Errorf("fit: coverage probability %v is not in (0, 1): %w", coverage, ErrBadInput)
	}
	if math.IsNaN(value) || math.IsInf(value, 0) {
		return Budget{}, fmt.Errorf("fit: %s value %v: %w", measurand, value, ErrBadInput)
	}
	b := Budget{Measurand: measurand, Unit: unit, Value: value, CoverageProbability: coverage}
	b.Rows = make([]BudgetRow, len(rows))
	contrib := make([]float64, len(rows))
	dofs := make([]DOF, len(rows))
	uc2 := 0.0
	for i, r := range rows {
		if !(r.StdUncertainty >= 0) || math.IsInf(r.StdUncertainty, 0) || math.IsNaN(r.Sensitivity) || math.IsInf(r.Sensitivity, 0) {
			return Budget{}, fmt.Errorf("fit: budget row %q: standard uncertainty %v, sensitivity %v: %w", r.Name, r.StdUncertainty, r.Sensitivity, ErrBadInput)
		}
		if !(r.DOF > 0) {
			return Budget{}, fmt.Errorf("fit: budget row %q: degrees of freedom %v must be > 0 (use InfDOF for Type B): %w", r.Name, float64(r.DOF), ErrBadInput)
		}
		if r.Kind != "A" && r.Kind != "B" {
			return Budget{}, fmt.Errorf("fit: budget row %q: kind %q must be \"A\" or \"B\": %w", r.Name, r.Kind, ErrBadInput)
		}
		r.Contribution = math.Abs(r.Sensitivity) * r.StdUncertainty
		b.Rows[i] = r
		contrib[i] = r.Contribution
		dofs[i] = r.DOF
		uc2 += r.Contribution * r.Contribution
	}
	b.CombinedStdUnc = math.Sqrt(uc2)
	b.EffectiveDOF = WelchSatterthwaite(contrib, dofs)
	b.CoverageK = CoverageFactor(b.EffectiveDOF, coverage)
	b.ExpandedU = b.CoverageK * b.CombinedStdUnc
	return b, nil
}

// RectangularStdUnc returns a/√3, the standard uncertainty of a rectangular
// distribution of half-width a (GUM 4.3.7).
func RectangularStdUnc(halfWidth float64) float64 { return halfWidth / math.Sqrt(3) }

// CoefficientBudget builds the GUM budget of the input-referred coefficient
//
//	k = 10⁶ · b1 / (K · g_m · g_s)      µV/V, with g_m = g_s = 1 nominal
//
// where b1 is the fitted slope of meter volts against stimulus volts (V/V),
// K the fixture's noise gain, g_m the meter's gain factor and g_s the
// stimulus step's gain factor. Rows:
//
//   - Type A, "t": the fit's slope standard error, c = 10⁶/K, ν = n − p
//     (GUM 4.2, H.3).
//   - Type B, rectangular (u = a/√3, GUM 4.3.7), ν = ∞: noise-gain
//     tolerance (c = −k/K), meter gain accuracy (c = −k), stimulus gain
//     accuracy (c = −k), each only when its half-width is non-zero.
//   - Type B, rectangular: stimulus offset error of ±a per setting, taken
//     independent between settings; its effect on the slope is at most that
//     on a two-point step across the span, u_rel = √2·(a/√3)/span, so
//     c = √2·k/span (per volt) — an upper bound for any design with more
//     levels (the slope's sensitivity to independent level errors is
//     1/√Σ(x−x̄)² ≤ √2/span).
//   - in.Extra, as given.
//
// Value, u_c and U are in µV/V. Type A alone is used for a fit with
// in.NoiseGain = 1 and no Type B knowledge.
func CoefficientBudget(f LineFit, in BudgetInputs) (Budget, error) {
	K := in.NoiseGain
	if !(K > 0) || math.IsInf(K, 0) {
		return Budget{}, fmt.Errorf("fit: noise gain %v must be > 0 (use 1 when the meter reads the input-referred offset): %w", K, ErrBadInput)
	}
	for _, v := range []struct {
		name string
		v    float64
	}{{"noise gain tolerance", in.NoiseGainTolRel}, {"meter gain ppm", in.MeterGainPPM}, {"stimulus gain ppm", in.StimulusGainPPM}, {"stimulus offset volts", in.StimulusOffsetVolts}} {
		if !(v.v >= 0) || math.IsInf(v.v, 0) {
			return Budget{}, fmt.Errorf("fit: %s %v must be ≥ 0: %w", v.name, v.v, ErrBadInput)
		}
	}
	if f.SlopeIndex < 0 || f.N == 0 {
		return Budget{}, fmt.Errorf("fit: coefficient budget needs a fitted line: %w", ErrBadInput)
	}
	k := 1e6 * f.Slope.Value / K
	rows := []BudgetRow{{
		Name: "slope of fit (repeatability, Type A)", Kind: "A", Distribution: DistT,
		Value: f.Slope.Value, StdUncertainty: f.Slope.StdErr, Unit: "V/V",
		Sensitivity: 1e6 / K, DOF: DOF(f.DOF),
	}}
	if in.NoiseGainTolRel > 0 {
		rows = append(rows, BudgetRow{
			Name: "noise gain tolerance", Kind: "B", Distribution: DistRectangular,
			Value: K, StdUncertainty: K * RectangularStdUnc(in.NoiseGainTolRel), Unit: "V/V",
			Sensitivity: -k / K, DOF: InfDOF,
		})
	}
	if in.MeterGainPPM > 0 {
		rows = append(rows, BudgetRow{
			Name: "meter gain accuracy", Kind: "B", Distribution: DistRectangular,
			Value: 1, StdUncertainty: RectangularStdUnc(in.MeterGainPPM * 1e-6), Unit: "1",
			Sensitivity: -k, DOF: InfDOF,
		})
	}
	if in.StimulusGainPPM > 0 {
		rows = append(rows, BudgetRow{
			Name: "stimulus gain accuracy", Kind: "B", Distribution: DistRectangular,
			Value: 1, StdUncertainty: RectangularStdUnc(in.StimulusGainPPM * 1e-6), Unit: "1",
			Sensitivity: -k, DOF: InfDOF,
		})
	}
	if in.StimulusOffsetVolts > 0 {
		if !(f.XSpan > 0) {
			return Budget{}, fmt.Errorf("fit: stimulus offset row needs a stimulus span: %w", ErrZeroSpan)
		}
		rows = append(rows, BudgetRow{
			Name: "stimulus offset per setting", Kind: "B", Distribution: DistRectangular,
			Value: 0, StdUncertainty: RectangularStdUnc(in.StimulusOffsetVolts), Unit: "V",
			Sensitivity: math.Sqrt2 * k / f.XSpan, DOF: InfDOF,
		})
	}
	rows = append(rows, in.Extra...)
	return Combine("input-referred coefficient k", "µV/V", k, rows, in.Coverage)
}

// RejectionFromBudget turns a coefficient budget (Unit "µV/V" or "V/V")
// into a rejection ratio with uncertainty (see Rejection):
//
//	ratio_dB = −20·log10|k|
//	u_dB = (20/ln10)·u_c/|k|,  U_dB = (20/ln10)·U/|k|   (JCGM 100:2008 (GUM), first order)
//	limits: −20·log10(|k| + U) and −20·log10(|k| − U)  (exact)
//
// When |k| ≤ U the coefficient is not distinguishable from zero at the
// coverage probability and only the one-sided bound
// ratio ≥ 1/(|k| + U) is reported (EURACHEM/CITAC CG4 Appendix F; worked
// example: ΔV_CM = 20 V, ΔV_OS = 0.3 µV, U = 2·0.5 µV → ≥ 143.7 dB). A
// coefficient and uncertainty both zero return ErrBadInput: nothing can be
// said.
func RejectionFromBudget(b Budget) (Rejection, error) {
	var toV float64
	switch b.Unit {
	case "µV/V", "uV/V":
		toV = 1e-6
	case "V/V":
		toV = 1
	default:
		return Rejection{}, fmt.Errorf("fit: budget unit %q: want µV/V or V/V: %w", b.Unit, ErrBadInput)
	}
	kV := b.Value * toV
	UV := b.ExpandedU * toV
	uV := b.CombinedStdUnc * toV
	ka := math.Abs(kV)
	if ka+UV == 0 {
		return Rejection{}, fmt.Errorf("fit: coefficient and its uncertainty are both zero, so no ratio or bound can be stated: %w", ErrBadInput)
	}
	r := Rejection{
		CoefficientVPerV:  kV,
		CoefficientUVPerV: kV * 1e6,
		StdUncUVPerV:      uV * 1e6,
		ExpandedUUVPerV:   UV * 1e6,
		CoverageK:         b.CoverageK,
		EffectiveDOF:      b.EffectiveDOF,
		LowerBoundDB:      -20 * math.Log10(ka+UV),
		Budget:            b,
	}
	r.LowerDB = r.LowerBoundDB
	if ka > UV {
		r.Resolved = true
		r.RatioDB = -20 * math.Log10(ka)
		r.StdUncDB = dBPerRel * uV / ka
		r.ExpandedUDB = dBPerRel * UV / ka
		r.UpperDB = -20 * math.Log10(ka-UV)
		r.RelativeExpandedU = UV / ka
		r.Asymmetric = r.RelativeExpandedU > 0.1
	}
	return r, nil
}

// CoefficientRejection is CoefficientBudget followed by RejectionFromBudget.
func CoefficientRejection(f LineFit, in BudgetInputs) (Rejection, error) {
	b, err := CoefficientBudget(f, in)
	if err != nil {
		return Rejection{}, err
	}
	return RejectionFromBudget(b)
}

// DBFromRel returns the first-order dB uncertainty of a ratio with relative
// standard uncertainty uRel: (20/ln10)·uRel = 8.686·uRel (JCGM 100:2008 (GUM)).
func DBFromRel(uRel float64) float64 { return dBPerRel * uRel }
