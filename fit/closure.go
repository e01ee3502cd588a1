package fit

import (
	"fmt"
	"math"
)

// CheckClosure tests superposition on a nulling-loop bench (the identity derived in fit/doc.go): the
// coefficient of a shift of both rails must equal the sum of the
// single-rail coefficients,
//
//	closure = k_shift − (k_pos + k_neg)
//	u(closure)² = u(k_shift)² + u(k_pos)² + u(k_neg)²   (independent; GUM 5.1.2)
//
// with ν_eff by Welch–Satterthwaite (GUM G.2b) and U = k·u at the coverage
// probability (0 → 0.95). Mismatch is set when |closure| > U: thermal tails
// or a fixture fault broke superposition. All coefficients in µV/V.
func CheckClosure(shift, pos, neg Quantity, coverage float64) (Closure, error) {
	rows := []BudgetRow{
		{Name: "k_shift", Kind: "A", Distribution: DistT, Value: shift.Value, StdUncertainty: shift.StdUnc, Unit: "µV/V", Sensitivity: 1, DOF: dofOrInf(shift.DOF)},
		{Name: "k_pos", Kind: "A", Distribution: DistT, Value: pos.Value, StdUncertainty: pos.StdUnc, Unit: "µV/V", Sensitivity: -1, DOF: dofOrInf(pos.DOF)},
		{Name: "k_neg", Kind: "A", Distribution: DistT, Value: neg.Value, StdUncertainty: neg.StdUnc, Unit: "µV/V", Sensitivity: -1, DOF: dofOrInf(neg.DOF)},
	}
	c := shift.Value - (pos.Value + neg.Value)
	b, err := Combine("closure k_shift − (k_pos + k_neg)", "µV/V", c, rows, coverage)
	if err != nil {
		return Closure{}, err
	}
	return Closure{
		ShiftUVPerV:     shift.Value,
		SumUVPerV:       pos.Value + neg.Value,
		ClosureUVPerV:   c,
		StdUncUVPerV:    b.CombinedStdUnc,
		EffectiveDOF:    b.EffectiveDOF,
		CoverageK:       b.CoverageK,
		ExpandedUUVPerV: b.ExpandedU,
		Mismatch:        math.Abs(c) > b.ExpandedU,
	}, nil
}

// CorrectShift corrects a supply-shift common-mode measurement for finite
// open-loop gain (the identity derived in fit/doc.go, derived from kc + kp + kn + ko = 0): shifting
// both rails with the inputs and the output held measures
// k_shift = k_p + k_n = −(k_c + k_o), so
//
//	uncorrected:  k_c ≈ −k_shift
//	corrected:    k_c = −k_shift − k_o,   u² = u(k_shift)² + u(k_o)²
//
// where k_o is the signed input-referred coefficient per volt of output
// (1/A_OL with its sign) from the open-loop-gain test. Both results are
// returned as Rejections (µV/V in, CMRR out). Example (the identity derived in fit/doc.go):
// k_shift = −10.01 µV/V, k_o = +0.01 µV/V → 99.99 dB uncorrected,
// 100.00 dB corrected.
func CorrectShift(shift, ko Quantity, coverage float64) (ShiftCorrection, error) {
	if math.IsNaN(shift.Value) || math.IsNaN(ko.Value) {
		return ShiftCorrection{}, fmt.Errorf("fit: NaN coefficient: %w", ErrBadInput)
	}
	shiftRow := BudgetRow{Name: "supply-shift coefficient k_shift", Kind: "A", Distribution: DistT, Value: shift.Value, StdUncertainty: shift.StdUnc, Unit: "µV/V", Sensitivity: -1, DOF: dofOrInf(shift.DOF)}
	bu, err := Combine("common-mode coefficient k_c (uncorrected)", "µV/V", -shift.Value, []BudgetRow{shiftRow}, coverage)
	if err != nil {
		return ShiftCorrection{}, err
	}
	koRow := BudgetRow{Name: "open-loop coefficient k_o (1/A_OL)", Kind: "A", Distribution: DistT, Value: ko.Value, StdUncertainty: ko.StdUnc, Unit: "µV/V", Sensitivity: -1, DOF: dofOrInf(ko.DOF)}
	bc, err := Combine("common-mode coefficient k_c (A_OL corrected)", "µV/V", -shift.Value-ko.Value, []BudgetRow{shiftRow, koRow}, coverage)
	if err != nil {
		return ShiftCorrection{}, err
	}
	var out ShiftCorrection
	if out.Uncorrected, err = RejectionFromBudget(bu); err != nil {
		return ShiftCorrection{}, err
	}
	if out.Corrected, err = RejectionFromBudget(bc); err != nil {
		return ShiftCorrection{}, err
	}
	out.AOLTermUVPerV = -ko.Value
	return out, nil
}

// SymmetricSupplyUVPerV returns the offset change per volt of a symmetric
// supply change (V+ up by Δ/2, V− down by Δ/2):
//
//	ΔV_IO/Δ = (k_p − k_n)/2
//
// (the identity derived in fit/doc.go; example k_p = +4, k_n = −14.01 µV/V → 9.005 µV/V).
func SymmetricSupplyUVPerV(kpUVPerV, knUVPerV float64) float64 {
	return (kpUVPerV - knUVPerV) / 2
}

// FourthCoefficient returns the coefficient fixed by the other three
// through k_c + k_p + k_n + k_o = 0 (the identity derived in fit/doc.go: moving every terminal
// together changes nothing).
func FourthCoefficient(a, b, c float64) float64 { return -(a + b + c) }
