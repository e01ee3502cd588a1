package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
	"nullbench/instrument/sim"
	"nullbench/internal/simtest"
	"nullbench/procedure/analysis"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// End-to-end tests: the simulated bench (started here, on loopback) holds
// parts whose true ratios the test chose; the tool measures them through
// SCPI exactly as "nullbench demo" does (plan from the demo's template,
// procedure.Run with instruments opened by the instrument package, the
// analysis of "run"), and the results are compared with the truth.

// startVirtualBench serves the simulated bench of cfg on loopback with a
// virtual clock (simtest.Start): bench time moves only when the tool
// waits or the meter integrates, so a campaign of hours runs in seconds
// and every wait counts exactly as the plan says (no free settling from
// exchange overheads, unlike a scaled clock); the runner shares it through
// RunClock. The bench closes and the returned context ends when the test
// does, or after timeout.
func startVirtualBench(t *testing.T, cfg sim.Config, timeout time.Duration) (context.Context, *simtest.Bench) {
	t.Helper()
	b := simtest.Start(t, cfg)
	ctx, cancel := context.WithTimeout(context.Background(), timeout)
	t.Cleanup(cancel)
	return ctx, b
}

// e2eUnit is one simulated op-amp: its true ratios (dB at 25 °C) and
// optional extra DUT keys.
type e2eUnit struct {
	id                     string
	cmrr, psrrPos, psrrNeg float64
	aol                    float64 // 0: derived by the sim
	extra                  string  // more key = value lines for its [[unit]] table
}

// e2eLot spreads n units over CMRR from lo to hi dB. The other ratios are
// set from chosen signed coefficients so that kc + kp + kn + ko = 0
// (derived, no published source) holds by construction: k_c from the
// CMRR, k_p and k_o from PSRR+ (85–130 dB) and A_OL (100–140 dB) values spread by the golden
// ratio, signs from a fixed pattern, and k_n = −(k_c + k_p + k_o).
func e2eLot(n int, lo, hi float64) []e2eUnit {
	const phi = 0.6180339887498949
	var out []e2eUnit
	for i := range n {
		frac := func(x float64) float64 { return x - math.Floor(x) }
		cm := lo
		if n > 1 {
			cm = lo + (hi-lo)*float64(i)/float64(n-1)
		}
		pp := 85 + 45*frac(float64(i)*phi+0.3)
		ao := 100 + 40*frac(float64(i)*phi*phi+0.7)
		sc := []float64{1, -1}[i%2]
		sp := []float64{1, -1}[(i/2)%2]
		kc, kp, ko := sc*math.Pow(10, -cm/20), sp*math.Pow(10, -pp/20), math.Pow(10, -ao/20)
		kn := -(kc + kp + ko)
		out = append(out, e2eUnit{id: fmt.Sprintf("T%02d", i+1), cmrr: cm, psrrPos: pp,
			psrrNeg: -20 * math.Log10(math.Abs(kn)), aol: ao})
	}
	return out
}

// e2eDUT writes the DUT file: the demo lot's part (HX-4107 ratings, die
// τ = 2 s, θ = 100 °C/W) and the given units in nulling loops, K = 1000.
func e2eDUT(seed int64, units []e2eUnit) string {
	var b strings.Builder
	fmt.Fprintf(&b, `seed = %d

`+simtest.PartHX4107+`output_headroom_volts = 1.5
input_beyond_rail_volts = 0.3
quiescent_amps = 0.002
theta_c_per_w = 100.0
die_tau_s = 2.0
case_tau_s = 90.0

[lot]
id = "E2E-%d"
fixture = "nulling_loop"
noise_gain = 1000.0
noise_gain_tolerance = 0.001
`, seed, seed)
	for _, u := range units {
		fmt.Fprintf(&b, "\n[[unit]]\nid = %q\ncmrr_db = %.6f\npsrr_pos_db = %.6f\npsrr_neg_db = %.6f\n", u.id, u.cmrr, u.psrrPos, u.psrrNeg)
		if u.aol > 0 {
			fmt.Fprintf(&b, "aol_db = %.6f\n", u.aol)
		}
		b.WriteString(u.extra)
	}
	return b.String()
}

// e2eRun is one campaign on a fresh simulated bench.
type e2eRun struct {
	plan     *plan.Plan
	results  *analysis.Results
	truth    map[string]sim.UnitTruth
	clock    *sim.ManualClock
	bench    *sim.Bench
	readings []journal.Reading
}

// runE2E starts a simulated bench with dutTOML on a virtual clock, writes
// the demo's lot plan for it, lets editPlan turn that text into the plan to
// run (it must change it: the demo plan as written has three
// temperatures), then runs and analyses the plan as the demo does. before,
// if not nil, runs after the bench has started and before the campaign
// (e.g. to start a chamber ramp).
func runE2E(t *testing.T, dutTOML string, editPlan func(b *sim.Bench, demoPlan string) string, before func(*e2eRun)) *e2eRun {
	t.Helper()
	return runE2EWith(t, sim.Config{}, dutTOML, editPlan, before)
}

