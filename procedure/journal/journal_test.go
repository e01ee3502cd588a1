package journal

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"sync"
	"testing"
	"time"

	"nullbench/procedure/plan"
)

// journalTestTime is a fixed clock for deterministic journals.
var journalTestTime = time.Date(2025, 3, 14, 9, 26, 53, 0, time.UTC)

func testHeader(p *plan.Plan) Header {
	return Header{PlanHash: p.Hash, PlanPath: p.Source, ToolVersion: "0.1.0-test", Started: journalTestTime, TimeScale: p.Bench.TimeScale}
}

func testReading(unit, test string, temp, repeat, step int, part string) Reading {
	return Reading{
		Time: journalTestTime.Add(time.Duration(step) * time.Second), BenchSeconds: float64(step) * 2.21,
		Unit: unit, Test: test, Part: part, TemperatureC: 25.1, TempIndex: temp, Repeat: repeat, Step: step,
		SetVolts: 5, ReadVolts: 4.9998, ReadBack: true, MeterVolts: 1.234e-3, MeterSDVolts: 2e-6, N: 5,
		SettleSeconds: 2.3, Flags: []string{FlagSettleTimeout},
	}
}

// writeTestJournal writes a journal with one of every record kind and
// returns its path and the records written.
func writeTestJournal(t *testing.T, p *plan.Plan) (string, []Reading) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "run.jsonl")
	w, err := Open(path, testHeader(p))
	if err != nil {
		t.Fatal(err)
	}
	w.Now = func() time.Time { return journalTestTime }
	var rs []Reading
	must := func(err error) {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
	}
	must(w.Identity(Identity{Instrument: "dmm", Roles: []string{plan.RoleMeter}, Address: "tcp://127.0.0.1:5025", IDN: "NULLBENCH-SIM,DMM-65,SIM0001,1.0"}))
	must(w.Event(Event{Type: EventPowerUp}))
	for step := 0; step < 10; step++ {
		r := testReading("U01", plan.TestCMRR, 0, 0, step, "")
		rs = append(rs, r)
		must(w.Reading(r))
	}
	must(w.PassDone(plan.WorkKey{TempIndex: 0, Unit: "U01", Test: plan.TestCMRR, Repeat: 0, Step: 9}))
	must(w.TestDone(plan.WorkKey{TempIndex: 0, Unit: "U01", Test: plan.TestCMRR}))
	for step := 0; step < 3; step++ {
		r := testReading("U01", plan.TestPSRRPos, 0, 0, step, "")
		rs = append(rs, r)
		must(w.Reading(r))
	}
	must(w.Event(Event{Type: EventAbort, Reason: "meter time-out", Unit: "U01"}))
	must(w.End(End{Status: EndAborted, Reason: "meter time-out"}))
	must(w.Close())
	must(w.Close()) // a second Close is harmless
	if err := w.Reading(rs[0]); err == nil {
		t.Error("write after Close accepted")
	}
	return path, rs
}

func TestJournalRoundTrip(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	path, rs := writeTestJournal(t, p)
	c, err := ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if c.Header != testHeader(p) {
		t.Errorf("header %+v", c.Header)
	}
	if !reflect.DeepEqual(c.Readings, rs) {
		t.Errorf("readings differ:\n got %+v\nwant %+v", c.Readings, rs)
	}
	if len(c.Identities) != 1 || c.Identities[0].IDN != "NULLBENCH-SIM,DMM-65,SIM0001,1.0" {
		t.Errorf("identities %+v", c.Identities)
	}
	if len(c.Events) != 2 || c.Events[1].Reason != "meter time-out" {
		t.Errorf("events %+v", c.Events)
	}
	if c.End == nil || c.End.Status != EndAborted {
		t.Errorf("end %+v", c.End)
	}
	if c.Truncated || c.Records != 1+1+1+10+2+3+1+1 {
		t.Errorf("records %d truncated %v", c.Records, c.Truncated)
	}
	info, _ := os.Stat(path)
	if c.ValidBytes != info.Size() {
		t.Errorf("valid bytes %d, file %d", c.ValidBytes, info.Size())
	}
	// Every line is one JSON object ending in a newline.
	data, _ := os.ReadFile(path)
	lines := strings.Split(strings.TrimSuffix(string(data), "\n"), "\n")
	if len(lines) != c.Records || !strings.HasPrefix(lines[0], `{"kind":"start"`) {
		t.Errorf("%d lines, first %q", len(lines), lines[0])
	}
	if err := CheckPlanMatch(p, c); err != nil {
		t.Errorf("same plan refused: %v", err)
	}
}

