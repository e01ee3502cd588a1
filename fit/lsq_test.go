package fit

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// zigzag returns stimulus levels 0, +a, −a, +2a, −2a, … over `levels`
// distinct values, repeated `cycles` times forward and back, so that time
// does not track the stimulus and a drift term can be fitted.
func zigzag(span float64, levels, cycles int) []float64 {
	half := levels / 2
	var seq []float64
	seq = append(seq, 0)
	for i := 1; i <= half; i++ {
		seq = append(seq, float64(i)*span/float64(2*half), -float64(i)*span/float64(2*half))
	}
	var out []float64
	for c := 0; c < cycles; c++ {
		if c%2 == 0 {
			out = append(out, seq...)
		} else {
			for i := len(seq) - 1; i >= 0; i-- {
				out = append(out, seq[i])
			}
		}
	}
	return out
}

// TestLineExact: an exact line y = 3 + 2x is recovered with zero residual;
// the design is mathematics, not a reference data set.
func TestLineExact(t *testing.T) {
	x := []float64{-2, -1, 0, 1, 2, 3}
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = 3 + 2*v
	}
	f, err := Line(x, y, LineOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if f.Intercept.Value != 3 || f.Slope.Value != 2 || f.ResidualSD != 0 || f.DOF != 4 || f.N != 6 || f.RSquared != 1 {
		t.Errorf("%+v", f)
	}
	if f.XMin != -2 || f.XMax != 3 || f.XSpan != 5 || f.SlopeIndex != 1 || f.DriftIndex != -1 || f.HasDrift || f.HasQuad {
		t.Errorf("range/index: %+v", f)
	}
}

// TestLineVoltsMicrovolts: a 20 V stimulus against a microvolt response on a
// 5 V pedestal keeps its digits. Storing 5 + 1.234e-6·x in float64 already
// rounds each reading by up to ulp(5)/2 = 4.4e-16 V, i.e. ~4e-11 of the
// 12 µV response, so the slope can only come back to ~1e-10 relative.
func TestLineVoltsMicrovolts(t *testing.T) {
	x := zigzag(20, 10, 3)
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = 5 + 1.234e-6*v
	}
	f, err := Line(x, y, LineOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(f.Slope.Value-1.234e-6) > 1e-10*1.234e-6 {
		t.Errorf("slope %.16g", f.Slope.Value)
	}
}

// TestLineDrift: a linear drift in time is separated from the stimulus when
// the levels are zigzagged; without the drift term the slope is biased.
func TestLineDrift(t *testing.T) {
	x := zigzag(10, 4, 4)
	tm := make([]float64, len(x))
	y := make([]float64, len(x))
	for i, v := range x {
		tm[i] = 2 * float64(i) // seconds
		y[i] = 1e-3 + 5e-5*v + 3e-6*tm[i]
	}
	f, err := Line(x, y, LineOptions{Time: tm})
	if err != nil {
		t.Fatal(err)
	}
	if !f.HasDrift || math.Abs(f.Drift.Value-3e-6) > 1e-18 || math.Abs(f.Slope.Value-5e-5) > 1e-17 {
		t.Errorf("slope %v drift %v", f.Slope.Value, f.Drift.Value)
	}
	if f.DriftIndex != 2 || f.Model.Terms[2].Name != "drift" {
		t.Errorf("index %d terms %+v", f.DriftIndex, f.Model.Terms)
	}
}

// TestLineCollinearTime: a ramp taken in order with evenly spaced times
// makes time a copy of the stimulus; the error must say so.
func TestLineCollinearTime(t *testing.T) {
	x := []float64{-10, -5, 0, 5, 10}
	tm := []float64{0, 1, 2, 3, 4}
	y := []float64{1, 2, 3, 4, 5.1}
	_, err := Line(x, y, LineOptions{Time: tm})
	if !errors.Is(err, ErrSingular) || !strings.Contains(err.Error(), "zigzag") {
		t.Errorf("err = %v", err)
	}
}

