package fit

import (
	"errors"
	"fmt"
	"math"
)

// TempSlope fits ratio_dB = a + b·T to one unit's results at temperatures
// T (°C) by Line and returns b in dB/°C with its standard error
// (se(b) = s/√Σ(T − T̄)², ν = n − 2; GUM H.3). Mismatched lengths panic;
// fewer than 3 points return ErrTooFewPoints, a single temperature
// ErrZeroSpan.
func TempSlope(unit string, tempC, ratioDB []float64) (TempFit, error) {
	lf, err := Line(tempC, ratioDB, LineOptions{})
	if err != nil {
		return TempFit{Unit: unit, N: len(tempC)}, fmt.Errorf("fit: temperature slope of %q: %w", unit, err)
	}
	return TempFit{
		Unit: unit, Fitted: true,
		SlopeDBPerC: lf.Slope.Value, SlopeStdErrDBPerC: lf.Slope.StdErr,
		InterceptDB: lf.Intercept.Value,
		DOF:         lf.DOF, ResidualSDDB: lf.ResidualSD, N: lf.N,
	}, nil
}

// LotTempSlope fits all units at once with one common temperature slope and
// an intercept per unit (analysis of covariance with parallel lines):
//
//	ratio_dB,ui = a_u + b·T_ui + e_ui,   ν = N − (units + 1)
//
// so unit-to-unit offsets do not bias b, and also fits each unit alone
// (TempSlope; units with too few points or one temperature are listed with
// Fitted false). Mismatched lengths within a unit panic. An empty lot, or a
// lot where no unit changes temperature, returns an error.
func LotTempSlope(units []UnitTemps) (LotTempFit, error) {
	if len(units) == 0 {
		return LotTempFit{}, fmt.Errorf("fit: no units: %w", ErrTooFewPoints)
	}
	var y, temp []float64
	for _, u := range units {
		if len(u.TempC) != len(u.RatioDB) {
			panic(fmt.Sprintf("fit.LotTempSlope: unit %q has %d temperatures and %d ratios", u.Unit, len(u.TempC), len(u.RatioDB)))
		}
		y = append(y, u.RatioDB...)
		temp = append(temp, u.TempC...)
	}
	cols := make([][]float64, 0, len(units)+1)
	names := make([]string, 0, len(units)+1)
	off := 0
	for _, u := range units {
		if len(u.TempC) == 0 {
			return LotTempFit{}, fmt.Errorf("fit: unit %q has no readings: %w", u.Unit, ErrTooFewPoints)
		}
		c := make([]float64, len(y))
		for i := range u.TempC {
			c[off+i] = 1
		}
		off += len(u.TempC)
		cols = append(cols, c)
		names = append(names, "intercept "+u.Unit)
	}
	cols = append(cols, temp)
	names = append(names, "temperature slope")
	lf, err := Linear(y, cols, LinearOptions{NoIntercept: true, Names: names})
	if err != nil {
		if errors.Is(err, ErrSingular) {
			return LotTempFit{}, fmt.Errorf("fit: no unit was measured at more than one temperature: %w", ErrZeroSpan)
		}
		return LotTempFit{}, fmt.Errorf("fit: lot temperature slope: %w", err)
	}
	s := lf.Terms[len(lf.Terms)-1]
	out := LotTempFit{Common: TempFit{
		Unit: "lot", Fitted: true, SlopeDBPerC: s.Value, SlopeStdErrDBPerC: s.StdErr,
		DOF: lf.DOF, ResidualSDDB: lf.ResidualSD, N: lf.N,
	}}
	var slopes []float64
	for _, u := range units {
		tf, err := TempSlope(u.Unit, u.TempC, u.RatioDB)
		if err != nil && !errors.Is(err, ErrTooFewPoints) && !errors.Is(err, ErrZeroSpan) {
			return LotTempFit{}, err
		}
		out.PerUnit = append(out.PerUnit, tf)
		if tf.Fitted {
			slopes = append(slopes, tf.SlopeDBPerC)
		}
	}
	out.UnitsFitted = len(slopes)
	if len(slopes) > 0 {
		out.MeanUnitSlopeDBPerC, out.SDUnitSlopeDBPerC = meanSD(slopes)
	}
	return out, nil
}

// PooledSD pools the repeatability of several groups of repeats,
//
//	s_p² = Σ_i (n_i − 1)·s_i² / Σ_i (n_i − 1),   ν = Σ_i (n_i − 1)
//
// (GUM H.3.6 / 4.2.8 pooled estimate of variance). Groups with fewer than
// two values add nothing. No degrees of freedom returns ErrTooFewPoints;
// NaN or Inf returns ErrBadInput.
func PooledSD(groups [][]float64) (Pooled, error) {
	num, dof, used := 0.0, 0, 0
	for g, v := range groups {
		if i := firstNonFinite(v); i >= 0 {
			return Pooled{}, fmt.Errorf("fit: group %d value %d is %v: %w", g, i, v[i], ErrBadInput)
		}
		if len(v) < 2 {
			continue
		}
		_, sd := meanSD(v)
		num += float64(len(v)-1) * sd * sd
		dof += len(v) - 1
		used++
	}
	if dof == 0 {
		return Pooled{}, fmt.Errorf("fit: no group has two or more repeats: %w", ErrTooFewPoints)
	}
	return Pooled{SD: math.Sqrt(num / float64(dof)), DOF: dof, Groups: used}, nil
}
