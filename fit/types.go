package fit

import (
	"encoding/json"
	"errors"
	"math"
	"strconv"
)

// Errors that callers may test with errors.Is.
var (
	// ErrTooFewPoints: fewer observations than parameters (or no degrees of
	// freedom left for a residual standard deviation).
	ErrTooFewPoints = errors.New("too few points for the model")
	// ErrSingular: the design matrix is rank deficient (two columns carry the
	// same information, or a column is all zeros).
	ErrSingular = errors.New("design matrix is singular")
	// ErrZeroSpan: the stimulus did not move (every stimulus value equal), so
	// no coefficient per volt can be formed. An inverting stage has both
	// inputs at ground: its common-mode stimulus span is zero and it has no
	// common-mode error to measure (common practice, no published source).
	ErrZeroSpan = errors.New("stimulus span is zero")
	// ErrBadInput: a number is out of its domain (negative gain, NaN, ...).
	ErrBadInput = errors.New("invalid input")
)

// DOF is a number of degrees of freedom. Type B rows and the normal limit
// carry +Inf. It marshals to JSON as a number, or as the string "inf" when
// infinite (JSON has no infinity).
type DOF float64

// InfDOF is the degrees of freedom of a Type B evaluation taken as exactly
// known (GUM G.4.2: ν = ∞ when u is taken as certain).
var InfDOF = DOF(math.Inf(1))

// IsInf reports whether d is infinite.
func (d DOF) IsInf() bool { return math.IsInf(float64(d), 1) }

// MarshalJSON writes "inf" for infinity.
func (d DOF) MarshalJSON() ([]byte, error) {
	if d.IsInf() {
		return []byte(`"inf"`), nil
	}
	if math.IsNaN(float64(d)) || math.IsInf(float64(d), -1) {
		return nil, errors.New("fit: DOF is NaN or -Inf")
	}
	return strconv.AppendFloat(nil, float64(d), 'g', -1, 64), nil
}

// UnmarshalJSON accepts a number or "inf".
func (d *DOF) UnmarshalJSON(b []byte) error {
	var s string
	if err := json.Unmarshal(b, &s); err == nil {
		if s == "inf" || s == "Inf" || s == "+Inf" {
			*d = InfDOF
			return nil
		}
		return errors.New("fit: DOF string must be \"inf\"")
	}
	var f float64
	if err := json.Unmarshal(b, &f); err != nil {
		return err
	}
	*d = DOF(f)
	return nil
}

// Term is one fitted parameter: its estimate and standard uncertainty
// (the standard error from the fit, GUM 4.2 Type A). Units are those of the
// model: a slope of meter volts against stimulus volts is in V/V.
type Term struct {
	Name   string  `json:"name"`
	Value  float64 `json:"value"`
	StdErr float64 `json:"std_err"`
}

// Quantity is an estimate with its standard uncertainty and degrees of
// freedom (GUM 4.2/4.3). It is the common currency between fits, budgets,
// ratios and closure checks. A zero DOF is read as unset, i.e. infinite
// (a Type B value); LineFit.SlopeQuantity fills it with n − p.
type Quantity struct {
	Value  float64 `json:"value"`
	StdUnc float64 `json:"std_unc"`
	DOF    DOF     `json:"dof"`
}

// LinearOptions configures Linear.
type LinearOptions struct {
	// NoIntercept fits y = Σ b_j·X_j with no constant term.
	NoIntercept bool
	// Names labels the columns (default "x1", "x2", ...). The intercept is
	// named "intercept".
	Names []string
}

