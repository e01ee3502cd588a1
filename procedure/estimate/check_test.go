package estimate

import (
	"bytes"
	"errors"
	"flag"
	"io"
	"math"
	"os"
	"path/filepath"
	"testing"

	"nullbench/procedure/plan"
)

var updateGolden = flag.Bool("update", false, "rewrite the golden files in testdata/")

const examplePlanDir = "../../testdata/plans"

func loadExamplePlan(t testing.TB, name string) *plan.Plan {
	t.Helper()
	p, err := plan.Load(filepath.Join(examplePlanDir, name+".toml"))
	if err != nil {
		t.Fatalf("load %s: %v", name, err)
	}
	return p
}

// TestWriteCheckGolden compares the `check` output of each example plan
// with its golden file: with the forecast of the built-in figures
// (testdata/check_<plan>.golden) and, for the plan alone without timing
// or noise figures, the step table writeCheck prints with no forecast
// (testdata/plan_only/check_<plan>.golden). Run with -update to rewrite
// them after an intended change, and read the diff.
func TestWriteCheckGolden(t *testing.T) {
	writers := []struct {
		dir   string
		write func(w io.Writer, p *plan.Plan) error
	}{
		{"testdata", func(w io.Writer, p *plan.Plan) error { return WriteCheck(w, p, DefaultFigures()) }},
		{filepath.Join("testdata", "plan_only"), func(w io.Writer, p *plan.Plan) error { return writeCheck(w, p, nil) }},
	}
	for _, wr := range writers {
		for _, name := range []string{"lot", "noise_gain", "board", "unsafe_overspan", "unsafe_hazardous"} {
			t.Run(filepath.Join(wr.dir, name), func(t *testing.T) {
				p := loadExamplePlan(t, name)
				var buf bytes.Buffer
				if err := wr.write(&buf, p); err != nil {
					t.Fatal(err)
				}
				golden := filepath.Join(wr.dir, "check_"+name+".golden")
				if *updateGolden {
					if err := os.MkdirAll(wr.dir, 0o755); err != nil {
						t.Fatal(err)
					}
					if err := os.WriteFile(golden, buf.Bytes(), 0o644); err != nil {
						t.Fatal(err)
					}
					return
				}
				want, err := os.ReadFile(golden)
				if err != nil {
					t.Fatalf("%v (run with -update to create it)", err)
				}
				if !bytes.Equal(buf.Bytes(), want) {
					t.Errorf("check output differs from %s (run with -update and review the diff):\n%s", golden, buf.String())
				}
			})
		}
	}
}

// TestTimelineBoardByHand works one point of the board plan out by hand
// with the built-in figures on a virtual clock (exchanges free): the
// first point of board_cmrr is the centre level, reached without a ramp;
// dwell 1 s, then the settling check's two triggers of 5 readings at
// 1 NPLC (5 × 20 ms = 0.1 s each) started 1 s apart, then the measuring
// trigger: 1 + 1 + 0.1 + 0.1 = 2.2 s; plus the expected further
// comparisons of the settling check, each 1 s: with the point noise σ =
// 13.5 µV (5 readings at 1 NPLC on 10 V: √((3e-6·10)²/5 + (1.5e-7·10)²)
// = 13.5 µV) two means differ by more than settle_volts = 50 µV with
// q = erfc(50/(2·13.5)) = 0.00882 (erfc from Abramowitz & Stegun
// 7.1.2), so q/(1 − q) = 0.00890 s more: 2.2089 s. Every later point
// adds its ramp steps, at least the 50 ms ramp dwell each.
func TestTimelineBoardByHand(t *testing.T) {
	p := loadExamplePlan(t, "board")
	p.Tests[0].Repeats = 3
	f := DefaultFigures()
	tl := f.Timeline(p)
	var first []TimedPoint
	for _, tp := range tl.Points {
		if tp.Test == 0 && tp.Key.Unit == p.Units[0].ID {
			first = append(first, tp)
		}
	}
	if len(first) != 3*20 {
		t.Fatalf("%d board_cmrr points for one unit, want 60", len(first))
	}
	if math.Abs(first[0].Seconds-2.2089) > 1e-4 {
		t.Errorf("first point %g s, want 2.2089", first[0].Seconds)
	}
	ramped := 0
	for _, tp := range first[1:] {
		switch {
		case tp.Seconds < 2.2-1e-9:
			t.Errorf("point %+v: %g s, want at least 2.2 s", tp.Key, tp.Seconds)
		case tp.Seconds >= 2.2+0.05-1e-9:
			ramped++
		}
	}
	if ramped < 40 {
		t.Errorf("%d points with a ramp step, want most of the 59 after the first (a zigzag returns to the centre)", ramped)
	}
	if tl.ChamberSeconds != 0 {
		t.Errorf("no temperature plan, chamber %g s", tl.ChamberSeconds)
	}
	last := tl.Points[len(tl.Points)-1]
	if !(tl.TotalSeconds > last.EndsAt) {
		t.Errorf("total %g s does not include the power-down after the last point (ends %g s)", tl.TotalSeconds, last.EndsAt)
	}
}

