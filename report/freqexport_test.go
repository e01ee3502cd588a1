package report

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"math"
	"strings"
	"testing"
)

// exportFreqResults covers what a reader of the frequency rows must tell
// apart: a judged resolved point with phase, a lower bound below the noise
// floor, an AC-voltmeter point without phase and not judged, a problem
// with no frequency, and user text that looks like a formula.
func exportFreqResults() []FreqResult {
	nan := math.NaN()
	return []FreqResult{
		{Result: Result{Unit: "F01", Test: "cmrr", TemperatureC: 25, CoefficientUVPerV: 2.5118864315095806, RatioDB: 112,
			ExpandedUDB: 0.28, ExpandedUDBLow: nan, ExpandedUDBHigh: nan, CoverageK: 2.06, DOFEffective: 25, Resolved: true, LowerBoundDB: nan,
			LimitDB: 90, Verdict: VerdictPass, Rule: "guarded", Notes: []string{"noise-gain stage: k_c + k_o"}},
			Quantity: "CMRR", FrequencyHz: 10, Instrument: "digitizer", PhaseDeg: 2, PhaseExpandedUDeg: 0.3, HasPhase: true, Coverage: 0.95, NoiseFloorDB: 150.5},
		{Result: Result{Unit: "F01", Test: "cmrr", TemperatureC: 25, CoefficientUVPerV: 0.1, RatioDB: nan,
			ExpandedUDB: 2, ExpandedUDBLow: nan, ExpandedUDBHigh: nan, CoverageK: 2, DOFEffective: math.Inf(1), Resolved: false, LowerBoundDB: 131.2,
			LimitDB: 45, Verdict: VerdictPass, Rule: "guarded", Notes: []string{"lower bound: below the noise floor", "second, with \"quotes\""}},
			Quantity: "CMRR", FrequencyHz: 100000, Instrument: "digitizer", PhaseDeg: 80, PhaseExpandedUDeg: 45, HasPhase: true, Coverage: 0.95, NoiseFloorDB: 131.9},
		{Result: Result{Unit: "=1+2", Test: "psrr_pos", TemperatureC: 25, CoefficientUVPerV: 31.622776601683793, RatioDB: 90,
			ExpandedUDB: 0.9, ExpandedUDBLow: nan, ExpandedUDBHigh: nan, CoverageK: 2, DOFEffective: 9, Resolved: true, LowerBoundDB: nan,
			LimitDB: nan, Verdict: VerdictNotJudged},
			Quantity: "PSRR+", FrequencyHz: 60, Instrument: "ac_meter", PhaseDeg: nan, PhaseExpandedUDeg: nan, Coverage: 0.95, NoiseFloorDB: nan},
		{Result: Result{Unit: "F03", Test: "cmrr", TemperatureC: 25, CoefficientUVPerV: nan, RatioDB: nan, ExpandedUDB: nan, CoverageK: nan,
			DOFEffective: nan, LowerBoundDB: nan, LimitDB: nan, Verdict: VerdictNoResult, Flags: []string{"60 Hz: no usable stimulus record"}},
			FrequencyHz: nan, PhaseDeg: nan, PhaseExpandedUDeg: nan, Coverage: nan, NoiseFloorDB: nan},
	}
}

func TestFreqResultsCSVGolden(t *testing.T) {
	var b bytes.Buffer
	if err := WriteFreqResultsCSV(&b, exportFreqResults(), CSVOptions{GuardFormulas: true}); err != nil {
		t.Fatal(err)
	}
	golden(t, "freq_results.csv", b.Bytes())
	recs, err := csv.NewReader(&b).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col := map[string]int{}
	for i, h := range recs[0] {
		col[h] = i
	}
	// The fields the frequency rows must carry.
	for _, k := range []string{"frequency_hz", "ratio_db", "u_db", "phase_deg", "u_phase_deg", "limit_db", "decision", "note", "noise_floor_db", "coverage_k"} {
		if _, ok := col[k]; !ok {
			t.Errorf("CSV header lacks %q", k)
		}
	}
	if got := recs[2][col["ratio_db"]]; got != "" {
		t.Errorf("a lower bound has ratio_db %q, want empty", got)
	}
	if got := recs[2][col["reported_db"]]; got != "131.2" {
		t.Errorf("a lower bound reports %q, want its bound 131.2", got)
	}
	if got := recs[3][col["phase_deg"]]; got != "" {
		t.Errorf("an AC voltmeter row has phase %q, want empty", got)
	}
	if got := recs[3][col["unit"]]; got != "'=1+2" {
		t.Errorf("formula-like unit written as %q", got)
	}
}

func TestFreqResultsJSONLGolden(t *testing.T) {
	var b bytes.Buffer
	rs := exportFreqResults()
	if err := WriteFreqResultsJSONL(&b, rs); err != nil {
		t.Fatal(err)
	}
	golden(t, "freq_results.jsonl", b.Bytes())
	lines := strings.Split(strings.TrimSuffix(b.String(), "\n"), "\n")
	if len(lines) != len(rs) {
		t.Fatalf("%d lines, want %d", len(lines), len(rs))
	}
	var first, bound map[string]any
	if err := json.Unmarshal([]byte(lines[0]), &first); err != nil {
		t.Fatal(err)
	}
	json.Unmarshal([]byte(lines[1]), &bound)
	if first["frequency_hz"] != 10.0 || first["ratio_db"] != 112.0 || first["u_db"] != 0.28 || first["phase_deg"] != 2.0 ||
		first["u_phase_deg"] != 0.3 || first["limit_db"] != 90.0 || first["decision"] != "pass" || first["coverage"] != 0.95 {
		t.Errorf("first line: %s", lines[0])
	}
	// NaN and infinity have no JSON form (RFC 8259 §6): null.
	if bound["ratio_db"] != nil || bound["dof_effective"] != nil || bound["lower_bound_db"] != 131.2 || bound["resolved"] != false {
		t.Errorf("lower-bound line: %s", lines[1])
	}
	if n, ok := bound["note"].([]any); !ok || len(n) != 2 {
		t.Errorf("notes travel as a list: %v", bound["note"])
	}
}