// runE2EWith is runE2E on a bench with more configuration (cfg.DUT and
// cfg.Clock are set here).
func runE2EWith(t *testing.T, cfg sim.Config, dutTOML string, editPlan func(b *sim.Bench, demoPlan string) string, before func(*e2eRun)) *e2eRun {
	t.Helper()
	dir := t.TempDir()
	dut, err := sim.ParseDUT([]byte(dutTOML), "e2e-dut.toml")
	if err != nil {
		t.Fatalf("DUT file: %v", err)
	}
	cfg.DUT = dut
	ctx, sb := startVirtualBench(t, cfg, 5*time.Minute)
	bench, clk := sb.Bench, sb.Manual
	paths, err := writeDemoPlans(dir, bench, dut, 1)
	if err != nil {
		t.Fatal(err)
	}
	if len(paths) != 1 {
		t.Fatalf("want one lot plan, got %v", paths)
	}
	text, err := os.ReadFile(paths[0])
	if err != nil {
		t.Fatal(err)
	}
	changed := editPlan(bench, string(text))
	if changed == string(text) {
		t.Fatalf("the plan edit changed nothing: has cmd/nullbench/demo/lot.toml changed?")
	}
	if err := os.WriteFile(paths[0], []byte(changed), 0o644); err != nil {
		t.Fatal(err)
	}
	p, err := plan.Load(paths[0])
	if err != nil {
		t.Fatalf("plan: %v", err)
	}
	run := &e2eRun{plan: p, clock: clk, bench: bench, truth: map[string]sim.UnitTruth{}}
	for _, u := range bench.Truth() {
		run.truth[u.ID] = u
	}
	if before != nil {
		before(run)
	}
	var errBuf bytes.Buffer
	std := streams{In: strings.NewReader(""), Out: io.Discard, Err: &errBuf}
	rec, _, err := measure(ctx, std, measureOptions{Plan: p, JournalPath: filepath.Join(dir, "journal.jsonl"),
		Clock: sb.RunClock()})
	if err != nil {
		t.Fatalf("run: %v\n%s", err, errBuf.String())
	}
	res, err := analyse(p, rec.Readings)
	if err != nil {
		t.Fatal(err)
	}
	run.results = res
	run.readings = rec.Readings
	return run
}

// e2eOnly25 keeps only the 25 °C point of the demo plan.
func e2eOnly25(_ *sim.Bench, text string) string {
	return strings.Replace(text, "points_c = [25.0, 85.0, -40.0]", "points_c = [25.0]", 1)
}

// coverageCheck is one result compared with its truth.
type coverageCheck struct {
	unit, test      string
	measured, truth float64 // dB; measured is the lower bound when unresolved
	lo, hi          float64 // the expanded-uncertainty interval in dB
	resolved        bool
	inside          bool
	z               float64 // (k − k_true)/u_c on the signed coefficient
}

// e2eTruthOf returns the true ratio (dB) and signed coefficient (µV/V) of
// a result name.
func e2eTruthOf(u sim.UnitTruth, name string) (db, k float64, ok bool) {
	switch name {
	case plan.TestCMRR:
		return u.CMRRdB, u.KcUVPerV, true
	case plan.TestPSRRPos:
		return u.PSRRPosdB, u.KpUVPerV, true
	case plan.TestPSRRNeg:
		return u.PSRRNegdB, u.KnUVPerV, true
	case plan.TestAOL:
		return u.AOLdB, u.KoUVPerV, true
	}
	return 0, 0, false
}

// compareWithTruth checks every cmrr (A_OL corrected), psrr_pos, psrr_neg
// and aol result at 25 °C against the truth. The criterion is the meaning
// of an expanded uncertainty at 95 % coverage (GUM, JCGM 100:2008, 6.2.2
// and 6.2.3: an interval expected to encompass about 95 % of the values
// that could reasonably be attributed to the measurand), so over many
// independent results the truth lies inside the stated interval in about
// 95 % of cases. Resolved results use the exact asymmetric limits
// −20·log10(|k| ± U) (fit.Rejection.LowerDB/UpperDB); unresolved ones state
// only the one-sided bound ratio ≥ 1/(|k| + U) (common practice, after
// EURACHEM/CITAC CG4 Appendix F), which the truth must not be below.
func compareWithTruth(t *testing.T, run *e2eRun) []coverageCheck {
	t.Helper()
	var out []coverageCheck
	for _, r := range run.results.Ratios {
		if math.Abs(r.TemperatureC-25) > 1 {
			continue
		}
		u, ok := run.truth[r.Unit]
		if !ok {
			continue
		}
		tdb, tk, ok := e2eTruthOf(u, r.Name)
		if !ok {
			continue
		}
		rj := r.Rejection
		c := coverageCheck{unit: r.Unit, test: r.Name, truth: tdb, resolved: rj.Resolved}
		if rj.StdUncUVPerV > 0 {
			c.z = (rj.CoefficientUVPerV - tk) / rj.StdUncUVPerV
		}
		if rj.Resolved {
			c.measured, c.lo, c.hi = rj.RatioDB, rj.LowerDB, rj.UpperDB
			c.inside = tdb >= c.lo && tdb <= c.hi
		} else {
			c.measured, c.lo, c.hi = rj.LowerBoundDB, rj.LowerBoundDB, math.Inf(1)
			c.inside = tdb >= c.lo
		}
		out = append(out, c)
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].test != out[j].test {
			return out[i].test < out[j].test
		}
		return out[i].unit < out[j].unit
	})
	return out
}

