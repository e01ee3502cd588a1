package main

import (
	"fmt"
	"math"
	"testing"

	"nullbench/instrument/sim"
)

// The switch and supply dialects of the simulated bench change only how
// the instruments are spoken to, never the parts or the physics, so the
// same plan (the demo's lot plan with each dialect's built-in profile,
// which sim writes into the bench section) must measure the same
// coefficients. Two results of one measurand agree when their difference
// is within the expanded uncertainty of the difference, U_d =
// sqrt(U_1² + U_2²) for independent runs (GUM JCGM 100:2008 §5.1.2 with
// unit sensitivities, k = 2 applied to both); each run's results must
// also cover the truth as in TestEndToEndCoverage (GUM 6.2.2).

// e2eDialectRun measures a small lot on the bench started in dialects.
func e2eDialectRun(t *testing.T, dialects ...string) *e2eRun {
	t.Helper()
	units := e2eLot(3, 85, 120)
	return runE2EWith(t, sim.Config{Dialects: dialects}, e2eDUT(7411, units), e2eOnly25, nil)
}

func TestDialectSwitchSupplyEndToEnd(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the lot plan six times")
	}
	base := e2eDialectRun(t)
	baseBy := map[string][2]float64{} // k, U in µV/V
	for _, r := range base.results.Ratios {
		baseBy[r.Unit+"/"+r.Name] = [2]float64{r.Rejection.CoefficientUVPerV, r.Rejection.ExpandedUUVPerV}
	}
	if len(baseBy) == 0 {
		t.Fatalf("the default bench gave no results; problems: %v", base.results.Problems)
	}
	for _, d := range []string{"mux_noopenall", "psu_chanlist", "psu_single", "psu_negout", "psu_slow"} {
		t.Run(d, func(t *testing.T) {
			run := e2eDialectRun(t, d)
			if len(run.results.Ratios) != len(base.results.Ratios) {
				t.Fatalf("%d results, the default bench gave %d; problems: %v", len(run.results.Ratios), len(base.results.Ratios), run.results.Problems)
			}
			for _, r := range run.results.Ratios {
				key := r.Unit + "/" + r.Name
				b, ok := baseBy[key]
				if !ok {
					t.Errorf("%s: no such result on the default bench", key)
					continue
				}
				k, u := r.Rejection.CoefficientUVPerV, r.Rejection.ExpandedUUVPerV
				ud := math.Hypot(u, b[1])
				t.Logf("%-12s %+.4f µV/V (U %.4f), default %+.4f (U %.4f)", key, k, u, b[0], b[1])
				if math.Abs(k-b[0]) > ud {
					t.Errorf("%s: %+.4f µV/V differs from the default bench's %+.4f by more than U_d = %.4f", key, k, b[0], ud)
				}
			}
			checks := compareWithTruth(t, run)
			inside := logCoverage(t, checks)
			// 12 results: at 95 % coverage, 10 or more inside has
			// probability 0.98 (binomial, n = 12, p = 0.95).
			if len(checks) != 12 || inside < 10 {
				t.Errorf("%d of %d results cover the truth; want at least 10 of 12", inside, len(checks))
			}
			inst := "psu"
			if d == "mux_noopenall" {
				inst = "mux"
			}
			if got := fmt.Sprint(run.plan.Bench.Instruments[inst].Profile); got != d {
				t.Errorf("the bench section names profile %q for %s, want %q", got, inst, d)
			}
		})
	}
}
