package fit

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"
)

func TestReadPointsCSV(t *testing.T) {
	cases := []struct {
		name    string
		in      string
		n       int
		time    bool
		wantErr string
	}{
		{"plain", "0,0.001\n5,0.0015\n-5,0.0005\n", 3, false, ""},
		{"header and time", "stimulus_V,measured_V,time_s\n0,1e-3,0\n5,2e-3,1.5\n", 2, true, ""},
		{"comments, blanks, CRLF, spaces", "# bench log\r\n\r\n0, 1\r\n 1 , 2\r\n", 2, false, ""},
		{"bad number", "0,1\n1,x\n", 0, false, "line 2: field 2"},
		{"NaN", "0,1\n1,NaN\n", 0, false, "line 2: field 2"},
		{"ragged", "0,1,0\n1,2\n", 0, false, "line 2: 2 fields, earlier rows have 3"},
		{"one column", "a\n1\n", 0, false, "line 2: 1 fields"},
		{"empty", "# nothing\n", 0, false, "no readings"},
		{"header only", "stim,meas\n", 0, false, "no readings"},
		{"second header", "stim,meas\nstim,meas\n", 0, false, "line 2"},
		{"quote", "0,\"1\n", 0, false, "line"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p, err := ReadPointsCSV(strings.NewReader(c.in))
			if c.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), c.wantErr) {
					t.Fatalf("err = %v, want %q", err, c.wantErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if len(p.StimulusVolts) != c.n || len(p.MeasuredVolts) != c.n || (p.TimeSeconds != nil) != c.time {
				t.Fatalf("%+v", p)
			}
		})
	}
}

func FuzzReadPointsCSV(f *testing.F) {
	f.Add("stimulus_V,measured_V,time_s\n0,1e-3,0\n5,2e-3,1.5\n-5,0,3\n")
	f.Add("0,0.001\n5,0.0015\n")
	f.Add("# c\n\"1\",\"2\"\n")
	f.Add("1,2,3,4\n")
	f.Fuzz(func(t *testing.T, s string) {
		p, err := ReadPointsCSV(strings.NewReader(s))
		if err != nil {
			return
		}
		n := len(p.StimulusVolts)
		if n == 0 || len(p.MeasuredVolts) != n || (p.TimeSeconds != nil && len(p.TimeSeconds) != n) {
			t.Fatalf("inconsistent points %+v", p)
		}
		for i := 0; i < n; i++ {
			if math.IsNaN(p.StimulusVolts[i]) || math.IsInf(p.MeasuredVolts[i], 0) {
				t.Fatal("non-finite value accepted")
			}
		}
		// HandFit must not panic on anything the reader accepts.
		HandFit(p, HandOptions{Stimulus: "cm", Gain: 1})
	})
}

// TestHandFitNorris runs the NIST/ITL StRD Norris data through the CSV
// reader and HandFit (gain 1): the slope and its standard uncertainty must
// match the certified B1 = 1.00211681802045, SD 0.429796848199937E-03 and the
// residual SD 0.884796396144373 to 13 significant digits.
func TestHandFitNorris(t *testing.T) {
	tab := loadRef(t, "nist_lls_norris.txt")
	x, _ := tab.Column("x")
	y, _ := tab.Column("y")
	var buf bytes.Buffer
	buf.WriteString("stimulus_V,measured_V\n")
	for i := range x {
		fmt.Fprintf(&buf, "%v,%v\n", x[i], y[i])
	}
	p, err := ReadPointsCSV(&buf)
	if err != nil {
		t.Fatal(err)
	}
	h, err := HandFit(p, HandOptions{Stimulus: "cm", Gain: 1})
	if err != nil {
		t.Fatal(err)
	}
	b1 := tab.Params[1]
	if d := lre(h.Slope, b1.Estimate); d < 13 { // NIST/ITL StRD Norris B1
		t.Errorf("slope %.15g, certified %.15g (%.1f digits)", h.Slope, b1.Estimate, d)
	}
	if d := lre(h.SlopeU, b1.SD); d < 13 { // NIST/ITL StRD Norris SD(B1)
		t.Errorf("slope u %.15g, certified %.15g (%.1f digits)", h.SlopeU, b1.SD, d)
	}
	if d := lre(h.ResidualSD, tab.ResidualSD); d < 13 { // NIST/ITL StRD Norris residual SD
		t.Errorf("residual SD %.15g (%.1f digits)", h.ResidualSD, d)
	}
	if h.DOF != 34 || h.Quantity != "CMRR" || h.DriftFitted {
		t.Errorf("%+v", h)
	}
}

