package main

import (
	"fmt"
	"math"

	"nullbench/fit"
	"nullbench/procedure/analysis"
	"nullbench/procedure/analysis/freq"
	"nullbench/procedure/plan"
	"nullbench/report"
)

// addFreq maps one plan's frequency-response analysis into the report's
// FreqResults (one per unit × test × temperature × frequency), their
// magnitude budget rows and the single-pole fits with their DC check.
// Conventions (report/freq.go): the input-referred coefficient |k(f)| in
// µV/V, ratio = −20·log10|k(f)| dB (JEDEC JESD99B), phase = arg k(f) in
// degrees, expanded uncertainties U = k·u at coverage probability cov
// (GUM G.3, k from Student's t at the Welch–Satterthwaite ν_eff).
func addFreq(c *report.Campaign, p *plan.Plan, frs []freq.FreqResponse, probs []analysis.Problem, cov float64) {
	if cov == 0 {
		cov = fit.DefaultCoverage
	}
	for _, fr := range frs {
		t := setPoint(p, fr.TempIndex)
		for _, pt := range fr.Points {
			r := freqResult(fr, pt, t, cov)
			// A campaign of several plans names several parts: each row
			// names its own.
			r.Part, r.Lot = p.Part.Number, p.Campaign.Lot
			c.FreqResults = append(c.FreqResults, r)
			for _, b := range pt.Rejection.Budget.Rows {
				c.FreqBudgets = append(c.FreqBudgets, report.FreqBudgetRow{
					BudgetRow:   budgetRow(fr.Unit, fr.Test, t, b),
					FrequencyHz: pt.FrequencyHz, Quantity: "magnitude",
				})
			}
		}
		row := freqFitRow(fr, t, cov)
		row.Part, row.Lot = p.Part.Number, p.Campaign.Lot
		c.FreqFits = append(c.FreqFits, row)
	}
	// A unit × test × frequency that could not be analysed is a problem
	// (the Problems sheet, problems.jsonl, the exit status) and is listed
	// as "no result" with its cause, as at DC.
	for _, pr := range probs {
		nan := math.NaN()
		c.Problems = append(c.Problems, report.Problem{Unit: pr.Unit, Test: pr.Test, Part: pr.Part, TemperatureC: setPoint(p, pr.TempIndex),
			Problem: "frequency response: " + pr.Problem})
		c.FreqResults = append(c.FreqResults, report.FreqResult{
			Result: report.Result{
				Unit: pr.Unit, Test: pr.Test, TemperatureC: setPoint(p, pr.TempIndex),
				CoefficientUVPerV: nan, CoefficientStdUUVPerV: nan, CoefficientExpandedUUVPerV: nan,
				RatioDB: nan, ExpandedUDB: nan, ExpandedUDBLow: nan, ExpandedUDBHigh: nan, CoverageK: nan, DOFEffective: nan,
				LowerBoundDB: nan, LimitDB: nan, PredictedUUVPerV: nan, Verdict: VerdictNoResult, Flags: []string{pr.Problem},
			},
			FrequencyHz: nan, PhaseDeg: nan, PhaseExpandedUDeg: nan, NoiseFloorDB: nan, Coverage: nan,
		})
	}
}

