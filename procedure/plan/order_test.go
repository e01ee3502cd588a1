package plan

import (
	"fmt"
	"math"
	"reflect"
	"testing"
)

func TestOrderLevelsSequences(t *testing.T) {
	five := []float64{10, -5, 0, 5, -10} // deliberately unsorted
	cases := []struct {
		order  string
		levels []float64
		want   []float64
	}{
		// The example of the plan schema: centre, +1, -1, +2, -2, then back.
		{OrderZigzag, five, []float64{0, 5, -5, 10, -10, -10, 10, -5, 5, 0}},
		{"", five, []float64{0, 5, -5, 10, -10, -10, 10, -5, 5, 0}},
		{OrderSymmetric, five, []float64{-10, -5, 0, 5, 10, 10, 5, 0, -5, -10}},
		{OrderAscending, five, []float64{-10, -5, 0, 5, 10}},
		// Even count: the centre is the lower middle level.
		{OrderZigzag, []float64{-3, -1, 1, 3}, []float64{-1, 1, -3, 3, 3, -3, 1, -1}},
		// Lopsided levels: after one side runs out the other continues.
		{OrderZigzag, []float64{0, 1, 2, 3, 4, 5}, []float64{2, 3, 1, 4, 0, 5, 5, 0, 4, 1, 3, 2}},
		{OrderZigzag, nil, []float64{}},
	}
	for _, c := range cases {
		got := OrderLevels(c.levels, c.order)
		if !reflect.DeepEqual(got, c.want) {
			t.Errorf("OrderLevels(%v, %q) = %v, want %v", c.levels, c.order, got, c.want)
		}
	}
	if !reflect.DeepEqual(five, []float64{10, -5, 0, 5, -10}) {
		t.Error("OrderLevels changed its argument")
	}
}

func TestOrderLevelsUnknownPanics(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("no panic for an unknown order")
		}
	}()
	OrderLevels([]float64{1, 2, 3}, "random")
}

// olsSlope is the least-squares slope of y on x,
// b = Σ(x-x̄)(y-ȳ) / Σ(x-x̄)² (straight-line fit, GUM H.3), written out
// here independently of the package.
func olsSlope(x, y []float64) float64 {
	var mx, my float64
	for i := range x {
		mx += x[i]
		my += y[i]
	}
	mx /= float64(len(x))
	my /= float64(len(y))
	var sxy, sxx float64
	for i := range x {
		sxy += (x[i] - mx) * (y[i] - my)
		sxx += (x[i] - mx) * (x[i] - mx)
	}
	return sxy / sxx
}

// TestOrderCancelsLinearDrift: a pure drift y = a + d·t, with one point
// per time step, fitted against the levels in the order visited, gives a
// slope of exactly 0 (to rounding) for zigzag and symmetric. For ascending
// evenly spaced levels x = x0 + Δ·t, so y = a + d·(x - x0)/Δ and the slope
// is d/Δ exactly: the drift is mistaken for a response.
func TestOrderCancelsLinearDrift(t *testing.T) {
	const a, d = 3e-3, 2.5e-6 // volts, volts per step
	sets := [][]float64{
		{-10, -5, 0, 5, 10},
		{-10, -5, 5, 10},
		{-3, 0, 2, 7, 11, 12, 20},
		{0, 1, 2},
		{-14, -7, 0, 7, 14, 21, 28, 35},
	}
	for _, levels := range sets {
		for _, order := range []string{OrderZigzag, OrderSymmetric} {
			x := OrderLevels(levels, order)
			y := make([]float64, len(x))
			for i := range x {
				y[i] = a + d*float64(i)
			}
			b := olsSlope(x, y)
			// Scale of a slope the drift could fake: d per level step.
			if math.Abs(b) > 1e-12*d {
				t.Errorf("%s %v: drift slope %g, want 0", order, levels, b)
			}
			// Every level's mean time equals the pass's mean time.
			meanT := float64(len(x)-1) / 2
			sum, n := map[float64]float64{}, map[float64]int{}
			for i, v := range x {
				sum[v] += float64(i)
				n[v]++
			}
			for v := range sum {
				if got := sum[v] / float64(n[v]); math.Abs(got-meanT) > 1e-12 {
					t.Errorf("%s %v: level %g mean time %g, want %g", order, levels, v, got, meanT)
				}
			}
		}
	}
	x := OrderLevels([]float64{-10, -5, 0, 5, 10}, OrderAscending)
	y := make([]float64, len(x))
	for i := range x {
		y[i] = a + d*float64(i)
	}
	const step = 5.0
	if b := olsSlope(x, y); math.Abs(b-d/step) > 1e-12*d {
		t.Errorf("ascending: drift slope %g, want d/Δ = %g", b, d/step)
	}
}

// TestOrderLevelsResponsePreserved: the order does not change the fitted
// response itself (y = k·x + drift recovers k for the palindromes).
func TestOrderLevelsResponsePreserved(t *testing.T) {
	const k, d = 1e-5, 3e-7
	for _, order := range []string{OrderZigzag, OrderSymmetric} {
		x := OrderLevels([]float64{-10, -5, 0, 5, 10}, order)
		y := make([]float64, len(x))
		for i := range x {
			y[i] = k*x[i] + d*float64(i)
		}
		if b := olsSlope(x, y); math.Abs(b-k) > 1e-12 {
			t.Errorf("%s: slope %g, want %g", order, b, k)
		}
	}
}

func TestSweeps(t *testing.T) {
	b := Test{Kind: TestBoardCMRR, Levels: []float64{-1, 0, 1}, DiffLevels: []float64{-0.1, 0, 0.1}, Order: OrderAscending}
	got := fmt.Sprint(Sweeps(&b))
	if want := "[{cm [-1 0 1]} {diff [-0.1 0 0.1]}]"; got != want {
		t.Errorf("board sweeps %s, want %s", got, want)
	}
	c := Test{Kind: TestCMRR, Levels: []float64{-1, 0, 1}, Order: OrderZigzag}
	if got := fmt.Sprint(Sweeps(&c)); got != "[{ [0 1 -1 -1 1 0]}]" {
		t.Errorf("cmrr sweeps %s", got)
	}
}
