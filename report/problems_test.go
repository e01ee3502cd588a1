package report

import (
	"bytes"
	"encoding/json"
	"math"
	"slices"
	"strings"
	"testing"
)

// testProblems are one problem of each shape: a unit's test, a board
// sweep, and a lot-wide one not tied to a temperature.
func testProblems() []Problem {
	return []Problem{
		{Unit: "U02", Test: "cmrr", TemperatureC: 25, Problem: "stuck meter: the same value at every point"},
		{Unit: "B1", Test: "board_cmrr", Part: "cm", TemperatureC: 85, Problem: "no common-mode sweep: the board CMRR cannot be formed"},
		{Test: "psrr_pos", TemperatureC: math.NaN(), Problem: "=no temperature coefficient: too few points"},
	}
}

// Sink: the workbook. Problems get their own sheet, after the others,
// one row each, the lot-wide one marked "(lot)", user text kept as text.
func TestWorkbookProblemsSheet(t *testing.T) {
	c := fixtureCampaign(defaultUnits, single)
	c.Problems = testProblems()
	_, f := writeBook(t, c, WorkbookOptions{NoCharts: true})
	if !slices.Contains(f.GetSheetList(), SheetProblems) {
		t.Fatalf("no %s sheet: %v", SheetProblems, f.GetSheetList())
	}
	rows, err := f.GetRows(SheetProblems)
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) < 4 || rows[0][0] != "Unit" || rows[0][4] != "Problem" {
		t.Fatalf("rows %q", rows)
	}
	want := [][]string{
		{"U02", "cmrr", "", "25.0", "stuck meter: the same value at every point"},
		{"B1", "board_cmrr", "cm", "85.0", "no common-mode sweep: the board CMRR cannot be formed"},
		{"(lot)", "psrr_pos", "", "", "=no temperature coefficient: too few points"},
	}
	for i, w := range want {
		got := rows[i+1]
		for j := range w {
			g := ""
			if j < len(got) {
				g = got[j]
			}
			if g != w[j] {
				t.Errorf("row %d col %d = %q, want %q", i+2, j+1, g, w[j])
			}
		}
	}
	if fm, _ := f.GetCellFormula(SheetProblems, "E4"); fm != "" {
		t.Errorf("problem text became a formula: %q", fm)
	}
	// No problems, no sheet.
	c.Problems = nil
	_, f = writeBook(t, c, WorkbookOptions{NoCharts: true})
	if slices.Contains(f.GetSheetList(), SheetProblems) {
		t.Error("a Problems sheet without problems")
	}
}

// Sink: the JSON lines. Every problem is a line with its cause; a result
// that could not be formed carries the cause in "error".
func TestProblemsJSONL(t *testing.T) {
	var b bytes.Buffer
	if err := WriteProblemsJSONL(&b, testProblems()); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(b.String()), "\n")
	if len(lines) != 3 {
		t.Fatalf("%d lines:\n%s", len(lines), b.String())
	}
	var last map[string]any
	if err := json.Unmarshal([]byte(lines[2]), &last); err != nil {
		t.Fatal(err)
	}
	if last["unit"] != "" || last["test"] != "psrr_pos" || last["temperature_c"] != nil || !strings.HasPrefix(last["problem"].(string), "=no temperature") {
		t.Errorf("lot problem line %v", last)
	}
	var first map[string]any
	if err := json.Unmarshal([]byte(lines[0]), &first); err != nil {
		t.Fatal(err)
	}
	if first["unit"] != "U02" || first["temperature_c"] != 25.0 {
		t.Errorf("unit problem line %v", first)
	}

	nan := math.NaN()
	res := []Result{
		{Unit: "U01", Test: "cmrr", TemperatureC: 25, RatioDB: 120, Verdict: "pass", LimitDB: nan},
		{Unit: "U02", Test: "cmrr", TemperatureC: 25, RatioDB: nan, Verdict: VerdictNoResult, Flags: []string{"stuck meter: the same value at every point"}, LimitDB: nan},
	}
	b.Reset()
	if err := WriteResultsJSONL(&b, res); err != nil {
		t.Fatal(err)
	}
	rl := strings.Split(strings.TrimSpace(b.String()), "\n")
	var ok, bad map[string]any
	if err := json.Unmarshal([]byte(rl[0]), &ok); err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal([]byte(rl[1]), &bad); err != nil {
		t.Fatal(err)
	}
	if _, has := ok["error"]; has {
		t.Errorf("a formed result has an error field: %v", ok)
	}
	if bad["error"] != "stuck meter: the same value at every point" || bad["verdict"] != VerdictNoResult {
		t.Errorf("no-result line %v", bad)
	}
}