func TestJournalDone(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	path, _ := writeTestJournal(t, p)
	c, err := ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	done := c.Done()
	if done.Points() != 13 {
		t.Errorf("points %d, want 13", done.Points())
	}
	steps := plan.TestSteps(p, 1) // psrr_pos
	for i, s := range steps {
		k := s.Key(0, "U01", 0)
		if got, want := done.Has(k), i < 3; got != want {
			t.Errorf("psrr_pos step %d done = %v, want %v", i, got, want)
		}
	}
	if done.Has(plan.WorkKey{TempIndex: 1, Unit: "U01", Test: plan.TestCMRR, Step: 0}) {
		t.Error("point at another temperature counted done")
	}
	if !done.PassDone(plan.WorkKey{Unit: "U01", Test: plan.TestCMRR, Step: 4}) || done.PassDone(plan.WorkKey{Unit: "U01", Test: plan.TestPSRRPos}) {
		t.Error("PassDone wrong")
	}
	if !done.TestDone(plan.WorkKey{Unit: "U01", Test: plan.TestCMRR, Repeat: 3}) || done.TestDone(plan.WorkKey{Unit: "U02", Test: plan.TestCMRR}) {
		t.Error("TestDone wrong")
	}
}

// TestJournalTornLastLine simulates a run killed in the middle of a write:
// the torn line is skipped and reported, and Resume cuts it off
// before appending.
func TestJournalTornLastLine(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	path, _ := writeTestJournal(t, p)
	data, _ := os.ReadFile(path)
	// Drop the end record and half of the abort event's line.
	lines := strings.SplitAfter(string(data), "\n")
	keep := strings.Join(lines[:len(lines)-3], "")
	torn := lines[len(lines)-3][:25]
	if err := os.WriteFile(path, []byte(keep+torn), 0o644); err != nil {
		t.Fatal(err)
	}
	c, err := ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	wantLine := len(lines) - 3 + 1 // the torn line follows the len(lines)-3 kept ones
	if !c.Truncated || c.TruncatedLine != wantLine || c.ValidBytes != int64(len(keep)) {
		t.Errorf("truncated %v at line %d (want %d), valid %d (want %d)", c.Truncated, c.TruncatedLine, wantLine, c.ValidBytes, len(keep))
	}
	if c.End != nil || len(c.Readings) != 13 {
		t.Errorf("end %+v readings %d", c.End, len(c.Readings))
	}

	w, c2, err := Resume(path, p, testHeader(p))
	if err != nil {
		t.Fatal(err)
	}
	if c2.Done().Points() != 13 {
		t.Errorf("resume sees %d points", c2.Done().Points())
	}
	r := testReading("U01", plan.TestPSRRPos, 0, 0, 3, "")
	if err := w.Reading(r); err != nil {
		t.Fatal(err)
	}
	w.Close()
	c3, err := ReadFile(path)
	if err != nil {
		t.Fatalf("after resume: %v", err)
	}
	if c3.Truncated || len(c3.Resumes) != 1 || len(c3.Readings) != 14 {
		t.Errorf("after resume: truncated %v resumes %d readings %d", c3.Truncated, len(c3.Resumes), len(c3.Readings))
	}
}

