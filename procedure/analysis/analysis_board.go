package analysis

import (
	"fmt"
	"math"

	"nullbench/fit"
	"nullbench/procedure/plan"
)

// BoardResult is one amplifier board at one temperature: its differential
// gain A_d and common-mode gain A_cm (slopes of output volts against the
// diff and cm sweeps), the measured CMRR = |A_d/A_cm| (its dB figure,
// uncertainty and decision are in the board_cmrr RatioResult), and beside
// it the worst-case limits that the design alone allows, so the engineer
// sees what dominates:
//
//	resistor matching:  CMRR_R = (1 + G)/(4t)           (Sedra & Smith, difference amplifier)
//	with the op-amp:    1/CMRR_tot = 1/CMRR_R + 1/CMRR_OA  (Franco, worst case; from memory, unverified)
//
// with G the nominal board_gain, t the resistor_tolerance and CMRR_OA the
// op-amp's datasheet CMRR (fixture.opamp_cmrr_db). Both are worst cases:
// real mismatches partly cancel, so a measured CMRR above the combined
// limit is usual; one well below it points to a fault.
type BoardResult struct {
	Unit         string  `json:"unit"`
	Condition    int     `json:"condition"`
	TempIndex    int     `json:"temp_index"`
	TemperatureC float64 `json:"temperature_c"`
	// DiffGain A_d and CMGain A_cm in V/V, each with its standard
	// uncertainty from its own budget (Type A of the fit, stimulus gain and
	// offset, meter gain) and ν_eff. HasDiffGain/HasCMGain say which sweeps
	// were fitted.
	DiffGain    fit.Quantity `json:"diff_gain"`
	CMGain      fit.Quantity `json:"cm_gain"`
	HasDiffGain bool         `json:"has_diff_gain"`
	HasCMGain   bool         `json:"has_cm_gain"`
	DiffLine    fit.LineFit  `json:"diff_line"`
	CMLine      fit.LineFit  `json:"cm_line"`
	// DiffBudget and CMBudget are those budgets in µV/V (10⁶·A).
	DiffBudget fit.Budget `json:"diff_budget"`
	CMBudget   fit.Budget `json:"cm_budget"`
	// CMRRRatio = |A_d/A_cm| (0 when A_cm is exactly 0); MeasuredDB is the
	// board_cmrr figure (a lower bound when MeasuredIsLowerBound) and
	// ExpandedUDB its U.
	HasCMRR              bool    `json:"has_cmrr"`
	CMRRRatio            float64 `json:"cmrr_ratio"`
	MeasuredDB           float64 `json:"measured_db"`
	MeasuredIsLowerBound bool    `json:"measured_is_lower_bound"`
	ExpandedUDB          float64 `json:"expanded_u_db"`
	// The design's worst-case limits.
	NominalGain        float64 `json:"nominal_gain"`
	ResistorTolerance  float64 `json:"resistor_tolerance"`
	HasResistorLimit   bool    `json:"has_resistor_limit"`
	ResistorLimitRatio float64 `json:"resistor_limit_ratio"`
	ResistorLimitDB    float64 `json:"resistor_limit_db"`
	HasOpAmpCMRR       bool    `json:"has_opamp_cmrr"`
	OpAmpCMRRdB        float64 `json:"opamp_cmrr_db"`
	HasCombinedLimit   bool    `json:"has_combined_limit"`
	CombinedLimitRatio float64 `json:"combined_limit_ratio"`
	CombinedLimitDB    float64 `json:"combined_limit_db"`
	// Dominant: "resistor matching", "op-amp" or "both" (neither share of
	// 1/CMRR_tot is twice the other), "" when not both are known.
	Dominant string `json:"dominant"`
	// Comparison of the measured CMRR with the worst-case limit, in words.
	Comparison string `json:"comparison"`
}

// ResistorCMRR returns the worst-case CMRR of a four-resistor difference
// amplifier of differential gain G built with resistors of relative
// tolerance t,
//
//	CMRR_R = (1 + G)/(4t)
//
// (Sedra & Smith, Microelectronic Circuits, difference amplifier problem,
// (K+1)/(4ε); e.g. G = 1, t = 0.1 % → 500, 54.0 dB). G must be
// > 0 and t > 0.
func ResistorCMRR(gain, tolerance float64) (float64, error) {
	if !(gain > 0) || math.IsInf(gain, 0) {
		return 0, fmt.Errorf("board gain %g must be > 0", gain)
	}
	if !(tolerance > 0) || math.IsInf(tolerance, 0) {
		return 0, fmt.Errorf("resistor tolerance %g must be > 0 (with exact resistors the matching sets no limit)", tolerance)
	}
	return (1 + gain) / (4 * tolerance), nil
}

