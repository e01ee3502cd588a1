package main

import (
	"bytes"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"

	"nullbench/procedure/journal"
)

// cliBinary returns the nullbench binary (for a child process the test
// can kill), built once per test run into a temporary folder that
// TestMain removes.
func cliBinary(t *testing.T) string {
	t.Helper()
	goTool, err := exec.LookPath("go")
	if err != nil {
		t.Skipf("no go tool to build the binary with: %v", err)
	}
	cliBin.once.Do(func() {
		cliBin.dir, cliBin.err = os.MkdirTemp("", "nullbench-bin-")
		if cliBin.err != nil {
			return
		}
		cliBin.path = filepath.Join(cliBin.dir, "nullbench")
		out, err := exec.Command(goTool, "build", "-o", cliBin.path, ".").CombinedOutput()
		if err != nil {
			cliBin.err = fmt.Errorf("go build: %v\n%s", err, out)
		}
	})
	if cliBin.err != nil {
		t.Fatal(cliBin.err)
	}
	return cliBin.path
}

// cliBin is the binary cliBinary built.
var cliBin struct {
	once sync.Once
	dir  string
	path string
	err  error
}

func TestMain(m *testing.M) {
	code := m.Run()
	if cliBin.dir != "" {
		os.RemoveAll(cliBin.dir)
	}
	os.Exit(code)
}

// cliCount counts the journal's records of a kind ("reading", "end").
func cliCount(t *testing.T, journal, kind string) int {
	t.Helper()
	data, err := os.ReadFile(journal)
	if err != nil {
		if os.IsNotExist(err) {
			return 0
		}
		t.Fatal(err)
	}
	return bytes.Count(data, []byte(`"kind":"`+kind+`"`))
}

// cliResultsByKey indexes JSON result lines by unit/test/temperature.
func cliResultsByKey(t *testing.T, lines []map[string]any) (map[string]map[string]any, []string) {
	t.Helper()
	by := map[string]map[string]any{}
	var keys []string
	for _, m := range lines {
		k := fmt.Sprintf("%v/%v/%v", m["unit"], m["test"], m["temperature_c"])
		if _, dup := by[k]; dup {
			t.Errorf("result %s twice", k)
		}
		by[k] = m
		keys = append(keys, k)
	}
	return by, keys
}