func TestResumeJournalRefusals(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	other := loadJournalPlan(t, "board")
	path, _ := writeTestJournal(t, p)
	_, _, err := Resume(path, other, testHeader(other))
	if err == nil || !strings.Contains(err.Error(), "belongs to plan ../../testdata/plans/lot.toml") ||
		!strings.Contains(err.Error(), p.Hash[:12]) || !strings.Contains(err.Error(), "board.toml") {
		t.Errorf("other plan: %v", err)
	}
	// A complete run is not resumed.
	dir := t.TempDir()
	done := filepath.Join(dir, "done.jsonl")
	w, err := Open(done, testHeader(p))
	if err != nil {
		t.Fatal(err)
	}
	w.End(End{Status: EndComplete})
	w.Close()
	if _, _, err := Resume(done, p, testHeader(p)); err == nil || !strings.Contains(err.Error(), "ended complete") || !strings.Contains(err.Error(), "nullbench report "+done) {
		t.Errorf("complete run: %v", err)
	}
	// Open never overwrites.
	if _, err := Open(done, testHeader(p)); err == nil || !strings.Contains(err.Error(), "already exists") {
		t.Errorf("overwrite: %v", err)
	}
	if _, _, err := Resume(filepath.Join(dir, "missing.jsonl"), p, testHeader(p)); err == nil {
		t.Error("missing journal resumed")
	}
}

func TestReadJournalRefusesGarbage(t *testing.T) {
	start := `{"kind":"start","time":"2025-03-14T09:26:53Z","header":{"plan_hash":"ab","plan_path":"p.toml","tool_version":"x","started":"2025-03-14T09:26:53Z","time_scale":1}}`
	reading := `{"kind":"reading","time":"2025-03-14T09:26:53Z","reading":{"time":"2025-03-14T09:26:53Z","bench_s":0,"unit":"U01","test":"cmrr","temperature_c":25,"temp_index":0,"repeat":0,"step":0,"set_volts":0,"read_volts":0,"read_back":false,"meter_volts":0,"meter_sd_volts":0,"n":5,"settle_s":0}}`
	end := `{"kind":"end","time":"2025-03-14T09:26:53Z","end":{"status":"aborted"}}`
	cases := []struct {
		name, data, want string
	}{
		{"empty", "", "empty journal"},
		{"only a torn line", start[:40], "no complete record"},
		{"not JSON in the middle", start + "\nhello\n" + reading + "\n", "line 2"},
		{"unknown field", start + "\n" + strings.Replace(reading, `"n":5`, `"n":5,"x":1`, 1) + "\n", "line 2"},
		{"unknown kind", start + "\n" + `{"kind":"note","time":"2025-03-14T09:26:53Z"}` + "\n", `line 2: unknown record kind "note"`},
		{"payload missing", start + "\n" + `{"kind":"reading","time":"2025-03-14T09:26:53Z"}` + "\n", "line 2: reading record without its reading payload"},
		{"wrong payload", start + "\n" + `{"kind":"end","time":"2025-03-14T09:26:53Z","end":{"status":"x"},"event":{"type":"abort","temp_index":0}}` + "\n", "line 2: end record carries a event payload"},
		{"first not start", reading + "\n", "line 1: a journal starts with a start record"},
		{"second start", start + "\n" + start + "\n", "line 2: a second start record"},
		{"record after end", start + "\n" + end + "\n" + reading + "\n", "line 3: reading record after the end record"},
		{"two objects on a line", start + "\n" + reading + reading + "\n", "line 2"},
		{"garbage before a good last line", start + "\n{{{\n" + reading + "\n", "line 2"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Read(strings.NewReader(c.data))
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("got %v, want an error containing %q", err, c.want)
			}
		})
	}
	// Blank lines are no records, not garbage; a torn last line is skipped.
	c, err := Read(strings.NewReader(start + "\n\n" + reading + "\n" + reading[:30]))
	if err != nil || len(c.Readings) != 1 || !c.Truncated || c.TruncatedLine != 4 {
		t.Errorf("blank line and torn tail: %+v %v", c, err)
	}
}

