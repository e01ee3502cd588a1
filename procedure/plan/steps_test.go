package plan

import "testing"

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