// LinearFit is the result of an ordinary least-squares fit
//
//	y_i = b_0 + Σ_j b_j·X_ij + e_i
//
// Terms lists the parameters in order: the intercept first (unless
// NoIntercept), then one per design column. Cov is the parameter covariance
// matrix s²·(XᵀX)⁻¹ in the same order.
type LinearFit struct {
	Terms []Term `json:"terms"`
	// Cov is the covariance matrix of the estimates (s²(XᵀX)⁻¹).
	Cov [][]float64 `json:"cov"`
	// N observations, DOF = N − number of parameters.
	N   int `json:"n"`
	DOF int `json:"dof"`
	// ResidualSD s = √(Σr²/DOF), in units of y.
	ResidualSD float64 `json:"residual_sd"`
	// RSS is the residual sum of squares Σr².
	RSS float64 `json:"rss"`
	// RSquared is 1 − RSS/Σ(y−ȳ)² with an intercept, 1 − RSS/Σy² without
	// (the convention of the NIST StRD certified values).
	RSquared  float64   `json:"r_squared"`
	Residuals []float64 `json:"residuals"`
	Fitted    []float64 `json:"fitted"`
	// Intercept reports whether Terms[0] is the intercept.
	Intercept bool `json:"intercept"`
	// Cond is the 2-norm condition number of the centred and scaled design
	// that was actually solved (large values warn of collinear columns).
	Cond float64 `json:"cond"`
}

// LineOptions configures Line.
type LineOptions struct {
	// Time, if not nil, adds a drift term b2·t (t in seconds, so b2 is in
	// units of y per second). Must have the length of x.
	Time []float64
	// Quadratic adds a term b3·x² (nonlinearity).
	Quadratic bool
	// NoIntercept removes b0.
	NoIntercept bool
	// Segments, if not nil, gives each point's segment (any int, e.g. the
	// session of a resumed run) and adds one offset term per segment other
	// than the first point's, so that a step of the reading between
	// segments falls into its own term and not into the slope. Terms are
	// named "offset step 1", "offset step 2", … in order of first
	// appearance. Must have the length of x.
	Segments []int
}

// LineFit is a straight line y = b0 + b1·x [+ b2·t] [+ b3·x²] fitted by
// Line. Named terms are copies of entries of Model.Terms; a term that was
// not fitted is zero and its Has… flag false.
type LineFit struct {
	Model     LinearFit `json:"model"`
	Intercept Term      `json:"intercept"`
	Slope     Term      `json:"slope"`
	Drift     Term      `json:"drift"`
	Quad      Term      `json:"quad"`
	HasDrift  bool      `json:"has_drift"`
	HasQuad   bool      `json:"has_quad"`
	// Steps are the offset steps of LineOptions.Segments (y units), one per
	// segment after the first.
	Steps []Term `json:"steps,omitempty"`
	// Index of each term in Model.Terms (−1 when absent).
	InterceptIndex int `json:"intercept_index"`
	SlopeIndex     int `json:"slope_index"`
	DriftIndex     int `json:"drift_index"`
	QuadIndex      int `json:"quad_index"`
	// XMin, XMax: the stimulus range; XSpan = XMax − XMin.
	XMin  float64 `json:"x_min"`
	XMax  float64 `json:"x_max"`
	XSpan float64 `json:"x_span"`
	// N, DOF, ResidualSD, RSquared repeat Model's for convenience.
	N          int     `json:"n"`
	DOF        int     `json:"dof"`
	ResidualSD float64 `json:"residual_sd"`
	RSquared   float64 `json:"r_squared"`
}

// Ratio is a rejection ratio formed from a signed input-referred
// coefficient k (V/V): ratio = 1/|k|, dB = 20·log10(ratio) (JEDEC JESD99B
// k_CMR, k_SVR; JEDEC JESD99B). It carries no uncertainty; see Rejection.
type Ratio struct {
	CoefficientVPerV  float64 `json:"coefficient_v_per_v"`
	CoefficientUVPerV float64 `json:"coefficient_uv_per_v"`
	Ratio             float64 `json:"ratio"`
	RatioDB           float64 `json:"ratio_db"`
}

