package analysis

import (
	"fmt"
	"math"

	"nullbench/fit"
	"nullbench/procedure/plan"
)

// ClosureResult is the consistency of one unit's op-amp coefficients at one
// temperature (derived from k_c + k_p + k_n + k_o = 0: an op-amp has no
// ground pin; no published source).
//
// Closure (superposition): shifting both rails up together must move V_IO
// by the sum of the single-rail coefficients,
//
//	closure = k_shift − (k_p + k_n)
//
// with k_shift per volt of both rails moved up. The cmrr test reports per
// volt of ΔV_CM = +L, i.e. rails moved down, so k_shift = −k(cmrr) for the
// supply-shift method (and for input drive on a noise-gain stage, whose
// output follows V_CM: k = k_c + k_o in both cases). With input drive in
// the nulling loop (output held) k(cmrr) = k_c and the shift is formed with
// the aol result, k_shift = −(k_c + k_o). The uncertainty is the GUM
// combination of the coefficients' budgets with the shared inputs (noise
// gain, meter gain) merged: they scale all coefficients alike and so
// contribute only in proportion to the closure itself. Closure.Mismatch is
// |closure| > U: thermal tails, a settling or fixture fault.
//
// Symmetric: where psrr_sym was measured too, its coefficient per volt of
// span must equal (k_p − k_n)/2.
type ClosureResult struct {
	Unit         string  `json:"unit"`
	Condition    int     `json:"condition"`
	TempIndex    int     `json:"temp_index"`
	TemperatureC float64 `json:"temperature_c"`
	// Formed is false when only the symmetric check could be made.
	Formed bool `json:"formed"`
	// Method says how k_shift was obtained.
	Method  string      `json:"method"`
	Closure fit.Closure `json:"closure"`
	Budget  fit.Budget  `json:"budget"`
	// The coefficients, each per volt of the named terminal moved up,
	// everything else held, µV/V. HasKc/HasKo say which are
	// known; Kc is the A_OL-corrected value where a correction applies.
	KpUVPerV float64 `json:"kp_uv_per_v"`
	KnUVPerV float64 `json:"kn_uv_per_v"`
	KcUVPerV float64 `json:"kc_uv_per_v"`
	KoUVPerV float64 `json:"ko_uv_per_v"`
	HasKc    bool    `json:"has_kc"`
	HasKo    bool    `json:"has_ko"`
	// Symmetric is the psrr_sym check.
	Symmetric ConsistencyCheck `json:"symmetric"`
}

// ConsistencyCheck compares a measured coefficient with the value predicted
// from other coefficients: residual = measured − predicted, its combined
// and expanded uncertainty (GUM 5.1.2, G.2b, G.6.4), and Mismatch when
// |residual| > U.
type ConsistencyCheck struct {
	Checked         bool       `json:"checked"`
	MeasuredUVPerV  float64    `json:"measured_uv_per_v"`
	PredictedUVPerV float64    `json:"predicted_uv_per_v"`
	ResidualUVPerV  float64    `json:"residual_uv_per_v"`
	StdUncUVPerV    float64    `json:"std_unc_uv_per_v"`
	EffectiveDOF    fit.DOF    `json:"effective_dof"`
	CoverageK       float64    `json:"coverage_k"`
	ExpandedUUVPerV float64    `json:"expanded_u_uv_per_v"`
	Mismatch        bool       `json:"mismatch"`
	Budget          fit.Budget `json:"budget"`
}

// outputMovesWithCM reports whether the cmrr test also moves the part's
// output against its rails, so that it measures k_c + k_o (derived from
// k_c + k_p + k_n + k_o = 0, no published source):
// every method but input drive in the nulling loop (which holds the output).
func outputMovesWithCM(p *plan.Plan) bool {
	return !(p.Fixture.Kind == plan.FixtureNullingLoop && p.Fixture.CommonMode == plan.CMByInputDrive)
}

