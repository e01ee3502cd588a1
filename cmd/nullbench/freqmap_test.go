package main

import (
	"math"
	"strings"
	"testing"

	"nullbench/fit"
	"nullbench/procedure/analysis"
	"nullbench/procedure/analysis/freq"
	"nullbench/procedure/plan"
	"nullbench/report"
)

// TestAddFreqMapsPointsFitsAndProblems maps a hand-made frequency
// response: a resolved digitizer point, a point below the noise floor and
// an AC-voltmeter point without phase, a pole fit with its DC check, and
// a problem; each lands in the report's types with its units and
// conventions.
func TestAddFreqMapsPointsFitsAndProblems(t *testing.T) {
	p := &plan.Plan{}
	p.Temperature.AmbientCelsius = 25
	budget := fit.Budget{Rows: []fit.BudgetRow{{Name: "sine fits (Type A)", Kind: "A", Unit: "dB", StdUncertainty: 0.05, Sensitivity: 1, Contribution: 0.05, DOF: 20}}}
	// 10 µV/V is 100 dB: ratio = 20·log10(10⁶/|k|µV/V) (JEDEC JESD99B).
	resolved := freq.FreqPoint{FrequencyHz: 60, Instrument: "digitizer", HasPhase: true, PhaseDeg: 12.5, UPhaseDeg: 0.4,
		NoiseFloorDB: 140, ThroughCorrected: true, ThroughGainDB: 1, ThroughPhaseDeg: 5,
		Rejection: fit.Rejection{CoefficientUVPerV: 10, StdUncUVPerV: 0.06, ExpandedUUVPerV: 0.12, RatioDB: 100, StdUncDB: 0.05, ExpandedUDB: 0.1,
			CoverageK: 2.01, EffectiveDOF: 40, Resolved: true, Budget: budget},
		Judged: true, Decision: fit.Decision{State: fit.StatePass, Rule: "guarded", LimitDB: 90}}
	floor := freq.FreqPoint{FrequencyHz: 1000, Instrument: "digitizer", HasPhase: true, PhaseDeg: 3, UPhaseDeg: 40, NoiseFloorDB: 128,
		Rejection: fit.Rejection{CoefficientUVPerV: 0.2, RatioDB: 134, ExpandedUDB: 3, CoverageK: 2, Resolved: false, LowerBoundDB: 127.5},
		Judged:    true, Decision: fit.Decision{State: fit.StatePass, Rule: "guarded", LimitDB: 80}}
	meter := freq.FreqPoint{FrequencyHz: 50, Instrument: "ac_meter", HasPhase: false, PhaseDeg: 0, NoiseFloorDB: 120,
		Rejection: fit.Rejection{CoefficientUVPerV: 100, RatioDB: 80, StdUncDB: 0.25, ExpandedUDB: 0.5, CoverageK: 2, Resolved: true}}
	fr := freq.FreqResponse{Unit: "F01", Test: "cmrr", Quantity: "CMRR", TempIndex: 0,
		Points:    []freq.FreqPoint{resolved, floor, meter},
		Pole:      &fit.PoleFit{RatioDCDB: 100.2, URatioDCDB: 0.1, PoleHz: 300, UPoleHz: 5, Resolved: true, DOF: 6},
		DCChecked: true, DCRatioDB: 100.1, DCExpandedDB: 0.2, DCDiffDB: 0.1, DCDiffUDB: 0.33, DCConsistent: true}
	flat := freq.FreqResponse{Unit: "F02", Test: "psrr_pos", Quantity: "PSRR+", PoleNote: "2 resolved frequencies: a pole fit needs 3"}
	probs := []analysis.Problem{{Unit: "F03", Test: "cmrr", TempIndex: 0, Problem: "60 Hz: stimulus records: none usable"}}

	c := &report.Campaign{}
	addFreq(c, p, []freq.FreqResponse{fr, flat}, probs, 0)

	if len(c.FreqResults) != 4 {
		t.Fatalf("%d frequency results, want 3 points + 1 problem", len(c.FreqResults))
	}
	cases := []struct {
		name                   string
		got                    report.FreqResult
		freq, ratio, u, lbound float64
		phase, uPhase          float64
		limit                  float64
		verdict, note          string
	}{
		{"resolved", c.FreqResults[0], 60, 100, 0.1, math.NaN(), 12.5, 0.4, 90, "pass", "through calibration removed 1.000 dB"},
		{"below the floor", c.FreqResults[1], 1000, math.NaN(), 3, 127.5, 3, 40, 80, "pass", "lower bound: the response at 1000 Hz is not resolved above the noise floor (largest resolvable ratio 128.00 dB)"},
		{"AC voltmeter", c.FreqResults[2], 50, 80, 0.5, math.NaN(), math.NaN(), math.NaN(), math.NaN(), report.VerdictNotJudged, ""},
	}
	same := func(a, b float64) bool { return (math.IsNaN(a) && math.IsNaN(b)) || math.Abs(a-b) < 1e-12 }
	for _, tc := range cases {
		g := tc.got
		if !same(g.FrequencyHz, tc.freq) || !same(g.RatioDB, tc.ratio) || !same(g.ExpandedUDB, tc.u) || !same(g.LowerBoundDB, tc.lbound) ||
			!same(g.PhaseDeg, tc.phase) || !same(g.PhaseExpandedUDeg, tc.uPhase) || !same(g.LimitDB, tc.limit) || g.Verdict != tc.verdict {
			t.Errorf("%s: got f %g Hz, ratio %g ± %g dB, bound %g, phase %g ± %g°, limit %g, %q", tc.name,
				g.FrequencyHz, g.RatioDB, g.ExpandedUDB, g.LowerBoundDB, g.PhaseDeg, g.PhaseExpandedUDeg, g.LimitDB, g.Verdict)
		}
		if tc.note != "" && !strings.Contains(strings.Join(g.Notes, "|"), tc.note) {
			t.Errorf("%s: notes %q lack %q", tc.name, g.Notes, tc.note)
		}
		if g.Unit != "F01" || g.QuantityName() != "CMRR" || g.TemperatureC != 25 {
			t.Errorf("%s: unit %q quantity %q at %g °C", tc.name, g.Unit, g.QuantityName(), g.TemperatureC)
		}
	}
	if r := c.FreqResults[0]; r.Rule != "guarded" || r.CoverageK != 2.01 || r.DOFEffective != 40 || r.CoefficientUVPerV != 10 || r.Instrument != "digitizer" {
		t.Errorf("resolved point: rule %q k %g ν %g |k| %g µV/V %q", r.Rule, r.CoverageK, r.DOFEffective, r.CoefficientUVPerV, r.Instrument)
	}
	if c.FreqResults[2].HasPhase {
		t.Error("an AC voltmeter point claims a phase")
	}
	if pr := c.FreqResults[3]; pr.Verdict != report.VerdictNoResult || pr.Unit != "F03" || !strings.Contains(pr.Flags[0], "none usable") {
		t.Errorf("problem mapped to %+v", pr)
	}
	if len(c.Problems) != 1 || !strings.HasPrefix(c.Problems[0].Problem, "frequency response: 60 Hz") {
		t.Errorf("problems %+v", c.Problems)
	}
	if len(c.FreqBudgets) != 1 || c.FreqBudgets[0].FrequencyHz != 60 || c.FreqBudgets[0].Quantity != "magnitude" || c.FreqBudgets[0].ValueUnit != "dB" {
		t.Errorf("budget rows %+v", c.FreqBudgets)
	}

	if len(c.FreqFits) != 2 {
		t.Fatalf("%d fit rows, want 2", len(c.FreqFits))
	}
	// Student's t for ν = 6 at 95 % two-sided is 2.45 (JCGM 100:2008 GUM
	// Table G.2).
	f := c.FreqFits[0]
	if math.Abs(f.CoverageK-2.447) > 0.001 {
		t.Errorf("pole fit k = %g, want t(6, 95 %%) = 2.447", f.CoverageK)
	}
	if f.LowFreqRatioDB != 100.2 || math.Abs(f.LowFreqExpandedUDB-f.CoverageK*0.1) > 1e-12 || f.CornerHz != 300 ||
		math.Abs(f.CornerExpandedUHz-f.CoverageK*5) > 1e-12 || !f.CornerResolved || f.Points != 2 {
		t.Errorf("pole row %+v", f)
	}
	if !f.DCChecked || !f.DCConsistent || f.DCRatioDB != 100.1 || f.DCDiffExpandedUDB != 0.33 {
		t.Errorf("DC check %+v", f)
	}
	if g := c.FreqFits[1]; !math.IsNaN(g.CornerHz) || !math.IsNaN(g.LowFreqRatioDB) || g.Note == "" || g.DCChecked {
		t.Errorf("a response without a pole fit maps to %+v", g)
	}
}