// BudgetRow is one line of a GUM uncertainty budget (JCGM 100:2008).
// Contribution = |Sensitivity|·StdUncertainty is in the unit of the
// measurand (the budget's Unit).
type BudgetRow struct {
	Name string `json:"name"`
	// Kind is "A" (statistics of observations, GUM 4.2) or "B" (other
	// information, GUM 4.3).
	Kind string `json:"kind"`
	// Distribution: "normal", "rectangular" or "t".
	Distribution string `json:"distribution"`
	// Value is the input estimate x_i, in Unit.
	Value float64 `json:"value"`
	// StdUncertainty u(x_i), in Unit.
	StdUncertainty float64 `json:"std_uncertainty"`
	Unit           string  `json:"unit"`
	// Sensitivity c_i = ∂f/∂x_i (measurand unit per Unit).
	Sensitivity float64 `json:"sensitivity"`
	// Contribution u_i(y) = |c_i|·u(x_i) (GUM 5.1.3).
	Contribution float64 `json:"contribution"`
	// DOF ν_i; InfDOF for Type B unless stated (GUM G.4.2).
	DOF DOF `json:"dof"`
}

// Budget is a combined uncertainty for one measurand (GUM 5.1.2, G.2b,
// G.6.4). Value, CombinedStdUnc and ExpandedU are in Unit.
type Budget struct {
	Measurand string      `json:"measurand"`
	Unit      string      `json:"unit"`
	Value     float64     `json:"value"`
	Rows      []BudgetRow `json:"rows"`
	// CombinedStdUnc u_c = √Σ(c_i·u_i)².
	CombinedStdUnc float64 `json:"combined_std_unc"`
	// EffectiveDOF ν_eff by Welch–Satterthwaite.
	EffectiveDOF DOF `json:"effective_dof"`
	// CoverageProbability p (0.95 unless set), two-sided.
	CoverageProbability float64 `json:"coverage_probability"`
	// CoverageK k = t_{(1+p)/2}(ν_eff).
	CoverageK float64 `json:"coverage_k"`
	// ExpandedU U = k·u_c.
	ExpandedU float64 `json:"expanded_u"`
}

// BudgetInputs describes the Type B knowledge used by CoefficientBudget.
// Half-widths are of rectangular distributions (GUM 4.3.7: u = a/√3).
type BudgetInputs struct {
	// NoiseGain K of the fixture (V/V); the input-referred coefficient is
	// k = slope/K. Use 1 for a direct (board or hand) measurement.
	NoiseGain float64
	// NoiseGainTolRel: half-width of K's relative tolerance (0.001 = 0.1 %).
	NoiseGainTolRel float64
	// MeterGainPPM: half-width of the meter's gain (reading) accuracy, ppm.
	MeterGainPPM float64
	// StimulusGainPPM: half-width of the stimulus step's gain error, ppm.
	StimulusGainPPM float64
	// StimulusOffsetVolts: half-width of each stimulus setting's offset
	// error, volts (taken independent from setting to setting).
	StimulusOffsetVolts float64
	// Extra rows are appended as given (their Contribution is recomputed).
	Extra []BudgetRow
	// Coverage probability, two-sided; 0 means 0.95.
	Coverage float64
}

// Rejection is a rejection ratio with its uncertainty, formed from a
// coefficient budget (RejectionFromBudget). Coefficients are signed and
// input referred; the ratio uses |k|.
//
// If |k| ≥ U the result is resolved: RatioDB = −20·log10|k| with a
// symmetric expanded uncertainty ExpandedUDB = (20/ln10)·U/|k| (JCGM 100:2008 (GUM))
// and the exact asymmetric limits LowerDB = −20·log10(|k|+U),
// UpperDB = −20·log10(|k|−U); Asymmetric is set when U/|k| > 0.1.
// If |k| < U the coefficient cannot be told from zero at the coverage
// probability: Resolved is false, RatioDB, ExpandedUDB and UpperDB are zero,
// and only LowerBoundDB = −20·log10(|k|+U) is meaningful (JCGM 100:2008 (GUM);
// EURACHEM/CITAC CG4 Appendix F). LowerBoundDB is set in both cases.
type Rejection struct {
	CoefficientVPerV  float64 `json:"coefficient_v_per_v"`
	CoefficientUVPerV float64 `json:"coefficient_uv_per_v"`
	StdUncUVPerV      float64 `json:"std_unc_uv_per_v"`
	ExpandedUUVPerV   float64 `json:"expanded_u_uv_per_v"`
	CoverageK         float64 `json:"coverage_k"`
	EffectiveDOF      DOF     `json:"effective_dof"`
	Resolved          bool    `json:"resolved"`
	RatioDB           float64 `json:"ratio_db"`
	StdUncDB          float64 `json:"std_unc_db"`
	ExpandedUDB       float64 `json:"expanded_u_db"`
	LowerDB           float64 `json:"lower_db"`
	UpperDB           float64 `json:"upper_db"`
	Asymmetric        bool    `json:"asymmetric"`
	LowerBoundDB      float64 `json:"lower_bound_db"`
	RelativeExpandedU float64 `json:"relative_expanded_u"`
	Budget            Budget  `json:"budget"`
}

