package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"nullbench/fit"
	"nullbench/internal/simtest"
	"nullbench/procedure/analysis"
	"nullbench/procedure/analysis/freq"
	"nullbench/procedure/plan"
)

// cliFreqPlan is a frequency-only plan for the noise-gain unit N01 of
// cliDUT (flat fixture: neither the DUT nor the plan gives a GBW).
const cliFreqPlan = `
[campaign]
name = "N01 against frequency (cmd test)"

[fixture]
kind = "noise_gain"
noise_gain = 101.0
noise_gain_tolerance = 0.001
common_mode = "input_drive"
max_stimulus_volts = 12.0

` + simtest.PartHX4107 + `cm_margin_volts = 0.5
current_limit_amps = 0.05

[generator]
max_peak_volts = 2.0
max_offset_volts = 1.0

[[ac_test]]
kind = "cmrr"
frequencies_hz = [50.0, 60.0, 1000.0]
peak_volts = 1.0
stimulus_range_volts = 2.0
response_range_volts = 2.0
limits_db = [90.0]
through_channel = "190"

[[ac_test]]
kind = "psrr_pos"
frequencies_hz = [100.0]
peak_volts = 0.5
generator_channel = "2"
through_channel = "190"

[[unit]]
id = "N01"
channel = "103"
`

// TestRunAndReportFrequencyPlan runs a plan with [[ac_test]] tables only on
// the simulated bench and reports its run folder again: run prints the
// frequency response, and report, from the journal's ac-reading records
// alone, prints the same figures.
func TestRunAndReportFrequencyPlan(t *testing.T) {
	b := cliStartSim(t, "")
	dir := t.TempDir()
	section := strings.Replace(b.BenchSection(), "[bench.roles]\n", "[bench.roles]\n"+
		"generator = { instrument = \"gen\", channel = \"1\" }\ndigitizer = { instrument = \"dig\" }\n", 1)
	path := cliWriteFile(t, dir, "freq.toml", section+cliFreqPlan)
	out := filepath.Join(dir, "run")
	args := []string{"run", path, "--out", out, "--no-charts"}
	r := cliExec(t, args...)
	cliWantCode(t, r, exitOK, args...)
	section1 := r.out[strings.Index(r.out, "Frequency response"):]
	for _, s := range []string{"N01 CMRR (cmrr", "N01 PSRR+ (psrr_pos", "50 Hz", "pass (limit 90 dB)", "a pole fit needs 3"} {
		if !strings.Contains(section1, s) {
			t.Errorf("run's frequency response lacks %q:\n%s", s, section1)
		}
	}
	// The frequency rows travel in their own exports, and the summary
	// counts them instead of calling the unit resultless.
	csvText, err := os.ReadFile(filepath.Join(out, "freq_results.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(string(csvText), "unit,part,lot,test,quantity,temperature_c,frequency_hz,") || !strings.Contains(string(csvText), "N01,HX-4107,,cmrr,CMRR,25,50,digitizer,") {
		t.Errorf("freq_results.csv:\n%s", csvText)
	}
	if _, err := os.Stat(filepath.Join(out, "freq_results.jsonl")); err != nil {
		t.Error(err)
	}
	if strings.Contains(r.out, "NO RESULTS") || !strings.Contains(r.out, "frequency results (unit × test × frequency): 3 pass") {
		t.Errorf("run's summary does not count the frequency results:\n%s", r.out)
	}
	rargs := []string{"report", out, "--out", filepath.Join(dir, "again"), "--no-charts"}
	rr := cliExec(t, rargs...)
	cliWantCode(t, rr, exitOK, rargs...)
	i := strings.Index(rr.out, "Frequency response")
	if i < 0 {
		t.Fatalf("report printed no frequency response:\n%s", rr.out)
	}
	// The plan path differs (the run folder's copy); the figures may not.
	strip := func(s string) string { return s[strings.Index(s, "\n"):] }
	if strip(rr.out[i:]) != strip(section1) {
		t.Errorf("report's frequency response differs from run's:\n%s\nwant:\n%s", rr.out[i:], section1)
	}
}

// TestPrintFreqSummaryCoverageAndDigits: the console's frequency summary
// states the coverage probability the analysis used (not a fixed 95 %),
// expands the pole fit with Student's t at that probability, quotes the
// corner as GUM 7.2.6 has it (U to two significant digits, f_c to match)
// and names frequencies in plain decimals, never "2.683e+04".
func TestPrintFreqSummaryCoverageAndDigits(t *testing.T) {
	p := &plan.Plan{Source: "freq.toml"}
	pole := &fit.PoleFit{RatioDCDB: 100.2, URatioDCDB: 0.1, PoleHz: 315.371370628783, UPoleHz: 3.7, Resolved: true, DOF: 6}
	pt := freq.FreqPoint{FrequencyHz: 26826.957952797256, Instrument: "digitizer",
		Rejection: fit.Rejection{CoefficientUVPerV: 10, RatioDB: 100, ExpandedUDB: 0.1, CoverageK: 2, Resolved: true}}
	rec := campaignRecord{Plan: p, Results: &analysis.Results{CoverageProbability: 0.99},
		Freq: []freq.FreqResponse{{Unit: "F01", Test: "cmrr", Quantity: "CMRR", Points: []freq.FreqPoint{pt}, Pole: pole}}}
	var b strings.Builder
	printFreqSummary(&b, rec)
	out := b.String()
	// Student's t for ν = 6 at 99 % two-sided is 3.707 (NIST/SEMATECH
	// e-Handbook of Statistical Methods, table 1.3.6.7.2, from memory);
	// U(f_c) = 3.707 × 3.7 = 13.7 Hz → 14 Hz, f_c → 315 Hz.
	for _, want := range []string{"at 99 % coverage", "corner 315 ± 14 Hz (k = 3.71, 99 %)", "     26827 Hz"} {
		if !strings.Contains(out, want) {
			t.Errorf("summary lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(out, "e+0") || strings.Contains(out, "95 %") {
		t.Errorf("summary has an exponent-form number or a fixed 95 %%:\n%s", out)
	}
}
