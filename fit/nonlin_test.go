package fit

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestNonlinear(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 3))
	x := zigzag(20, 10, 4) // −10 … +10 V
	tm := make([]float64, len(x))
	for i := range tm {
		tm[i] = float64(i)
	}
	const K = 1000.0
	noise := 2e-6 // meter volts
	mk := func(quad, kink float64) []float64 {
		y := make([]float64, len(x))
		for i, v := range x {
			y[i] = 0.01*v + quad*v*v + kink*math.Max(0, v) + 1e-7*tm[i] + noise*rng.NormFloat64()
		}
		return y
	}
	t.Run("straight", func(t *testing.T) {
		nl, err := Nonlinear(x, mk(0, 0), NonlinOptions{NoiseGain: K, Time: tm})
		if err != nil {
			t.Fatal(err)
		}
		if nl.QuadSignificant || nl.SpanDependent || !nl.HalvesCompared {
			t.Errorf("%+v", nl)
		}
		// largest residual ~ a few noise SDs, referred to the input: ≤ 4σ/K in µV
		if nl.MaxDeviationUV <= 0 || nl.MaxDeviationUV > 4*noise/K*1e6 {
			t.Errorf("max deviation %v µV", nl.MaxDeviationUV)
		}
	})
	t.Run("bowed", func(t *testing.T) {
		nl, err := Nonlinear(x, mk(2e-6, 0), NonlinOptions{NoiseGain: K, Time: tm})
		if err != nil {
			t.Fatal(err)
		}
		if !nl.QuadSignificant || math.Abs(nl.Quad.Value-2e-6) > 5*nl.Quad.StdErr {
			t.Errorf("quad %+v significant %v", nl.Quad, nl.QuadSignificant)
		}
		// the bow puts the largest residual at the ends or the middle
		if nl.AtStimulusVolts != 0 && math.Abs(nl.AtStimulusVolts) != 10 {
			t.Errorf("largest deviation at %v V", nl.AtStimulusVolts)
		}
	})
	t.Run("kinked", func(t *testing.T) {
		// upper half slope 0.01 + 2e-5 V/V: the ratio changes across the span
		nl, err := Nonlinear(x, mk(0, 2e-5), NonlinOptions{NoiseGain: K, Time: tm})
		if err != nil {
			t.Fatal(err)
		}
		if !nl.SpanDependent || nl.SlopeZ < 3 {
			t.Errorf("%+v", nl)
		}
		d := nl.UpperSlope.Value - nl.LowerSlope.Value
		if math.Abs(d-2e-5) > 5*nl.UpperSlope.StdErr {
			t.Errorf("slope change %v", d)
		}
	})
	t.Run("two levels", func(t *testing.T) {
		nl, err := Nonlinear([]float64{-1, 1, -1, 1}, []float64{0, 1, 0.01, 1.01}, NonlinOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if nl.HalvesCompared || nl.QuadSignificant {
			t.Errorf("%+v", nl)
		}
	})
}