// findIndex returns the index of a result in a.res.Ratios, or −1.
func (a *analyzer) findIndex(unit, name string, cond int) int {
	for i := range a.res.Ratios {
		r := &a.res.Ratios[i]
		if r.Unit == unit && r.Name == name && r.Condition == cond {
			return i
		}
	}
	return -1
}

// analyzeNulling forms, per unit × condition, the A_OL-corrected CMRR, the
// closure and symmetric checks, and psrr_worst.
//
// Choice: when a correction applies and an aol result exists, the
// corrected coefficient k_c = k − k_o is the "cmrr" result (it is the
// quantity CMRR is defined on: inputs moved, output held), and the
// measured one is kept as "cmrr_uncorrected"; both are judged against the
// cmrr limit. Without an aol result there is no CMRR proper: the measured
// figure is reported only as "cmrr_uncorrected" (judged against the cmrr
// limit), with a note bounding the open-loop term by the part's rated
// A_OL (openLoopTermNote). No output calls k_c + k_o "cmrr".
func (a *analyzer) analyzeNulling() {
	type uc struct {
		unit string
		cond int
	}
	var pairs []uc
	seen := map[uc]bool{}
	for _, r := range a.res.Ratios {
		k := uc{r.Unit, r.Condition}
		if !seen[k] {
			seen[k] = true
			pairs = append(pairs, k)
		}
	}
	moves := outputMovesWithCM(a.p)
	var added []RatioResult
	for _, pc := range pairs {
		cm := a.findIndex(pc.unit, plan.TestCMRR, pc.cond)
		pos := a.findIndex(pc.unit, plan.TestPSRRPos, pc.cond)
		neg := a.findIndex(pc.unit, plan.TestPSRRNeg, pc.cond)
		sym := a.findIndex(pc.unit, plan.TestPSRRSym, pc.cond)
		aol := a.findIndex(pc.unit, plan.TestAOL, pc.cond)
		cond := a.res.Conditions[pc.cond]

		// Unequal rail steps (analysis_rails.go), before anything is
		// formed from the two-rail results.
		a.correctRailLeaks(cm, pos, neg, sym)

		// Open-loop-gain correction.
		hasCorr, kcCorr := false, 0.0
		if cm >= 0 && moves {
			if aol >= 0 {
				corr, err := a.correctAOL(a.res.Ratios[cm], a.res.Ratios[aol])
				if err != nil {
					a.problem(pc.unit, plan.TestCMRR, "", cond, "no A_OL correction: "+err.Error())
				} else {
					a.res.Ratios[cm].Name = ResultCMRRUncorrected
					a.res.Ratios[cm].Notes = append(a.res.Ratios[cm].Notes,
						"measured coefficient k = k_c + k_o, not corrected for the open-loop gain; the corrected value is reported as cmrr")
					added = append(added, corr)
					hasCorr, kcCorr = true, corr.Rejection.CoefficientUVPerV
				}
			} else {
				a.res.Ratios[cm].Name = ResultCMRRUncorrected
				a.res.Ratios[cm].Notes = append(a.res.Ratios[cm].Notes, a.openLoopTermNote(a.res.Ratios[cm]))
			}
		}

		cr := ClosureResult{Unit: pc.unit, Condition: pc.cond, TempIndex: cond.TempIndex, TemperatureC: cond.TemperatureC}
		if pos >= 0 {
			cr.KpUVPerV = a.res.Ratios[pos].Rejection.CoefficientUVPerV
		}
		if neg >= 0 {
			cr.KnUVPerV = a.res.Ratios[neg].Rejection.CoefficientUVPerV
		}
		if aol >= 0 {
			cr.HasKo, cr.KoUVPerV = true, a.res.Ratios[aol].Rejection.CoefficientUVPerV
		}
		switch {
		case hasCorr:
			cr.HasKc, cr.KcUVPerV = true, kcCorr
		case cm >= 0 && !moves:
			cr.HasKc, cr.KcUVPerV = true, a.res.Ratios[cm].Rejection.CoefficientUVPerV
		}

		// Closure.
		if cm >= 0 && pos >= 0 && neg >= 0 {
			m := a.res.Ratios[cm]
			var terms []budgetTerm
			switch {
			case moves:
				if a.p.Fixture.CommonMode == plan.CMBySupplyShift {
					cr.Method = "k_shift = −k(cmrr): supply shift, both rails moved with the inputs and the output at ground"
				} else {
					cr.Method = "k_shift = −k(cmrr): input drive on a noise-gain stage, whose output follows the inputs, is a supply shift seen from the part"
				}
				terms = []budgetTerm{{"cmrr sweep", m.Rejection.Budget, -1}}
			case aol >= 0:
				cr.Method = "k_shift = −(k_c + k_o): input drive with the output held, plus the aol sweep"
				terms = []budgetTerm{{"cmrr sweep", m.Rejection.Budget, -1}, {"aol sweep", a.res.Ratios[aol].Rejection.Budget, -1}}
			}
			if terms != nil {
				shift := 0.0
				for _, t := range terms {
					shift += t.c * t.b.Value
				}
				p, n := a.res.Ratios[pos].Rejection.Budget, a.res.Ratios[neg].Rejection.Budget
				terms = append(terms, budgetTerm{"psrr_pos sweep", p, -1}, budgetTerm{"psrr_neg sweep", n, -1})
				c := shift - (p.Value + n.Value)
				b, err := a.combineBudgets("closure k_shift − (k_p + k_n)", c, terms)
				if err != nil {
					a.problem(pc.unit, "closure", "", cond, "no closure: "+err.Error())
				} else {
					cr.Formed, cr.Budget = true, b
					cr.Closure = fit.Closure{
						ShiftUVPerV: shift, SumUVPerV: p.Value + n.Value, ClosureUVPerV: c,
						StdUncUVPerV: b.CombinedStdUnc, EffectiveDOF: b.EffectiveDOF, CoverageK: b.CoverageK,
						ExpandedUUVPerV: b.ExpandedU, Mismatch: math.Abs(c) > b.ExpandedU,
					}
				}
			}
		}

		// Symmetric supply check.
		if sym >= 0 && pos >= 0 && neg >= 0 {
			s := a.res.Ratios[sym].Rejection.Budget
			p, n := a.res.Ratios[pos].Rejection.Budget, a.res.Ratios[neg].Rejection.Budget
			pred := fit.SymmetricSupplyUVPerV(p.Value, n.Value)
			b, err := a.combineBudgets("psrr_sym − (k_p − k_n)/2", s.Value-pred, []budgetTerm{
				{"psrr_sym sweep", s, 1}, {"psrr_pos sweep", p, -0.5}, {"psrr_neg sweep", n, 0.5}})
			if err != nil {
				a.problem(pc.unit, plan.TestPSRRSym, "", cond, "no symmetric check: "+err.Error())
			} else {
				cr.Symmetric = ConsistencyCheck{Checked: true, MeasuredUVPerV: s.Value, PredictedUVPerV: pred,
					ResidualUVPerV: b.Value, StdUncUVPerV: b.CombinedStdUnc, EffectiveDOF: b.EffectiveDOF,
					CoverageK: b.CoverageK, ExpandedUUVPerV: b.ExpandedU, Mismatch: math.Abs(b.Value) > b.ExpandedU, Budget: b}
			}
		}
		if cr.Formed || cr.Symmetric.Checked {
			a.res.Closures = append(a.res.Closures, cr)
		}

		// Worst of PSRR+ and PSRR−.
		if pos >= 0 && neg >= 0 {
			w := a.res.Ratios[pos]
			dp, _ := a.res.Ratios[pos].ValueDB()
			dn, _ := a.res.Ratios[neg].ValueDB()
			if dn < dp {
				w = a.res.Ratios[neg]
			}
			from := w.Name
			w.Name, w.Quantity = plan.PsrrWorst, "PSRR (worse of + and −)"
			w.DerivedFrom = []string{from}
			w.Repeats = append([]RepeatValue(nil), w.Repeats...)
			w.Notes = append(cloneStrings(w.Notes), "the worse (lower dB) of psrr_pos and psrr_neg: "+from)
			added = append(added, w)
		}
	}
	a.res.Ratios = append(a.res.Ratios, added...)
}

