package procedure

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"testing"

	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// A unit skipped by option is journalled once, never switched in, and
// not counted as missing; a resume of that journal keeps it skipped.
func TestRunSkipUnitByOption(t *testing.T) {
	p := resumePlan() // 2 temperatures × 2 units × 18 points = 72
	path := filepath.Join(t.TempDir(), "skip.jsonl")
	w, err := journal.Open(path, header(p))
	if err != nil {
		t.Fatal(err)
	}
	fb := newFakeBench(p)
	out, err := runFake(context.Background(), t, p, fb, RunOptions{Journal: w, Skip: map[string]string{"U02": "part cracked"}})
	w.Close()
	if err != nil {
		t.Fatal(err)
	}
	if out.Total != 36 || len(out.Readings) != 36 {
		t.Fatalf("total %d, readings %d; want 36 (U01 only)", out.Total, len(out.Readings))
	}
	for _, c := range fb.callsSnapshot() {
		if c.Op == "close" && c.Ch == "102" {
			t.Fatalf("the skipped unit's channel was closed: %v", c)
		}
	}
	_, c := journalKeys(t, path)
	if got := c.Skipped(); len(got) != 1 || got["U02"] != "part cracked" {
		t.Fatalf("skipped %v", got)
	}
	n := 0
	for _, e := range c.Events {
		if e.Type == journal.EventUnitSkipped {
			n++
		}
	}
	if n != 1 {
		t.Errorf("%d unit-skipped events, want 1 (a skip holds for later temperatures)", n)
	}
	k := journal.CompletenessOf(p, c)
	if !k.Complete() || k.Planned != 36 {
		t.Errorf("completeness %+v, want 36 planned and none missing", k)
	}

	// Cut the journal after the skip and the first unit's first
	// temperature: the resumed run, without the option, keeps U02 skipped.
	lines := bytes.SplitAfter(must(os.ReadFile(path)), []byte("\n"))
	cut := 0
	for i, l := range lines {
		if bytes.Contains(l, []byte(`"unit-skipped"`)) {
			cut = i + 1
		}
	}
	if err := os.WriteFile(path, bytes.Join(lines[:cut], nil), 0o644); err != nil {
		t.Fatal(err)
	}
	out2, _ := resume(t, p, path, nil)
	if out2.Total != 36 {
		t.Errorf("resumed total %d, want 36", out2.Total)
	}
	_, c2 := journalKeys(t, path)
	if k := journal.CompletenessOf(p, c2); !k.Complete() {
		t.Errorf("resumed journal: %+v", k)
	}
	for _, r := range c2.Readings {
		if r.Unit == "U02" {
			t.Fatalf("skipped unit measured after resume: %+v", r)
		}
	}
}

// An operator at a hand-swap bench answers "skip socket empty".
func TestRunSkipUnitByOperator(t *testing.T) {
	p := testPlan()
	p.Tests = p.Tests[:1]
	p.Bench.Roles.Switch = plan.RoleBinding{}
	for i := range p.Units {
		p.Units[i].Channel = ""
	}
	fb := newFakeBench(p)
	op := &fakeOperator{fb: fb, skip: map[string]string{"U01": "socket empty"}}
	path := filepath.Join(t.TempDir(), "op.jsonl")
	w, err := journal.Open(path, header(p))
	if err != nil {
		t.Fatal(err)
	}
	out, err := runFake(context.Background(), t, p, fb, RunOptions{Journal: w, Operator: op})
	w.Close()
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range out.Readings {
		if r.Unit == "U01" {
			t.Fatal("skipped unit measured")
		}
	}
	_, c := journalKeys(t, path)
	if c.Skipped()["U01"] != "socket empty" {
		t.Fatalf("skips %v", c.Skipped())
	}
	if k := journal.CompletenessOf(p, c); !k.Complete() || k.Measured != len(out.Readings) {
		t.Errorf("completeness %+v with %d readings", k, len(out.Readings))
	}
}

func must[T any](v T, err error) T {
	if err != nil {
		panic(err)
	}
	return v
}
