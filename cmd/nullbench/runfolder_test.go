package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"
)

// workbookCells reads every sheet's cell values (the workbook as a reader
// sees it), leaving out the Summary row naming the writer's version.
func workbookCells(t *testing.T, path string) map[string][][]string {
	t.Helper()
	f, err := excelize.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	out := map[string][][]string{}
	for _, s := range f.GetSheetList() {
		rows, err := f.GetRows(s)
		if err != nil {
			t.Fatal(err)
		}
		out[s] = rows
	}
	return out
}

func copyDir(t *testing.T, from, to string) {
	t.Helper()
	err := filepath.WalkDir(from, func(p string, d os.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(from, p)
		if d.IsDir() {
			return os.MkdirAll(filepath.Join(to, rel), 0o755)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(filepath.Join(to, rel), b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
}

func TestRunFolderIsSelfContained(t *testing.T) {
	b := cliStartSim(t, "")
	dir := t.TempDir()
	planText := b.BenchSection() + strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0")
	plan := cliWriteFile(t, dir, "plan.toml", planText)
	out := filepath.Join(dir, "run1")
	r := cliExec(t, "run", plan, "--out", out, "--no-charts")
	cliWantCode(t, r, exitOK, "run", plan)

	// The plan copy is byte for byte the plan measured.
	if got := cliMust(os.ReadFile(filepath.Join(out, runPlanName))); !bytes.Equal(got, []byte(planText)) {
		t.Fatal("plan copy differs from the plan")
	}
	m, err := readManifest(out)
	if err != nil {
		t.Fatal(err)
	}
	if m.Plan.SHA256 != sha256Hex([]byte(planText)) || len(m.Profiles) == 0 || m.Journal.Records == 0 || !m.Complete || len(m.Outputs) != len(runOutputs) {
		t.Fatalf("manifest %+v", m)
	}
	for _, p := range m.Profiles {
		if _, err := os.Stat(filepath.Join(out, p.File)); err != nil {
			t.Errorf("profile copy %s: %v", p.File, err)
		}
	}

	// The folder, copied elsewhere with the original plan gone, reports
	// alone and reproduces the workbook cell for cell.
	moved := filepath.Join(t.TempDir(), "sent")
	copyDir(t, out, moved)
	if err := os.Remove(plan); err != nil {
		t.Fatal(err)
	}
	r = cliExec(t, "report", moved, "--no-charts")
	cliWantCode(t, r, exitOK, "report", moved)
	want, got := workbookCells(t, filepath.Join(out, "campaign.xlsx")), workbookCells(t, filepath.Join(moved, "campaign.xlsx"))
	if !reflect.DeepEqual(want, got) {
		for s := range want {
			if !reflect.DeepEqual(want[s], got[s]) {
				t.Errorf("sheet %s differs after report of the copied folder:\nrun:    %v\nreport: %v", s, want[s], got[s])
			}
		}
	}
	summary := strings.Join(flatten(got["Summary"]), "|")
	if !strings.Contains(summary, "complete: all ") || !strings.Contains(summary, "intact") {
		t.Errorf("summary does not state complete and intact: %s", summary)
	}

	t.Run("journal cut at a line boundary", func(t *testing.T) {
		d := filepath.Join(t.TempDir(), "cut")
		copyDir(t, out, d)
		j := filepath.Join(d, runJournalName)
		lines := bytes.SplitAfter(cliMust(os.ReadFile(j)), []byte("\n"))
		keep := len(lines) / 2
		if err := os.WriteFile(j, bytes.Join(lines[:keep], nil), 0o644); err != nil {
			t.Fatal(err)
		}
		r := cliExec(t, "report", d, "--no-charts")
		cliWantCode(t, r, exitFailure, "report", d)
		wantMsg := "journal edited or truncated at line " + itoa(keep+1)
		if !strings.Contains(r.err, wantMsg) {
			t.Errorf("stderr does not say %q:\n%s", wantMsg, r.err)
		}
		if !strings.Contains(r.out, "INCOMPLETE: ") {
			t.Errorf("console summary not marked INCOMPLETE:\n%s", r.out)
		}
		cells := workbookCells(t, filepath.Join(d, "campaign.xlsx"))
		s := strings.Join(flatten(cells["Summary"]), "|")
		if !strings.Contains(s, wantMsg) || !strings.Contains(s, "INCOMPLETE: ") {
			t.Errorf("summary sheet lacks the integrity and INCOMPLETE marks: %s", s)
		}
		if u := strings.Join(cells["Units"][0], "|"); !strings.Contains(u, "INCOMPLETE: ") {
			t.Errorf("Units sheet header lacks the INCOMPLETE mark: %s", u)
		}
		csv := string(cliMust(os.ReadFile(filepath.Join(d, "results.csv"))))
		if !strings.Contains(csv, "campaign_incomplete,missing_points") || !strings.Contains(csv, ",true,") {
			t.Errorf("results.csv does not carry the incomplete field:\n%s", csv)
		}
		// The seal is not renewed from a cut journal: a second report
		// still finds the cut.
		r = cliExec(t, "report", d, "--no-charts")
		if !strings.Contains(r.err, wantMsg) {
			t.Errorf("second report forgot the cut:\n%s", r.err)
		}
	})

	t.Run("journal with an edited line", func(t *testing.T) {
		d := filepath.Join(t.TempDir(), "edited")
		copyDir(t, out, d)
		j := filepath.Join(d, runJournalName)
		lines := bytes.SplitAfter(cliMust(os.ReadFile(j)), []byte("\n"))
		n := 0
		for i, l := range lines {
			if bytes.Contains(l, []byte(`"kind":"reading"`)) {
				// Move the meter reading: a digit of the value changes.
				lines[i] = bytes.Replace(l, []byte(`"meter_volts":`), []byte(`"meter_volts":1`), 1)
				n = i + 1
				break
			}
		}
		if err := os.WriteFile(j, bytes.Join(lines, nil), 0o644); err != nil {
			t.Fatal(err)
		}
		r := cliExec(t, "report", d, "--no-charts")
		cliWantCode(t, r, exitFailure, "report", d)
		if wantMsg := "journal edited or truncated at line " + itoa(n); !strings.Contains(r.err, wantMsg) {
			t.Errorf("stderr does not say %q:\n%s", wantMsg, r.err)
		}
	})

	t.Run("out folder of someone else", func(t *testing.T) {
		plan := cliWriteFile(t, t.TempDir(), "plan.toml", planText)
		theirs := t.TempDir()
		cliWriteFile(t, theirs, "campaign.xlsx", "their own workbook")
		r := cliExec(t, "run", plan, "--out", theirs)
		cliWantCode(t, r, exitUsage, "run", plan, "--out", theirs)
		if !strings.Contains(r.err, "--force") {
			t.Errorf("refusal does not mention --force:\n%s", r.err)
		}
		if got := string(cliMust(os.ReadFile(filepath.Join(theirs, "campaign.xlsx")))); got != "their own workbook" {
			t.Fatal("their workbook was overwritten")
		}
		r = cliExec(t, "report", out, "--out", theirs)
		cliWantCode(t, r, exitUsage, "report", out, "--out", theirs)
		r = cliExec(t, "run", plan, "--out", theirs, "--force", "--no-charts")
		cliWantCode(t, r, exitOK, "run", plan, "--out", theirs, "--force")
	})
}

func flatten(rows [][]string) []string {
	var out []string
	for _, r := range rows {
		out = append(out, r...)
	}
	return out
}

func itoa(i int) string { return strconv.Itoa(i) }

// run --skip leaves a unit out: skipped, not failed, and the campaign is
// still complete.
func TestRunSkipUnit(t *testing.T) {
	b := cliStartSim(t, "")
	dir := t.TempDir()
	plan := cliWriteFile(t, dir, "plan.toml", b.BenchSection()+strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"))
	out := filepath.Join(dir, "out")
	r := cliExec(t, "run", plan, "--out", out, "--no-charts", "--skip", "U02=part cracked")
	cliWantCode(t, r, exitOK, "run", plan)
	if !strings.Contains(r.out, "unit U02 skipped: part cracked") || strings.Contains(r.out, "INCOMPLETE") {
		t.Errorf("console:\n%s", r.out)
	}
	cells := workbookCells(t, filepath.Join(out, "campaign.xlsx"))
	found := false
	for _, row := range cells["Units"] {
		if len(row) > 5 && row[0] == "U02" {
			found = true
			if row[3] != "SKIPPED" || !strings.Contains(row[5], "part cracked") {
				t.Errorf("Units row %v, want SKIPPED with the reason", row)
			}
		}
	}
	if !found {
		t.Errorf("no U02 row on the Units sheet: %v", cells["Units"])
	}
	if s := strings.Join(flatten(cells["Summary"]), "|"); !strings.Contains(s, "unit-skipped") || !strings.Contains(s, "complete: all ") {
		t.Errorf("summary lacks the skip in its event log or the complete mark: %s", s)
	}
	m, err := readManifest(out)
	if err != nil || !m.Complete {
		t.Errorf("manifest %+v, %v", m, err)
	}
	r = cliExec(t, "run", plan, "--out", filepath.Join(dir, "x"), "--skip", "U99")
	cliWantCode(t, r, exitUsage, "run", plan, "--skip", "U99")
}

// An interrupted run's folder reports INCOMPLETE with the count; resumed,
// it is complete, the seal moves on, and report finds the journal intact.
func TestRunFolderInterruptedThenResumed(t *testing.T) {
	b := cliStartSim(t, "")
	dir := t.TempDir()
	plan := cliWriteFile(t, dir, "plan.toml", b.BenchSection()+strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"))
	out := filepath.Join(dir, "out")
	j := filepath.Join(out, runJournalName)
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	done := make(chan cliResult, 1)
	go func() { done <- cliRun(t, ctx, cliOpts{}, "run", plan, "--out", out, "--no-charts") }()
	for cliCount(t, j, "reading") < 5 {
		select {
		case r := <-done:
			t.Fatalf("the run ended (exit %d) before 5 readings", r.code)
		case <-time.After(time.Millisecond):
		}
	}
	cancel()
	r := <-done
	if !regexp.MustCompile(`INCOMPLETE: \d+ of \d+ planned points not measured`).MatchString(r.out) {
		t.Errorf("interrupted run's summary not marked INCOMPLETE:\n%s", r.out)
	}
	m, err := readManifest(out)
	if err != nil || m.Complete || m.MissingPoints == 0 || m.Journal.Records == 0 {
		t.Fatalf("manifest after the interruption %+v, %v", m, err)
	}
	r = cliExec(t, "resume", out, "--no-charts")
	cliWantCode(t, r, exitOK, "resume", out)
	m2, err := readManifest(out)
	if err != nil || !m2.Complete || m2.Journal.Records <= m.Journal.Records {
		t.Fatalf("manifest after the resume %+v, %v", m2, err)
	}
	r = cliExec(t, "report", out, "--no-charts")
	cliWantCode(t, r, exitOK, "report", out)
	if strings.Contains(r.out, "INCOMPLETE") || strings.Contains(r.err, "edited or truncated") {
		t.Errorf("resumed folder:\n%s\n%s", r.out, r.err)
	}
	cells := workbookCells(t, filepath.Join(out, "campaign.xlsx"))
	if s := strings.Join(flatten(cells["Summary"]), "|"); !strings.Contains(s, "resume") || !strings.Contains(s, "abort") && !strings.Contains(s, "interrupted") {
		t.Errorf("event log lacks the interruption and the resume: %s", s)
	}
}
