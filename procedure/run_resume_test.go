package procedure

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"testing"
	"time"

	"nullbench/procedure/fault"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// resumePlan: two chamber temperatures, two units on the switch, cmrr
// (3 levels, zigzag: 6 points) once and psrr_pos (6 points) twice:
// 2·2·(6 + 2·6) = 72 points.
func resumePlan() *plan.Plan {
	p := withChamber(testPlan(), 25, 45)
	p.Tests = p.Tests[:2]
	p.Tests[0].Levels = []float64{-5, 0, 5}
	p.Tests[1].Repeats = 2
	return p
}

func header(p *plan.Plan) journal.Header {
	return journal.Header{PlanHash: p.Hash, PlanPath: "resume-test.toml", ToolVersion: "test", Started: time.Now(), TimeScale: 1}
}

// journalKeys reads a journal file and returns its reading keys (failing
// on a duplicate) and its contents.
func journalKeys(t *testing.T, path string) (map[plan.WorkKey]bool, *journal.Contents) {
	t.Helper()
	c, err := journal.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return keySet(t, c.Readings), c
}

func sameKeys(t *testing.T, what string, got, want map[plan.WorkKey]bool) {
	t.Helper()
	if len(got) != len(want) {
		t.Errorf("%s: %d points, want %d", what, len(got), len(want))
	}
	for k := range want {
		if !got[k] {
			t.Errorf("%s: point %+v missing", what, k)
			return
		}
	}
	for k := range got {
		if !want[k] {
			t.Errorf("%s: point %+v not in the uninterrupted run", what, k)
			return
		}
	}
}

// uninterrupted runs the plan once with a journal and returns its keys.
func uninterrupted(t *testing.T, p *plan.Plan, dir string) (map[plan.WorkKey]bool, string) {
	t.Helper()
	path := filepath.Join(dir, "reference.jsonl")
	w, err := journal.Open(path, header(p))
	if err != nil {
		t.Fatal(err)
	}
	fb := newFakeBench(p)
	// Every reading is in the journal, fsynced, before the next point: at
	// the k-th averaging the file holds k-1 readings.
	nread, flushErr := 0, error(nil)
	var spot measurementSpotter
	fb.onCall = func(c fakeCall) {
		if !spot.measurement(c) || flushErr != nil {
			return
		}
		nread++
		f, err := journal.ReadFile(path)
		if err != nil {
			flushErr = err
		} else if len(f.Readings) != nread-1 {
			flushErr = fmt.Errorf("at averaging %d the journal holds %d readings", nread, len(f.Readings))
		}
	}
	out, err := runFake(context.Background(), t, p, fb, RunOptions{Journal: w})
	w.Close()
	if err != nil {
		t.Fatal(err)
	}
	if flushErr != nil {
		t.Fatal(flushErr)
	}
	noViolations(t, fb)
	keys := keySet(t, out.Readings)
	jk, c := journalKeys(t, path)
	sameKeys(t, "reference journal", jk, keys)
	if c.End == nil || c.End.Status != journal.EndComplete {
		t.Errorf("reference journal ends %+v", c.End)
	}
	if len(keys) != out.Total || out.Total != 72 {
		t.Fatalf("reference run: %d points of %d", len(keys), out.Total)
	}
	return keys, path
}

// resume continues the journal at path on a fresh (unpowered) bench.
func resume(t *testing.T, p *plan.Plan, path string, prog *recProgress) (*Outcome, *fakeBench) {
	t.Helper()
	w, c, err := journal.Resume(path, p, header(p))
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	fb := newFakeBench(p)
	opt := RunOptions{Journal: w, Resume: c}
	if prog != nil {
		opt.Progress = prog
	}
	out, err := runFake(context.Background(), t, p, fb, opt)
	if err != nil {
		t.Fatalf("resumed run: %v", err)
	}
	noViolations(t, fb)
	if out.Recovered != len(c.Readings) || !out.Complete {
		t.Errorf("recovered %d of %d journal readings, complete %v", out.Recovered, len(c.Readings), out.Complete)
	}
	if prog != nil && (prog.done != len(c.Readings) || len(prog.points) != out.Total-len(c.Readings)) {
		t.Errorf("progress began with %d done and saw %d points; journal had %d of %d", prog.done, len(prog.points), len(c.Readings), out.Total)
	}
	return out, fb
}

