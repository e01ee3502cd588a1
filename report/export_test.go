package report

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"flag"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"
)

var update = flag.Bool("update", false, "rewrite golden files under testdata/")

// golden compares got with testdata/name, or rewrites it with -update.
func golden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", name)
	if *update {
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./report -run %s -update to create it)", err, t.Name())
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s differs from the output:\n--- got ---\n%s\n--- want ---\n%s", path, got, want)
	}
}

// exportResults covers the cases a reader of the CSV must tell apart: a
// judged value, a lower bound, no limit, NaN fields, an infinite ν_eff,
// asymmetric U, and user text that looks like formulas or needs quoting.
func exportResults() []Result {
	nan := math.NaN()
	return []Result{
		{Unit: "U01", Test: "cmrr", TemperatureC: 25, CoefficientUVPerV: 0.5623413251903491, CoefficientStdUUVPerV: 0.028, CoefficientExpandedUUVPerV: 0.0596,
			RatioDB: 125, ExpandedUDB: 0.87, ExpandedUDBLow: nan, ExpandedUDBHigh: nan, CoverageK: 2.13, DOFEffective: 20,
			Resolved: true, LowerBoundDB: nan, LimitDB: 110, Verdict: VerdictPass, Rule: "guarded"},
		{Unit: "U07", Test: "cmrr", TemperatureC: 25, CoefficientUVPerV: 0.003, CoefficientStdUUVPerV: 0.05, CoefficientExpandedUUVPerV: 0.1,
			RatioDB: nan, ExpandedUDB: nan, ExpandedUDBLow: nan, ExpandedUDBHigh: nan, CoverageK: 2, DOFEffective: math.Inf(1),
			Resolved: false, LowerBoundDB: 139.91, LimitDB: 110, Verdict: VerdictPass, Rule: "guarded", Flags: []string{"unresolved"},
			Notes: []string{"k_c + k_o, not CMRR; |k_o| ≤ 3.2 µV/V", "drift term dropped (too few levels)"}},
		{Unit: "=1+2", Test: "psrr_pos", TemperatureC: -40, CoefficientUVPerV: 31.6, CoefficientStdUUVPerV: 3.2,
			RatioDB: 90.0, ExpandedUDB: 0.9, ExpandedUDBLow: 0.85, ExpandedUDBHigh: 0.95, CoverageK: 2.05, DOFEffective: 50,
			Resolved: true, LowerBoundDB: nan, LimitDB: nan, Verdict: VerdictNotJudged, Rule: "simple"},
		{Unit: "@SUM(A1)", Test: "cmrr", TemperatureC: 85, CoefficientUVPerV: 3.3, CoefficientStdUUVPerV: 0.1,
			RatioDB: 109.63, ExpandedUDB: 0.5, ExpandedUDBLow: nan, ExpandedUDBHigh: nan, CoverageK: 2, DOFEffective: 12.4,
			Resolved: true, LowerBoundDB: nan, LimitDB: 110, Verdict: VerdictConditionalFail, Rule: "guarded",
			Flags: []string{"settle-timeout", "note, with \"quotes\""}},
		{Unit: "-y", Test: "cmrr", TemperatureC: 25, CoefficientUVPerV: -5.6, CoefficientStdUUVPerV: 0.2,
			RatioDB: 105.04, ExpandedUDB: 0.3, ExpandedUDBLow: nan, ExpandedUDBHigh: nan, CoverageK: 2, DOFEffective: 8,
			Resolved: true, LowerBoundDB: nan, LimitDB: 110, Verdict: VerdictFail, Rule: "guarded"},
	}
}

func exportReadings() []Reading {
	t0 := time.Date(2026, 3, 2, 8, 30, 0, 123456789, time.UTC)
	return []Reading{
		{Time: t0, BenchSeconds: 0, Unit: "U01", Test: "cmrr", TemperatureC: 25, MeasuredC: 25.03, Repeat: 0, Step: 0,
			SetVolts: 0, ReadVolts: 0.0001, MeterVolts: 1.0001e-4, MeterSDVolts: 3e-7, N: 10, SettleSeconds: 1.5},
		{Time: t0.Add(9123 * time.Millisecond).In(time.FixedZone("CET", 3600)), BenchSeconds: 9.123, Unit: "+x", Test: "board_cmrr", Sweep: "cm",
			TemperatureC: 25, MeasuredC: math.NaN(), Repeat: 0, Step: 1, SetVolts: 5, ReadVolts: 5.0001, MeterVolts: 0.0029123,
			MeterSDVolts: 3.1e-7, N: 10, SettleSeconds: 30, Flags: []string{"settle-timeout"}},
		{BenchSeconds: 18.2, Unit: "U01\nsecond line", Test: "cmrr", TemperatureC: 25, MeasuredC: 25.03, Repeat: 1, Step: 2,
			SetVolts: -5, ReadVolts: -4.9999, MeterVolts: -0.0026, MeterSDVolts: 2.9e-7, N: 10, SettleSeconds: 1.4},
	}
}

