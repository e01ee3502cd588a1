package fit

import (
	"fmt"
	"math"
	"slices"
	"strconv"

	"gonum.org/v1/gonum/mat"
)

// rankTol is the smallest diagonal element of R, relative to the largest,
// that the solver accepts for the centred, unit-norm design columns. Below
// it the design is treated as singular (condition number above ~1e12).
const rankTol = 1e-12

// Linear fits by ordinary least squares
//
//	y_i = b_0 + Σ_j b_j·X_ij + e_i     (b_0 omitted when opt.NoIntercept)
//
// minimising Σ e_i². columns[j] holds X_·j. Each column is centred on its
// mean x̄_j (when there is an intercept) and scaled to unit norm s_j, the
// intercept column becomes 1/√n, and the scaled design Z is factorised by
// Householder QR (Golub & Van Loan, Matrix Computations, 4th ed., §5.3;
// column scaling §5.3.8). The solution is then refined on the augmented
// system [I X; Xᵀ 0]·[r; b] = [y; 0] with residuals formed in double-double
// arithmetic (Björck, Numerical Methods for Least Squares Problems, 1996,
// §2.9), which keeps volts against microvolts and the ill-conditioned NIST
// StRD sets (Longley, Wampler 1-5, Pontius) to 13 or more digits. Results
// are in the original parametrisation:
//
//	b_j = β_j/s_j,  b_0 = β_0/√n − Σ_j b_j·x̄_j
//	Cov(b) = s²·(XᵀX)⁻¹,  s² = Σ r_i² / (n − p)
//
// A column whose length differs from len(y) is a programmer error and
// panics. Fewer than p+1 points return ErrTooFewPoints (a residual standard
// deviation needs at least one degree of freedom); a constant or collinear
// column returns ErrSingular; NaN or Inf values return ErrBadInput.
func Linear(y []float64, columns [][]float64, opt LinearOptions) (LinearFit, error) {
	n := len(y)
	for j, c := range columns {
		if len(c) != n {
			panic(fmt.Sprintf("fit.Linear: column %d has %d values, y has %d", j, len(c), n))
		}
	}
	m := len(columns)
	icpt := !opt.NoIntercept
	p := m
	if icpt {
		p++
	}
	if p == 0 {
		return LinearFit{}, fmt.Errorf("fit: no parameters to fit: %w", ErrBadInput)
	}
	if n <= p {
		return LinearFit{}, fmt.Errorf("fit: %d points for %d parameters (need at least %d): %w", n, p, p+1, ErrTooFewPoints)
	}
	if i := firstNonFinite(y); i >= 0 {
		return LinearFit{}, fmt.Errorf("fit: y[%d] = %v: %w", i, y[i], ErrBadInput)
	}
	names := make([]string, m)
	for j := range columns {
		if j < len(opt.Names) && opt.Names[j] != "" {
			names[j] = opt.Names[j]
		} else {
			names[j] = "x" + strconv.Itoa(j+1)
		}
		if i := firstNonFinite(columns[j]); i >= 0 {
			return LinearFit{}, fmt.Errorf("fit: column %q value %d = %v: %w", names[j], i, columns[j][i], ErrBadInput)
		}
	}

	// Centre and scale: Z = [1/√n, (X_j − x̄_j)/s_j] with unit-norm
	// columns, so that X_full = Z·M with
	//   M = [[√n, √n·x̄ᵀ], [0, diag(s)]]   (intercept case)
	//   M = diag(s)                       (no intercept).
	centre := make([]float64, m)
	scale := make([]float64, m)
	z := mat.NewDense(n, p, nil)
	sqrtN := math.Sqrt(float64(n))
	off := 0
	if icpt {
		off = 1
		for i := 0; i < n; i++ {
			z.Set(i, 0, 1/sqrtN)
		}
	}
	for j, c := range columns {
		if icpt {
			centre[j] = mean(c)
		}
		ss := 0.0
		for _, v := range c {
			d := v - centre[j]
			ss += d * d
		}
		scale[j] = math.Sqrt(ss)
		if scale[j] == 0 || math.IsInf(scale[j], 0) {
			if icpt {
				return LinearFit{}, fmt.Errorf("fit: column %q is constant, so it cannot be told from the intercept: %w", names[j], ErrSingular)
			}
			return LinearFit{}, fmt.Errorf("fit: column %q is all zeros: %w", names[j], ErrSingular)
		}
		for i, v := range c {
			z.Set(i, j+off, (v-centre[j])/scale[j])
		}
	}
	tr := transform{icpt: icpt, sqrtN: sqrtN, centre: centre, scale: scale}

	var qr mat.QR
	qr.Factorize(z)
	var rd mat.Dense
	qr.RTo(&rd)
	rmax := 0.0
	for j := 0; j < p; j++ {
		rmax = math.Max(rmax, math.Abs(rd.At(j, j)))
	}
	for j := 0; j < p; j++ {
		if math.Abs(rd.At(j, j)) <= rankTol*rmax {
			name := "intercept"
			if j >= off {
				name = names[j-off]
			}
			return LinearFit{}, fmt.Errorf("fit: column %q is a linear combination of the others (R[%d][%d] = %.3g): %w", name, j, j, rd.At(j, j), ErrSingular)
		}
	}
	rt := mat.NewTriDense(p, mat.Upper, nil)
	for i := 0; i < p; i++ {
		for j := i; j < p; j++ {
			rt.SetTri(i, j, rd.At(i, j))
		}
	}
	rinv := mat.NewTriDense(p, mat.Upper, nil)
	if err := rinv.InverseTri(rt); err != nil {
		return LinearFit{}, fmt.Errorf("fit: %v: %w", err, ErrSingular)
	}

	// First solution.
	var bv mat.VecDense
	if err := qr.SolveVecTo(&bv, false, mat.NewVecDense(n, y)); err != nil {
		return LinearFit{}, fmt.Errorf("fit: %v: %w", err, ErrSingular)
	}
	b := tr.toB(bv.RawVector().Data) // original parametrisation (b0 first when icpt)
	res := make([]float64, n)
	residualsDD(res, y, columns, b, icpt)

	// Iterative refinement of the augmented system
	//   [I X; Xᵀ 0]·[r; b] = [y; 0]
	// (Björck 1967; Björck, Numerical Methods for Least Squares Problems,
	// SIAM 1996, §2.9.3), with f = y − r − X·b and g = −Xᵀ·r formed in
	// double-double arithmetic (FMA error-free transformations, Ogita, Rump
	// & Oishi 2005) and the correction solved with the QR of Z. This
	// recovers the digits that the large-residual term and the back
	// transformation b0 = β0/√n − Σ b_j·x̄_j would otherwise lose.
	f := make([]float64, n)
	fv := mat.NewVecDense(n, f)
	g := make([]float64, p)
	var xf, w mat.VecDense
	for iter := 0; iter < 4; iter++ {
		refineRHS(f, g, y, res, columns, b, icpt)
		gt := tr.applyMinvT(g)
		if err := qr.SolveVecTo(&xf, false, fv); err != nil {
			break
		}
		if err := qr.SolveVecTo(&w, true, mat.NewVecDense(p, gt)); err != nil {
			break
		}
		// δβ = x_f − R⁻¹R⁻ᵀ·g̃ ; δr = w + f − Z·x_f
		dbeta := make([]float64, p)
		for i := 0; i < p; i++ {
			t := 0.0
			for k := i; k < p; k++ {
				rk := 0.0
				for l := 0; l <= k; l++ {
					rk += rinv.At(l, k) * gt[l]
				}
				t += rinv.At(i, k) * rk
			}
			dbeta[i] = xf.AtVec(i) - t
		}
		db := tr.toB(dbeta)
		small := true
		for j := range b {
			if math.Abs(db[j]) > 1e-16*math.Abs(b[j]) {
				small = false
			}
			b[j] += db[j]
		}
		for i := 0; i < n; i++ {
			zx := 0.0
			for j := 0; j < p; j++ {
				zx += z.At(i, j) * xf.AtVec(j)
			}
			res[i] += w.AtVec(i) + f[i] - zx
		}
		if small {
			break
		}
	}
	residualsDD(res, y, columns, b, icpt)
	rss := 0.0
	for _, r := range res {
		rss += r * r
	}
	dof := n - p
	s2 := rss / float64(dof)

	// Cov(b) = s²·(M⁻¹R⁻¹)(M⁻¹R⁻¹)ᵀ.
	l := make([][]float64, p) // l[·][k] = M⁻¹·(column k of R⁻¹)
	col := make([]float64, p)
	for k := 0; k < p; k++ {
		for i := 0; i < p; i++ {
			col[i] = rinv.At(i, k)
		}
		l[k] = tr.toB(col)
	}
	out := LinearFit{N: n, DOF: dof, RSS: rss, ResidualSD: math.Sqrt(s2), Intercept: icpt, Cond: qr.Cond(), Residuals: res}
	out.Cov = make([][]float64, p)
	for i := 0; i < p; i++ {
		out.Cov[i] = make([]float64, p)
		for j := 0; j < p; j++ {
			sum := 0.0
			for k := 0; k < p; k++ {
				sum += l[k][i] * l[k][j]
			}
			out.Cov[i][j] = s2 * sum
		}
	}
	for i := 0; i < p; i++ {
		name := "intercept"
		if i >= off {
			name = names[i-off]
		}
		out.Terms = append(out.Terms, Term{Name: name, Value: b[i], StdErr: math.Sqrt(out.Cov[i][i])})
	}
	out.Fitted = make([]float64, n)
	for i := range y {
		out.Fitted[i] = y[i] - res[i]
	}
	// R²: centred with an intercept, uncentred without (NIST StRD convention).
	tss := 0.0
	ybar := 0.0
	if icpt {
		ybar = mean(y)
	}
	for _, v := range y {
		tss += (v - ybar) * (v - ybar)
	}
	if tss > 0 {
		out.RSquared = 1 - rss/tss
	}
	return out, nil
}

