package fit

import (
	"fmt"
	"math"
)

// InputReferred returns the signed input-referred coefficient
//
//	k = b1 / K     (V/V)
//
// from a fitted slope b1 of meter volts against stimulus volts and the
// fixture's noise gain K (nulling loop: E0 = K·V_IO, so ΔV_IO = ΔE0/K;
// MIL-STD-883 Method 4001/4003). K must be > 0.
func InputReferred(slopeVPerV, noiseGain float64) (float64, error) {
	if !(noiseGain > 0) || math.IsInf(noiseGain, 0) {
		return 0, fmt.Errorf("fit: noise gain %v must be > 0: %w", noiseGain, ErrBadInput)
	}
	if math.IsNaN(slopeVPerV) || math.IsInf(slopeVPerV, 0) {
		return 0, fmt.Errorf("fit: slope %v: %w", slopeVPerV, ErrBadInput)
	}
	return slopeVPerV / noiseGain, nil
}

// RatioFromCoefficient forms a rejection ratio from a signed input-referred
// coefficient k (V/V):
//
//	µV/V = 10⁶·k (sign kept),  ratio = 1/|k|,  dB = 20·log10(ratio)
//
// (JEDEC JESD99B: k_CMR = ΔV_IC/ΔV_IO, k_SVR = ΔV_S/ΔV_IO and its
// reciprocal k_SVS; MIL-STD-883 Methods 4001.1/4003). k = 0 returns ErrBadInput: an exactly
// zero coefficient has no finite ratio, use a Rejection's lower bound.
func RatioFromCoefficient(kVPerV float64) (Ratio, error) {
	if kVPerV == 0 || math.IsNaN(kVPerV) || math.IsInf(kVPerV, 0) {
		return Ratio{}, fmt.Errorf("fit: coefficient %v V/V has no finite ratio (state a lower bound from its uncertainty instead): %w", kVPerV, ErrBadInput)
	}
	r := 1 / math.Abs(kVPerV)
	return Ratio{
		CoefficientVPerV:  kVPerV,
		CoefficientUVPerV: 1e6 * kVPerV,
		Ratio:             r,
		RatioDB:           20 * math.Log10(r),
	}, nil
}

// RatioFromSteps forms a rejection ratio from one step:
//
//	CMRR = ΔV_CM/ΔV_OS,  PSRR = ΔV_S/ΔV_OS   (JESD99B k_CMR, k_SVR)
//
// with k = ΔV_OS/ΔV_stimulus kept signed. A zero stimulus step returns
// ErrZeroSpan rather than dividing (an inverting stage, both inputs at
// ground, has no common-mode stimulus at all: common practice, no published
// source); a zero offset change returns ErrBadInput.
func RatioFromSteps(deltaStimulusVolts, deltaOffsetVolts float64) (Ratio, error) {
	if deltaStimulusVolts == 0 {
		return Ratio{}, fmt.Errorf("fit: the stimulus did not change: %w", ErrZeroSpan)
	}
	if math.IsNaN(deltaStimulusVolts) || math.IsInf(deltaStimulusVolts, 0) {
		return Ratio{}, fmt.Errorf("fit: stimulus step %v V: %w", deltaStimulusVolts, ErrBadInput)
	}
	return RatioFromCoefficient(deltaOffsetVolts / deltaStimulusVolts)
}

// RatioFromNullLoop forms a ratio from a nulling-loop step: the loop output
// changes by ΔE0 = K·ΔV_IO, so
//
//	ratio = K·ΔV_stimulus/|ΔE0|
//
// (derived from MIL-STD-883 Method 4001/4003; e.g.
// MIL-M-38510/114: E1 − E2 = 0.300 V, K = 1000, ΔV_CM = 30 V → 100.0 dB).
func RatioFromNullLoop(deltaStimulusVolts, deltaE0Volts, noiseGain float64) (Ratio, error) {
	k, err := InputReferred(deltaE0Volts, noiseGain)
	if err != nil {
		return Ratio{}, err
	}
	return RatioFromSteps(deltaStimulusVolts, k)
}

// DBFromRatio returns 20·log10(ratio).
func DBFromRatio(ratio float64) float64 { return 20 * math.Log10(ratio) }

// RatioFromDB returns 10^(dB/20).
func RatioFromDB(db float64) float64 { return math.Pow(10, db/20) }

// DBFromUVPerV returns the rejection in dB of a coefficient in µV/V,
// 20·log10(10⁶/|µV/V|) (JESD99B k_SVS ↔ k_SVR: 10 µV/V = 100 dB).
func DBFromUVPerV(uvPerV float64) float64 { return 20 * math.Log10(1e6/math.Abs(uvPerV)) }

// UVPerVFromDB returns |k| in µV/V for a rejection in dB: 10⁶·10^(−dB/20).
func UVPerVFromDB(db float64) float64 { return 1e6 * math.Pow(10, -db/20) }

// BoardCMRR forms the CMRR of an amplifier board from its fitted
// differential gain A_d and common-mode gain A_cm (both V/V, e.g. slopes of
// output volts against differential and common-mode input volts):
//
//	CMRR = A_d/A_cm,   k = A_cm/A_d (input-referred, signed)
//
// (JESD99B; Sedra & Smith, Microelectronic Circuits). The uncertainty of
// the quotient comes from a GUM budget with sensitivities
// c_cm = 10⁶/A_d and c_d = −10⁶·A_cm/A_d² (µV/V), i.e.
// u_rel(k)² = u_rel(A_d)² + u_rel(A_cm)² (GUM 5.1.6, uncorrelated), ν_eff by
// Welch–Satterthwaite. A common-mode gain not distinguishable from zero
// gives an unresolved Rejection with a lower bound. A zero A_d returns
// ErrBadInput.
func BoardCMRR(diffGain, cmGain Quantity, coverage float64) (BoardRatio, error) {
	ad, acm := diffGain.Value, cmGain.Value
	if ad == 0 || math.IsNaN(ad) || math.IsInf(ad, 0) {
		return BoardRatio{}, fmt.Errorf("fit: differential gain %v: %w", ad, ErrBadInput)
	}
	k := 1e6 * acm / ad
	rows := []BudgetRow{
		{Name: "common-mode gain A_cm (fit)", Kind: "A", Distribution: DistT, Value: acm, StdUncertainty: cmGain.StdUnc, Unit: "V/V", Sensitivity: 1e6 / ad, DOF: dofOrInf(cmGain.DOF)},
		{Name: "differential gain A_d (fit)", Kind: "A", Distribution: DistT, Value: ad, StdUncertainty: diffGain.StdUnc, Unit: "V/V", Sensitivity: -1e6 * acm / (ad * ad), DOF: dofOrInf(diffGain.DOF)},
	}
	b, err := Combine("board input-referred common-mode coefficient A_cm/A_d", "µV/V", k, rows, coverage)
	if err != nil {
		return BoardRatio{}, err
	}
	rej, err := RejectionFromBudget(b)
	if err != nil {
		return BoardRatio{}, err
	}
	out := BoardRatio{DiffGain: diffGain, CMGain: cmGain, Rejection: rej}
	if acm != 0 {
		out.Ratio = math.Abs(ad / acm)
	}
	return out, nil
}

// dofOrInf maps a zero (unset) DOF to InfDOF.
func dofOrInf(d DOF) DOF {
	if d == 0 {
		return InfDOF
	}
	return d
}
