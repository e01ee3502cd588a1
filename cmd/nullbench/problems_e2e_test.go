package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/xuri/excelize/v2"

	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// An analysis problem reaches every sink: the console, problems.jsonl,
// the result's own JSON line, the workbook's Problems sheet and the exit
// status (6). The problem here is a result below the plan's
// min_valid_points: a campaign on the simulated bench whose journal lost
// two of U01's psrr_pos points (rewritten without them, as a run cut
// short would leave it) is reported; psrr_pos of U01 then has 4 valid
// points against min_valid_points = 6 and is not judged, never a pass.
func TestProblemsReachEverySink(t *testing.T) {
	b := cliStartSim(t, "")
	dir := t.TempDir()
	body := strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0")
	body = strings.Replace(body, "kind = \"psrr_pos\"\nlevels = [-3.0, 0.0, 3.0]\n", "kind = \"psrr_pos\"\nlevels = [-3.0, 0.0, 3.0]\nmin_valid_points = 6\n", 1)
	if !strings.Contains(body, "min_valid_points = 6") {
		t.Fatal("the plan edit did not apply")
	}
	planPath := cliWriteFile(t, dir, "plan.toml", b.BenchSection()+body)
	out := filepath.Join(dir, "out")
	r := cliExec(t, "run", planPath, "--out", out)
	cliWantCode(t, r, exitOK, "run", planPath)
	if data, err := os.ReadFile(filepath.Join(out, "problems.jsonl")); err != nil || len(data) != 0 {
		t.Errorf("problems.jsonl of a clean run: %q, %v", data, err)
	}

	// The same journal without two of U01's psrr_pos readings.
	c, err := journal.ReadFile(filepath.Join(out, "journal.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	cut := filepath.Join(dir, "cut")
	if err := os.MkdirAll(cut, 0o755); err != nil {
		t.Fatal(err)
	}
	jp := filepath.Join(cut, "journal.jsonl")
	h := c.Header
	h.PlanPath = planPath
	w, err := journal.Open(jp, h)
	if err != nil {
		t.Fatal(err)
	}
	for _, id := range c.Identities {
		if err := w.Identity(id); err != nil {
			t.Fatal(err)
		}
	}
	dropped := 0
	for _, rd := range c.Readings {
		if rd.Unit == "U01" && rd.Test == plan.TestPSRRPos && dropped < 2 {
			dropped++
			continue
		}
		if err := w.Reading(rd); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.End(journal.End{Status: journal.EndAborted, Reason: "test: two points left out"}); err != nil {
		t.Fatal(err)
	}
	w.Close()

	rep := filepath.Join(cut, "report")
	r = cliExec(t, "report", jp, "--out", rep)
	// Sink: the exit status.
	cliWantCode(t, r, exitProblems, "report", jp)
	why := "not judged: 4 valid point(s) in the psrr_pos sweep, fewer than the plan's min_valid_points 6"
	// Sink: the console (summary and the closing error).
	console := r.out + r.err
	if !strings.Contains(console, "PROBLEM U01 psrr_pos at 25 °C: "+why) {
		t.Errorf("the console does not list the problem:\n%s", console)
	}
	if !strings.Contains(r.err, "could not be formed or judged") {
		t.Errorf("the exit message does not say why:\n%s", r.err)
	}
	// Sink: problems.jsonl.
	pdata, err := os.ReadFile(filepath.Join(rep, "problems.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, m := range cliJSONLines(t, string(pdata)) {
		found = found || (m["unit"] == "U01" && m["test"] == "psrr_pos" && m["problem"] == why && m["temperature_c"] == 25.0)
	}
	if !found {
		t.Errorf("problems.jsonl lacks the problem:\n%s", pdata)
	}
	// The result's own line: not judged, with the reason in its notes.
	rdata, err := os.ReadFile(filepath.Join(rep, "results.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	rows := 0
	for _, m := range cliJSONLines(t, string(rdata)) {
		if m["unit"] != "U01" || m["test"] != "psrr_pos" {
			continue
		}
		rows++
		if m["verdict"] != "not judged" {
			t.Errorf("U01 psrr_pos verdict %v, want not judged", m["verdict"])
		}
		if !strings.Contains(strings.Join(anyStrings(m["notes"]), "|"), why) {
			t.Errorf("U01 psrr_pos notes %v lack the reason", m["notes"])
		}
	}
	if rows != 1 {
		t.Errorf("%d result lines for U01 psrr_pos, want 1", rows)
	}
	// Sink: the workbook's Problems sheet.
	f, err := excelize.OpenFile(filepath.Join(rep, "campaign.xlsx"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	prow, err := f.GetRows("Problems")
	if err != nil {
		t.Fatalf("no Problems sheet: %v (sheets %v)", err, f.GetSheetList())
	}
	found = false
	for _, row := range prow {
		found = found || (len(row) >= 5 && row[0] == "U01" && row[1] == "psrr_pos" && row[4] == why)
	}
	if !found {
		t.Errorf("the Problems sheet lacks the problem: %q", prow)
	}
}

func anyStrings(v any) []string {
	var out []string
	if l, ok := v.([]any); ok {
		for _, x := range l {
			if s, ok := x.(string); ok {
				out = append(out, s)
			}
		}
	}
	return out
}