// CombinedCMRR returns the worst-case CMRR of a stage whose resistor
// matching allows cmrrR and whose op-amp has cmrrOA (both plain ratios),
//
//	1/CMRR_tot = 1/CMRR_R + 1/CMRR_OA
//
// (Franco, Design with Operational Amplifiers and Analog Integrated
// Circuits; cited from memory, page not checked; the two can also partly
// cancel). E.g. 2750 and 10⁵ (100 dB) → 2676 (68.55 dB).
func CombinedCMRR(cmrrR, cmrrOA float64) float64 {
	return 1 / (1/cmrrR + 1/cmrrOA)
}

// boardPair holds the two sweeps of one board_cmrr test.
type boardPair struct {
	unit       string
	cond       int
	diff, cm   *groupKey
	diffSweep  sweep
	diffBudget fit.Budget
	hasDiff    bool
}

// analyzeBoards fits the board_cmrr sweeps (A_d, A_cm, CMRR) and then the
// board PSRR sweeps, referred to the input by the unit's measured A_d (or
// the nominal board_gain when the unit has no diff sweep at that
// temperature).
func (a *analyzer) analyzeBoards() {
	type uc struct {
		unit string
		cond int
	}
	var order []uc
	pairs := map[uc]*boardPair{}
	for i := range a.keys {
		k := &a.keys[i]
		c := a.res.Conditions[k.cond]
		switch k.test {
		case plan.TestBoardCMRR:
			key := uc{k.unit, k.cond}
			bp := pairs[key]
			if bp == nil {
				bp = &boardPair{unit: k.unit, cond: k.cond}
				pairs[key] = bp
				order = append(order, key)
			}
			if k.part == plan.PartDiff {
				bp.diff = k
			} else {
				bp.cm = k
			}
		case plan.TestBoardPSRRPos, plan.TestBoardPSRRNeg:
		default:
			a.problem(k.unit, k.test, k.part, c, fmt.Sprintf("test %q is not analysed on a board fixture", k.test))
		}
	}
	for _, key := range order {
		a.analyzeBoardCMRR(pairs[key])
	}
	for _, k := range a.keys {
		if k.test != plan.TestBoardPSRRPos && k.test != plan.TestBoardPSRRNeg {
			continue
		}
		a.analyzeBoardPSRR(k, pairs[uc{k.unit, k.cond}])
	}
}

func quantityFromBudget(b fit.Budget) fit.Quantity {
	return fit.Quantity{Value: b.Value * 1e-6, StdUnc: b.CombinedStdUnc * 1e-6, DOF: b.EffectiveDOF}
}

