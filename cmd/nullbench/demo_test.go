package main

import (
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/xuri/excelize/v2"

	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
	"nullbench/report"
)

// cliDemoDUT is a small invented lot for the demo: one HX-4107 whose CMRR
// (94 dB) is below the demo plan's 100 dB limit, and one HB-220 board.
const cliDemoDUT = `# cmd demo test: invented parts (Harrowgate Analog Test demo data)
seed = 77

[part]
number = "HX-4107"

[lot]
id = "L-DEMO-T"
fixture = "nulling_loop"
noise_gain = 1000.0

[[unit]]
id = "U01"
cmrr_db = 94.0
psrr_pos_db = 118.0
psrr_neg_db = 108.0

[[board]]
id = "B01"
number = "HB-220"
gain = 10.0
resistor_tolerance = 0.001
resistor_errors = [0.0006, -0.0004, -0.0007, 0.0003]

[board.opamp]
cmrr_db = 110.0
psrr_pos_db = 112.0
psrr_neg_db = 108.0
`

// The demo with a DUT file of two units: its plans, journals, workbook and
// JSON lines; a failing part is part of the demo's story (exit 0); report
// rebuilds the same results from the two journals.
func TestDemoWithSmallDUT(t *testing.T) {
	dir := t.TempDir()
	dut := cliWriteFile(t, dir, "dut.toml", cliDemoDUT)
	out := filepath.Join(dir, "demo")
	// 10000× real time: the lot's three chamber temperatures and the board
	// take a few seconds.
	args := []string{"demo", "--dut", dut, "--out", out, "--json", "--no-charts", "--time-scale", "10000"}
	r := cliExec(t, args...)
	cliWantCode(t, r, exitOK, args...)
	for _, f := range []string{"lot-plan.toml", "lot-journal.jsonl", "board-B01-plan.toml", "board-B01-journal.jsonl", "campaign.xlsx", "results.csv", "results.jsonl"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("demo did not write %s: %v", f, err)
		}
	}
	if !strings.Contains(r.err, "results: ") || !strings.Contains(r.err, "workbook: ") {
		t.Errorf("no summary on stderr:\n%s", r.err)
	}
	lines := cliJSONLines(t, r.out)
	count := map[string]int{}
	verdicts := map[string]string{}
	freqLines := 0
	for _, m := range lines {
		for _, k := range cliResultKeys {
			if _, ok := m[k]; !ok {
				t.Errorf("result lacks %q: %v", k, m)
			}
		}
		// Frequency-response results follow the DC ones, with the same
		// keys and frequency_hz and the phase (absent from DC results).
		if f, ok := m["frequency_hz"].(float64); ok {
			freqLines++
			if _, ok := m["phase_deg"]; !(f > 0) || !ok {
				t.Errorf("frequency result %v", m)
			}
			continue
		}
		key := m["unit"].(string) + "/" + m["test"].(string)
		count[key]++
		if m["temperature_c"] == 25.0 {
			verdicts[key] = m["verdict"].(string)
		}
	}
	// The lot plan: three temperatures × (cmrr, its uncorrected value,
	// psrr_pos, psrr_neg, psrr_worst, psrr_sym, aol); the board: one
	// temperature × three tests.
	want := map[string]int{}
	for _, test := range []string{"cmrr", "cmrr_uncorrected", "psrr_pos", "psrr_neg", "psrr_worst", "psrr_sym", "aol"} {
		want["U01/"+test] = 3
	}
	for _, test := range []string{"board_cmrr", "board_psrr_pos", "board_psrr_neg"} {
		want["B01/"+test] = 1
	}
	// The frequency campaign's short DC sweep: k_c + k_o of each of its
	// three noise-gain units.
	for _, u := range []string{"F01", "F02", "F03"} {
		want[u+"/cmrr_uncorrected"] = 1
	}
	for k, n := range want {
		if count[k] != n {
			t.Errorf("%s: %d results, want %d", k, count[k], n)
		}
	}
	// Frequency lines: the board's CMRR at 50 and 60 Hz and three op-amps
	// × three tests × 8 frequencies (demo/freq.toml).
	if len(lines)-freqLines != 27 || freqLines != 2+3*3*8 {
		t.Errorf("%d DC results (want 27: %v) and %d frequency results (want 74)", len(lines)-freqLines, count, freqLines)
	}
	for _, s := range []string{"Frequency response", "F01 CMRR (cmrr", "B01 board CMRR (board_cmrr", "single pole", "agrees with the DC result"} {
		if !strings.Contains(r.err, s) {
			t.Errorf("frequency summary lacks %q", s)
		}
	}
	if verdicts["U01/cmrr"] != "fail" || verdicts["U01/psrr_pos"] != "pass" || verdicts["B01/board_cmrr"] != "pass" {
		t.Errorf("verdicts at 25 °C %v; want U01 cmrr fail (94 dB against 100), psrr_pos and the board pass", verdicts)
	}

	f, err := excelize.OpenFile(filepath.Join(out, "campaign.xlsx"))
	if err != nil {
		t.Fatal(err)
	}
	rows, err := f.GetRows(report.SheetResults)
	freqRows, ferr := f.GetRows(report.SheetFreq)
	f.Close()
	for i, row := range freqRows {
		if len(row) == 0 {
			freqRows = freqRows[:i]
			break
		}
	}
	if ferr != nil || len(freqRows) != 1+freqLines {
		t.Errorf("sheet %s: %d rows (%v), want %d", report.SheetFreq, len(freqRows), ferr, 1+freqLines)
	}
	for i, row := range rows { // the table ends at the first blank row (the key follows it)
		if len(row) == 0 {
			rows = rows[:i]
			break
		}
	}
	if err != nil || len(rows) != 1+len(lines)-freqLines {
		t.Errorf("sheet %s: %d rows (%v), want %d", report.SheetResults, len(rows), err, 1+len(lines)-freqLines)
	}

	// report from the three journals alone: the same results, the same
	// exit status a run would give (5: a result failed its limit).
	rargs := []string{"report", filepath.Join(out, "lot-journal.jsonl"), filepath.Join(out, "board-B01-journal.jsonl"), filepath.Join(out, "freq-journal.jsonl"), "--out", filepath.Join(dir, "again"), "--json", "--no-charts"}
	rr := cliExec(t, rargs...)
	cliWantCode(t, rr, exitOutOfLimits, rargs...)
	if rr.out != r.out {
		t.Errorf("report from the journals differs from the demo's results:\n%s\nwant:\n%s", rr.out, r.out)
	}

	// The demo folder's manifest: one entry per journal, each with its own
	// plan, seal and completeness (the demo measured every point), and
	// never a single empty plan or journal name.
	m, err := readManifest(out)
	if err != nil {
		t.Fatal(err)
	}
	if m.Plan.File != "" || m.Journal.File != "" || m.Journal.Records != 0 {
		t.Errorf("demo manifest names a single plan %q / journal %q: it is not a run folder", m.Plan.File, m.Journal.File)
	}
	var names []string
	for _, j := range m.Journals {
		names = append(names, j.File)
		jc, err := journal.ReadFile(filepath.Join(out, j.File))
		if err != nil {
			t.Fatal(err)
		}
		p, perr := plan.Load(filepath.Join(out, j.Plan.File))
		if perr != nil || p.Hash != j.Plan.SHA256 || jc.Header.PlanHash != j.Plan.SHA256 {
			t.Errorf("manifest entry %s: plan %s sha256 %s, the file's %v, the journal's %s", j.File, j.Plan.File, j.Plan.SHA256, p, jc.Header.PlanHash)
		}
		if j.Seal != jc.Seal() || !j.Complete || j.MissingPoints != 0 {
			t.Errorf("manifest entry %s: seal %+v complete %v missing %d; the journal's seal %+v, complete", j.File, j.Seal, j.Complete, j.MissingPoints, jc.Seal())
		}
	}
	if want := []string{"lot-journal.jsonl", "board-B01-journal.jsonl", "freq-journal.jsonl"}; !slices.Equal(names, want) {
		t.Errorf("manifest journals %q, want %q", names, want)
	}

	// report DIR on the demo folder reports every journal in it, into the
	// folder itself (its journals and plans are not someone else's
	// files): the demo's results again (the journals in name order, so
	// the lines are compared as a set).
	dargs := []string{"report", out, "--json", "--no-charts"}
	dr := cliExec(t, dargs...)
	cliWantCode(t, dr, exitOutOfLimits, dargs...)
	sortedLines := func(s string) []string { l := strings.Split(strings.TrimSpace(s), "\n"); slices.Sort(l); return l }
	if !slices.Equal(sortedLines(dr.out), sortedLines(r.out)) || len(dr.out) == 0 {
		t.Errorf("report DIR differs from the demo's results:\n%s\nwant:\n%s\nstderr:\n%s", dr.out, r.out, dr.err)
	}
	// report JOURNAL on one journal of the demo folder, with the default
	// --out (the journal's folder): the frequency campaign alone.
	jargs := []string{"report", filepath.Join(out, "freq-journal.jsonl"), "--no-charts"}
	jr := cliExec(t, jargs...)
	if jr.code == exitUsage || !strings.Contains(jr.out, "Frequency response") {
		t.Errorf("report %s: exit %d, want the frequency campaign reported:\n%s\n%s", jargs[1], jr.code, jr.out, jr.err)
	}
	if m, err := readManifest(out); err != nil || len(m.Journals) != 1 || m.Journals[0].File != "freq-journal.jsonl" {
		t.Errorf("after report of one journal the manifest lists %+v (%v), want that journal alone", m, err)
	}
}
