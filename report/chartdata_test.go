package report

import (
	"math"
	"slices"
	"strings"
	"testing"
)

func TestNiceWidth(t *testing.T) {
	tests := []struct{ in, want float64 }{
		{0.7, 1}, {1, 1}, {1.01, 2}, {2.5, 5}, {7, 10}, {0.13, 0.2}, {0.04, 0.05}, {0, 0.01}, {math.NaN(), 0.01}, {35, 50},
	}
	for _, tc := range tests {
		if got := niceWidth(tc.in); math.Abs(got-tc.want) > 1e-12 {
			t.Errorf("niceWidth(%v) = %v, want %v", tc.in, got, tc.want)
		}
	}
}

func TestLotHistogram(t *testing.T) {
	mk := func(vals []float64, resolved []bool, limit float64) *Campaign {
		c := &Campaign{}
		for i, v := range vals {
			r := Result{Unit: "U", Test: "cmrr", TemperatureC: 25, RatioDB: v, LowerBoundDB: math.NaN(), Resolved: true, LimitDB: limit}
			if resolved != nil && !resolved[i] {
				r.Resolved, r.LowerBoundDB, r.RatioDB = false, v, math.NaN()
			}
			c.Results = append(c.Results, r)
		}
		return c
	}
	tests := []struct {
		name       string
		vals       []float64
		resolved   []bool
		limit      float64
		binDB      float64
		wantEdges  []float64
		wantCounts []int // resolved + bound-only per bin
		wantBelow  int
		wantSkip   int
	}{
		{
			name: "limit is an edge; equal to the limit counts above it",
			vals: []float64{105, 109.99, 110, 110.01, 112.4}, limit: 110, binDB: 1,
			wantEdges:  []float64{105, 106, 107, 108, 109, 110, 111, 112},
			wantCounts: []int{1, 0, 0, 0, 1, 2, 0, 1},
			wantBelow:  5,
		},
		{
			name: "limit above every value",
			vals: []float64{100, 101}, limit: 103, binDB: 1,
			wantEdges:  []float64{100, 101, 102, 103},
			wantCounts: []int{1, 1, 0, 0},
			wantBelow:  3,
		},
		{
			name: "no limit: edges on multiples of the width",
			vals: []float64{121.3, 124.9, 126}, limit: math.NaN(), binDB: 2,
			wantEdges:  []float64{120, 122, 124, 126},
			wantCounts: []int{1, 0, 1, 1},
		},
		{
			name: "bounds and infinities",
			vals: []float64{120, 140, math.Inf(1)}, resolved: []bool{true, false, true}, limit: 110, binDB: 10,
			wantEdges:  []float64{110, 120, 130, 140},
			wantCounts: []int{0, 1, 0, 1},
			wantSkip:   1,
		},
		{
			// √25 = 5 bins over 100..120 dB → 4 dB → 5 dB (1-2-5).
			name: "automatic width",
			vals: slices.Repeat([]float64{100, 105, 110, 115, 120}, 5), limit: 110,
			wantEdges:  []float64{100, 105, 110, 115, 120},
			wantCounts: []int{5, 5, 5, 5, 5},
			wantBelow:  2,
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			h, ok := lotHistogram(mk(tc.vals, tc.resolved, tc.limit), "cmrr", 25, tc.binDB)
			if !ok {
				t.Fatal("no histogram")
			}
			if len(h.Edges) != len(tc.wantEdges) {
				t.Fatalf("edges %v, want %v", h.Edges, tc.wantEdges)
			}
			for i := range h.Edges {
				if math.Abs(h.Edges[i]-tc.wantEdges[i]) > 1e-9 {
					t.Errorf("edges %v, want %v", h.Edges, tc.wantEdges)
					break
				}
			}
			var counts []int
			for i := range h.Edges {
				counts = append(counts, h.Resolved[i]+h.BoundOnly[i])
			}
			if !slices.Equal(counts, tc.wantCounts) {
				t.Errorf("counts %v, want %v", counts, tc.wantCounts)
			}
			if !math.IsNaN(tc.limit) && h.BelowLimit != tc.wantBelow {
				t.Errorf("bins below the limit %d, want %d", h.BelowLimit, tc.wantBelow)
			}
			if h.Skipped != tc.wantSkip {
				t.Errorf("skipped %d, want %d", h.Skipped, tc.wantSkip)
			}
		})
	}
	if _, ok := lotHistogram(mk(nil, nil, 110), "cmrr", 25, 1); ok {
		t.Error("histogram of no results")
	}
}

func TestWorstUnits(t *testing.T) {
	rep := map[fitKey]float64{
		{Unit: "A", Test: "cmrr", T: tempKey(25)}: 120,
		{Unit: "B", Test: "cmrr", T: tempKey(25)}: 100,
		{Unit: "C", Test: "cmrr", T: tempKey(25)}: math.NaN(),
		{Unit: "D", Test: "cmrr", T: tempKey(25)}: 100,
		{Unit: "E", Test: "cmrr", T: tempKey(85)}: 10, // other temperature
	}
	got := worstUnits([]string{"A", "C", "E", "D", "B"}, "cmrr", 25.004, rep, 4)
	// Lowest first, ties by id, unknown (NaN, missing) last.
	if want := []string{"B", "D", "A", "C"}; !slices.Equal(got, want) {
		t.Errorf("worstUnits = %q, want %q", got, want)
	}
}