// correctAOL forms k_c = k − k_o from the measured common-mode result and
// the aol result (derived, no published source; the same as
// fit.CorrectShift with
// k_shift = −k), with the budgets combined and the shared inputs merged.
// Example (invented numbers): k = k_c + k_o = 10.01 µV/V (99.99 dB), k_o =
// 0.01 µV/V → k_c = 10.00 µV/V (100.00 dB).
func (a *analyzer) correctAOL(m, o RatioResult) (RatioResult, error) {
	k, ko := m.Rejection.Budget, o.Rejection.Budget
	b, err := a.combineBudgets("common-mode coefficient k_c = k − k_o (A_OL corrected)", k.Value-ko.Value,
		[]budgetTerm{{"cmrr sweep", k, 1}, {"aol sweep", ko, -1}})
	if err != nil {
		return RatioResult{}, err
	}
	rej, err := fit.RejectionFromBudget(b)
	if err != nil {
		return RatioResult{}, err
	}
	c := m
	c.Rejection = rej
	c.AOLCorrected = true
	c.AOLTermUVPerV = -ko.Value
	c.Stimulus = "ΔV_IO per volt of common mode with the output held: k_c = k − k_o, k from the cmrr sweep (" + m.Stimulus + "), k_o from the aol sweep"
	c.DerivedFrom = []string{ResultCMRRUncorrected, plan.TestAOL}
	c.Notes = append(cloneStrings(m.Notes), fmt.Sprintf("corrected for the open-loop gain: %+.4g µV/V added (−k_o, A_OL = %.1f dB)", -ko.Value, fit.DBFromUVPerV(ko.Value)))
	if len(m.Repeats) > 0 {
		c.Repeats = make([]RepeatValue, len(m.Repeats))
		for i, r := range m.Repeats {
			c.Repeats[i] = newRepeatValue(r.Repeat, r.Points, r.CoefficientUVPerV-ko.Value)
		}
	}
	return c, nil
}