// Line fits a straight line with optional drift and quadratic terms,
//
//	y_i = b0 + b1·x_i [+ b2·t_i] [+ b3·x_i²] + e_i
//
// by Linear. For a rejection measurement x is the stimulus (volts) and y the
// meter reading (volts); b1 is then in V/V, b2 in V/s. The drift term
// absorbs a linear wander of the reading in time (thermal EMF, settling) if
// the levels are taken in an order where time does not track the stimulus
// (e.g. zigzag 0, +, −, +, 0 …); a time column collinear with x returns
// ErrSingular. An x that never moves returns ErrZeroSpan. Mismatched
// lengths panic.
func Line(x, y []float64, opt LineOptions) (LineFit, error) {
	if len(x) != len(y) {
		panic(fmt.Sprintf("fit.Line: len(x) = %d, len(y) = %d", len(x), len(y)))
	}
	if opt.Time != nil && len(opt.Time) != len(x) {
		panic(fmt.Sprintf("fit.Line: len(Time) = %d, len(x) = %d", len(opt.Time), len(x)))
	}
	if i := firstNonFinite(x); i >= 0 {
		return LineFit{}, fmt.Errorf("fit: x[%d] = %v: %w", i, x[i], ErrBadInput)
	}
	out := LineFit{InterceptIndex: -1, SlopeIndex: -1, DriftIndex: -1, QuadIndex: -1}
	if len(x) > 0 {
		out.XMin, out.XMax = x[0], x[0]
		for _, v := range x {
			out.XMin = math.Min(out.XMin, v)
			out.XMax = math.Max(out.XMax, v)
		}
	}
	out.XSpan = out.XMax - out.XMin
	if len(x) >= 2 && out.XSpan == 0 {
		return LineFit{}, fmt.Errorf("fit: every stimulus value is %g V: %w", out.XMin, ErrZeroSpan)
	}
	cols := [][]float64{x}
	names := []string{"slope"}
	if opt.Time != nil {
		cols = append(cols, opt.Time)
		names = append(names, "drift")
	}
	if opt.Quadratic {
		x2 := make([]float64, len(x))
		for i, v := range x {
			x2[i] = v * v
		}
		cols = append(cols, x2)
		names = append(names, "quad")
	}
	if opt.Segments != nil {
		if len(opt.Segments) != len(x) {
			panic(fmt.Sprintf("fit.Line: len(Segments) = %d, len(x) = %d", len(opt.Segments), len(x)))
		}
		var order []int
		for _, s := range opt.Segments {
			if !slices.Contains(order, s) {
				order = append(order, s)
			}
		}
		for j, seg := range order[1:] {
			col := make([]float64, len(x))
			for i, s := range opt.Segments {
				if s == seg {
					col[i] = 1
				}
			}
			cols = append(cols, col)
			names = append(names, fmt.Sprintf("offset step %d", j+1))
		}
	}
	lf, err := Linear(y, cols, LinearOptions{NoIntercept: opt.NoIntercept, Names: names})
	if err != nil {
		if opt.Time != nil {
			return LineFit{}, fmt.Errorf("%w (if the time column tracks the stimulus, take the levels in a zigzag order)", err)
		}
		return LineFit{}, err
	}
	out.Model = lf
	out.N, out.DOF, out.ResidualSD, out.RSquared = lf.N, lf.DOF, lf.ResidualSD, lf.RSquared
	i := 0
	if lf.Intercept {
		out.InterceptIndex = 0
		out.Intercept = lf.Terms[0]
		i = 1
	}
	out.SlopeIndex = i
	out.Slope = lf.Terms[i]
	i++
	if opt.Time != nil {
		out.DriftIndex = i
		out.Drift = lf.Terms[i]
		out.HasDrift = true
		i++
	}
	if opt.Quadratic {
		out.QuadIndex = i
		out.Quad = lf.Terms[i]
		out.HasQuad = true
		i++
	}
	out.Steps = append(out.Steps, lf.Terms[i:]...)
	return out, nil
}