// logCoverage reports the misses and, per test, the spread of the
// normalised errors z = (k − k_true)/u_c; with a complete budget z follows
// a Student t with ν_eff degrees of freedom (rms a little above 1).
func logCoverage(t *testing.T, checks []coverageCheck) (inside int) {
	t.Helper()
	type agg struct {
		n, in   int
		sum, s2 float64
	}
	by := map[string]*agg{}
	var names []string
	for _, c := range checks {
		a := by[c.test]
		if a == nil {
			a = &agg{}
			by[c.test] = a
			names = append(names, c.test)
		}
		a.n++
		a.sum += c.z
		a.s2 += c.z * c.z
		if c.inside {
			a.in++
			inside++
			continue
		}
		t.Logf("outside U: %s %-8s measured %.3f dB, interval %.3f..%.3f dB, true %.3f dB (z = %+.2f)", c.unit, c.test, c.measured, c.lo, c.hi, c.truth, c.z)
	}
	sort.Strings(names)
	for _, n := range names {
		a := by[n]
		t.Logf("%-8s %2d/%2d inside U; z mean %+.2f rms %.2f", n, a.in, a.n, a.sum/float64(a.n), math.Sqrt(a.s2/float64(a.n)))
	}
	return inside
}

// TestEndToEndCoverage measures a lot of simulated op-amps with CMRR from
// 80 to 130 dB (and PSRR±, A_OL spread) through the whole tool and checks
// that each result's expanded uncertainty covers the true value in at
// least 95 % of the cases (GUM 6.2: the meaning of a 95 % coverage
// interval). With n results the count inside is binomial; the test asks
// for the nominal 95 % of the pooled count, rounded down.
func TestEndToEndCoverage(t *testing.T) {
	n := 25
	if testing.Short() {
		n = 10
	}
	units := e2eLot(n, 80, 130)
	run := runE2E(t, e2eDUT(7301, units), e2eOnly25, nil)
	checks := compareWithTruth(t, run)
	if want := 4 * n; len(checks) != want {
		t.Fatalf("compared %d results with the truth, want %d (cmrr, psrr_pos, psrr_neg, aol per unit); problems: %v", len(checks), want, run.results.Problems)
	}
	inside := logCoverage(t, checks)
	frac := float64(inside) / float64(len(checks))
	t.Logf("%d of %d results inside U (%.1f %%), %d units, CMRR 80–130 dB", inside, len(checks), 100*frac, n)
	if need := int(math.Floor(0.95 * float64(len(checks)))); inside < need {
		t.Errorf("only %d of %d results inside their expanded uncertainty of the truth (%.1f %%); a 95 %% interval should cover at least %d", inside, len(checks), 100*frac, need)
	}
}

// e2eDriftPlan is a plan of one test on one unit at room temperature
// (temperature mode "none": the procedure leaves the chamber alone), for
// the drift test below.
func e2eDriftPlan(bench *sim.Bench, unitID, channel, kind, order string, driftTerm bool) string {
	return fmt.Sprintf(`[campaign]
name     = "HX-4107 level order against a steady drift (test)"
operator = "test"
lot      = "E2E-DRIFT"

[fixture]
kind = "nulling_loop"
noise_gain = 1000.0
noise_gain_tolerance = 0.001
common_mode = "supply_shift"
max_stimulus_volts = 12.0

[decision]
rule = "simple"

[temperature]
mode = "none"
ambient_c = 25.0

[[test]]
kind = %q
levels = [-10.0, -5.0, 0.0, 5.0, 10.0]
order = %q
nplc = 1.0
readings = 5
dwell_s = 2.0
settle_volts = 0.0002
drift_term = %t

`+simtest.PartHX4107+`cm_margin_volts = 0.5
current_limit_amps = 0.02
input_beyond_rail_volts = 0.3

[[unit]]
id = %q
channel = %q

%s`, kind, order, driftTerm, unitID, channel, bench.BenchSection())
}