func TestJournalConcurrentWriters(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	path := filepath.Join(t.TempDir(), "c.jsonl")
	w, err := Open(path, testHeader(p))
	if err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	for g := 0; g < 4; g++ {
		wg.Add(1)
		go func(g int) {
			defer wg.Done()
			for i := 0; i < 10; i++ {
				if err := w.Reading(testReading(fmt.Sprintf("U%02d", g), plan.TestCMRR, 0, 0, i, "")); err != nil {
					t.Error(err)
				}
			}
		}(g)
	}
	wg.Wait()
	w.Close()
	c, err := ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if c.Done().Points() != 40 {
		t.Errorf("%d points, want 40", c.Done().Points())
	}
}

func TestJournalWriterRefusesBadRecords(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	w, err := Open(filepath.Join(t.TempDir(), "b.jsonl"), testHeader(p))
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	if err := w.Event(Event{}); err == nil {
		t.Error("event without type accepted")
	}
	if err := w.Reading(Reading{Unit: "U01"}); err == nil {
		t.Error("reading without test accepted")
	}
	r := testReading("U01", plan.TestCMRR, 0, 0, 0, "")
	r.MeterVolts = nanForTest()
	if err := w.Reading(r); err == nil || !strings.Contains(err.Error(), "encode") {
		t.Errorf("NaN reading: %v", err)
	}
	if _, err := Open(filepath.Join(t.TempDir(), "h.jsonl"), Header{}); err == nil {
		t.Error("start without plan hash accepted")
	}
}

func nanForTest() float64 {
	zero := 0.0
	return zero / zero
}

// TestJournalSurvivesSIGKILL runs a child process (this test binary) that
// appends readings as fast as it can, kills it with SIGKILL mid-run, and
// reads the journal: every record but possibly the last must be there, in
// order, with no gap.
func TestJournalSurvivesSIGKILL(t *testing.T) {
	if os.Getenv("NULLBENCH_JOURNAL_CHILD") != "" {
		t.Skip("running as the child")
	}
	if testing.Short() {
		t.Skip("spawns a process")
	}
	path := filepath.Join(t.TempDir(), "killed.jsonl")
	cmd := exec.Command(os.Args[0], "-test.run=^TestJournalKillChild$")
	cmd.Env = append(os.Environ(), "NULLBENCH_JOURNAL_CHILD="+path)
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	// Wait (without a time assertion) until the child has written enough.
	deadline := time.Now().Add(60 * time.Second)
	for {
		data, _ := os.ReadFile(path)
		if bytes.Count(data, []byte("\n")) >= 200 {
			break
		}
		if time.Now().After(deadline) {
			cmd.Process.Kill()
			cmd.Wait()
			t.Fatal("the child wrote fewer than 200 records")
		}
		time.Sleep(5 * time.Millisecond)
	}
	if err := cmd.Process.Kill(); err != nil { // SIGKILL on Unix
		t.Fatal(err)
	}
	cmd.Wait()
	c, err := ReadFile(path)
	if err != nil {
		t.Fatalf("journal of a killed run: %v", err)
	}
	if len(c.Readings) < 199 {
		t.Fatalf("%d readings", len(c.Readings))
	}
	for i, r := range c.Readings {
		if r.Step != i {
			t.Fatalf("reading %d has step %d: a record was lost", i, r.Step)
		}
	}
	t.Logf("killed after %d complete records (torn last line: %v)", c.Records, c.Truncated)
}

// TestJournalKillChild is the child of TestJournalSurvivesSIGKILL; it does
// nothing in a normal test run.
func TestJournalKillChild(t *testing.T) {
	path := os.Getenv("NULLBENCH_JOURNAL_CHILD")
	if path == "" {
		t.Skip("only runs as the child of TestJournalSurvivesSIGKILL")
	}
	w, err := Open(path, Header{PlanHash: "child", PlanPath: "child.toml"})
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; ; i++ {
		r := testReading("U01", plan.TestCMRR, 0, 0, i, "")
		r.Flags = []string{strings.Repeat("x", 2000)} // long lines make a torn write more likely
		if err := w.Reading(r); err != nil {
			t.Fatal(err)
		}
	}
}