// freqResult is one frequency point in the report's terms.
func freqResult(fr freq.FreqResponse, pt freq.FreqPoint, t, cov float64) report.FreqResult {
	rj := pt.Rejection
	limit, verdict, rule := math.NaN(), report.VerdictNotJudged, ""
	if pt.Judged {
		limit, verdict, rule = pt.Decision.LimitDB, string(pt.Decision.State), string(pt.Decision.Rule)
	}
	notes := append([]string(nil), pt.Notes...)
	if !rj.Resolved {
		notes = append(notes, fmt.Sprintf("lower bound: the response at %s Hz is not resolved above the noise floor (largest resolvable ratio %.2f dB); the part rejects at least %.2f dB",
			report.FormatHz(pt.FrequencyHz), pt.NoiseFloorDB, rj.LowerBoundDB))
	}
	if pt.ThroughCorrected {
		notes = append(notes, fmt.Sprintf("through calibration removed %.3f dB, %.2f° of channel mismatch; fixture gain at f %.2f dB, %.2f° divided out",
			pt.ThroughGainDB, pt.ThroughPhaseDeg, pt.FixtureGainDB, pt.FixturePhaseDeg))
	}
	var flags []string
	if pt.Excluded > 0 {
		flags = append(flags, fmt.Sprintf("%d flagged records", pt.Excluded))
	}
	phase, uPhase := math.NaN(), math.NaN()
	if pt.HasPhase {
		phase, uPhase = pt.PhaseDeg, pt.UPhaseDeg
	}
	floor := math.NaN()
	if pt.NoiseFloorDB != 0 {
		floor = pt.NoiseFloorDB
	}
	return report.FreqResult{
		Result: report.Result{
			Unit: fr.Unit, Test: fr.Test, TemperatureC: t,
			CoefficientUVPerV: rj.CoefficientUVPerV, CoefficientStdUUVPerV: rj.StdUncUVPerV, CoefficientExpandedUUVPerV: rj.ExpandedUUVPerV,
			RatioDB: ratioOrNaN(rj), ExpandedUDB: rj.ExpandedUDB, ExpandedUDBLow: math.NaN(), ExpandedUDBHigh: math.NaN(),
			CoverageK: rj.CoverageK, DOFEffective: float64(rj.EffectiveDOF),
			Resolved: rj.Resolved, LowerBoundDB: nanUnless(!rj.Resolved, rj.LowerBoundDB),
			LimitDB: limit, Verdict: verdict, Rule: rule, Flags: flags, Notes: notes, PredictedUUVPerV: math.NaN(),
		},
		Quantity: fr.Quantity, FrequencyHz: pt.FrequencyHz, Instrument: pt.Instrument,
		PhaseDeg: phase, PhaseExpandedUDeg: uPhase, HasPhase: pt.HasPhase, NoiseFloorDB: floor, Coverage: cov,
	}
}

// freqFitRow is the single-pole fit of one unit × test × temperature with
// its DC cross-check. The pole fit's uncertainties are standard ones;
// they are expanded with k from Student's t at the fit's degrees of
// freedom (GUM G.3.2), the k the DC check uses.
func freqFitRow(fr freq.FreqResponse, t, cov float64) report.FreqFitRow {
	nan := math.NaN()
	row := report.FreqFitRow{
		Unit: fr.Unit, Test: fr.Test, Quantity: fr.Quantity, TemperatureC: t,
		LowFreqRatioDB: nan, LowFreqExpandedUDB: nan, CornerHz: nan, CornerExpandedUHz: nan, CoverageK: nan, CornerLowerBoundHz: nan,
		Note:      fr.PoleNote,
		DCChecked: fr.DCChecked, DCRatioDB: nan, DCExpandedUDB: nan, DCDiffDB: nan, DCDiffExpandedUDB: nan,
		DCConsistent: fr.DCConsistent, DCNote: fr.DCNote,
	}
	for _, pt := range fr.Points {
		if pt.Rejection.Resolved && pt.Rejection.StdUncDB > 0 {
			row.Points++
		}
	}
	if fr.Pole != nil {
		pf := fr.Pole
		k := poleCoverageK(pf, cov)
		row.CoverageK = k
		row.LowFreqRatioDB, row.LowFreqExpandedUDB = pf.RatioDCDB, k*pf.URatioDCDB
		row.CornerResolved = pf.Resolved
		if pf.Resolved {
			row.CornerHz, row.CornerExpandedUHz = pf.PoleHz, k*pf.UPoleHz
		} else {
			row.CornerLowerBoundHz = pf.PoleLowerBoundHz
			if row.Note == "" {
				row.Note = fmt.Sprintf("the corner is not resolved by the data: above %s Hz (one-sided 95 %%)", report.FormatSig(pf.PoleLowerBoundHz, 4))
			}
		}
	}
	if fr.DCChecked {
		row.DCRatioDB, row.DCExpandedUDB = fr.DCRatioDB, fr.DCExpandedDB
		row.DCDiffDB, row.DCDiffExpandedUDB = fr.DCDiffDB, fr.DCDiffUDB
	}
	return row
}

// poleCoverageK is the coverage factor of a pole fit's parameters: Student's
// t at the fit's degrees of freedom (at least 1) for probability cov.
func poleCoverageK(pf *fit.PoleFit, cov float64) float64 {
	return fit.CoverageFactor(fit.DOF(math.Max(float64(pf.DOF), 1)), cov)
}