// Polynomial fits y = b0 + b1·x + … + b_d·x^d (b0 omitted when
// noIntercept) by Linear; Terms are named "intercept", "x^1" … "x^d".
// degree must be at least 1 (panics otherwise).
func Polynomial(x, y []float64, degree int, noIntercept bool) (LinearFit, error) {
	if degree < 1 {
		panic(fmt.Sprintf("fit.Polynomial: degree %d < 1", degree))
	}
	if len(x) != len(y) {
		panic(fmt.Sprintf("fit.Polynomial: len(x) = %d, len(y) = %d", len(x), len(y)))
	}
	cols := make([][]float64, degree)
	names := make([]string, degree)
	for d := 1; d <= degree; d++ {
		c := make([]float64, len(x))
		for i, v := range x {
			c[i] = math.Pow(v, float64(d))
		}
		cols[d-1] = c
		names[d-1] = "x^" + strconv.Itoa(d)
	}
	return Linear(y, cols, LinearOptions{NoIntercept: noIntercept, Names: names})
}

// PredictStdUnc returns the value of a fitted linear model at the design
// point row (one value per design column, without the intercept's 1) and
// its standard uncertainty √(gᵀ·Cov·g), g = (1, row…) (GUM H.3.4 eq. H.16
// for the straight line). Panics if len(row) does not match the model.
func (f LinearFit) PredictStdUnc(row ...float64) (value, stdUnc float64) {
	g := make([]float64, 0, len(f.Terms))
	if f.Intercept {
		g = append(g, 1)
	}
	g = append(g, row...)
	if len(g) != len(f.Terms) {
		panic(fmt.Sprintf("fit.LinearFit.PredictStdUnc: %d values for %d terms", len(row), len(f.Terms)))
	}
	v := 0.0
	for i, gi := range g {
		value += gi * f.Terms[i].Value
		for j, gj := range g {
			v += gi * f.Cov[i][j] * gj
		}
	}
	return value, math.Sqrt(math.Max(v, 0))
}