// BoardRatio is CMRR = A_d/A_cm of an amplifier board from two fitted gains
// (JESD99B; Sedra & Smith), with the uncertainty of the quotient
// u_rel² = u_rel(A_d)² + u_rel(A_cm)² (GUM 5.1.6, uncorrelated).
type BoardRatio struct {
	DiffGain  Quantity  `json:"diff_gain"`
	CMGain    Quantity  `json:"cm_gain"`
	Ratio     float64   `json:"ratio"`
	Rejection Rejection `json:"rejection"`
}

// Closure is the superposition check k_shift = k_pos + k_neg (the identity derived in fit/doc.go).
// Values in µV/V.
type Closure struct {
	ShiftUVPerV     float64 `json:"shift_uv_per_v"`
	SumUVPerV       float64 `json:"sum_uv_per_v"`
	ClosureUVPerV   float64 `json:"closure_uv_per_v"`
	StdUncUVPerV    float64 `json:"std_unc_uv_per_v"`
	EffectiveDOF    DOF     `json:"effective_dof"`
	CoverageK       float64 `json:"coverage_k"`
	ExpandedUUVPerV float64 `json:"expanded_u_uv_per_v"`
	// Mismatch: |closure| > U(closure).
	Mismatch bool `json:"mismatch"`
}

// ShiftCorrection is the open-loop-gain correction of a supply-shift
// common-mode measurement (the identity derived in fit/doc.go): shifting both rails measures
// k_p + k_n = −(k_c + k_o), so k_c = −k_shift − k_o.
type ShiftCorrection struct {
	// Uncorrected: k_c taken as −k_shift (A_OL ignored).
	Uncorrected Rejection `json:"uncorrected"`
	// Corrected: k_c = −k_shift − k_o.
	Corrected Rejection `json:"corrected"`
	// AOLTermUVPerV is −k_o, the correction added, µV/V.
	AOLTermUVPerV float64 `json:"aol_term_uv_per_v"`
}

// Nonlinearity describes how far a transfer departs from a straight line.
type Nonlinearity struct {
	// MaxDeviationUV: largest |residual| of the straight-line fit, referred
	// to the input (divided by the noise gain), µV; at AtStimulusVolts.
	MaxDeviationUV  float64 `json:"max_deviation_uv"`
	AtStimulusVolts float64 `json:"at_stimulus_volts"`
	// Quad is b3 of y = b0 + b1·x + b3·x² (+ drift) (meter V per V²);
	// QuadSignificant when |b3| > t_{0.975}(ν)·se(b3).
	Quad            Term    `json:"quad"`
	QuadT           float64 `json:"quad_t"`
	QuadSignificant bool    `json:"quad_significant"`
	// LowerSlope, UpperSlope: slopes fitted to the lower and upper halves of
	// the stimulus range (meter V/V); SlopeZ = |Δ|/√(u1²+u2²).
	LowerSlope    Term    `json:"lower_slope"`
	UpperSlope    Term    `json:"upper_slope"`
	SlopeZ        float64 `json:"slope_z"`
	SpanDependent bool    `json:"span_dependent"`
	// HalvesCompared is false when a half had too few points to fit.
	HalvesCompared bool `json:"halves_compared"`
}

// Rule names an ILAC-G8:09/2019 decision rule.
type Rule string