func TestResultsCSVGolden(t *testing.T) {
	var b bytes.Buffer
	if err := WriteResultsCSV(&b, exportResults(), CSVOptions{}); err != nil {
		t.Fatal(err)
	}
	golden(t, "results.csv", b.Bytes())
}

func TestReadingsCSVGolden(t *testing.T) {
	var b bytes.Buffer
	if err := WriteReadingsCSV(&b, exportReadings(), CSVOptions{}); err != nil {
		t.Fatal(err)
	}
	golden(t, "readings.csv", b.Bytes())
}

// TestCSVIsRFC4180 reads the export back and checks the RFC 4180 rules
// the golden files rely on: CRLF record ends (§2.1), a header line (§2.3),
// the same field count on every line (§2.4), and fields with commas,
// quotes or line breaks quoted with doubled quotes (§2.6, §2.7).
func TestCSVIsRFC4180(t *testing.T) {
	var b bytes.Buffer
	if err := WriteResultsCSV(&b, exportResults(), CSVOptions{}); err != nil {
		t.Fatal(err)
	}
	raw := b.String()
	if !strings.HasSuffix(raw, "\r\n") || strings.Count(raw, "\r\n") != len(exportResults())+1 {
		t.Errorf("want %d CRLF-terminated records", len(exportResults())+1)
	}
	if !strings.Contains(raw, `"settle-timeout;note, with ""quotes"""`) {
		t.Errorf("flags with comma and quotes not quoted per RFC 4180 §2.6–2.7:\n%s", raw)
	}
	recs, err := csv.NewReader(strings.NewReader(raw)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(recs[0], resultCSVHeader) {
		t.Errorf("header %q", recs[0])
	}
	col := func(name string) int { return slices.Index(resultCSVHeader, name) }
	tests := []struct {
		row        int
		field, val string
	}{
		{1, "unit", "U01"},
		{1, "ratio_db", "125"},
		{1, "coefficient_uv_per_v", "0.5623413251903491"}, // shortest form that reads back exactly
		{1, "expanded_u_low_db", ""},                      // NaN
		{2, "resolved", "false"},
		{2, "ratio_db", ""}, // unresolved: no ratio, only the bound
		{2, "notes", "k_c + k_o, not CMRR; |k_o| ≤ 3.2 µV/V | drift term dropped (too few levels)"},
		{2, "lower_bound_db", "139.91"},
		{2, "reported_db", "139.91"},
		{2, "dof_effective", "+Inf"},
		{3, "unit", "=1+2"}, // verbatim without GuardFormulas
		{3, "limit_db", ""},
		{3, "temperature_c", "-40"},
		{4, "flags", "settle-timeout;note, with \"quotes\""},
		{5, "coefficient_uv_per_v", "-5.6"}, // numbers are never guarded
	}
	for _, tc := range tests {
		if got := recs[tc.row][col(tc.field)]; got != tc.val {
			t.Errorf("row %d %s = %q, want %q", tc.row, tc.field, got, tc.val)
		}
	}
}

func TestCSVGuardFormulas(t *testing.T) {
	tests := []struct{ unit, want string }{
		{"=1+2", "'=1+2"},
		{"+x", "'+x"},
		{"-y", "'-y"},
		{"@SUM(A1)", "'@SUM(A1)"},
		{"\tTAB", "'\tTAB"},
		{"U01", "U01"},
		{"", ""},
		{"x=1", "x=1"},
	}
	for _, tc := range tests {
		var b bytes.Buffer
		r := exportResults()[:1]
		r[0].Unit = tc.unit
		r[0].CoefficientUVPerV = -1.5
		if err := WriteResultsCSV(&b, r, CSVOptions{GuardFormulas: true}); err != nil {
			t.Fatal(err)
		}
		recs, err := csv.NewReader(&b).ReadAll()
		if err != nil {
			t.Fatal(err)
		}
		if got := recs[1][0]; got != tc.want {
			t.Errorf("unit %q guarded as %q, want %q", tc.unit, got, tc.want)
		}
		if got := recs[1][slices.Index(resultCSVHeader, "coefficient_uv_per_v")]; got != "-1.5" {
			t.Errorf("a negative number was altered: %q", got)
		}
	}
}

func TestResultsJSONL(t *testing.T) {
	var b bytes.Buffer
	rs := exportResults()
	if err := WriteResultsJSONL(&b, rs); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSuffix(b.String(), "\n"), "\n")
	if len(lines) != len(rs) {
		t.Fatalf("%d lines, want %d", len(lines), len(rs))
	}
	for i, line := range lines {
		var m map[string]any
		if err := json.Unmarshal([]byte(line), &m); err != nil {
			t.Fatalf("line %d is not one JSON object: %v\n%s", i+1, err, line)
		}
		for _, k := range []string{"unit", "test", "temperature_c", "ratio_db", "expanded_u_db", "coverage_k", "resolved", "lower_bound_db", "verdict",
			"coefficient_std_u_uv_per_v", "coefficient_expanded_u_uv_per_v", "notes"} {
			if _, ok := m[k]; !ok {
				t.Errorf("line %d lacks %q", i+1, k)
			}
		}
		if m["unit"] != rs[i].Unit {
			t.Errorf("line %d unit %v, want %q", i+1, m["unit"], rs[i].Unit)
		}
	}
	var r2 map[string]any
	json.Unmarshal([]byte(lines[1]), &r2)
	// NaN and infinity have no JSON form (RFC 8259 §6): null.
	// An unresolved result has no ratio: ratio_db is null, not 0.
	if r2["ratio_db"] != nil || r2["expanded_u_db"] != nil || r2["dof_effective"] != nil || r2["resolved"] != false || r2["lower_bound_db"] != 139.91 {
		t.Errorf("unresolved line: %s", lines[1])
	}
	// Notes travel as a list, and as an empty list when there are none.
	if n, ok := r2["notes"].([]any); !ok || len(n) != 2 || n[1] != "drift term dropped (too few levels)" {
		t.Errorf("notes of the unresolved line: %v", r2["notes"])
	}
	var r1 map[string]any
	json.Unmarshal([]byte(lines[0]), &r1)
	if n, ok := r1["notes"].([]any); !ok || len(n) != 0 {
		t.Errorf("notes of a result without notes: %v", r1["notes"])
	}
	if r1["coefficient_uv_per_v"] != 0.5623413251903491 || r1["coverage_k"] != 2.13 || r1["coefficient_expanded_u_uv_per_v"] != 0.0596 {
		t.Errorf("numbers not exact: %s", lines[0])
	}
}

