package report

import (
	"math"
	"strconv"
	"strings"
)

// Frequency-response input types. The caller (cmd/nullbench) maps the
// analysis's per-frequency results, single-pole fits and budgets into
// these; report imports nothing of ours. The conventions of model.go hold:
// NaN is "not available", units are in the field names, user and
// instrument text is written as literal text.

// FreqResult is the judged outcome of one unit × test × temperature at one
// stimulus frequency. The embedded Result carries the figures as at DC,
// with these differences:
//   - CoefficientUVPerV is the magnitude |k(f)| ≥ 0 of the input-referred
//     complex coefficient (response/stimulus, referred to the input by the
//     fixture's gain at f), in µV/V; its sign lives in PhaseDeg;
//   - RatioDB = 20·log10(10⁶ / |k(f)|) (JEDEC JESD99B, as at DC);
//   - ExpandedUDB, CoverageK, DOFEffective, Resolved, LowerBoundDB,
//     LimitDB (the limit at this frequency), Verdict, Rule (the decision
//     rule, e.g. "guarded"), Flags and Notes mean what they mean at DC;
//   - PredictedUUVPerV is NaN unless the caller has a prediction.
type FreqResult struct {
	Result
	// Part and Lot name the part or board and its lot when they differ
	// from the campaign's ("" = the campaign's Part / Lot).
	Part string
	Lot  string
	// Quantity is the name the charts print, e.g. "CMRR", "PSRR+" ("" =
	// Test).
	Quantity string
	// FrequencyHz is the stimulus frequency (> 0; a result at 0 Hz is a
	// DC Result, not a FreqResult).
	FrequencyHz float64
	// Instrument is what measured the response: "digitizer" (magnitude
	// and phase from IEEE Std 1057 sine fits) or "ac_meter" (magnitude
	// only, HasPhase false).
	Instrument string
	// PhaseDeg is arg k(f) in degrees, in (−180, 180]: the phase of the
	// input-referred response relative to the stimulus, positive when the
	// response leads the stimulus. PhaseExpandedUDeg is its expanded
	// uncertainty U = k·u (same CoverageK). Both NaN when HasPhase is false.
	PhaseDeg          float64
	PhaseExpandedUDeg float64
	HasPhase          bool
	// Coverage is the two-sided coverage probability of ExpandedUDB and
	// PhaseExpandedUDeg (e.g. 0.95; NaN: not stated).
	Coverage float64
	// NoiseFloorDB is the largest ratio the setup resolves at this
	// frequency (from a record with the stimulus off); a ratio above it
	// is not resolved and only LowerBoundDB states something about the
	// part. NaN: no floor record.
	NoiseFloorDB float64
}

// QuantityName is the name charts and tables print for r.
func (r FreqResult) QuantityName() string {
	if r.Quantity != "" {
		return r.Quantity
	}
	return r.Test
}

// FreqBudgetRow is one uncertainty-budget component (GUM §5.1) of a
// frequency-response result. For Quantity "magnitude" (or "") the
// embedded BudgetRow's component is an input's standard uncertainty
// expressed in dB of the ratio (ValueUnit "dB", first order: 20/ln 10 dB
// per unit relative change), Sensitivity is dimensionless and
// Contribution is in dB; for Quantity "phase" they are in degrees.
type FreqBudgetRow struct {
	BudgetRow
	Part        string
	FrequencyHz float64
	Quantity    string // "magnitude" or "phase"
}