// openLoopTermNote says what an uncorrected common-mode result contains and
// how large the open-loop term can be: |k_o| = 1/A_OL ≤ 10^(−A_OL,min/20)
// with the part's rated minimum open-loop gain (plan part.aol_min_db), and
// the range of CMRR (of k_c alone) the measured k allows, |k| ± |k_o|max
// (derived from k = k_c + k_o, no published source).
func (a *analyzer) openLoopTermNote(m RatioResult) string {
	const what = "k_c + k_o, not CMRR: the output moves against the rails with the common mode and no aol test separates the open-loop term"
	aolDB := a.p.Part.AOLMinDB
	if !(aolDB > 0) {
		return what + "; give part.aol_min_db (the rated A_OL) to bound it, or add an aol test to correct it"
	}
	ko := fit.UVPerVFromDB(aolDB)
	k := math.Abs(m.Rejection.CoefficientUVPerV)
	s := fmt.Sprintf("%s; with the rated A_OL ≥ %.1f dB, |k_o| ≤ %.4g µV/V against |k| = %.4g µV/V", what, aolDB, ko, k)
	if hi := k + ko; k > ko {
		s += fmt.Sprintf(", so CMRR (k_c alone) lies between %.2f and %.2f dB", fit.DBFromUVPerV(hi), fit.DBFromUVPerV(k-ko))
	} else {
		s += fmt.Sprintf(", so CMRR (k_c alone) is only known to be ≥ %.2f dB", fit.DBFromUVPerV(hi))
	}
	return s
}

func cloneStrings(s []string) []string { return append([]string(nil), s...) }
