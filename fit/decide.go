package fit

import (
	"fmt"
	"math"
)

// Decide judges a ratio in dB against a minimum limit TL (e.g. CMRR ≥ 85 dB)
// by an ILAC-G8:09/2019 §4.2 decision rule, with the expanded uncertainty
// U (dB, coverage 95 %):
//
// RuleSimple (w = 0): pass if value ≥ TL, else fail. The
// false-accept risk at the limit can reach 50 %.
//
// RuleGuarded (w = U): acceptance limit AL = TL + w,
// rejection limit RL = TL − w, and the non-binary zones ILAC-G8 names:
//
//	value ≥ AL           pass              (false-accept risk < 2.5 %)
//	TL ≤ value < AL      conditional pass
//	RL < value < TL      conditional fail
//	value ≤ RL           fail
//
// JCGM 100:2008 (GUM) check: TL = 85 dB, U = 1.5 dB: 87 pass, 86 conditional pass,
// 84 conditional fail, 83 fail. The rule's name and w travel in the
// Decision.
func Decide(valueDB, expandedUDB, limitDB float64, rule Rule) (Decision, error) {
	return decideAsym(valueDB, expandedUDB, expandedUDB, limitDB, rule)
}

// decideAsym uses separate guard bands below (wLow, acceptance side) and
// above (wHigh, rejection side) the value, for asymmetric dB intervals.
func decideAsym(valueDB, wLow, wHigh, limitDB float64, rule Rule) (Decision, error) {
	for _, v := range []float64{valueDB, wLow, wHigh, limitDB} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return Decision{}, fmt.Errorf("fit: decision input %v: %w", v, ErrBadInput)
		}
	}
	if wLow < 0 || wHigh < 0 {
		return Decision{}, fmt.Errorf("fit: negative expanded uncertainty: %w", ErrBadInput)
	}
	d := Decision{Rule: rule, LimitDB: limitDB, JudgedDB: valueDB}
	switch rule {
	case RuleSimple:
		d.AcceptanceLimitDB, d.RejectionLimitDB = limitDB, limitDB
		if valueDB >= limitDB {
			d.State = StatePass
		} else {
			d.State = StateFail
		}
	case RuleGuarded:
		d.GuardBandDB = wLow
		d.RejectGuardBandDB = wHigh
		d.AcceptanceLimitDB = limitDB + wLow
		d.RejectionLimitDB = limitDB - wHigh
		switch {
		case valueDB >= d.AcceptanceLimitDB:
			d.State = StatePass
		case valueDB >= limitDB:
			d.State = StateConditionalPass
		case valueDB > d.RejectionLimitDB:
			d.State = StateConditionalFail
		default:
			d.State = StateFail
		}
	default:
		return Decision{}, fmt.Errorf("fit: unknown decision rule %q: %w", rule, ErrBadInput)
	}
	return d, nil
}

// DecideRejection judges a Rejection against a minimum limit TL in dB.
//
// A resolved result uses its exact asymmetric limits as guard bands: on the
// acceptance side w = RatioDB − LowerDB, on the rejection side
// w' = UpperDB − RatioDB (both equal U_dB to first order), so the zones are
// those of Decide with the interval [LowerDB, UpperDB].
//
// An unresolved result (|k| ≤ U) is judged as follows:
//   - RuleSimple (w = 0): ILAC-G8:09/2019 §4.2.1 judges the measured value
//     itself, so the point estimate −20·log10|k| (+∞ for k = 0) is
//     compared with TL: pass if it is at or above TL, else fail. Judging
//     the bound instead would fail a better part (smaller |k|, larger
//     relative U) and pass a worse one at the same limit.
//   - RuleGuarded: judged by the lower bound L = LowerBoundDB, which already
//     contains U (EURACHEM/CITAC CG4 Appendix F), so no further guard band
//     is applied: pass if L ≥ TL; otherwise the interval [L, ∞) straddles
//     the limit: conditional pass if the point estimate −20·log10|k| is at
//     or above TL, conditional fail if not. An unresolved result is never
//     "fail", since no upper bound exists.
func DecideRejection(r Rejection, limitDB float64, rule Rule) (Decision, error) {
	if r.Resolved {
		return decideAsym(r.RatioDB, r.RatioDB-r.LowerDB, r.UpperDB-r.RatioDB, limitDB, rule)
	}
	L := r.LowerBoundDB
	if math.IsNaN(L) || math.IsInf(L, 0) || math.IsNaN(limitDB) || math.IsInf(limitDB, 0) {
		return Decision{}, fmt.Errorf("fit: lower bound %v, limit %v: %w", L, limitDB, ErrBadInput)
	}
	d := Decision{Rule: rule, LimitDB: limitDB, AcceptanceLimitDB: limitDB, RejectionLimitDB: limitDB, JudgedDB: L, JudgedOnLowerBound: true}
	est := math.Inf(1)
	if r.CoefficientVPerV != 0 {
		est = -20 * math.Log10(math.Abs(r.CoefficientVPerV))
	}
	switch rule {
	case RuleSimple:
		d.JudgedDB, d.JudgedOnLowerBound = est, false
		if est >= limitDB {
			d.State = StatePass
		} else {
			d.State = StateFail
		}
	case RuleGuarded:
		switch {
		case L >= limitDB:
			d.State = StatePass
		case est >= limitDB:
			d.State = StateConditionalPass
		default:
			d.State = StateConditionalFail
		}
	default:
		return Decision{}, fmt.Errorf("fit: unknown decision rule %q: %w", rule, ErrBadInput)
	}
	return d, nil
}
