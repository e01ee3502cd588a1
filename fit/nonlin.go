package fit

import (
	"errors"
	"fmt"
	"math"
)

// NonlinOptions configures Nonlinear.
type NonlinOptions struct {
	// NoiseGain K refers meter volts to the input (1 when direct).
	NoiseGain float64
	// Time, if not nil, adds a drift term to every model (seconds).
	Time []float64
	// ZLimit flags a span-dependent ratio when the slope change exceeds
	// ZLimit standard uncertainties (0 → 3).
	ZLimit float64
	// Coverage for the quadratic-term test, two-sided (0 → 0.95).
	Coverage float64
}

// Nonlinear describes how a transfer (meter volts y against stimulus volts
// x) departs from a straight line:
//
//   - MaxDeviationUV: the largest |residual| of y = b0 + b1·x (+ drift),
//     divided by the noise gain K and expressed in µV at the input.
//   - Quadratic term: y = b0 + b1·x + b3·x² (+ drift); significant when
//     |b3| > t_{(1+p)/2}(ν)·se(b3), ν = n − p (a two-sided t test at the
//     coverage probability, GUM G.3).
//   - Span dependence: the continuous two-segment ("hinge") model
//     y = b0 + b1·x + b2·max(0, x − x_m) (+ drift) with the knot x_m at the
//     middle of the stimulus range. b1 is the slope of the lower half,
//     b1 + b2 that of the upper half, and b2 their difference with its
//     standard error from the same fit (so the shared data at the knot are
//     accounted for); SpanDependent when |b2|/se(b2) > ZLimit.
//
// Mismatched lengths panic. The straight line must be fittable; the
// quadratic and hinge models are skipped (zero, flags false) when there are
// too few distinct levels.
func Nonlinear(x, y []float64, opt NonlinOptions) (Nonlinearity, error) {
	K := opt.NoiseGain
	if K == 0 {
		K = 1
	}
	if !(K > 0) || math.IsInf(K, 0) {
		return Nonlinearity{}, fmt.Errorf("fit: noise gain %v must be > 0: %w", opt.NoiseGain, ErrBadInput)
	}
	z := opt.ZLimit
	if z == 0 {
		z = 3
	}
	var out Nonlinearity
	line, err := Line(x, y, LineOptions{Time: opt.Time})
	if err != nil {
		return out, err
	}
	for i, r := range line.Model.Residuals {
		if d := math.Abs(r) / K * 1e6; d > out.MaxDeviationUV {
			out.MaxDeviationUV = d
			out.AtStimulusVolts = x[i]
		}
	}
	quad, err := Line(x, y, LineOptions{Time: opt.Time, Quadratic: true})
	switch {
	case err == nil:
		out.Quad = quad.Quad
		if quad.Quad.StdErr > 0 {
			out.QuadT = quad.Quad.Value / quad.Quad.StdErr
		}
		t := CoverageFactor(DOF(quad.DOF), coverageOr(opt.Coverage))
		out.QuadSignificant = math.Abs(quad.Quad.Value) > t*quad.Quad.StdErr
	case errors.Is(err, ErrTooFewPoints) || errors.Is(err, ErrSingular):
	default:
		return out, err
	}

	mid := (line.XMin + line.XMax) / 2
	hinge := make([]float64, len(x))
	for i, v := range x {
		hinge[i] = math.Max(0, v-mid)
	}
	cols := [][]float64{x, hinge}
	if opt.Time != nil {
		cols = append(cols, opt.Time)
	}
	h, err := Linear(y, cols, LinearOptions{Names: []string{"lower slope", "slope change", "drift"}})
	switch {
	case err == nil:
		b1, b2 := h.Terms[1], h.Terms[2]
		out.HalvesCompared = true
		out.LowerSlope = Term{Name: "lower half slope", Value: b1.Value, StdErr: b1.StdErr}
		vu := h.Cov[1][1] + h.Cov[2][2] + 2*h.Cov[1][2]
		out.UpperSlope = Term{Name: "upper half slope", Value: b1.Value + b2.Value, StdErr: math.Sqrt(math.Max(vu, 0))}
		if b2.StdErr > 0 {
			out.SlopeZ = math.Abs(b2.Value) / b2.StdErr
			out.SpanDependent = out.SlopeZ > z
		}
	case errors.Is(err, ErrTooFewPoints) || errors.Is(err, ErrSingular):
	default:
		return out, err
	}
	return out, nil
}

func coverageOr(p float64) float64 {
	if p == 0 {
		return DefaultCoverage
	}
	return p
}
