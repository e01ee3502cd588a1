package main

import (
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"

	"nullbench/instrument/sim"
	"nullbench/procedure/analysis"
	"nullbench/procedure/plan"
)

// e2eSignedTruth is the true signed coefficient (µV/V) of a result name,
// including the derived psrr_sym = (k_p − k_n)/2 per volt of span and
// cmrr_uncorrected = k_c + k_o (both derived from superposition and
// k_c + k_p + k_n + k_o = 0, no published source).
func e2eSignedTruth(u sim.UnitTruth, name string) (float64, bool) {
	switch name {
	case plan.TestPSRRSym:
		return (u.KpUVPerV - u.KnUVPerV) / 2, true
	case analysis.ResultCMRRUncorrected:
		return u.KcUVPerV + u.KoUVPerV, true
	}
	_, k, ok := e2eTruthOf(u, name)
	return k, ok
}

// e2eErrors returns, per result of the names at 25 °C, the error of the
// signed coefficient against the truth in units of its expanded
// uncertainty U (|e| ≤ 1: the truth is inside U).
func e2eErrors(t *testing.T, res *analysis.Results, truth map[string]sim.UnitTruth, names ...string) map[string][]float64 {
	t.Helper()
	out := map[string][]float64{}
	for _, r := range res.Ratios {
		if !slices.Contains(names, r.Name) || math.Abs(r.TemperatureC-25) > 1 {
			continue
		}
		k, ok := e2eSignedTruth(truth[r.Unit], r.Name)
		if !ok {
			continue
		}
		rj := r.Rejection
		out[r.Name] = append(out[r.Name], (rj.CoefficientUVPerV-k)/rj.ExpandedUUVPerV)
	}
	return out
}

// TestEndToEndUnequalSupplyGains: the two supply channels of the simulated
// bench are programmed with gains 0.25 % high and 0.25 % low, so a
// supply-shift step of L moves the span by 0.5 %·L and psrr_sym's step
// moves both rails' mean. The leak, k_sym·(g1 − g2) into the common-mode
// result and (k_p + k_n)·(g1 − g2)/4 into psrr_sym (superposition, derived,
// no published source), is invisible in the budget unless the two rails'
// read-backs are used. With them every cmrr and psrr_sym result must hold
// its truth within U (a 95 % interval: at most one miss allowed of 8);
// analysed again with the rail read-backs hidden, most of the
// high-CMRR results must fall outside.
func TestEndToEndUnequalSupplyGains(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end campaign")
	}
	units := e2eLot(8, 110, 135)
	run := runE2EWith(t, sim.Config{SupplyGainErrors: []float64{2.5e-3, -2.5e-3}}, e2eDUT(7411, units), e2eOnly25, nil)
	names := []string{plan.TestCMRR, plan.TestPSRRSym}
	with := e2eErrors(t, run.results, run.truth, names...)

	hidden := slices.Clone(run.readings)
	for i := range hidden {
		hidden[i].RailsReadBack = false
	}
	res, err := analyse(run.plan, hidden)
	if err != nil {
		t.Fatal(err)
	}
	without := e2eErrors(t, res, run.truth, names...)
	corrected := 0
	for _, r := range run.results.Ratios {
		if r.RailLeakCorrected {
			corrected++
		}
	}
	if corrected < 2*len(units) {
		t.Errorf("%d results corrected for unequal rail steps, want %d (cmrr_uncorrected and psrr_sym of each unit)", corrected, 2*len(units))
	}
	outside := func(e []float64) int {
		n := 0
		for _, v := range e {
			if math.Abs(v) > 1 {
				n++
			}
		}
		return n
	}
	for _, name := range names {
		t.Logf("%s errors in units of U: with the read-backs %.2f; without %.2f", name, with[name], without[name])
		if len(with[name]) != len(units) || len(without[name]) != len(units) {
			t.Fatalf("%s: %d and %d results, want %d", name, len(with[name]), len(without[name]), len(units))
		}
		if n := outside(with[name]); n > 1 {
			t.Errorf("%s: %d of %d outside U with the correction", name, n, len(units))
		}
	}
	if n := outside(without[plan.TestCMRR]); n < len(units)/2 {
		t.Errorf("cmrr: only %d of %d outside U without the correction: the test does not show the leak", n, len(units))
	}
}