// FuzzReadJournal: the reader never panics; what it accepts is consistent
// (a start record first, ValidBytes within the input, and the complete
// part re-reads to the same records without a torn line).
func FuzzReadJournal(f *testing.F) {
	// The seed is encoded in memory: fuzz workers rerun this setup, and
	// fsyncs there would slow them to a crawl on a busy machine.
	p := &plan.Plan{Hash: "0123456789abcdef0123456789abcdef0123456789abcdef0123456789abcdef", Source: "plans/lot.toml"}
	h := testHeader(p)
	recs := []Record{
		{Kind: RecordStart, Header: &h},
		{Kind: RecordIdentity, Identity: &Identity{Instrument: "psu", Roles: []string{plan.RoleSupplyPos, plan.RoleSupplyNeg}, IDN: "NULLBENCH-SIM,PSU-2CH,SIM0002,1.0"}},
	}
	for i := 0; i < 3; i++ {
		r := testReading("U01", plan.TestCMRR, 0, 0, i, "")
		recs = append(recs, Record{Kind: RecordReading, Reading: &r})
	}
	b := testReading("B01", plan.TestBoardCMRR, 1, 2, 0, plan.PartDiff)
	recs = append(recs,
		Record{Kind: RecordReading, Reading: &b},
		Record{Kind: RecordPassDone, Work: &plan.WorkKey{Unit: "U01", Test: plan.TestCMRR}},
		Record{Kind: RecordACReading, AC: &ACReading{Unit: "U01", Test: plan.TestCMRR, FrequencyHz: 60, Record: ACStimulus,
			Channels: []ACChannelFit{{FrequencyHz: 60, A: 1, N: 2000, DOF: 1997}, {FrequencyHz: 60, B: 1e-3, N: 2000, DOF: 1997}}}},
		Record{Kind: RecordEvent, Event: &Event{Type: EventSafeState}},
		Record{Kind: RecordEnd, End: &End{Status: EndInterrupted}},
		Record{Kind: RecordResume, Header: &h},
	)
	var seed []byte
	for _, r := range recs {
		r.Time = journalTestTime
		line, err := json.Marshal(r)
		if err != nil {
			f.Fatal(err)
		}
		seed = append(append(seed, line...), '\n')
	}
	if _, err := Read(bytes.NewReader(seed)); err != nil {
		f.Fatalf("seed journal: %v", err)
	}
	f.Add(seed)
	f.Add(seed[:len(seed)-7])
	f.Add(seed[:len(seed)/2])
	f.Add([]byte("{}\n"))
	f.Add([]byte("\n\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		c, err := Read(bytes.NewReader(data))
		if err != nil {
			return
		}
		if c.Records < 1 || c.Header.PlanHash == "" {
			t.Fatalf("accepted without a start record: %+v", c)
		}
		if c.ValidBytes < 0 || c.ValidBytes > int64(len(data)) {
			t.Fatalf("ValidBytes %d of %d", c.ValidBytes, len(data))
		}
		if c.Truncated && c.TruncatedLine < 1 {
			t.Fatalf("truncated at line %d", c.TruncatedLine)
		}
		again, err := Read(bytes.NewReader(data[:c.ValidBytes]))
		if err != nil || again.Truncated || again.Records != c.Records {
			t.Fatalf("complete part re-reads differently: %v %+v", err, again)
		}
		_ = c.Done()
	})
}

// loadJournalPlan loads testdata/plans/<name>.toml (the cross-package
// example plans) and fails the test on any error.
func loadJournalPlan(t testing.TB, name string) *plan.Plan {
	t.Helper()
	p, err := plan.Load(filepath.Join("../../testdata/plans", name+".toml"))
	if err != nil {
		t.Fatalf("load %s: %v", name, err)
	}
	return p
}