const (
	// RuleSimple: simple acceptance, guard band w = 0 (ILAC-G8 §4.2).
	RuleSimple Rule = "ILAC-G8:09/2019 §4.2 simple acceptance (w = 0)"
	// RuleGuarded: guarded acceptance with w = U and the non-binary zones
	// pass / conditional pass / conditional fail / fail (ILAC-G8 §4.2).
	RuleGuarded Rule = "ILAC-G8:09/2019 §4.2 guarded acceptance (w = U)"
)

// State is the outcome of a decision.
type State string

const (
	StatePass            State = "pass"
	StateConditionalPass State = "conditional pass"
	StateConditionalFail State = "conditional fail"
	StateFail            State = "fail"
)

// Decision is the judgement of one result against a minimum limit in dB.
// The rule and guard band travel with it.
type Decision struct {
	State   State   `json:"state"`
	Rule    Rule    `json:"rule"`
	LimitDB float64 `json:"limit_db"`
	// GuardBandDB w on the acceptance side (0 for simple acceptance);
	// RejectGuardBandDB w' on the rejection side (equal to w for a
	// symmetric U; differs for asymmetric dB limits).
	GuardBandDB       float64 `json:"guard_band_db"`
	RejectGuardBandDB float64 `json:"reject_guard_band_db"`
	// AcceptanceLimitDB AL = TL + w; RejectionLimitDB RL = TL − w'.
	AcceptanceLimitDB float64 `json:"acceptance_limit_db"`
	RejectionLimitDB  float64 `json:"rejection_limit_db"`
	// JudgedDB is the value compared: the estimate, or for an unresolved
	// result its lower bound (JudgedOnLowerBound).
	JudgedDB           float64 `json:"judged_db"`
	JudgedOnLowerBound bool    `json:"judged_on_lower_bound"`
}

// LotOptions configures Lot.
type LotOptions struct {
	// Coverage P of the tolerance bound (0 → 0.95).
	Coverage float64
	// Confidence γ of the tolerance bound (0 → 0.95).
	Confidence float64
	// OutlierAlpha is the significance of the generalized ESD test
	// (0 → 0.05); MaxOutliers its upper bound r (0 → max(1, n/10), ≤ 10).
	OutlierAlpha float64
	MaxOutliers  int
	// Unit labels the values (e.g. "dB").
	Unit string
}

// LotStats summarises one test over a lot of parts against a lower limit.
// All values are in Unit.
type LotStats struct {
	Unit   string  `json:"unit"`
	N      int     `json:"n"`
	Mean   float64 `json:"mean"`
	SD     float64 `json:"sd"`
	Min    float64 `json:"min"`
	Median float64 `json:"median"`
	Max    float64 `json:"max"`
	// LowerLimit LSL; Cpl = (mean − LSL)/(3·SD).
	LowerLimit float64 `json:"lower_limit"`
	Cpl        float64 `json:"cpl"`
	// CplDefined is false when SD = 0 (Cpl and the bound are then zero).
	CplDefined bool `json:"cpl_defined"`
	// ToleranceK k with mean − k·SD a lower bound covering Coverage of the
	// population with Confidence (one-sided normal tolerance bound).
	Coverage            float64 `json:"coverage"`
	Confidence          float64 `json:"confidence"`
	ToleranceK          float64 `json:"tolerance_k"`
	LowerToleranceBound float64 `json:"lower_tolerance_bound"`
	// Yield: fraction of results ≥ LowerLimit (PassCount of N).
	PassCount int     `json:"pass_count"`
	Yield     float64 `json:"yield"`
	// Outliers: indices into the input, by OutlierMethod.
	Outliers      []int  `json:"outliers"`
	OutlierMethod string `json:"outlier_method"`
}