func TestReadingsJSONL(t *testing.T) {
	var b bytes.Buffer
	rd := exportReadings()
	if err := WriteReadingsJSONL(&b, rd); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSuffix(b.String(), "\n"), "\n")
	if len(lines) != len(rd) {
		t.Fatalf("%d lines, want %d", len(lines), len(rd))
	}
	var got []struct {
		Time      string   `json:"time"`
		Unit      string   `json:"unit"`
		MeasuredC *float64 `json:"measured_c"`
		Meter     float64  `json:"meter_volts"`
		Flags     []string `json:"flags"`
	}
	for i, l := range lines {
		var g struct {
			Time      string   `json:"time"`
			Unit      string   `json:"unit"`
			MeasuredC *float64 `json:"measured_c"`
			Meter     float64  `json:"meter_volts"`
			Flags     []string `json:"flags"`
		}
		if err := json.Unmarshal([]byte(l), &g); err != nil {
			t.Fatalf("line %d: %v", i+1, err)
		}
		got = append(got, g)
	}
	// RFC 3339 in UTC, whatever zone the reading carried; no time: omitted.
	if got[0].Time != "2026-03-02T08:30:00.123456789Z" || got[1].Time != "2026-03-02T08:30:09.246456789Z" || got[2].Time != "" {
		t.Errorf("times %q %q %q", got[0].Time, got[1].Time, got[2].Time)
	}
	if got[1].MeasuredC != nil || got[0].MeasuredC == nil || *got[0].MeasuredC != 25.03 {
		t.Errorf("measured_c: NaN must be null, values exact")
	}
	if got[2].Unit != "U01\nsecond line" || got[1].Meter != 0.0029123 || !slices.Equal(got[1].Flags, []string{"settle-timeout"}) {
		t.Errorf("fields not kept: %+v", got)
	}
}

// FuzzCSVRoundTrip: any unit id survives a CSV export and encoding/csv's
// reader, except carriage returns: with CRLF record ends encoding/csv's
// writer drops a CR inside a field and writes LF as CRLF, which its reader
// turns back into LF.
func FuzzCSVRoundTrip(f *testing.F) {
	for _, s := range []string{"U01", "=1+2", "a,b", "q\"uote", "line\nbreak", "cr\rlf\r\n", " sp ", ""} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, unit string) {
		var b bytes.Buffer
		r := exportResults()[:1]
		r[0].Unit = unit
		if err := WriteResultsCSV(&b, r, CSVOptions{}); err != nil {
			t.Fatal(err)
		}
		recs, err := csv.NewReader(&b).ReadAll()
		if err != nil {
			t.Fatalf("unit %q: export does not read back: %v", unit, err)
		}
		if len(recs) != 2 || len(recs[1]) != len(resultCSVHeader) {
			t.Fatalf("unit %q: %d records", unit, len(recs))
		}
		if want := strings.ReplaceAll(unit, "\r", ""); recs[1][0] != want {
			t.Errorf("unit %q read back as %q", unit, recs[1][0])
		}
	})
}
