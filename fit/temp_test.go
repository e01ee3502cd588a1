package fit

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

func TestTempSlopes(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	temps := []float64{-40, 25, 85, 125, 25, -40}
	const slope = -0.05 // dB/°C
	var units []UnitTemps
	for u, offset := range []float64{100, 104, 97, 110} {
		ut := UnitTemps{Unit: string(rune('A' + u))}
		for _, tc := range temps {
			ut.TempC = append(ut.TempC, tc)
			ut.RatioDB = append(ut.RatioDB, offset+slope*tc+0.05*rng.NormFloat64())
		}
		units = append(units, ut)
	}
	units = append(units, UnitTemps{Unit: "E", TempC: []float64{25}, RatioDB: []float64{101}})
	lt, err := LotTempSlope(units)
	if err != nil {
		t.Fatal(err)
	}
	c := lt.Common
	if math.Abs(c.SlopeDBPerC-slope) > 4*c.SlopeStdErrDBPerC || c.SlopeStdErrDBPerC <= 0 || c.SlopeStdErrDBPerC > 1e-3 {
		t.Errorf("common slope %v ± %v", c.SlopeDBPerC, c.SlopeStdErrDBPerC)
	}
	if c.N != 25 || c.DOF != 25-6 {
		t.Errorf("n %d dof %d", c.N, c.DOF)
	}
	if lt.UnitsFitted != 4 || len(lt.PerUnit) != 5 || lt.PerUnit[4].Fitted {
		t.Errorf("per unit %+v", lt.PerUnit)
	}
	if math.Abs(lt.MeanUnitSlopeDBPerC-slope) > 1e-3 || lt.SDUnitSlopeDBPerC <= 0 {
		t.Errorf("mean unit slope %v sd %v", lt.MeanUnitSlopeDBPerC, lt.SDUnitSlopeDBPerC)
	}
	// Without per-unit intercepts the unit offsets would bias nothing here
	// (same temperatures), but one unit's slope alone is less precise.
	if lt.PerUnit[0].SlopeStdErrDBPerC <= c.SlopeStdErrDBPerC {
		t.Errorf("unit se %v not above lot se %v", lt.PerUnit[0].SlopeStdErrDBPerC, c.SlopeStdErrDBPerC)
	}
	if _, err := LotTempSlope([]UnitTemps{{Unit: "A", TempC: []float64{25, 25, 25}, RatioDB: []float64{1, 2, 3}}}); !errors.Is(err, ErrZeroSpan) {
		t.Errorf("one temperature: %v", err)
	}
	if _, err := TempSlope("A", []float64{25, 85}, []float64{100, 99}); !errors.Is(err, ErrTooFewPoints) {
		t.Errorf("two points: %v", err)
	}
}

// Pooled variance Σ(n_i−1)s_i²/Σ(n_i−1) (GUM 4.2.8): {1,2,3} has s² = 1
// (2 dof), {2,4} s² = 2 (1 dof), {5} adds nothing → 4/3 with 3 dof.
func TestPooledSD(t *testing.T) {
	p, err := PooledSD([][]float64{{1, 2, 3}, {2, 4}, {5}})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(p.SD-math.Sqrt(4.0/3)) > 1e-15 || p.DOF != 3 || p.Groups != 2 {
		t.Errorf("%+v", p)
	}
	if _, err := PooledSD([][]float64{{1}, {2}}); !errors.Is(err, ErrTooFewPoints) {
		t.Errorf("singletons: %v", err)
	}
	if _, err := PooledSD([][]float64{{1, math.NaN()}}); !errors.Is(err, ErrBadInput) {
		t.Errorf("NaN: %v", err)
	}
}
