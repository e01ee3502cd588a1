package main

import (
	"bytes"
	"encoding/csv"
	"math"
	"strconv"
	"testing"

	"nullbench/procedure/analysis/freq"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
	"nullbench/report"
)

// TestFreqFiguresSinglePoleWorkedExample takes a part whose input-referred
// coefficient has one real pole at f_c = 1 kHz, k(f) = k₀·(1 + j·f/f_c)
// with k₀ = 10 µV/V (100 dB), through the whole frequency chain: sine-fit
// records → analysis.AnalyzeFreq → addFreq → freq_results.csv, and checks
// the exported ratio and phase against the single-time-constant low-pass
// T(f) = 1/(1 + j·f/f_c) as tabulated in Sedra & Smith, Microelectronic
// Circuits (frequency response of STC networks; values from memory, and
// they follow from |T| = 1/√(1 + (f/f_c)²), ∠T = −atan(f/f_c)):
//
//	f/f_c   20·log10|T|    ∠T
//	0.1     −0.0432 dB     −5.71°
//	1       −3.0103 dB    −45.00°
//	10     −20.0432 dB    −84.29°
//
// The ratio is 20·log10(1/|k|) = 100 dB + 20·log10|T| and arg k = −∠T
// (the coefficient rises where the ratio falls). The fitted corner and
// low-frequency ratio must come back as 1 kHz and 100 dB.
func TestFreqFiguresSinglePoleWorkedExample(t *testing.T) {
	const k0, fc, gain = 1e-5, 1000.0, 1000.0
	book := []struct{ fOverFc, dB, deg float64 }{{0.1, -0.0432, -5.71}, {1, -3.0103, -45.00}, {10, -20.0432, -84.29}}
	var freqs []float64
	for _, b := range book {
		freqs = append(freqs, b.fOverFc*fc)
	}
	p := &plan.Plan{
		Fixture: plan.Fixture{Kind: plan.FixtureNullingLoop, NoiseGain: gain, NoiseGainTolerance: 0.001},
		ACTests: []plan.ACTest{{Kind: plan.TestCMRR, FrequenciesHz: freqs, LimitsDB: []float64{70}}},
	}
	p.Temperature.AmbientCelsius = 25
	p.Decision.Rule = "guarded"
	fitOf := func(f float64, v complex128, u float64) journal.ACChannelFit {
		// y = a·cos(ωt + φ): A = a·cos φ, B = −a·sin φ.
		var cov [3][3]float64
		cov[0][0], cov[1][1], cov[2][2] = u*u, u*u, u*u
		return journal.ACChannelFit{FrequencyHz: f, A: real(v), B: -imag(v), Cov: cov, N: 4000, DOF: 3997}
	}
	var recs []journal.ACReading
	for i, f := range freqs {
		k := complex(k0, 0) * complex(1, f/fc)
		resp := complex(gain, 0) * k // 1 V stimulus at the part, flat fixture of gain K
		add := func(rec string, s, r complex128, u float64) {
			recs = append(recs, journal.ACReading{Unit: "W01", Test: plan.TestCMRR, FreqIndex: i, FrequencyHz: f, Record: rec,
				GeneratorOn: rec != journal.ACFloor, Channels: []journal.ACChannelFit{fitOf(f, s, u), fitOf(f, r, u)}})
		}
		add(journal.ACFloor, 1e-7, 1e-7, 1e-7)
		add(journal.ACThrough, 1, 1, 1e-6)
		add(journal.ACStimulus, 1, resp, 1e-6)
	}
	frs, probs, err := freq.AnalyzeFreq(p, recs, freq.FreqInputs{})
	if err != nil || len(probs) > 0 || len(frs) != 1 {
		t.Fatalf("%v %+v %d responses", err, probs, len(frs))
	}
	c := &report.Campaign{}
	addFreq(c, p, frs, probs, 0)
	var buf bytes.Buffer
	if err := report.WriteFreqResultsCSV(&buf, c.FreqResults, report.CSVOptions{}); err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(&buf).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col := map[string]int{}
	for i, h := range rows[0] {
		col[h] = i
	}
	num := func(r []string, k string) float64 {
		v, err := strconv.ParseFloat(r[col[k]], 64)
		if err != nil {
			t.Fatalf("%s = %q: %v", k, r[col[k]], err)
		}
		return v
	}
	if len(rows) != 1+len(book) {
		t.Fatalf("%d CSV rows, want %d", len(rows)-1, len(book))
	}
	for i, b := range book {
		r := rows[1+i]
		if f := num(r, "frequency_hz"); math.Abs(f-b.fOverFc*fc) > 1e-9 {
			t.Errorf("row %d at %g Hz, want %g", i+1, f, b.fOverFc*fc)
		}
		// The table's 4 decimals (dB) and 2 decimals (°).
		if got := num(r, "ratio_db"); math.Abs(got-(100+b.dB)) > 0.0001 {
			t.Errorf("f/f_c = %g: ratio_db %.5f, want 100 %+.4f dB", b.fOverFc, got, b.dB)
		}
		if got := num(r, "phase_deg"); math.Abs(got-(-b.deg)) > 0.005 {
			t.Errorf("f/f_c = %g: phase_deg %.4f, want %.2f", b.fOverFc, got, -b.deg)
		}
		if r[col["decision"]] != "pass" || num(r, "limit_db") != 70 || !(num(r, "u_db") > 0) {
			t.Errorf("f/f_c = %g: decision %q limit %q U %q", b.fOverFc, r[col["decision"]], r[col["limit_db"]], r[col["u_db"]])
		}
	}
	if len(c.FreqFits) != 1 {
		t.Fatalf("%d pole fits", len(c.FreqFits))
	}
	pf := c.FreqFits[0]
	if math.Abs(pf.CornerHz-fc) > 0.1 || math.Abs(pf.LowFreqRatioDB-100) > 1e-3 || !pf.CornerResolved {
		t.Errorf("pole fit: corner %g Hz, R₀ %g dB, resolved %v; want 1000 Hz, 100 dB", pf.CornerHz, pf.LowFreqRatioDB, pf.CornerResolved)
	}
}
