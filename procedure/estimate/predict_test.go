package estimate

import (
	"bufio"
	"bytes"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"

	"nullbench/procedure/plan"
)

// TestStudentT975AgainstNISTTable checks the coverage factor against the
// t_0.975 column of the NIST/SEMATECH e-Handbook table 1.3.6.7.2
// (testdata/student_t_quantiles.txt, with its provenance notes).
func TestStudentT975AgainstNISTTable(t *testing.T) {
	f, err := os.Open("testdata/student_t_quantiles.txt")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	rows := 0
	for sc.Scan() {
		fs := strings.Fields(sc.Text())
		if len(fs) != 6 || strings.HasPrefix(fs[0], "#") || fs[0] == "nu" {
			continue
		}
		want, err := strconv.ParseFloat(fs[3], 64)
		if err != nil {
			t.Fatal(err)
		}
		nu := math.Inf(1)
		if fs[0] != "inf" {
			nu, _ = strconv.ParseFloat(fs[0], 64)
		}
		got := StudentT975(nu)
		// The table has three decimals; the expansion is good to 0.002
		// from ν = 3 (A&S 26.7.5).
		if d := math.Abs(got - want); d > 0.0025 {
			t.Errorf("ν = %v: t = %.4f, table %.3f", nu, got, want)
		}
		rows++
	}
	if rows < 30 {
		t.Fatalf("read %d rows", rows)
	}
}

// TestLimitAboveResolvableWarns works the noise-gain plan's cmrr test out
// by hand and checks that check warns of a limit above what it resolves
// and not of one below. One point: 5 readings at 1 NPLC on the 10 V range,
// σ = √((3e-6·10)²/5 + (1.5e-7·10)²) = 13.5 µV (the built-in meter
// figures); the zigzag visits −10 … +10 V in steps of 5 twice, Σ(x − x̄)² =
// 2 × 250 = 500 V²; the slope's u = σ/√500 = 0.604 µV/V at the meter
// (GUM H.3), / K = 101 → 0.00598 µV/V; ν = 10 − 2 = 8, t = 2.306 (NIST/
// SEMATECH e-Handbook table 1.3.6.7.2) → U = 0.01379 µV/V, so the plan
// resolves 20·log10(10⁶/0.01379) = 157.2 dB.
func TestLimitAboveResolvableWarns(t *testing.T) {
	p := loadExamplePlan(t, "noise_gain")
	pr := Predict(p, DefaultFigures())
	tp := pr.Tests[0]
	if tp.Kind != plan.TestCMRR || math.Abs(tp.ExpandedUUVPerV-0.01379) > 0.0001 || math.Abs(tp.ResolvableDB-157.2) > 0.05 {
		t.Fatalf("cmrr: U = %.5f µV/V, resolves %.2f dB; want 0.01379 µV/V, 157.2 dB (by hand)", tp.ExpandedUUVPerV, tp.ResolvableDB)
	}
	for _, c := range []struct {
		limit float64
		warn  bool
	}{{150, false}, {157, false}, {157.5, true}, {170, true}} {
		p.Limits[plan.TestCMRR] = c.limit
		warns := Predict(p, DefaultFigures()).Warnings()
		var out bytes.Buffer
		if err := WriteCheck(&out, p, DefaultFigures()); err != nil {
			t.Fatal(err)
		}
		got := len(warns) > 0 && strings.Contains(warns[0], "test[1] cmrr") && strings.Contains(warns[0], "above")
		printed := strings.Contains(out.String(), "\nwarnings\n") && strings.Contains(out.String(), "ABOVE what the plan resolves")
		if got != c.warn || printed != c.warn {
			t.Errorf("limit %g dB: warnings %q, printed %v; want a warning: %v", c.limit, warns, printed, c.warn)
		}
	}
}