// analyzeBoardCMRR fits A_d and A_cm of one board and forms
//
//	k = A_cm/A_d (µV/V per volt of V_CM),  CMRR = 1/|k|
//
// with the budget of the quotient: the rows of A_cm with sensitivity 1/A_d
// and those of A_d with −k/A_d (GUM 5.1.2); the meter gain is one input to
// both and cancels. The value equals fit.BoardCMRR's.
func (a *analyzer) analyzeBoardCMRR(bp *boardPair) {
	cond := a.res.Conditions[bp.cond]
	br := BoardResult{Unit: bp.unit, Condition: bp.cond, TempIndex: cond.TempIndex, TemperatureC: cond.TemperatureC}
	a.boardLimits(&br)
	t := a.testOf(plan.TestBoardCMRR)
	if bp.diff == nil {
		a.problem(bp.unit, plan.TestBoardCMRR, plan.PartDiff, cond, "no differential sweep: A_d and the board CMRR cannot be formed")
	} else {
		conv := conventionFor(a.p, plan.TestBoardCMRR, plan.PartDiff)
		s, err := fitSweep(a.groups[*bp.diff], t)
		var b fit.Budget
		if err == nil {
			b, err = a.coefficientBudget(s.coefLine, 1, 0, a.stimulusAccuracy(conv.roles), 1)
		}
		if err == nil && s.coefLine.Slope.Value == 0 {
			err = fmt.Errorf("the differential gain fitted to exactly 0")
		}
		if err == nil {
			err = plausibleGain(s.line.Slope.Value, a.p.Fixture.BoardGain)
		}
		if err != nil {
			a.problem(bp.unit, plan.TestBoardCMRR, plan.PartDiff, cond, "no differential gain: "+err.Error())
		} else {
			bp.diffSweep, bp.diffBudget, bp.hasDiff = s, b, true
			br.HasDiffGain, br.DiffGain, br.DiffLine, br.DiffBudget = true, quantityFromBudget(b), s.line, b
		}
	}
	var cmS sweep
	if bp.cm == nil {
		a.problem(bp.unit, plan.TestBoardCMRR, plan.PartCM, cond, "no common-mode sweep: the board CMRR cannot be formed")
	} else {
		conv := conventionFor(a.p, plan.TestBoardCMRR, plan.PartCM)
		s, err := fitSweep(a.groups[*bp.cm], t)
		var b fit.Budget
		if err == nil {
			b, err = a.coefficientBudget(s.coefLine, 1, 0, a.stimulusAccuracy(conv.roles), 1)
		}
		if err != nil {
			a.problem(bp.unit, plan.TestBoardCMRR, plan.PartCM, cond, "no common-mode gain: "+err.Error())
		} else {
			cmS = s
			br.HasCMGain, br.CMGain, br.CMLine, br.CMBudget = true, quantityFromBudget(b), s.line, b
		}
	}
	if br.HasDiffGain && br.HasCMGain {
		key := groupKey{unit: bp.unit, test: plan.TestBoardCMRR, part: plan.PartCM, cond: bp.cond}
		conv := conventionFor(a.p, plan.TestBoardCMRR, plan.PartCM)
		ad := bp.diffSweep.line.Slope.Value
		k := br.CMBudget.Value / ad
		b, err := a.combineBudgets("board input-referred common-mode coefficient A_cm/A_d", k, []budgetTerm{
			{"cm sweep (A_cm)", br.CMBudget, 1 / ad}, {"diff sweep (A_d)", br.DiffBudget, -k / br.DiffBudget.Value}})
		var rej fit.Rejection
		if err == nil {
			rej, err = fit.RejectionFromBudget(b)
		}
		if err != nil {
			a.problem(bp.unit, plan.TestBoardCMRR, "", cond, "no board CMRR: "+err.Error())
		} else {
			r := a.newRatio(key, plan.TestBoardCMRR, conv, cmS)
			r.NoiseGain = ad
			r.Rejection = rej
			r.Notes = append(r.Notes, bp.diffSweep.notes...)
			a.nonlinearity(&r, cmS, ad)
			r.Repeats = repeatValues(cmS, func(l fit.LineFit) float64 { return 1e6 * l.Slope.Value / ad })
			a.res.Ratios = append(a.res.Ratios, r)
			br.HasCMRR = true
			if acm := br.CMGain.Value; acm != 0 {
				br.CMRRRatio = math.Abs(ad / acm)
			}
			br.MeasuredDB, br.MeasuredIsLowerBound = r.ValueDB()
			br.ExpandedUDB = rej.ExpandedUDB
			br.Comparison = compareWithLimit(&br, rej)
		}
	}
	a.res.Boards = append(a.res.Boards, br)
}

// boardLimits fills the design's worst-case CMRR limits.
func (a *analyzer) boardLimits(br *BoardResult) {
	f := a.p.Fixture
	br.NominalGain, br.ResistorTolerance = f.BoardGain, f.ResistorTolerance
	if r, err := ResistorCMRR(f.BoardGain, f.ResistorTolerance); err == nil {
		br.HasResistorLimit, br.ResistorLimitRatio, br.ResistorLimitDB = true, r, fit.DBFromRatio(r)
	}
	if f.OpAmpCMRRdB > 0 {
		br.HasOpAmpCMRR, br.OpAmpCMRRdB = true, f.OpAmpCMRRdB
	}
	switch {
	case br.HasResistorLimit && br.HasOpAmpCMRR:
		oa := fit.RatioFromDB(f.OpAmpCMRRdB)
		br.HasCombinedLimit = true
		br.CombinedLimitRatio = CombinedCMRR(br.ResistorLimitRatio, oa)
		br.CombinedLimitDB = fit.DBFromRatio(br.CombinedLimitRatio)
		// Shares of 1/CMRR_tot.
		sr, so := 1/br.ResistorLimitRatio, 1/oa
		switch {
		case sr >= 2*so:
			br.Dominant = "resistor matching"
		case so >= 2*sr:
			br.Dominant = "op-amp"
		default:
			br.Dominant = "both"
		}
	case br.HasResistorLimit:
		br.HasCombinedLimit, br.CombinedLimitRatio, br.CombinedLimitDB = true, br.ResistorLimitRatio, br.ResistorLimitDB
		br.Dominant = "resistor matching"
	case br.HasOpAmpCMRR:
		br.HasCombinedLimit, br.CombinedLimitRatio, br.CombinedLimitDB = true, fit.RatioFromDB(f.OpAmpCMRRdB), f.OpAmpCMRRdB
		br.Dominant = "op-amp"
	}
}

