package plan

import "testing"

// The line of a [[test]], [[unit]] or [[ac_test]] table is the line of its
// header (testdata/plans/lot.toml: five tests from line 95, units from
// line 143).
func TestTableLines(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	for i, want := range []int{95, 109, 120, 128, 136} {
		if got := p.TestLine(i); got != want {
			t.Errorf("TestLine(%d) = %d, want %d", i, got, want)
		}
	}
	for i, want := range []int{143, 149} {
		if got := p.UnitLine(i); got != want {
			t.Errorf("UnitLine(%d) = %d, want %d", i, got, want)
		}
	}
	if got := (&Plan{}).TestLine(0); got != 0 {
		t.Errorf("a plan built in code: TestLine = %d, want 0", got)
	}
	f := loadExamplePlan(t, "freq_noise_gain")
	if len(f.ACTests) == 0 || f.ACTestLine(0) == 0 {
		t.Errorf("freq_noise_gain: ACTestLine(0) = %d", f.ACTestLine(0))
	}
}
