package plan

import (
	"bytes"
	"errors"
	"flag"
	"os"
	"path/filepath"
	"testing"
)

var updateGolden = flag.Bool("update", false, "rewrite the golden files in testdata/")

// TestWriteCheckGolden compares the `check` step table of each example plan,
// without a forecast (no timing or noise figures), with
// testdata/check_<plan>.golden; run with -update to rewrite them after
// an intended change, and read the diff.
func TestWriteCheckGolden(t *testing.T) {
	for _, name := range []string{"lot", "noise_gain", "board", "unsafe_overspan", "unsafe_hazardous"} {
		t.Run(name, func(t *testing.T) {
			p := loadExamplePlan(t, name)
			var buf bytes.Buffer
			if err := WriteCheck(&buf, p, nil); err != nil {
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
		if err := WriteCheck(&failingWriter{n: n}, p, nil); err == nil {
			t.Errorf("write error after %d writes not reported", n)
		}
	}
}

func TestWriteCheckInvalidPlan(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	p.Tests[0].Order = "spiral"
	var buf bytes.Buffer
	if err := WriteCheck(&buf, p, nil); err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(buf.Bytes(), []byte(`unknown order "spiral"`)) {
		t.Errorf("output:\n%s", buf.String())
	}
}
