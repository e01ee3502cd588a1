package plan

import (
	"bytes"
	"errors"
	"flag"
	"math"
	"os"
	"path/filepath"
	"testing"
)

var updateGolden = flag.Bool("update", false, "rewrite the golden files in testdata/")

// TestWriteCheckGolden compares the `check` step table of each example plan
// with testdata/check_<plan>.golden; run with -update to rewrite them after
// an intended change, and read the diff.
func TestWriteCheckGolden(t *testing.T) {
	for _, name := range []string{"lot", "noise_gain", "board", "unsafe_overspan", "unsafe_hazardous"} {
		t.Run(name, func(t *testing.T) {
			p := loadExamplePlan(t, name)
			var buf bytes.Buffer
			if err := WriteCheck(&buf, p); err != nil {
				t.Fatal(err)
			}
			golden := filepath.Join("testdata", "check_"+name+".golden")
			if *updateGolden {
				if err := os.MkdirAll("testdata", 0o755); err != nil {
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

// TestEstimateDurationLot works the lot plan's estimate out by hand:
// one point = dwell 2 s + (5 readings + 2 settle readings) × 1 NPLC / 50 Hz
// × 1.5 = 2 + 7 × 0.03 = 2.21 s for cmrr and aol, and 16 + 0.21 = 16.21 s
// for the three supply tests (dwell 16 s); a zigzag pass of 5 levels is
// 10 points, so a unit takes 2 × 22.1 + 3 × 162.1 = 530.5 s at a
// temperature; × 10 units × 3 temperatures = 15915 s. Chamber: 25 °C from
// ambient 25 °C (0 s) + 300 s soak; to -40 °C: 65 °C at 5 °C/min = 780 s +
// 300 s; to 85 °C: 125 °C = 1500 s + 300 s; 3180 s in all. Total 19095 s of
// bench time, 95.475 s of wall time at time_scale 200.
func TestEstimateDurationLot(t *testing.T) {
	e := EstimateDuration(loadExamplePlan(t, "lot"))
	near := func(name string, got, want float64) {
		t.Helper()
		if math.Abs(got-want) > 1e-9*math.Max(1, want) {
			t.Errorf("%s = %.6f, want %.6f", name, got, want)
		}
	}
	near("point", e.Tests[0].PassSeconds/float64(e.Tests[0].Points), 2.21)
	if e.Tests[0].Points != 10 {
		t.Errorf("points per pass %d, want 10", e.Tests[0].Points)
	}
	near("unit", e.UnitSeconds, 530.5)
	near("measure", e.MeasureSeconds, 15915)
	near("soak", e.SoakSeconds, 3180)
	near("total", e.TotalSeconds, 19095)
	near("wall", e.WallSeconds, 95.475)
	if e.Units != 10 || e.Temperatures != 3 {
		t.Errorf("units %d temperatures %d", e.Units, e.Temperatures)
	}
}

// TestEstimateDurationBoard: the board_cmrr test has two sweeps (cm and
// diff) of 5 levels, 20 points per pass; with dwell 1 s and 1 NPLC a point
// is 1 + 7 × 0.03 = 1.21 s; repeats multiply.
func TestEstimateDurationBoard(t *testing.T) {
	p := loadExamplePlan(t, "board")
	p.Tests[0].Repeats = 3
	e := EstimateDuration(p)
	if e.Tests[0].Points != 20 {
		t.Fatalf("points %d, want 20", e.Tests[0].Points)
	}
	if math.Abs(e.Tests[0].Seconds-3*20*1.21) > 1e-9 {
		t.Errorf("board_cmrr %g s, want %g", e.Tests[0].Seconds, 3*20*1.21)
	}
	if e.SoakSeconds != 0 || e.Temperatures != 1 {
		t.Errorf("no temperature plan: soak %g, temperatures %d", e.SoakSeconds, e.Temperatures)
	}
}

func TestStepTable(t *testing.T) {
	p := loadExamplePlan(t, "board")
	steps := StepTable(p)
	// 2 × 10 (board_cmrr) + 6 + 6 (zigzag over 3 levels, and back).
	if len(steps) != 32 {
		t.Fatalf("%d steps, want 32", len(steps))
	}
	s := steps[10] // first diff step: the centre level 0
	if s.Part != PartDiff || s.Index != 0 || s.LevelVolts != 0 {
		t.Errorf("step 10 = %+v", s)
	}
	for _, s := range steps {
		if s.Kind == TestBoardCMRR && s.Part == PartCM {
			// V+ - Vcm and Vcm - V- for a level L with ±15 V rails.
			if s.ToPosVolts != 15-s.LevelVolts || s.ToNegVolts != s.LevelVolts+15 || s.CMVolts != s.LevelVolts {
				t.Errorf("cm step %+v", s)
			}
		}
	}
	k := steps[3].Key(2, "B02", 1)
	if k != (WorkKey{TempIndex: 2, Unit: "B02", Test: TestBoardCMRR, Repeat: 1, Part: PartCM, Step: 3}) {
		t.Errorf("key %+v", k)
	}
}

func TestFormatSeconds(t *testing.T) {
	cases := map[float64]string{4.5: "4.5s", 59.94: "59.9s", 125: "2m05s", 3723: "1h02m03s", 6495: "1h48m15s"}
	for s, want := range cases {
		if got := FormatSeconds(s); got != want {
			t.Errorf("FormatSeconds(%g) = %q, want %q", s, got, want)
		}
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
	for _, n := range []int{0, 3, 20} {
		if err := WriteCheck(&failingWriter{n: n}, p); err == nil {
			t.Errorf("write error after %d writes not reported", n)
		}
	}
}

func TestWriteCheckInvalidPlan(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	p.Tests[0].Order = "spiral"
	var buf bytes.Buffer
	if err := WriteCheck(&buf, p); err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(buf.Bytes(), []byte(`unknown order "spiral"`)) {
		t.Errorf("output:\n%s", buf.String())
	}
}