// TestEndToEndDriftCancellingOrder: a steady offset drift during a sweep
// biases the slope of an ascending sweep (time then tracks the level, so
// a drift looks exactly like a slope) but not of a zigzag, whose every
// level has the pass's mean time (plan.OrderLevels; the least-squares
// slope of GUM H.3 then gets nothing from a drift linear in time). The
// drift here is physical: the chamber ramps at its maximum rate
// (5 °C/min) while one op-amp with an offset tempco of 1 µV/°C is measured
// at room-temperature settings, so its offset drifts by about
// 0.08 µV/s (the relay's thermal EMF adds its own steady part). Its ratio
// tempcos are zero, so the true A_OL stays the 25 °C value; the fit has no
// drift term. The zigzag result must lie within its expanded uncertainty
// of the truth and the ascending one must not.
func TestEndToEndDriftCancellingOrder(t *testing.T) {
	const aolDB = 120.0
	kc, kp, ko := math.Pow(10, -110.0/20), -math.Pow(10, -116.0/20), math.Pow(10, -aolDB/20)
	kn := -(kc + kp + ko)
	unit := e2eUnit{id: "D01", cmrr: 110, psrrPos: 116, psrrNeg: -20 * math.Log10(math.Abs(kn)), aol: aolDB,
		extra: "drift_uv_per_c = 1.0\ncmrr_tc_db_per_c = 0.0\npsrr_tc_db_per_c = 0.0\naol_tc_db_per_c = 0.0\n"}
	dut := e2eDUT(4401, []e2eUnit{unit})

	measureOrder := func(order string, driftTerm bool) coverageCheck {
		t.Helper()
		editPlan := func(b *sim.Bench, _ string) string {
			return e2eDriftPlan(b, unit.id, "101", plan.TestAOL, order, driftTerm)
		}
		run := runE2E(t, dut, editPlan, func(run *e2eRun) {
			// Start the chamber ramp over SCPI, as an operator would at its
			// panel, and let the case temperature reach the ramp's rate
			// (case time constant 90 s: after 600 s the lag has settled to
			// 0.1 % of its start).
			var addr string
			for _, e := range run.bench.Endpoints() {
				if e.Name == sim.NameChamber {
					addr = e.Address
				}
			}
			ctx := context.Background()
			ch, err := instrument.Open(ctx, "chamber", addr, "chamber", instrument.OpenOptions{})
			if err != nil {
				t.Fatal(err)
			}
			defer ch.Close()
			if err := ch.Session.Write(ctx, "SOUR:TEMP 150"); err != nil {
				t.Fatal(err)
			}
			run.clock.Advance(600 * time.Second)
		})
		// The drift was there: the chamber air rose at its ramp rate
		// through the wait and the sweep.
		if air := run.bench.Inspect().AirC; air < 25+40 {
			t.Fatalf("%s: chamber air at %.1f °C after the sweep; the ramp did not run", order, air)
		}
		checks := compareWithTruth(t, run)
		if len(checks) != 1 || checks[0].test != plan.TestAOL {
			t.Fatalf("%s: want one aol result, got %+v; problems %v", order, checks, run.results.Problems)
		}
		c := checks[0]
		t.Logf("%-9s drift term %-5v: A_OL %.3f dB, interval %.3f..%.3f dB, true %.3f dB (z = %+.1f), inside %v",
			order, driftTerm, c.measured, c.lo, c.hi, c.truth, c.z, c.inside)
		return c
	}
	zig := measureOrder(plan.OrderZigzag, false)
	asc := measureOrder(plan.OrderAscending, false)
	// With the drift term fitted as well, the zigzag's drift no longer
	// inflates its residuals: a tight interval, still around the truth.
	zigDrift := measureOrder(plan.OrderZigzag, true)
	if !zigDrift.inside || zigDrift.hi-zigDrift.lo > (zig.hi-zig.lo)/2 {
		t.Errorf("zigzag with a drift term: A_OL %.3f dB, interval %.3f..%.3f dB, true %.3f dB; want it inside and at most half as wide as without (%.3f..%.3f dB)",
			zigDrift.measured, zigDrift.lo, zigDrift.hi, zigDrift.truth, zig.lo, zig.hi)
	}
	if !zig.inside {
		t.Errorf("zigzag order without a drift term: A_OL %.3f dB, interval %.3f..%.3f dB misses the true %.3f dB", zig.measured, zig.lo, zig.hi, zig.truth)
	}
	if asc.inside {
		t.Errorf("ascending order: A_OL %.3f dB, interval %.3f..%.3f dB covers the true %.3f dB; the drift should have biased it", asc.measured, asc.lo, asc.hi, asc.truth)
	}
}