func TestHandFitJSONAndText(t *testing.T) {
	// A 10 V common-mode zigzag through K = 1000 on a part with
	// k = −3.162 µV/V (≈ 110 dB) and a little drift.
	x := zigzag(20, 10, 2)
	var csv strings.Builder
	csv.WriteString("stimulus_V,measured_V,time_s\n")
	for i, v := range x {
		noise := 2e-7 * math.Sin(float64(7*i)) // deterministic pseudo-noise
		fmt.Fprintf(&csv, "%g,%.9g,%d\n", v, 0.0012+1000*(-3.162e-6)*v+1e-7*float64(i)+noise, 2*i)
	}
	p, err := ReadPointsCSV(strings.NewReader(csv.String()))
	if err != nil {
		t.Fatal(err)
	}
	h, err := HandFit(p, HandOptions{Stimulus: "cm", Gain: 1000, GainTol: 0.001})
	if err != nil {
		t.Fatal(err)
	}
	if !h.Resolved || !h.DriftFitted || math.Abs(h.RatioDB-110) > 0.1 || math.Abs(h.CoefficientUVPerV+3.162) > 0.05 {
		t.Errorf("%+v", h)
	}
	js, err := json.Marshal(h)
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(js, &m); err != nil {
		t.Fatal(err)
	}
	for _, key := range []string{"slope", "slope_u", "residual_sd", "dof", "coefficient_uV_per_V", "ratio_db", "expanded_u_db", "coverage_k", "resolved", "lower_bound_db", "budget"} {
		if _, ok := m[key]; !ok {
			t.Errorf("JSON lacks %q: %s", key, js)
		}
	}
	if rows, _ := m["budget"].([]any); len(rows) != 2 {
		t.Errorf("budget rows %v", m["budget"])
	}
	var text bytes.Buffer
	if err := h.WriteText(&text); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"CMRR", "110.", "noise gain tolerance", "inf"} {
		if !strings.Contains(text.String(), want) {
			t.Errorf("text lacks %q:\n%s", want, text.String())
		}
	}
	// unresolved: response lost in noise → only a bound
	flat := Points{StimulusVolts: x, MeasuredVolts: make([]float64, len(x))}
	for i := range flat.MeasuredVolts {
		flat.MeasuredVolts[i] = 1e-6 * math.Sin(float64(7*i))
	}
	h2, err := HandFit(flat, HandOptions{Stimulus: "supply", Gain: 1000})
	if err != nil {
		t.Fatal(err)
	}
	if h2.Resolved || h2.RatioDB != 0 || h2.LowerBoundDB < 120 || h2.Quantity != "PSRR" {
		t.Errorf("%+v", h2)
	}
	text.Reset()
	h2.WriteText(&text)
	if !strings.Contains(text.String(), "≥") {
		t.Errorf("unresolved text:\n%s", text.String())
	}
	if _, err := HandFit(p, HandOptions{Stimulus: "diff", Gain: 1}); !errors.Is(err, ErrBadInput) {
		t.Errorf("bad stimulus: %v", err)
	}
	if _, err := HandFit(p, HandOptions{Stimulus: "cm"}); !errors.Is(err, ErrBadInput) {
		t.Errorf("no gain: %v", err)
	}
}