// A run killed with SIGKILL part-way is continued by "resume" without
// measuring a point twice; "report" rebuilds the same results from the
// journal alone, and they agree with an uninterrupted run of the same plan
// within their expanded uncertainties. A torn last line is reported and
// measured again; a journal of another plan is refused.
func TestResumeAfterKill(t *testing.T) {
	bin := cliBinary(t)
	b := cliStartSim(t, "")
	dir := t.TempDir()
	const totalPoints = 2 * (10 + 6) // 2 units × (cmrr 2×5 levels, psrr_pos 2×3 levels)
	planText := b.BenchSection() + strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0")
	plan := cliWriteFile(t, dir, "plan.toml", planText)

	// The child runs with the plan's path relative to its own folder, as
	// a user would type it; resume below runs from another folder.
	child := exec.Command(bin, "run", "plan.toml", "--out", "killed")
	child.Dir = dir
	var childOut, childErr bytes.Buffer
	child.Stdout, child.Stderr = &childOut, &childErr
	if err := child.Start(); err != nil {
		t.Fatal(err)
	}
	waited := make(chan error, 1)
	go func() { waited <- child.Wait() }()
	journal := filepath.Join(dir, "killed", "journal.jsonl")
	const killAt = 12 // in the first unit's psrr_pos sweep
	deadline := time.After(30 * time.Second)
poll:
	for {
		select {
		case err := <-waited:
			t.Fatalf("run ended (%v) before %d readings were journalled; nothing to resume:\n%s", err, killAt, childErr.String())
		case <-deadline:
			_ = child.Process.Kill()
			t.Fatalf("no %d readings in the journal after 30 s:\n%s", killAt, childErr.String())
		case <-time.After(time.Millisecond):
			if cliCount(t, journal, "reading") >= killAt {
				break poll
			}
		}
	}
	if err := child.Process.Kill(); err != nil { // SIGKILL: no clean-up at all
		t.Fatal(err)
	}
	if err := <-waited; err == nil || !strings.Contains(err.Error(), "killed") {
		t.Fatalf("child: %v, want killed", err)
	}
	taken := cliCount(t, journal, "reading")
	if taken < killAt || taken >= totalPoints || cliCount(t, journal, "end") != 0 {
		t.Fatalf("after the kill: %d readings, %d end records; want %d … %d and none", taken, cliCount(t, journal, "end"), killAt, totalPoints-1)
	}
	// Keep a copy of the killed journal for the torn-line case below.
	killedCopy, err := os.ReadFile(journal)
	if err != nil {
		t.Fatal(err)
	}

	// resume, from this folder, finds the plan through the journal.
	r := cliExec(t, "resume", journal, "--json")
	cliWantCode(t, r, exitOK, "resume", journal)
	if want := fmt.Sprintf("campaign: %d points, %d already in the journal", totalPoints, taken); !strings.Contains(r.err, want) {
		t.Errorf("resume does not say %q:\n%s", want, r.err)
	}
	if got := cliCount(t, journal, "reading"); got != totalPoints {
		t.Errorf("the journal has %d readings after resume, want %d (no point twice, none missing)", got, totalPoints)
	}
	if cliCount(t, journal, "end") != 1 || !strings.Contains(string(cliMust(os.ReadFile(journal))), `"status":"complete"`) {
		t.Errorf("the resumed journal does not end complete")
	}
	resumed := cliJSONLines(t, r.out)
	if len(resumed) != 4 {
		t.Fatalf("resume printed %d results, want 4:\n%s", len(resumed), r.out)
	}
	for _, f := range []string{"campaign.xlsx", "results.jsonl", "results.csv"} {
		if _, err := os.Stat(filepath.Join(dir, "killed", f)); err != nil {
			t.Errorf("resume did not write %s beside the journal: %v", f, err)
		}
	}

	// A finished journal has nothing left to measure: resume says so and
	// writes the workbook and exports from the journal (a run killed while
	// writing them ends this way), as report would.
	r = cliExec(t, "resume", journal)
	cliWantCode(t, r, exitOK, "resume", journal)
	if !strings.Contains(r.err, "already ended complete") || !strings.Contains(r.err, "nullbench report") {
		t.Errorf("resume of a finished journal: %s", r.err)
	}

	// report from the journal alone: exactly the resumed run's results.
	r = cliExec(t, "report", journal, "--out", filepath.Join(dir, "report"), "--json")
	cliWantCode(t, r, exitOK, "report", journal)
	if strings.TrimSpace(r.out) != strings.TrimSpace(string(cliMust(os.ReadFile(filepath.Join(dir, "killed", "results.jsonl"))))) {
		t.Errorf("report's results differ from the resumed run's:\n%s", r.out)
	}

	// An uninterrupted run of the same plan agrees within U.
	whole := filepath.Join(dir, "whole")
	r = cliExec(t, "run", plan, "--out", whole, "--json")
	cliWantCode(t, r, exitOK, "run", plan)
	byKeyA, keysA := cliResultsByKey(t, resumed)
	byKeyB, keysB := cliResultsByKey(t, cliJSONLines(t, r.out))
	if strings.Join(keysA, " ") != strings.Join(keysB, " ") {
		t.Fatalf("resumed results %v, uninterrupted %v", keysA, keysB)
	}
	for _, k := range keysA {
		a, b := byKeyA[k], byKeyB[k]
		ra, ua := a["ratio_db"].(float64), a["expanded_u_db"].(float64)
		rb, ub := b["ratio_db"].(float64), b["expanded_u_db"].(float64)
		t.Logf("%s: resumed %.3f ± %.3f dB, uninterrupted %.3f ± %.3f dB", k, ra, ua, rb, ub)
		if math.Abs(ra-rb) > ua+ub {
			t.Errorf("%s: resumed %.3f ± %.3f dB and uninterrupted %.3f ± %.3f dB disagree", k, ra, ua, rb, ub)
		}
	}

	t.Run("torn last line", func(t *testing.T) {
		// The killed journal with its last reading cut in half, as if the
		// kill had come in the middle of writing it.
		lines := strings.SplitAfter(strings.TrimRight(string(killedCopy), "\n"), "\n")
		last := lines[len(lines)-1]
		if !strings.Contains(last, `"kind":"reading"`) {
			t.Fatalf("the killed journal does not end with a reading: %q", last)
		}
		torn := strings.Join(lines[:len(lines)-1], "") + last[:len(last)/2]
		tornLine := len(lines)
		tdir := filepath.Join(dir, "torn")
		tj := filepath.Join(tdir, "journal.jsonl")
		if err := os.MkdirAll(tdir, 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(tj, []byte(torn), 0o644); err != nil {
			t.Fatal(err)
		}
		// Cut short, psrr_pos of U01 has too few points for a fit: an
		// analysis problem, which the exit status reports.
		r := cliExec(t, "report", tj, "--json")
		cliWantCode(t, r, exitProblems, "report", tj)
		if want := "line " + strconv.Itoa(tornLine) + " is incomplete"; !strings.Contains(r.err, want) {
			t.Errorf("report does not say %q:\n%s", want, r.err)
		}
		r = cliExec(t, "resume", tj)
		cliWantCode(t, r, exitOK, "resume", tj)
		for _, want := range []string{
			"line " + strconv.Itoa(tornLine) + " was cut short",
			fmt.Sprintf("campaign: %d points, %d already in the journal", totalPoints, taken-1),
		} {
			if !strings.Contains(r.err, want) {
				t.Errorf("resume does not say %q:\n%s", want, r.err)
			}
		}
		if got := cliCount(t, tj, "reading"); got != totalPoints {
			t.Errorf("%d readings after resuming the torn journal, want %d", got, totalPoints)
		}
		// The torn bytes are gone: the journal reads cleanly now.
		r = cliExec(t, "report", tj, "--out", filepath.Join(tdir, "again"))
		cliWantCode(t, r, exitOK, "report", tj)
		if strings.Contains(r.err, "incomplete") {
			t.Errorf("the resumed journal still has a torn line:\n%s", r.err)
		}
	})

	t.Run("another plan", func(t *testing.T) {
		other := cliWriteFile(t, t.TempDir(), "other.toml", strings.Replace(planText, `name = "HX-4107 cmd test"`, `name = "HX-4107 another test"`, 1))
		want := regexp.MustCompile(`this journal belongs to plan \S*plan\.toml .*but the plan given is \S*other\.toml`)
		for _, verb := range []string{"resume", "report"} {
			r := cliExec(t, verb, journal, "--plan", other)
			cliWantCode(t, r, exitUsage, verb, journal, "--plan", other)
			if !want.MatchString(r.err) {
				t.Errorf("%s: stderr does not match %s:\n%s", verb, want, r.err)
			}
		}
	})

	t.Run("plan moved", func(t *testing.T) {
		moved := plan + ".moved"
		if err := os.Rename(plan, moved); err != nil {
			t.Fatal(err)
		}
		// The run folder holds its own copy of the plan: report needs
		// nothing else.
		r := cliExec(t, "report", journal, "--out", filepath.Join(dir, "moved"))
		cliWantCode(t, r, exitOK, "report", journal)
		// A bare journal, away from its run folder, needs the plan.
		bare := filepath.Join(t.TempDir(), "bare.jsonl")
		if err := os.WriteFile(bare, cliMust(os.ReadFile(journal)), 0o644); err != nil {
			t.Fatal(err)
		}
		r = cliExec(t, "report", bare, "--out", filepath.Join(dir, "bare"))
		cliWantCode(t, r, exitUsage, "report", bare)
		if !strings.Contains(r.err, "give its path with --plan") {
			t.Errorf("no hint to give --plan:\n%s", r.err)
		}
		r = cliExec(t, "report", journal, "--plan", moved, "--out", filepath.Join(dir, "moved"))
		cliWantCode(t, r, exitOK, "report", journal, "--plan", moved)
	})
}

func cliMust[T any](v T, err error) T {
	if err != nil {
		panic(err)
	}
	return v
}

// A run killed (SIGKILL) after its journal ended complete, while the
// workbook was being written: resume measures nothing again and writes
// the workbook and exports from the journal. The kill comes as soon as the
// journal's end record is seen; whatever output the child managed to
// write before it is removed, and a half-written temporary workbook is
// left as a kill leaves it, so the folder is the one a kill during the
// workbook write leaves whatever the timing.
func TestResumeAfterKillDuringWorkbookWrite(t *testing.T) {
	bin := cliBinary(t)
	b := cliStartSim(t, "")
	dir := t.TempDir()
	planText := b.BenchSection() + strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0")
	cliWriteFile(t, dir, "plan.toml", planText)
	child := exec.Command(bin, "run", "plan.toml", "--out", "killed")
	child.Dir = dir
	var childErr bytes.Buffer
	child.Stderr = &childErr
	if err := child.Start(); err != nil {
		t.Fatal(err)
	}
	waited := make(chan error, 1)
	go func() { waited <- child.Wait() }()
	out := filepath.Join(dir, "killed")
	jp := filepath.Join(out, "journal.jsonl")
	deadline := time.After(60 * time.Second)
poll:
	for {
		select {
		case err := <-waited:
			t.Logf("the run ended (%v) before the kill; its outputs are removed below", err)
			break poll
		case <-deadline:
			_ = child.Process.Kill()
			t.Fatalf("no end record after 60 s:\n%s", childErr.String())
		case <-time.After(time.Millisecond):
			if cliCount(t, jp, "end") > 0 {
				_ = child.Process.Kill()
				<-waited
				break poll
			}
		}
	}
	c, err := journal.ReadFile(jp)
	if err != nil {
		t.Fatal(err)
	}
	if c.End == nil || c.End.Status != journal.EndComplete {
		t.Fatalf("journal end %+v, want complete", c.End)
	}
	for _, f := range runOutputs {
		os.Remove(filepath.Join(out, f))
	}
	stale := filepath.Join(out, ".nullbench-4711.xlsx")
	if err := os.WriteFile(stale, []byte("PK\x03\x04 half a zip"), 0o600); err != nil {
		t.Fatal(err)
	}
	// Left by a kill some time ago (report.RemoveStaleTemps leaves a
	// temporary file younger than a minute to a writer still at work).
	old := time.Now().Add(-2 * time.Minute)
	if err := os.Chtimes(stale, old, old); err != nil {
		t.Fatal(err)
	}
	readings := len(c.Readings)

	r := cliExec(t, "resume", out)
	cliWantCode(t, r, exitOK, "resume", out)
	for _, want := range []string{"the run already ended complete; nothing to measure", "Writing the workbook and exports from the journal"} {
		if !strings.Contains(r.err, want) {
			t.Errorf("resume does not say %q:\n%s", want, r.err)
		}
	}
	for _, f := range runOutputs {
		if st, err := os.Stat(filepath.Join(out, f)); err != nil || (st.Size() == 0 && f != "problems.jsonl") {
			t.Errorf("%s missing or empty after resume: %v", f, err)
		}
	}
	fx, err := excelize.OpenFile(filepath.Join(out, "campaign.xlsx"))
	if err != nil {
		t.Fatalf("the workbook resume wrote does not open: %v", err)
	}
	defer fx.Close()
	rows, err := fx.GetRows("Readings")
	if err != nil || len(rows) < readings+1 {
		t.Errorf("Readings sheet: %d rows (%v), want at least %d", len(rows), err, readings+1)
	}
	if _, err := os.Stat(stale); !os.IsNotExist(err) {
		t.Errorf("the half-written temporary workbook is still there: %v", err)
	}
	// Nothing measured again: the journal is as the run left it.
	if got := cliCount(t, jp, "reading"); got != readings {
		t.Errorf("%d readings after resume, want %d", got, readings)
	}
	// And the folder is a sealed run again: report from it alone works.
	r = cliExec(t, "report", out)
	cliWantCode(t, r, exitOK, "report", out)
}