type failingWriter struct{ n int }

func (w *failingWriter) Write(b []byte) (int, error) {
	if w.n <= 0 {
		return 0, errors.New("disk full")
	}
	w.n--
	return len(b), nil
}

func TestWriteCheckReportsWriteErrors(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	for _, n := range []int{0, 3, 20, 60} {
		if err := WriteCheck(&failingWriter{n: n}, p, DefaultFigures()); err == nil {
			t.Errorf("write error after %d writes not reported", n)
		}
	}
}

// TestTimelineCountsTimerLateness works the board plan's first point out
// by hand on a simulated bench whose timer rounds every wait up to whole
// granules of WaitGranularitySeconds = 1 s of bench time and wakes
// WaitOverrunSeconds = 0.1 s late (a host timer that rounds waits up to
// whole milliseconds and wakes 0.1 ms late, at time_scale 1000): the
// dwell 1 s → 1.1 s; each trigger's integration of 0.1 s → 1.1 s; the
// settling interval is used up by the first trigger (no wait); so 1.1 +
// 1.1 + 1.1 + 1.1 = 4.4 s, plus the expected further comparisons
// (0.00890, see TestTimelineBoardByHand) of 1.1 s each: 4.4098 s.
func TestTimelineCountsTimerLateness(t *testing.T) {
	p := loadExamplePlan(t, "board")
	f := DefaultFigures()
	f.WaitGranularitySeconds, f.WaitOverrunSeconds = 1, 0.1
	tl := f.Timeline(p)
	if got := tl.Points[0].Seconds; math.Abs(got-4.4098) > 1e-4 {
		t.Errorf("first point %.5f s, want 4.4098 s", got)
	}
	for _, c := range []struct{ d, want float64 }{{0, 0}, {-1, 0}, {0.5, 1.1}, {0.8, 1.1}, {1, 1.1}, {1.2, 2.1}, {10, 10.1}} {
		if got := f.wait(c.d); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("wait(%g) = %g, want %g", c.d, got, c.want)
		}
	}
	// Without a granularity a wait only wakes late.
	f.WaitGranularitySeconds = 0
	if got := f.wait(0.5); math.Abs(got-0.6) > 1e-12 {
		t.Errorf("wait(0.5) without granularity = %g, want 0.6", got)
	}
}

// TestTimelineMeterWithoutCount works the board plan's first point out by
// hand, as in TestTimelineCountsTimerLateness (waits rounded up to whole
// seconds and 0.1 s late), for a meter that takes one reading per
// trigger: each of the point's three takes of 5 readings is 5 triggers,
// each integrating 20 ms → 1.1 s, so 5.5 s a take: dwell 1.1 + 3 × 5.5 =
// 17.6 s, plus the expected further comparisons (0.00890,
// TestTimelineBoardByHand) of 5.5 s each: 17.6490 s. With an init and a sync query per trigger and
// exchanges of 10 ms (set: 20 ms with the error check), each trigger costs
// 2 × 10 + 20 = 40 ms more: 15 triggers and 0.00890 × 5 more, 0.6018 s.
func TestTimelineMeterWithoutCount(t *testing.T) {
	p := loadExamplePlan(t, "board")
	f := DefaultFigures()
	f.WaitGranularitySeconds, f.WaitOverrunSeconds = 1, 0.1
	f.MeterOnePerTrigger = true
	if got := f.Timeline(p).Points[0].Seconds; math.Abs(got-17.6490) > 1e-3 {
		t.Errorf("first point %.5f s, want 17.6490 s", got)
	}
	f.MeterTriggerSets, f.MeterTriggerQueries = 1, 1
	f.Roles[plan.RoleMeter] = RoleFigures{SetSeconds: 0.02, QuerySeconds: 0.01}
	if got := f.Timeline(p).Points[0].Seconds; math.Abs(got-(17.6490+0.6018)) > 1e-3 {
		t.Errorf("first point with init and sync %.5f s, want %.4f s", got, 17.6490+0.6018)
	}
}
