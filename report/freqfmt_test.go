package report

import (
	"math"
	"testing"
)

// TestRoundToU checks rounding to the uncertainty against JCGM 100:2008
// (GUM) 7.2.6: U to at most two significant digits, the estimate rounded
// to be consistent with it. The two GUM cases are its own examples (from
// memory): y = 10.057 62 Ω with u_c = 27 mΩ is quoted 10.058 Ω, and
// u = 28.05 kHz rounds down to 28 kHz.
func TestRoundToU(t *testing.T) {
	cases := []struct {
		name         string
		v, u         float64
		wantV, wantU float64
		wantD        int
		wantOK       bool
	}{
		{"GUM 7.2.6 resistance, Ω", 10.05762, 0.027, 10.058, 0.027, 3, true},
		{"GUM 7.2.6 28.05 kHz down to 28", 1000.3, 28.05, 1000, 28, 0, true},
		{"pole corner from a review of the demo, Hz", 315.371370628783, 9.1063104792092, 315.4, 9.1, 1, true},
		{"U carries into the next decade", 1234.567, 9.96, 1235, 10, 0, true},
		{"U of thousands rounds the value to hundreds", 26826.96, 1234, 26800, 1200, -2, true},
		{"no U: unrounded", 315.37, math.NaN(), 315.37, math.NaN(), 0, false},
		{"zero U: unrounded", 315.37, 0, 315.37, 0, 0, false},
	}
	same := func(a, b float64) bool { return (math.IsNaN(a) && math.IsNaN(b)) || a == b }
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			v, u, d, ok := RoundToU(c.v, c.u)
			if !same(v, c.wantV) || !same(u, c.wantU) || d != c.wantD || ok != c.wantOK {
				t.Errorf("RoundToU(%v, %v) = %v, %v, %d, %v; want %v, %v, %d, %v", c.v, c.u, v, u, d, ok, c.wantV, c.wantU, c.wantD, c.wantOK)
			}
		})
	}
}

// TestFormatHzAndWithU: frequencies in plain decimals to five significant
// digits (never "2.683e+04"), and a value with its U as GUM 7.2.6 quotes
// them (JCGM 100:2008 7.2.6 example, from memory: 10.058 Ω, u 27 mΩ).
func TestFormatHzAndWithU(t *testing.T) {
	for _, c := range []struct {
		f    float64
		want string
	}{
		{26826.957952797256, "26827"}, {37.275937203149404, "37.276"}, {10, "10"}, {100000, "100000"},
		{1930.6977288832495, "1930.7"}, {0.5, "0.5"}, {1e6, "1000000"},
	} {
		if got := FormatHz(c.f); got != c.want {
			t.Errorf("FormatHz(%v) = %q, want %q", c.f, got, c.want)
		}
	}
	for _, c := range []struct {
		v, u         float64
		wantV, wantU string
	}{
		{10.05762, 0.027, "10.058", "0.027"},
		{315.371370628783, 9.1063104792092, "315.4", "9.1"},
		{26826.96, 1234, "26800", "1200"},
	} {
		if v, u := FormatWithU(c.v, c.u); v != c.wantV || u != c.wantU {
			t.Errorf("FormatWithU(%v, %v) = %q, %q; want %q, %q", c.v, c.u, v, u, c.wantV, c.wantU)
		}
	}
}