// compareWithLimit says in words how the measured CMRR stands against the
// worst-case limit, taking the expanded uncertainty into account.
func compareWithLimit(br *BoardResult, rej fit.Rejection) string {
	if !br.HasCombinedLimit {
		return ""
	}
	lim := br.CombinedLimitDB
	if !rej.Resolved {
		if rej.LowerBoundDB > lim {
			return fmt.Sprintf("at least %.1f dB, above the worst-case design limit %.1f dB: the mismatches partly cancel", rej.LowerBoundDB, lim)
		}
		return fmt.Sprintf("not resolved (at least %.1f dB); the worst-case design limit is %.1f dB", rej.LowerBoundDB, lim)
	}
	switch {
	case rej.LowerDB > lim:
		return fmt.Sprintf("%.1f dB, above the worst-case design limit %.1f dB: the mismatches partly cancel", rej.RatioDB, lim)
	case rej.UpperDB < lim:
		return fmt.Sprintf("%.1f dB, below the worst-case design limit %.1f dB: check resistor values, wiring and the op-amp", rej.RatioDB, lim)
	default:
		return fmt.Sprintf("%.1f dB, at the worst-case design limit %.1f dB within its uncertainty", rej.RatioDB, lim)
	}
}

// analyzeBoardPSRR fits one board PSRR sweep and refers it to the input:
//
//	k = sign·b1/A_d   (µV/V per volt of the rail; sign −1 for V−, as psrr_neg)
//
// with A_d measured on the same unit and condition (the meter gain then
// cancels), or else the nominal board_gain with a rectangular relative
// tolerance of ±2t (a gain set by a resistor ratio; common practice, no
// published source).
func (a *analyzer) analyzeBoardPSRR(k groupKey, bp *boardPair) {
	cond := a.res.Conditions[k.cond]
	conv := conventionFor(a.p, k.test, "")
	s, err := fitSweep(a.groups[k], a.testOf(k.test))
	if err != nil {
		a.problem(k.unit, k.test, "", cond, "no fit: "+err.Error())
		return
	}
	sb, err := a.coefficientBudget(s.coefLine, 1, 0, a.stimulusAccuracy(conv.roles), conv.sign)
	if err != nil {
		a.problem(k.unit, k.test, "", cond, "no coefficient: "+err.Error())
		return
	}
	var adB fit.Budget
	nominal := false
	if bp != nil && bp.hasDiff {
		adB = bp.diffBudget
	} else {
		g, t := a.p.Fixture.BoardGain, a.p.Fixture.ResistorTolerance
		if !(g > 0) {
			a.problem(k.unit, k.test, "", cond, fmt.Sprintf("no differential sweep of this unit at this temperature and fixture.board_gain is %g: the PSRR cannot be referred to the input", g))
			return
		}
		adB, err = fit.Combine("board differential gain A_d (nominal)", "µV/V", 1e6*g, []fit.BudgetRow{{
			Name: "nominal board_gain, resistor tolerance ±2t (not measured)", Kind: "B", Distribution: fit.DistRectangular,
			Value: g, StdUncertainty: g * fit.RectangularStdUnc(2*t), Unit: "V/V", Sensitivity: 1e6, DOF: fit.InfDOF,
		}}, a.cov)
		if err != nil {
			a.problem(k.unit, k.test, "", cond, "no nominal gain: "+err.Error())
			return
		}
		nominal = true
	}
	ad := adB.Value * 1e-6
	kv := sb.Value / ad
	b, err := a.combineBudgets("board input-referred supply coefficient ΔV_out/A_d", kv, []budgetTerm{
		{"supply sweep", sb, 1 / ad}, {"A_d", adB, -kv / adB.Value}})
	var rej fit.Rejection
	if err == nil {
		rej, err = fit.RejectionFromBudget(b)
	}
	if err != nil {
		a.problem(k.unit, k.test, "", cond, "no board PSRR: "+err.Error())
		return
	}
	r := a.newRatio(k, k.test, conv, s)
	r.NoiseGain, r.DiffGainNominal, r.Rejection = ad, nominal, rej
	if nominal {
		r.Notes = append(r.Notes, fmt.Sprintf("referred to the input by the nominal board_gain %g (no differential sweep of this unit at this temperature)", ad))
	}
	a.nonlinearity(&r, s, ad)
	sign := conv.sign
	r.Repeats = repeatValues(s, func(l fit.LineFit) float64 { return sign * 1e6 * l.Slope.Value / ad })
	a.res.Ratios = append(a.res.Ratios, r)
}

// MinGainFraction is the smallest plausible measured differential gain of
// a board as a fraction of its nominal gain: below it there is no board in
// the position (or its output is open), and a "ratio" of two noise
// readings would mean nothing (common practice, no published source).
const MinGainFraction = 0.1

// plausibleGain refuses a differential gain near zero: no part in the
// position, or no gain.
func plausibleGain(ad, nominal float64) error {
	if nominal > 0 && math.Abs(ad) < MinGainFraction*nominal {
		return fmt.Errorf("no part / no gain: the differential gain is %.3g V/V against a nominal %g V/V (below %g %% of it): is a board in this position, powered and wired?", ad, nominal, 100*MinGainFraction)
	}
	return nil
}