func TestRunResumeAfterAbortGivesTheSamePoints(t *testing.T) {
	p := resumePlan()
	dir := t.TempDir()
	want, _ := uninterrupted(t, p, dir)
	// Stop at the k-th averaging: the first point, inside the first pass,
	// the second test, its second repeat, the second unit, the second
	// temperature, the last point; by an instrument fault, or by Ctrl-C.
	type stop struct {
		k   int
		how string
	}
	stops := []stop{{1, "fault"}, {4, "cancel"}, {9, "fault"}, {15, "fault"}, {19, "cancel"}, {37, "fault"}, {40, "cancel"}, {72, "fault"}}
	for _, st := range stops {
		k, how := st.k, st.how
		t.Run(fmt.Sprintf("%s at point %d", how, k), func(t *testing.T) {
			path := filepath.Join(dir, fmt.Sprintf("%s-%d.jsonl", how, k))
			w, err := journal.Open(path, header(p))
			if err != nil {
				t.Fatal(err)
			}
			fb := newFakeBench(p)
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			if how == "fault" {
				fb.fault = failNthMeterRead(true, k, errLost, true)
			} else {
				n := 0
				var spot measurementSpotter
				fb.onCall = func(c fakeCall) {
					if spot.measurement(c) {
						if n++; n == k {
							cancel() // Ctrl-C during the averaging: it is not journalled
						}
					}
				}
			}
			out, err := runFake(ctx, t, p, fb, RunOptions{Journal: w})
			w.Close()
			var re *fault.RunError
			if !errors.As(err, &re) {
				t.Fatalf("first run: %v", err)
			}
			if how == "fault" && out.Measured != k-1 {
				t.Fatalf("first run measured %d points before the fault at %d", out.Measured, k)
			}
			_, c := journalKeys(t, path)
			wantEnd := journal.EndAborted
			if how == "cancel" {
				wantEnd = journal.EndInterrupted
			}
			if c.End == nil || c.End.Status != wantEnd {
				t.Errorf("journal ends %+v, want %s", c.End, wantEnd)
			}
			if !hasEvent(c, journal.EventSafeState) || !hasEvent(c, journal.EventAbort) {
				t.Errorf("journal lacks the abort or safe-state event: %+v", c.Events)
			}
			out2, _ := resume(t, p, path, &recProgress{})
			sameKeys(t, "resumed outcome", keySet(t, out2.Readings), want)
			// Readings carry the session that took them: 0 before the
			// break, 1 after the first resume.
			for i, r := range out2.Readings {
				if wantS := map[bool]int{true: 0, false: 1}[i < out2.Recovered]; r.Session != wantS {
					t.Errorf("reading %d (recovered %d): session %d, want %d", i, out2.Recovered, r.Session, wantS)
					break
				}
			}
			jk, _ := journalKeys(t, path)
			sameKeys(t, "resumed journal", jk, want)
		})
	}
}

