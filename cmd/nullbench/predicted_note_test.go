package main

import (
	"strings"
	"testing"

	"nullbench/fit"
	"nullbench/procedure/analysis"
	"nullbench/report"
)

// TestExcessOverPredictionIsANote: a result whose U is more than twice the
// prediction carries a note saying so; one within it does not; both carry
// the predicted U beside the achieved one.
func TestExcessOverPredictionIsANote(t *testing.T) {
	res := &analysis.Results{Conditions: []analysis.Condition{{}}}
	res.Ratios = []analysis.RatioResult{
		{Unit: "U01", Name: "psrr_pos", Rejection: fit.Rejection{ExpandedUUVPerV: 0.5}},
		{Unit: "U02", Name: "psrr_pos", Rejection: fit.Rejection{ExpandedUUVPerV: 0.15}},
	}
	c := &report.Campaign{}
	addResults(c, res, map[string]float64{"psrr_pos": 0.1})
	if len(c.Results) != 2 {
		t.Fatalf("%d results", len(c.Results))
	}
	if got := strings.Join(c.Results[0].Notes, " "); !strings.Contains(got, "5.0 × the 0.1 µV/V check predicted") {
		t.Errorf("U01 notes %q: want the excess noted", got)
	}
	if got := strings.Join(c.Results[1].Notes, " "); strings.Contains(got, "check predicted") {
		t.Errorf("U02 notes %q: 1.5 × the prediction is no excess", got)
	}
	for _, r := range c.Results {
		if r.PredictedUUVPerV != 0.1 {
			t.Errorf("%s: predicted %g, want 0.1", r.Unit, r.PredictedUUVPerV)
		}
	}
}