// TestFreqResultsDecideUnitsAndExit: a failing frequency point makes the
// unit fail and the campaign's exit status "out of limits", as at DC.
func TestFreqResultsDecideUnitsAndExit(t *testing.T) {
	c := &report.Campaign{Units: []report.UnitInfo{{ID: "N01"}}}
	pass := report.FreqResult{Result: report.Result{Unit: "N01", Test: "cmrr", RatioDB: 95, Resolved: true, LimitDB: 90, Verdict: "pass"}, FrequencyHz: 50}
	fail := report.FreqResult{Result: report.Result{Unit: "N01", Test: "cmrr", RatioDB: 80, Resolved: true, LimitDB: 90, Verdict: "fail"}, FrequencyHz: 1000}
	for _, tc := range []struct {
		name    string
		rs      []report.FreqResult
		failed  bool
		verdict string
	}{
		{"all pass", []report.FreqResult{pass}, false, "pass"},
		{"one fails", []report.FreqResult{pass, fail}, true, "fail"},
	} {
		c.FreqResults = tc.rs
		if anyFailed(c) != tc.failed {
			t.Errorf("%s: anyFailed = %v", tc.name, !tc.failed)
		}
		v := report.UnitVerdicts(c)
		if len(v) != 1 || v[0].Verdict != tc.verdict {
			t.Errorf("%s: unit verdicts %+v", tc.name, v)
		}
		if tc.failed && !strings.Contains(v[0].Worst, "1000 Hz") {
			t.Errorf("%s: deciding result %q does not name the frequency", tc.name, v[0].Worst)
		}
	}
}