// TestRunResumeAfterCrash cuts the uninterrupted journal after n complete
// lines and half of the next, as a run killed mid-write leaves it.
func TestRunResumeAfterCrash(t *testing.T) {
	p := resumePlan()
	dir := t.TempDir()
	want, ref := uninterrupted(t, p, dir)
	data, err := os.ReadFile(ref)
	if err != nil {
		t.Fatal(err)
	}
	lines := bytes.SplitAfter(data, []byte("\n"))
	for _, n := range []int{2, 40, len(lines) / 2, len(lines) - 3} {
		t.Run(fmt.Sprintf("after line %d", n), func(t *testing.T) {
			cut := bytes.Join(lines[:n], nil)
			cut = append(cut, lines[n][:len(lines[n])/2]...)
			path := filepath.Join(dir, fmt.Sprintf("crash-%d.jsonl", n))
			if err := os.WriteFile(path, cut, 0o644); err != nil {
				t.Fatal(err)
			}
			out, _ := resume(t, p, path, nil)
			sameKeys(t, "resumed outcome", keySet(t, out.Readings), want)
			jk, _ := journalKeys(t, path)
			sameKeys(t, "resumed journal", jk, want)
		})
	}
}

func TestRunResumeRefusesAnotherPlan(t *testing.T) {
	p := resumePlan()
	q := resumePlan()
	q.Hash = "another-plan"
	fb := newFakeBench(q)
	_, err := runFake(context.Background(), t, q, fb, RunOptions{Resume: &journal.Contents{Header: header(p)}})
	if err == nil || len(fb.calls) != 0 {
		t.Fatalf("err %v after %d calls", err, len(fb.calls))
	}
}

func TestRunJournalEvents(t *testing.T) {
	p := resumePlan()
	path := filepath.Join(t.TempDir(), "events.jsonl")
	w, err := journal.Open(path, header(p))
	if err != nil {
		t.Fatal(err)
	}
	fb := newFakeBench(p)
	if _, err := runFake(context.Background(), t, p, fb, RunOptions{Journal: w}); err != nil {
		t.Fatal(err)
	}
	w.Close()
	_, c := journalKeys(t, path)
	count := map[string]int{}
	for _, e := range c.Events {
		count[e.Type]++
	}
	// 2 temperatures × 2 units: 4 power-ups, power-downs and unit swaps;
	// 2 soaks; set points reached for 2 temperatures plus the return to
	// ambient.
	for typ, n := range map[string]int{journal.EventPowerUp: 4, journal.EventPowerDown: 4, journal.EventUnitSwap: 4, journal.EventSoakDone: 2, journal.EventTemperatureSet: 3} {
		if count[typ] != n {
			t.Errorf("%d %s events, want %d (all: %v)", count[typ], typ, n, count)
		}
	}
	if len(c.Identities) != 1 || c.Identities[0].IDN != "FAKE,BENCH,0,1" {
		t.Errorf("identities %+v", c.Identities)
	}
	// pass-done markers: 2 temps × 2 units × (1 + 2 repeats); test-done:
	// 2 temps × 2 units × 2 tests.
	if len(c.Passes) != 12 || len(c.Tests) != 8 {
		t.Errorf("%d pass-done and %d test-done markers, want 12 and 8", len(c.Passes), len(c.Tests))
	}
}

func hasEvent(c *journal.Contents, typ string) bool {
	for _, e := range c.Events {
		if e.Type == typ {
			return true
		}
	}
	return false
}

// A journal that stops accepting writes stops the run at the next reading,
// with the bench brought down.
func TestRunStopsWhenTheJournalFails(t *testing.T) {
	p := testPlan()
	path := filepath.Join(t.TempDir(), "j.jsonl")
	w, err := journal.Open(path, header(p))
	if err != nil {
		t.Fatal(err)
	}
	fb := newFakeBench(p)
	n := 0
	var spot measurementSpotter
	fb.onCall = func(c fakeCall) {
		if spot.measurement(c) {
			if n++; n == 5 {
				w.Close() // the disk goes away
			}
		}
	}
	out, err := runFake(context.Background(), t, p, fb, RunOptions{Journal: w})
	var re *fault.RunError
	if !errors.As(err, &re) || re.Stage != stageJournal || out.Measured != 4 {
		t.Fatalf("err %v, measured %d", err, out.Measured)
	}
	checkSafeState(t, fb, p, lastReadCall(fb), "down")
}