func TestLinearErrors(t *testing.T) {
	if _, err := Line([]float64{1, 2}, []float64{1, 2}, LineOptions{}); !errors.Is(err, ErrTooFewPoints) {
		t.Errorf("2 points: %v", err)
	}
	if _, err := Line([]float64{1, 2, math.NaN()}, []float64{1, 2, 3}, LineOptions{}); !errors.Is(err, ErrBadInput) {
		t.Errorf("NaN x: %v", err)
	}
	if _, err := Line([]float64{1, 2, 3}, []float64{1, math.Inf(1), 3}, LineOptions{}); !errors.Is(err, ErrBadInput) {
		t.Errorf("Inf y: %v", err)
	}
	if _, err := Linear([]float64{1, 2, 3}, [][]float64{{0, 0, 0}}, LinearOptions{NoIntercept: true}); !errors.Is(err, ErrSingular) {
		t.Errorf("zero column: %v", err)
	}
	if _, err := Linear([]float64{1, 2, 3, 4}, [][]float64{{1, 2, 3, 4}, {2, 4, 6, 8}}, LinearOptions{}); !errors.Is(err, ErrSingular) {
		t.Errorf("collinear: %v", err)
	}
	if _, err := Linear([]float64{1, 2, 3}, nil, LinearOptions{NoIntercept: true}); !errors.Is(err, ErrBadInput) {
		t.Errorf("no parameters: %v", err)
	}
	// Intercept-only model: the mean with s/√n.
	f, err := Linear([]float64{1, 2, 3, 6}, nil, LinearOptions{})
	if err != nil || f.Terms[0].Value != 3 || math.Abs(f.Terms[0].StdErr-math.Sqrt(14.0/3/4)) > 1e-15 {
		t.Errorf("mean model %+v %v", f, err)
	}
}

func TestLinePanicsOnMismatch(t *testing.T) {
	cases := map[string]func(){
		"x/y":     func() { Line([]float64{1, 2, 3}, []float64{1, 2}, LineOptions{}) },
		"time":    func() { Line([]float64{1, 2, 3}, []float64{1, 2, 3}, LineOptions{Time: []float64{1}}) },
		"column":  func() { Linear([]float64{1, 2, 3}, [][]float64{{1, 2}}, LinearOptions{}) },
		"degree":  func() { Polynomial([]float64{1, 2, 3}, []float64{1, 2, 3}, 0, false) },
		"predict": func() { (LinearFit{Terms: make([]Term, 2), Intercept: true}).PredictStdUnc(1, 2) },
	}
	for name, fn := range cases {
		t.Run(name, func(t *testing.T) {
			defer func() {
				if recover() == nil {
					t.Error("no panic")
				}
			}()
			fn()
		})
	}
}

// TestLineStdErrMatchesFormula: for a straight line, se(b1) = s/√Σ(x−x̄)²
// (GUM H.3, JCGM 100:2008 (GUM)), and the covariance is symmetric.
func TestLineStdErrMatchesFormula(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	x := zigzag(4, 8, 2)
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = 0.5 - 0.2*v + 0.01*rng.NormFloat64()
	}
	f, err := Line(x, y, LineOptions{})
	if err != nil {
		t.Fatal(err)
	}
	m := mean(x)
	sxx := 0.0
	for _, v := range x {
		sxx += (v - m) * (v - m)
	}
	if want := f.ResidualSD / math.Sqrt(sxx); math.Abs(f.Slope.StdErr-want) > 1e-14*want {
		t.Errorf("se %v, formula %v", f.Slope.StdErr, want)
	}
	if f.Model.Cov[0][1] != f.Model.Cov[1][0] {
		t.Error("covariance not symmetric")
	}
	sum := 0.0
	for _, r := range f.Model.Residuals {
		sum += r
	}
	if math.Abs(sum) > 1e-14 {
		t.Errorf("residuals sum to %v with an intercept", sum)
	}
}