// FreqFitRow is the single-pole model fitted across frequencies for one
// unit × test × temperature,
//
//	|k(f)| = |k_0|·√(1 + (f/f_c)²),  i.e.  R(f) = R_0 − 10·log10(1 + (f/f_c)²) dB
//
// (one real pole; Sedra & Smith, Microelectronic Circuits, single-time-constant
// networks; cited from memory), with the
// DC cross-check of R_0 against the unit's DC result of the same test.
type FreqFitRow struct {
	Unit         string
	Part         string // "" = the campaign's
	Lot          string // "" = the campaign's
	Test         string
	Quantity     string // e.g. "CMRR"; "" = Test
	TemperatureC float64
	Points       int // frequencies in the fit
	// LowFreqRatioDB is R_0 with its expanded uncertainty; CornerHz is
	// f_c with its expanded uncertainty (both at CoverageK).
	LowFreqRatioDB     float64
	LowFreqExpandedUDB float64
	CornerHz           float64
	CornerExpandedUHz  float64
	CoverageK          float64
	// CornerResolved is false when the data do not show the corner: then
	// only CornerLowerBoundHz (f_c above it) is a statement.
	CornerResolved     bool
	CornerLowerBoundHz float64
	Note               string // why there is no fit, or what limits it
	// DC cross-check: DCRatioDB ± DCExpandedUDB is the unit's DC result,
	// DCDiffDB = R_0 − DCRatioDB with expanded uncertainty
	// DCDiffExpandedUDB; DCConsistent when |DCDiffDB| ≤ DCDiffExpandedUDB.
	// DCChecked false: no DC result to compare (DCNote says why).
	DCChecked         bool
	DCRatioDB         float64
	DCExpandedUDB     float64
	DCDiffDB          float64
	DCDiffExpandedUDB float64
	DCConsistent      bool
	DCNote            string
}

// RoundToU rounds an expanded uncertainty u to two significant digits and
// the estimate v to the same decimal place, so that neither carries more
// digits than u supports (JCGM 100:2008 (GUM) 7.2.6). decimals is the
// number of decimal places of both (negative: rounded to tens, hundreds,
// …). A u that is NaN, infinite or not positive leaves v and u as they
// are, with ok false.
func RoundToU(v, u float64) (rv, ru float64, decimals int, ok bool) {
	if math.IsNaN(u) || math.IsInf(u, 0) || u <= 0 {
		return v, u, 0, false
	}
	// Two significant digits of u: its leading digit sits at 10^e.
	e := int(math.Floor(math.Log10(u)))
	decimals = 1 - e
	ru = roundDecimals(u, decimals)
	// Rounding may carry u into a new decade (9.96 → 10): keep two digits.
	if e2 := int(math.Floor(math.Log10(ru))); e2 > e {
		decimals = 1 - e2
		ru = roundDecimals(u, decimals)
	}
	return roundDecimals(v, decimals), ru, decimals, true
}

// roundDecimals rounds v to d decimal places (d < 0: to 10^-d), through
// its decimal text so that 315.4 stays 315.4 and not 315.40000000000003.
func roundDecimals(v float64, d int) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return v
	}
	if d < 0 {
		q := math.Pow(10, float64(-d))
		return math.Round(v/q) * q
	}
	r, err := strconv.ParseFloat(strconv.FormatFloat(v, 'f', d, 64), 64)
	if err != nil {
		return v
	}
	return r
}

// FormatWithU is v and u as text rounded by RoundToU (GUM 7.2.6), e.g.
// "315.4" and "9.1"; without a usable u, v to six significant digits.
func FormatWithU(v, u float64) (vs, us string) {
	rv, ru, d, ok := RoundToU(v, u)
	if !ok {
		return FormatSig(v, 6), FormatSig(u, 2)
	}
	d = max(d, 0)
	return strconv.FormatFloat(rv, 'f', d, 64), strconv.FormatFloat(ru, 'f', d, 64)
}

// FormatHz is a stimulus frequency in plain decimal notation to five
// significant digits (26826.96 → "26827", 37.27594 → "37.276", 100000 →
// "100000"): enough to tell log-spaced points apart, never in exponent
// form.
func FormatHz(f float64) string { return FormatSig(f, 5) }

// FormatSig is v rounded to n significant digits in plain decimal
// notation, trailing zeros after the point dropped; NaN and infinities as
// Go prints them.
func FormatSig(v float64, n int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return strconv.FormatFloat(v, 'g', -1, 64)
	}
	if v == 0 {
		return "0"
	}
	e := int(math.Floor(math.Log10(math.Abs(v))))
	d := n - 1 - e
	t := strconv.FormatFloat(roundDecimals(v, d), 'f', max(d, 0), 64)
	if strings.Contains(t, ".") {
		t = strings.TrimRight(strings.TrimRight(t, "0"), ".")
	}
	return t
}

// floorSig rounds v down to n significant digits (NaN and infinities as
// they are).
func floorSig(v float64, n int) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) || v == 0 {
		return v
	}
	d := n - 1 - int(math.Floor(math.Log10(math.Abs(v))))
	q := math.Pow(10, float64(d))
	r := math.Floor(v*q) / q
	return roundDecimals(r, max(d, 0))
}
