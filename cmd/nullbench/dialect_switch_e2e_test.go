package main

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

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
	return e2eDialectRunBefore(t, nil, dialects...)
}

func e2eDialectRunBefore(t *testing.T, before func(*e2eRun), dialects ...string) *e2eRun {
	t.Helper()
	units := e2eLot(3, 85, 120)
	return runE2EWith(t, sim.Config{Dialects: dialects}, e2eDUT(7411, units), e2eOnly25, before)
}

// closeLastUnitByHand closes the last unit's relay before the run, as an
// earlier run could have left it: on a switch without open-all the tool
// must still open it before it measures the first unit, or two units
// share the buses and the first unit's results change.
func closeLastUnitByHand(t *testing.T) func(*e2eRun) {
	return func(run *e2eRun) {
		var ch string
		for _, u := range run.truth {
			if u.Channel > ch {
				ch = u.Channel
			}
		}
		for _, ep := range run.bench.Endpoints() {
			if ep.Name == "mux" {
				sendSCPI(t, ep.Address, "ROUT:CLOS (@"+ch+")")
			}
		}
		if len(run.bench.Inspect().Closed) != 1 {
			t.Fatalf("relay %s not closed by hand", ch)
		}
	}
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
	for _, d := range []string{"mux_noopenall", "psu_chanlist", "psu_single", "psu_negout", "psu_slow", "src_eot"} {
		t.Run(d, func(t *testing.T) {
			var before func(*e2eRun)
			if d == "mux_noopenall" {
				before = closeLastUnitByHand(t)
			}
			run := e2eDialectRunBefore(t, before, d)
			if got := run.bench.Inspect().Closed; len(got) != 0 {
				t.Errorf("relays closed after the run: %v", got)
			}
			// Break before make: never two units on the buses at once.
			if n := run.bench.Inspect().MostClosed; n != 1 {
				t.Errorf("up to %d relays were closed at once, want 1", n)
			}
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
			switch d {
			case "mux_noopenall":
				inst = "mux"
			case "src_eot":
				inst = "src"
			}
			if got := fmt.Sprint(run.plan.Bench.Instruments[inst].Profile); got != d {
				t.Errorf("the bench section names profile %q for %s, want %q", got, inst, d)
			}
		})
	}
}

// A true negative output (sim dialect psu_negout, profile psu_negout) left
// on at −15 V by hand is ramped toward 0 V by "off" like a floating
// negative rail: the sim's channel moves through intermediate values, never
// away from 0 V, and ends at 0 V and off. Ramping the rails down in steps
// is the plan's safety rule (SAFETY.md; common practice, no published
// source).
func TestOffRampsATrueNegativeOutputToZero(t *testing.T) {
	d, err := sim.ParseDUT([]byte(cliDUT), "cli-dut.toml")
	if err != nil {
		t.Fatal(err)
	}
	b, err := sim.New(sim.Config{DUT: d, TimeScale: cliTimeScale, Dialects: []string{"psu_negout"}})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	if err := b.Start(ctx, sim.ServeOptions{}); err != nil {
		cancel()
		t.Fatal(err)
	}
	t.Cleanup(func() { cancel(); b.Close() })
	addr := map[string]string{}
	for _, e := range b.Endpoints() {
		addr[e.Name] = e.Address
	}
	sendSCPI(t, addr["psu"], "INST:NSEL 1", "VOLT 15", "OUTP ON", "INST:NSEL 2", "VOLT -15", "OUTP ON")
	if s := b.Inspect(); !s.Supply[1].On || math.Abs(s.Supply[1].ProgrammedVolts-15) > 1e-9 {
		t.Fatalf("VOLT -15 on the negative output: channel 2 %+v (the model keeps the magnitude)", s.Supply[1])
	}
	section := b.BenchSection()
	if !strings.Contains(section, `profile = "psu_negout"`) {
		t.Fatalf("bench section without the psu_negout profile:\n%s", section)
	}
	planFile := cliWriteFile(t, t.TempDir(), "plan.toml", section+strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"))

	// Watch channel 2 while "off" runs.
	var seen []float64
	stop := make(chan struct{})
	done := make(chan struct{})
	go func() {
		defer close(done)
		for {
			v := b.Inspect().Supply[1].ProgrammedVolts
			if len(seen) == 0 || seen[len(seen)-1] != v {
				seen = append(seen, v)
			}
			select {
			case <-stop:
				return
			case <-time.After(200 * time.Microsecond):
			}
		}
	}()
	r := cliExec(t, "off", planFile)
	close(stop)
	<-done
	cliWantCode(t, r, exitOK, "off", planFile)
	t.Logf("channel 2 magnitudes seen: %v\n%s", seen, r.out)
	s := b.Inspect()
	if s.Supply[1].On || s.Supply[1].ProgrammedVolts != 0 || s.Supply[1].OutputVolts != 0 {
		t.Errorf("negative output left at %+v", s.Supply[1])
	}
	if len(seen) < 3 {
		t.Errorf("channel 2 went %v: no intermediate step between -15 V and 0 V", seen)
	}
	for i := 1; i < len(seen); i++ {
		if seen[i] > seen[i-1] {
			t.Errorf("channel 2 moved away from 0 V: %v", seen)
			break
		}
	}
}
