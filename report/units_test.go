package report

import (
	"math"
	"strings"
	"testing"
)

// Per-unit verdicts: the most severe ILAC-G8:09/2019 §4.2 zone decides;
// a skipped unit, one with points missing, one with unjudged tests and
// one whose result could not be formed each say so instead of "pass".
func TestUnitVerdicts(t *testing.T) {
	res := func(unit, test string, db, limit float64, verdict string) Result {
		return Result{Unit: unit, Test: test, TemperatureC: 25, RatioDB: db, Resolved: true, LimitDB: limit, Verdict: verdict}
	}
	nan := math.NaN()
	c := &Campaign{
		Units: []UnitInfo{
			{ID: "U01", Serial: "SN-1001"}, {ID: "U02", Serial: "SN-1002"}, {ID: "U03", Skipped: "part cracked"},
			{ID: "U04", MissingPoints: 12}, {ID: "U05"}, {ID: "U06"},
		},
		Results: []Result{
			res("U01", "cmrr", 112, 90, VerdictPass), res("U01", "psrr_pos", 101, 100, VerdictConditionalPass),
			res("U02", "cmrr", 88, 90, VerdictFail), res("U02", "psrr_pos", 120, 100, VerdictPass),
			res("U04", "cmrr", 112, 90, VerdictPass),
			res("U05", "cmrr", 112, 90, VerdictPass), res("U05", "aol", 120, nan, VerdictNotJudged),
			{Unit: "U06", Test: "cmrr", TemperatureC: 25, RatioDB: nan, LimitDB: nan, Verdict: VerdictNoResult, Flags: []string{"implausible: stuck meter"}},
		},
	}
	want := []struct {
		unit, serial, verdict, reason string
	}{
		{"U01", "SN-1001", VerdictConditionalPass, "all 2 judged results inside their limits"},
		{"U02", "SN-1002", VerdictFail, "1 of 2 judged results outside their limits"},
		{"U03", "", UnitSkipped, "skipped: part cracked"},
		{"U04", "", UnitIncomplete, "12 points not measured"},
		{"U05", "", VerdictPass, "1 results not judged (no limit)"},
		{"U06", "", VerdictNoResult, "stuck meter"},
	}
	got := UnitVerdicts(c)
	if len(got) != len(want) {
		t.Fatalf("%d verdicts, want %d", len(got), len(want))
	}
	for i, w := range want {
		g := got[i]
		if g.Unit != w.unit || g.Serial != w.serial || g.Verdict != w.verdict || !strings.Contains(g.Reason, w.reason) {
			t.Errorf("unit %s: %+v; want serial %q, verdict %q, reason containing %q", w.unit, g, w.serial, w.verdict, w.reason)
		}
	}
	// The deciding result: the most severe verdict, else the least margin.
	if got[0].Worst != "psrr_pos at 25 °C: 101.00 dB (limit 100.00 dB)" || got[1].Worst != "cmrr at 25 °C: 88.00 dB (limit 90.00 dB)" {
		t.Errorf("deciding results %q, %q", got[0].Worst, got[1].Worst)
	}
}
