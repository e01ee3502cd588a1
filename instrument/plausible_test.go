package instrument

import (
	"math"
	"testing"
)

// A DMM shows up to about 120 % of its range before it reports overload
// (common practice, no published source); a finite reading beyond that is
// a fault, while the SCPI overload code (+/-Inf after parsing, IEEE 488.2
// / SCPI 1999 Vol. 1 §7.2.1.5 9.9E37) is handled as an overload.
func TestBeyondRange(t *testing.T) {
	cases := []struct {
		readings []float64
		rng      float64
		n        int
		first    float64
	}{
		{[]float64{1, -9.9, 11.9}, 10, 0, 0},
		{[]float64{12.1}, 10, 1, 12.1},
		{[]float64{0.5, 1e7, -1e300}, 10, 2, 1e7},
		{[]float64{math.Inf(1), math.NaN()}, 10, 0, 0}, // overload and NaN codes: not this check
		{[]float64{1e300}, 0, 0, 0},                    // range not configured
		{[]float64{0.13}, 0.1, 1, 0.13},
	}
	for _, c := range cases {
		n, first := beyondRange(c.readings, c.rng)
		if n != c.n || first != c.first {
			t.Errorf("beyondRange(%v, %g) = %d, %g; want %d, %g", c.readings, c.rng, n, first, c.n, c.first)
		}
	}
}