// SlopeQuantity returns the slope as a Quantity with ν = n − p.
func (f LineFit) SlopeQuantity() Quantity {
	return Quantity{Value: f.Slope.Value, StdUnc: f.Slope.StdErr, DOF: DOF(f.DOF)}
}

// mean is a two-pass (corrected) arithmetic mean.
func mean(v []float64) float64 {
	if len(v) == 0 {
		return 0
	}
	s := 0.0
	for _, x := range v {
		s += x
	}
	m := s / float64(len(v))
	c := 0.0
	for _, x := range v {
		c += x - m
	}
	return m + c/float64(len(v))
}

func firstNonFinite(v []float64) int {
	for i, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return i
		}
	}
	return -1
}

// transform maps between the scaled parameters β of Z and the original
// parameters b of X_full = Z·M (see Linear).
type transform struct {
	icpt   bool
	sqrtN  float64
	centre []float64
	scale  []float64
}

// toB returns b = M⁻¹·β.
func (t transform) toB(beta []float64) []float64 {
	b := make([]float64, len(beta))
	off := 0
	if t.icpt {
		off = 1
	}
	for j := range t.scale {
		b[j+off] = beta[j+off] / t.scale[j]
	}
	if t.icpt {
		b0 := beta[0] / t.sqrtN
		for j := range t.scale {
			b0 -= b[j+1] * t.centre[j]
		}
		b[0] = b0
	}
	return b
}

// applyMinvT returns u = M⁻ᵀ·g.
func (t transform) applyMinvT(g []float64) []float64 {
	u := make([]float64, len(g))
	if !t.icpt {
		for j := range g {
			u[j] = g[j] / t.scale[j]
		}
		return u
	}
	u[0] = g[0] / t.sqrtN
	for j := range t.scale {
		u[j+1] = (g[j+1] - t.centre[j]*g[0]) / t.scale[j]
	}
	return u
}