func TestChartTemperature(t *testing.T) {
	want85 := 85.0
	tests := []struct {
		temps []float64
		want  *float64
		exp   float64
	}{
		{[]float64{-40, 20, 85}, nil, 20},
		{[]float64{-40, 85}, nil, 85}, // |85−25| = 60 < |−40−25| = 65
		{[]float64{25}, nil, 25},
		{nil, nil, 25},
		{[]float64{-40, 25, 85}, &want85, 85},
	}
	for _, tc := range tests {
		if got := chartTemperature(tc.temps, tc.want); got != tc.exp {
			t.Errorf("chartTemperature(%v) = %v, want %v", tc.temps, got, tc.exp)
		}
	}
}

func TestResidualVolts(t *testing.T) {
	// MeterVolts = a + b·x + q·x² + d·(t − t0) + e: the residual is e.
	f := &FitRow{Intercept: 0.01, SlopeVPerV: 1e-3, Quadratic: 2e-6, DriftVPerS: 1e-8, DriftOriginSeconds: 100}
	for _, tc := range []struct{ x, t, e float64 }{{0, 100, 0}, {10, 0, 3e-7}, {-7.5, 250, -1e-6}} {
		r := &Reading{ReadVolts: tc.x, BenchSeconds: tc.t,
			MeterVolts: 0.01 + 1e-3*tc.x + 2e-6*tc.x*tc.x + 1e-8*(tc.t-100) + tc.e}
		if got := residualVolts(f, r); math.Abs(got-tc.e) > 1e-15 {
			t.Errorf("residual at x=%v t=%v: %g, want %g", tc.x, tc.t, got, tc.e)
		}
	}
}

func TestCellText(t *testing.T) {
	tests := []struct{ in, want string }{
		{"plain", "plain"},
		{"=1+2", "=1+2"},
		{"tab\tnl\ncr\r", "tab\tnl\ncr\r"},
		{"nul\x00", "nul\uFFFD"},
		{"\xc3\x28", "\uFFFD("},
		{"\uFFFE", "\uFFFD"},
		{"😀", "😀"},
	}
	for _, tc := range tests {
		if got := cellText(tc.in); got != tc.want {
			t.Errorf("cellText(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
	// 32,767 UTF-16 units: an emoji (2 units) is not split.
	got := cellText(strings.Repeat("😀", maxCellUTF16/2+1))
	if n := len([]rune(got)); n != maxCellUTF16/2 {
		t.Errorf("cut to %d emoji, want %d", n, maxCellUTF16/2)
	}
	if sharedText("a_x0041_x0042_") != "a_x005F_x0041_x005F_x0042_" {
		t.Errorf("sharedText = %q", sharedText("a_x0041_x0042_"))
	}
}

// A board_cmrr test has a differential and a common-mode sweep, each with
// its own fit: they get a response chart each, and readings join their
// own sweep's fit.
func TestPlanChartsSweeps(t *testing.T) {
	c := &Campaign{}
	for _, sw := range []struct {
		name  string
		slope float64
	}{{"diff", 10}, {"cm", 1e-4}} {
		c.Fits = append(c.Fits, FitRow{Unit: "B01", Test: "board_cmrr", Sweep: sw.name, TemperatureC: 25, SlopeVPerV: sw.slope})
		for i, x := range []float64{-1, 0, 1} {
			c.Readings = append(c.Readings, Reading{Unit: "B01", Test: "board_cmrr", Sweep: sw.name, TemperatureC: 25,
				Step: i, ReadVolts: x, MeterVolts: sw.slope * x})
		}
	}
	c.Results = []Result{{Unit: "B01", Test: "board_cmrr", TemperatureC: 25, RatioDB: 100, Resolved: true, LimitDB: math.NaN()}}
	p := planCharts(c, ChartOptions{})
	if len(p.Responses) != 2 {
		t.Fatalf("%d response charts, want one per sweep", len(p.Responses))
	}
	for i, want := range []struct {
		sweep string
		slope float64
	}{{"diff", 10}, {"cm", 1e-4}} {
		rc := p.Responses[i]
		if rc.Sweep != want.sweep || len(rc.Series) != 1 || len(rc.Series[0].Points) != 3 {
			t.Fatalf("chart %d: sweep %q, %d series", i, rc.Sweep, len(rc.Series))
		}
		for _, r := range rc.Series[0].Residuals {
			if math.Abs(r.Y) > 1e-9 {
				t.Errorf("%s sweep: residual %v µV, want 0 (reading joined to the wrong fit)", want.sweep, r.Y)
			}
		}
		if got := rc.title(); got != "board_cmrr ("+want.sweep+" sweep) at 25 °C: output change against stimulus (1 unit)" {
			t.Errorf("title %q", got)
		}
	}
}
