package estimate

import (
	"bytes"
	"math"
	"strings"
	"testing"

	"nullbench/procedure/plan"
)

func TestWriteCheckPlanOnlyReportsWriteErrors(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	for _, n := range []int{0, 3, 20} {
		if err := writeCheck(&failingWriter{n: n}, p, nil); err == nil {
			t.Errorf("write error after %d writes not reported", n)
		}
	}
}

func TestWriteCheckInvalidPlan(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	p.Tests[0].Order = "spiral"
	var buf bytes.Buffer
	if err := writeCheck(&buf, p, nil); err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(buf.Bytes(), []byte(`unknown order "spiral"`)) {
		t.Errorf("output:\n%s", buf.String())
	}
}

// TestWriteCheckACTests: check lists each [[ac_test]] with its sine's
// extremes at the part and, per frequency, the limit and the bench time
// of its three records. At 10 Hz with min_cycles 8 and min_samples 2000 a
// record is 8 cycles = 0.8 s; settling is max(10 cycles, 0.2 s) = 1 s; three
// records with their settling take 5.4 s (worked by hand from the
// defaults in ac.go).
func TestWriteCheckACTests(t *testing.T) {
	p := loadExamplePlan(t, "freq_noise_gain")
	var b strings.Builder
	if err := writeCheck(&b, p, nil); err != nil {
		t.Fatal(err)
	}
	out := b.String()
	for _, s := range []string{
		"ac_test[1] cmrr: sine 1 V peak about 0 V on the common-mode node (generator output 1 at 1 V peak)",
		"ac_test[2] psrr_pos: sine 0.5 V peak about 0 V on the rail through a series_injector",
		"at the peaks: V+ +14.5 V … +15.5 V",
		"10 Hz  limit ≥ 90 dB      record 0.8s, with settling 5.4s",
		"60 Hz  limit ≥ 80 dB",
	} {
		if !strings.Contains(out, s) {
			t.Errorf("check output lacks %q:\n%s", s, out)
		}
	}
	if got := plan.ACRecordSeconds(&p.ACTests[0], 10); math.Abs(got-0.8) > 1e-12 {
		t.Errorf("record at 10 Hz %g s, want 0.8", got)
	}
}