// residualsDD sets res[i] = y[i] − (X_full·b)[i], accumulated in
// double-double arithmetic and rounded once.
func residualsDD(res, y []float64, cols [][]float64, b []float64, icpt bool) {
	off := 0
	for i := range y {
		hi, lo := y[i], 0.0
		if icpt {
			hi, lo = ddAdd(hi, lo, -b[0], 0)
			off = 1
		}
		for j, c := range cols {
			ph := b[j+off] * c[i]
			pl := math.FMA(b[j+off], c[i], -ph)
			hi, lo = ddAdd(hi, lo, -ph, -pl)
		}
		res[i] = hi + lo
	}
}

// refineRHS forms f = y − r − X_full·b and g = −X_fullᵀ·r in double-double
// arithmetic.
func refineRHS(f, g, y, r []float64, cols [][]float64, b []float64, icpt bool) {
	off := 0
	if icpt {
		off = 1
	}
	for i := range y {
		hi, lo := twoSum(y[i], -r[i])
		if icpt {
			hi, lo = ddAdd(hi, lo, -b[0], 0)
		}
		for j, c := range cols {
			ph := b[j+off] * c[i]
			pl := math.FMA(b[j+off], c[i], -ph)
			hi, lo = ddAdd(hi, lo, -ph, -pl)
		}
		f[i] = hi + lo
	}
	if icpt {
		hi, lo := 0.0, 0.0
		for _, v := range r {
			hi, lo = ddAdd(hi, lo, -v, 0)
		}
		g[0] = hi + lo
	}
	for j, c := range cols {
		hi, lo := 0.0, 0.0
		for i, v := range r {
			ph := c[i] * v
			pl := math.FMA(c[i], v, -ph)
			hi, lo = ddAdd(hi, lo, -ph, -pl)
		}
		g[j+off] = hi + lo
	}
}

// twoSum is Knuth's error-free addition: s + e = a + b exactly.
func twoSum(a, b float64) (s, e float64) {
	s = a + b
	bb := s - a
	e = (a - (s - bb)) + (b - bb)
	return s, e
}

// ddAdd adds two double-double numbers (ah+al) + (bh+bl).
func ddAdd(ah, al, bh, bl float64) (float64, float64) {
	s, e := twoSum(ah, bh)
	e += al + bl
	return twoSum(s, e)
}

// VarianceInflation returns the variance inflation factor of a regressor
// a against one other regressor b in a model with an intercept,
//
//	VIF = 1/(1 − r²),  r = Pearson correlation of a and b
//
// (Marquardt, Technometrics 12, 1970; Draper & Smith, Applied Regression
// Analysis, ch. 16): how many times the variance of a's coefficient grows
// because b is in the model. It is +Inf when a and b are collinear and
// NaN when either does not vary. Values above 10 are the usual warning
// threshold (common practice, no published source for the number).
func VarianceInflation(a, b []float64) float64 {
	if len(a) != len(b) {
		panic(fmt.Sprintf("fit.VarianceInflation: len(a) = %d, len(b) = %d", len(a), len(b)))
	}
	ma, mb := mean(a), mean(b)
	var saa, sbb, sab float64
	for i := range a {
		da, db := a[i]-ma, b[i]-mb
		saa += da * da
		sbb += db * db
		sab += da * db
	}
	if saa == 0 || sbb == 0 {
		return math.NaN()
	}
	r2 := sab * sab / (saa * sbb)
	if r2 >= 1 {
		return math.Inf(1)
	}
	return 1 / (1 - r2)
}

// SlopeAt returns the slope of the fitted curve at stimulus x0,
//
//	dy/dx(x0) = b1 + 2·b3·x0,  u² = u(b1)² + 4·x0²·u(b3)² + 4·x0·cov(b1, b3)
//
// (GUM 5.2.2, correlated inputs, with the covariances of the fit). Without
// a quadratic term it is the slope itself.
func (f LineFit) SlopeAt(x0 float64) Term {
	if !f.HasQuad || f.QuadIndex < 0 || f.SlopeIndex < 0 {
		return f.Slope
	}
	c := f.Model.Cov
	i, j := f.SlopeIndex, f.QuadIndex
	v := c[i][i] + 4*x0*x0*c[j][j] + 4*x0*c[i][j]
	return Term{Name: f.Slope.Name, Value: f.Slope.Value + 2*f.Quad.Value*x0, StdErr: math.Sqrt(math.Max(v, 0))}
}
