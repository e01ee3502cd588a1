package analysis

import (
	"fmt"
	"math"
	"slices"

	"nullbench/fit"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// Unequal supply channel gains: the hidden PSRR leak of a two-rail step.
//
// A step that should move both rails by the same amount (supply-shift
// cmrr) or by equal and opposite amounts (psrr_sym) moves them by
// g1·L and g2·L when the two supply channels' gains differ. With the rail
// changes ΔV+ and ΔV− as read back, the mean change μ = (ΔV+ + ΔV−)/2 and
// the span change s = ΔV+ − ΔV−, the part's offset moves by
//
//	ΔV_IO = k_p·ΔV+ + k_n·ΔV− = (k_p + k_n)·μ + (k_p − k_n)/2·s
//
// (superposition of the single-rail coefficients; with k_c + k_p + k_n +
// k_o = 0, derived, no published source). The level L_read the runner
// records is −μ for a supply shift and s for psrr_sym, so the other term is
// a leak:
//
//	supply shift:  k_measured = (k_c + k_o) + k_sym·∂s/∂L,   k_sym = (k_p − k_n)/2
//	psrr_sym:      k_measured = k_sym + (k_p + k_n)·∂μ/∂L
//
// With both rails read back at every point and k_p, k_n from the unit's
// single-rail tests at the same temperature, the leak is taken out of each
// reading (y − K·c·z, z = s or μ) before the fit, and two budget rows carry
// what remains: the uncertainty of c (from the psrr_pos and psrr_neg
// budgets) and that of the read-back slope ∂z/∂L, bounded by the two
// supplies' read-back gain accuracies (rectangular, GUM 4.3.7).

// railLeak describes the leak of one test.
type railLeak struct {
	what string // "span change" or "mean rail change"
	// z is the leaking regressor from the rail changes (volts).
	z func(dPos, dNeg float64) float64
	// coefUV is c (µV/V per volt of z) and coefU its standard uncertainty;
	// coefDOF its degrees of freedom.
	coefUV, coefU float64
	coefDOF       fit.DOF
	coefText      string
	// rbScale: the read-back gain errors e+, e− change ∂z/∂L by
	// rbScale·(e+ − e−) (per volt of level).
	rbScale float64
}

// correctRailLeaks corrects the supply-shift cmrr and the psrr_sym result
// of one unit × condition for unequal rail steps (see above), given the
// indexes of its results (−1 when absent).
func (a *analyzer) correctRailLeaks(cm, pos, neg, sym int) {
	span := func(dp, dn float64) float64 { return dp - dn }
	mean := func(dp, dn float64) float64 { return (dp + dn) / 2 }
	if pos < 0 || neg < 0 {
		for _, c := range []struct {
			idx  int
			what string
			z    func(dp, dn float64) float64
		}{{cm, "span change", span}, {sym, "mean rail change", mean}} {
			if c.idx < 0 || (c.idx == cm && a.p.Fixture.CommonMode != plan.CMBySupplyShift) {
				continue
			}
			if beta, ok := a.railSlope(c.idx, c.z); ok && beta != 0 {
				r := &a.res.Ratios[c.idx]
				r.Notes = append(r.Notes, fmt.Sprintf("the rails did not step alike (read-back %s %+.3g V per volt of level, which leaks PSRR into this result); "+
					"not corrected: measure psrr_pos and psrr_neg at the same temperature to correct it", c.what, beta))
			}
		}
		return
	}
	p, n := a.res.Ratios[pos].Rejection.Budget, a.res.Ratios[neg].Rejection.Budget
	dof := fit.DOF(math.Min(float64(p.EffectiveDOF), float64(n.EffectiveDOF)))
	uSum := math.Hypot(p.CombinedStdUnc, n.CombinedStdUnc)
	if cm >= 0 && a.p.Fixture.CommonMode == plan.CMBySupplyShift {
		a.correctRailLeak(cm, railLeak{
			what: "span change", z: span,
			coefUV: (p.Value - n.Value) / 2, coefU: uSum / 2, coefDOF: dof,
			coefText: "k_sym = (k_p − k_n)/2", rbScale: 1,
		})
	}
	if sym >= 0 {
		a.correctRailLeak(sym, railLeak{
			what: "mean rail change", z: mean,
			coefUV: p.Value + n.Value, coefU: uSum, coefDOF: dof,
			coefText: "k_p + k_n = −(k_c + k_o)", rbScale: 0.25,
		})
	}
}

// railSlope returns ∂z/∂L of a result's sweep, z from the rail changes as
// read back; ok is false when a reading lacks them.
func (a *analyzer) railSlope(idx int, z func(dp, dn float64) float64) (float64, bool) {
	r := a.res.Ratios[idx]
	rs := a.groups[groupKey{unit: r.Unit, test: r.Name, cond: r.Condition}]
	x, zs, ok := a.railRegressor(rs, z)
	if !ok {
		return 0, false
	}
	l, err := fit.Line(x, zs, fit.LineOptions{})
	if err != nil {
		return 0, false
	}
	return l.Slope.Value, true
}

// railRegressor returns the level and z of every reading the fit uses.
func (a *analyzer) railRegressor(rs []journal.Reading, z func(dp, dn float64) float64) (x, zs []float64, ok bool) {
	pos0, neg0 := a.p.Part.NominalPosVolts, a.p.Part.NominalNegVolts
	for _, r := range rs {
		if hasFlag(r, journal.FlagOverload) || hasFlag(r, journal.FlagImplausible) {
			continue
		}
		if !r.RailsReadBack {
			return nil, nil, false
		}
		lv := r.SetVolts
		if r.ReadBack {
			lv = r.ReadVolts
		}
		x = append(x, lv)
		zs = append(zs, z(r.PosRailVolts-pos0, r.NegRailVolts-neg0))
	}
	return x, zs, len(x) >= 3
}

// correctRailLeak refits result idx with the leak taken out of its
// readings and adds the budget rows of what remains.
func (a *analyzer) correctRailLeak(idx int, lk railLeak) {
	old := a.res.Ratios[idx]
	key := groupKey{unit: old.Unit, test: old.Name, cond: old.Condition}
	rs := slices.Clone(a.groups[key])
	x, zs, ok := a.railRegressor(rs, lk.z)
	if !ok {
		return
	}
	zl, err := fit.Line(x, zs, fit.LineOptions{})
	if err != nil {
		return
	}
	beta := zl.Slope.Value
	K := a.p.Fixture.NoiseGain
	pos0, neg0 := a.p.Part.NominalPosVolts, a.p.Part.NominalNegVolts
	for i := range rs {
		if rs[i].RailsReadBack {
			rs[i].MeterVolts -= K * lk.coefUV * 1e-6 * lk.z(rs[i].PosRailVolts-pos0, rs[i].NegRailVolts-neg0)
		}
	}
	conv := conventionFor(a.p, old.Name, "")
	extra := []fit.BudgetRow{{
		Name: "rail leak: " + lk.coefText + " from psrr_pos and psrr_neg", Kind: "B", Distribution: fit.DistNormal,
		Value: lk.coefUV, StdUncertainty: lk.coefU, Unit: "µV/V", Sensitivity: -beta * conv.sign, DOF: lk.coefDOF,
	}}
	gp := a.stimulusAccuracy([]string{plan.RoleSupplyPos}).GainPPM
	gn := a.stimulusAccuracy([]string{plan.RoleSupplyNeg}).GainPPM
	if gp > 0 || gn > 0 {
		uBeta := lk.rbScale * math.Hypot(fit.RectangularStdUnc(gp*1e-6), fit.RectangularStdUnc(gn*1e-6))
		extra = append(extra, fit.BudgetRow{
			Name: "rail leak: " + lk.what + " per volt of level, read-back gain accuracy of the two supplies", Kind: "B",
			Distribution: fit.DistRectangular, Value: beta, StdUncertainty: uBeta, Unit: "V/V",
			Sensitivity: -lk.coefUV * conv.sign, DOF: fit.InfDOF,
		})
	}
	nr, err := a.opAmpRatio(key, rs, extra)
	if err != nil {
		old.Notes = append(old.Notes, "rail-leak correction failed: "+err.Error())
		a.res.Ratios[idx] = old
		return
	}
	nr.Name, nr.Quantity = old.Name, old.Quantity
	nr.Notes = append(nr.Notes, fmt.Sprintf("corrected for unequal rail steps: the %s read back %+.3g V per volt of level; "+
		"with %s = %.4g µV/V the leak %+.4g µV/V was removed", lk.what, beta, lk.coefText, lk.coefUV,
		nr.Rejection.CoefficientUVPerV-old.Rejection.CoefficientUVPerV))
	nr.RailLeakCorrected, nr.RailLeakUVPerV = true, nr.Rejection.CoefficientUVPerV-old.Rejection.CoefficientUVPerV
	a.res.Ratios[idx] = nr
}