// TestVarianceInflation: VIF = 1/(1 − r²) (Marquardt 1970). Ascending
// levels with time rising alongside are collinear (+Inf); a zigzag
// 0, +1, −1, +2, −2 against time 0..4 has r = −0.3 by hand
// (Σ(x−x̄)(t−t̄) = −3, Σ(x−x̄)² = 10, Σ(t−t̄)² = 10), so VIF = 1/0.91.
func TestVarianceInflation(t *testing.T) {
	tm := []float64{0, 1, 2, 3, 4}
	if v := VarianceInflation([]float64{-2, -1, 0, 1, 2}, tm); !math.IsInf(v, 1) {
		t.Errorf("ascending: VIF %g, want +Inf", v)
	}
	if v := VarianceInflation([]float64{0, 1, -1, 2, -2}, tm); math.Abs(v-1/0.91) > 1e-12 {
		t.Errorf("zigzag: VIF %.15g, want %.15g", v, 1/0.91)
	}
	if v := VarianceInflation([]float64{1, 1, 1, 1, 1}, tm); !math.IsNaN(v) {
		t.Errorf("constant: VIF %g, want NaN", v)
	}
}

// TestSlopeAt: y = 1 + 2x + 0.5x² exactly has slope 2 + x: 2 at 0 and 5 at
// 3 (calculus). With noise, the standard error at the centre of the data
// equals that of the slope refitted on x − x̄ (the same model
// reparametrised, so the same variance: GUM 5.2.2 with the fit's
// covariance).
func TestSlopeAt(t *testing.T) {
	x := []float64{0, 1, 2, 3, 4, 5, 6}
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = 1 + 2*v + 0.5*v*v + 1e-3*math.Sin(3*v)
	}
	f, err := Line(x, y, LineOptions{Quadratic: true})
	if err != nil {
		t.Fatal(err)
	}
	if s := f.SlopeAt(3); math.Abs(s.Value-5) > 0.01 {
		t.Errorf("slope at 3: %g, want 5", s.Value)
	}
	xc := make([]float64, len(x))
	for i, v := range x {
		xc[i] = v - 3
	}
	fc, err := Line(xc, y, LineOptions{Quadratic: true})
	if err != nil {
		t.Fatal(err)
	}
	s := f.SlopeAt(3)
	if math.Abs(s.Value-fc.Slope.Value) > 1e-9 || math.Abs(s.StdErr-fc.Slope.StdErr) > 1e-9*fc.Slope.StdErr+1e-15 {
		t.Errorf("slope at centre %g ± %g, centred refit %g ± %g", s.Value, s.StdErr, fc.Slope.Value, fc.Slope.StdErr)
	}
	lin, _ := Line(x, y, LineOptions{})
	if lin.SlopeAt(3) != lin.Slope {
		t.Errorf("no quadratic term: SlopeAt changed the slope")
	}
}

// TestLineSegments: y = 2 + 3x with a step of +0.5 from the fourth point
// on (a reading offset that changed between two sessions). A single line
// puts part of the step into the slope; with a segment offset the slope is
// exactly 3 and the step 0.5 (exact data, least squares reproduces them).
func TestLineSegments(t *testing.T) {
	x := []float64{-2, 0, 2, -1, 1, 3}
	seg := []int{0, 0, 0, 1, 1, 1}
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = 2 + 3*v
		if seg[i] == 1 {
			y[i] += 0.5
		}
	}
	plain, err := Line(x, y, LineOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(plain.Slope.Value-3) < 0.01 {
		t.Fatalf("setup: the step does not bias the plain slope (%g)", plain.Slope.Value)
	}
	f, err := Line(x, y, LineOptions{Segments: seg})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(f.Slope.Value-3) > 1e-12 || len(f.Steps) != 1 || math.Abs(f.Steps[0].Value-0.5) > 1e-12 || f.DOF != 3 {
		t.Errorf("slope %g, steps %+v, dof %d", f.Slope.Value, f.Steps, f.DOF)
	}
}