// TempFit is the change of a ratio with temperature, dB/°C, from a
// straight line ratio_dB = a + b·T.
type TempFit struct {
	Unit string `json:"unit"`
	// Fitted is false when the unit had too few points or one temperature.
	Fitted bool `json:"fitted"`
	// SlopeDBPerC with its standard error; DOF = n − p.
	SlopeDBPerC       float64 `json:"slope_db_per_c"`
	SlopeStdErrDBPerC float64 `json:"slope_std_err_db_per_c"`
	// InterceptDB is the fitted ratio at 0 °C.
	InterceptDB  float64 `json:"intercept_db"`
	DOF          int     `json:"dof"`
	ResidualSDDB float64 `json:"residual_sd_db"`
	N            int     `json:"n"`
}

// UnitTemps are one unit's ratio readings at several temperatures.
type UnitTemps struct {
	Unit    string
	TempC   []float64
	RatioDB []float64
}

// LotTempFit is a common temperature slope fitted to all units, each with
// its own intercept, plus the per-unit slopes and their spread.
type LotTempFit struct {
	// Common: one slope, per-unit intercepts (InterceptDB is zero).
	Common  TempFit   `json:"common"`
	PerUnit []TempFit `json:"per_unit"`
	// MeanUnitSlopeDBPerC and SDUnitSlopeDBPerC over the fitted units
	// (SD is zero with fewer than two).
	MeanUnitSlopeDBPerC float64 `json:"mean_unit_slope_db_per_c"`
	SDUnitSlopeDBPerC   float64 `json:"sd_unit_slope_db_per_c"`
	UnitsFitted         int     `json:"units_fitted"`
}

// Pooled is a pooled standard deviation of repeats:
// s_p² = Σ(n_i−1)·s_i² / Σ(n_i−1), DOF = Σ(n_i−1).
type Pooled struct {
	SD     float64 `json:"sd"`
	DOF    int     `json:"dof"`
	Groups int     `json:"groups"`
}

// Points are hand-taken readings: stimulus volts, measured volts, and
// optionally time in seconds (TimeSeconds nil when the file has no time
// column).
type Points struct {
	StimulusVolts []float64 `json:"stimulus_volts"`
	MeasuredVolts []float64 `json:"measured_volts"`
	TimeSeconds   []float64 `json:"time_seconds,omitempty"`
}

// HandOptions configures HandFit.
type HandOptions struct {
	// Stimulus is "cm" (common mode) or "supply".
	Stimulus string
	// Gain is the noise gain K from the input to the meter (V/V), 1 when
	// the meter reads the input-referred offset directly.
	Gain float64
	// GainTol is the relative half-width of Gain's tolerance (0.001 = 0.1 %).
	GainTol float64
	// MeterGainPPM, StimulusGainPPM, StimulusOffsetVolts: see BudgetInputs.
	MeterGainPPM        float64
	StimulusGainPPM     float64
	StimulusOffsetVolts float64
	// Coverage probability (0 → 0.95).
	Coverage float64
}

// HandResult is the analysis of hand-taken readings, ready for JSON.
type HandResult struct {
	Stimulus              string      `json:"stimulus"`
	Quantity              string      `json:"quantity"` // "CMRR" or "PSRR"
	N                     int         `json:"n"`
	Gain                  float64     `json:"gain"`
	DriftFitted           bool        `json:"drift_fitted"`
	Slope                 float64     `json:"slope"`
	SlopeU                float64     `json:"slope_u"`
	Intercept             float64     `json:"intercept_volts"`
	DriftVoltsPerS        float64     `json:"drift_volts_per_s"`
	ResidualSD            float64     `json:"residual_sd"`
	DOF                   int         `json:"dof"`
	CoefficientUVPerV     float64     `json:"coefficient_uV_per_V"`
	CoefficientStdUUVPerV float64     `json:"coefficient_std_u_uV_per_V"`
	RatioDB               float64     `json:"ratio_db"`
	ExpandedUDB           float64     `json:"expanded_u_db"`
	LowerDB               float64     `json:"lower_db"`
	UpperDB               float64     `json:"upper_db"`
	CoverageK             float64     `json:"coverage_k"`
	EffectiveDOF          DOF         `json:"effective_dof"`
	Resolved              bool        `json:"resolved"`
	LowerBoundDB          float64     `json:"lower_bound_db"`
	Budget                []BudgetRow `json:"budget"`
}