// e2eWithoutAOL is the demo's lot plan at 25 °C without its aol test and
// with the part's rated minimum A_OL set to aolMinDB.
func e2eWithoutAOL(t *testing.T, aolMinDB float64) func(b *sim.Bench, text string) string {
	return func(b *sim.Bench, text string) string {
		text = e2eOnly25(b, text)
		i := strings.Index(text, "[[test]]\nkind = \"aol\"")
		if i < 0 {
			t.Fatal("the demo plan has no aol test to remove")
		}
		if j := strings.Index(text[i+1:], "\n["); j < 0 {
			text = text[:i]
		} else {
			text = text[:i] + text[i+1+j+1:]
		}
		return strings.Replace(text, "[part]\n", fmt.Sprintf("[part]\naol_min_db = %g\n", aolMinDB), 1)
	}
}

// TestEndToEndWithoutAOL runs the demo's lot plan without its aol test, at
// 25 °C, on parts whose A_OL is 100–140 dB, with the rated minimum
// aol_min_db = 100 in the plan. No result may be called cmrr (the
// supply-shift figure is k_c + k_o); every cmrr_uncorrected result must
// hold k_c + k_o within U (at most one miss in 12, a 95 % interval), and
// the CMRR range its note states from the rated A_OL must contain the true
// CMRR of every unit (k_c = k − k_o with |k_o| ≤ 1/A_OL,min; derived, no
// published source).
func TestEndToEndWithoutAOL(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end campaign")
	}
	units := e2eLot(12, 85, 130)
	run := runE2E(t, e2eDUT(7523, units), e2eWithoutAOL(t, 100), nil)
	if run.plan.Part.AOLMinDB != 100 || slices.ContainsFunc(run.plan.Tests, func(x plan.Test) bool { return x.Kind == plan.TestAOL }) {
		t.Fatalf("plan edit: aol_min_db %g, tests %v", run.plan.Part.AOLMinDB, run.plan.Tests)
	}
	misses, n := 0, 0
	for _, r := range run.results.Ratios {
		if r.Name == plan.TestCMRR {
			t.Errorf("%s: a result is called cmrr without an aol test", r.Unit)
		}
		if r.Name != analysis.ResultCMRRUncorrected {
			continue
		}
		n++
		u := run.truth[r.Unit]
		rj := r.Rejection
		if math.Abs(rj.CoefficientUVPerV-(u.KcUVPerV+u.KoUVPerV)) > rj.ExpandedUUVPerV {
			misses++
		}
		lo, hi := math.NaN(), math.Inf(1)
		note := strings.Join(r.Notes, " ")
		if i := strings.Index(note, "lies between "); i >= 0 {
			fmt.Sscanf(note[i+len("lies between "):], "%g and %g dB", &lo, &hi)
		} else if i := strings.Index(note, "only known to be ≥ "); i >= 0 {
			fmt.Sscanf(note[i+len("only known to be ≥ "):], "%g dB", &lo)
		}
		if math.IsNaN(lo) {
			t.Errorf("%s: no CMRR range in the notes %q", r.Unit, r.Notes)
			continue
		}
		if u.CMRRdB < lo-0.05 || u.CMRRdB > hi+0.05 {
			t.Errorf("%s: true CMRR %.2f dB outside the stated range %.2f…%.2f dB", r.Unit, u.CMRRdB, lo, hi)
		}
	}
	if n != len(units) || misses > 1 {
		t.Errorf("%d cmrr_uncorrected results (want %d), %d outside U", n, len(units), misses)
	}
}
