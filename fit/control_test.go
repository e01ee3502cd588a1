package fit

import (
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// TestChartFactorsTable checks c4, A3, B3, B4, B5 and B6, computed from
// their formulas, against the published table of control chart factors
// copied into testdata/reference/control_chart_constants.txt ("Table A.22
// Factors for Constructing Control Charts", a textbook appendix seen as a
// secondary copy; see the file's header), to the digits the table prints.
func TestChartFactorsTable(t *testing.T) {
	tab := loadRef(t, "control_chart_constants.txt")
	col := func(name string) []float64 {
		c, ok := tab.Column(name)
		if !ok {
			t.Fatalf("column %s missing", name)
		}
		return c
	}
	ns := col("n")
	if len(ns) != 19 {
		t.Fatalf("parsed %d rows, want 19 (n = 2..20)", len(ns))
	}
	cols := []struct {
		name string
		half float64 // half a unit in the last printed digit
		get  func(ChartFactors) float64
	}{
		{"c4", 0.00005, func(f ChartFactors) float64 { return f.C4 }},
		{"A3", 0.0005, func(f ChartFactors) float64 { return f.A3 }},
		{"B3", 0.0005, func(f ChartFactors) float64 { return f.B3 }},
		{"B4", 0.0005, func(f ChartFactors) float64 { return f.B4 }},
		{"B5", 0.0005, func(f ChartFactors) float64 { return f.B5 }},
		{"B6", 0.0005, func(f ChartFactors) float64 { return f.B6 }},
	}
	for _, c := range cols {
		want := col(c.name)
		for i, nf := range ns {
			f := Factors(int(nf), 3)
			// published table, rounded to the printed digits
			if got := c.get(f); math.Abs(got-want[i]) > c.half+1e-12 {
				t.Errorf("n=%d %s = %.6f, table %v", int(nf), c.name, got, want[i])
			}
		}
	}
}

// TestC4Values: c4(5) = 0.939985603 as printed (9 digits) in SAS/QC
// User's Guide, chapter "Functions", "C4 Function" (SAS Institute; its
// example "constant=c4(5)" results in 0.939985603; also named in the
// constants file's header); c4 → 1 − 1/(4n) for large n (Montgomery, from memory: the
// asymptote (4n−4)/(4n−3)), and NaN below n = 2.
func TestC4Values(t *testing.T) {
	if got := C4(5); math.Abs(got-0.939985603) > 5e-10 {
		t.Errorf("c4(5) = %.10f, want 0.939985603", got)
	}
	for _, n := range []int{200, 1000, 100000} {
		fn := float64(n)
		approx := (4*fn - 4) / (4*fn - 3)
		if got := C4(n); math.Abs(got-approx) > 1/(fn*fn) {
			t.Errorf("c4(%d) = %.12f, asymptote %.12f", n, got, approx)
		}
	}
	if !math.IsNaN(C4(1)) || !math.IsNaN(C4(0)) {
		t.Error("c4 below n = 2 must be NaN")
	}
}

// loadPiston reads Montgomery's Table 6.3 (25 subgroups of 5 piston-ring
// diameters, mm) from testdata/reference/piston_rings_t6_3.txt.
func loadPiston(t *testing.T) [][]float64 {
	t.Helper()
	tab := loadRef(t, "piston_rings_t6_3.txt")
	var cols [5][]float64
	for j, name := range []string{"x1", "x2", "x3", "x4", "x5"} {
		c, ok := tab.Column(name)
		if !ok {
			t.Fatalf("column %s missing", name)
		}
		cols[j] = c
	}
	g := make([][]float64, len(cols[0]))
	for i := range g {
		for j := range cols {
			g[i] = append(g[i], cols[j][i])
		}
	}
	if len(g) != 25 {
		t.Fatalf("parsed %d subgroups, want 25", len(g))
	}
	return g
}

// TestXbarSPistonRingsMeanS reproduces Montgomery, Introduction to
// Statistical Quality Control, Example 6.3 (x̄ and s charts for the piston
// rings of Table 6.3): x̿ = 74.001, s̄ = 0.0094, X̄ chart 73.988 … 74.014,
// s chart centre 0.0094, UCL 0.0196, LCL 0 (published results, recalled
// from memory; the book computes them from x̿ and s̄ rounded as shown, so
// the limits are compared to ±0.001 mm and ±0.0001 mm). The per-subgroup
// x̄_i and s_i are checked against the table's published columns.
func TestXbarSPistonRingsMeanS(t *testing.T) {
	g := loadPiston(t)
	cc, err := XbarS(g, ControlOptions{Estimator: SigmaMeanS})
	if err != nil {
		t.Fatal(err)
	}
	pub := loadRef(t, "piston_rings_t6_3_published.txt")
	xb, _ := pub.Column("xbar")
	sd, _ := pub.Column("s")
	for i := range xb {
		p := cc.Points[i]
		// Table 6.3 columns x̄_i (3 decimals) and s_i (4 decimals)
		if math.Abs(p.Mean-xb[i]) > 0.0005+1e-9 || math.Abs(p.SD-sd[i]) > 0.00005+1e-9 {
			t.Errorf("subgroup %d: x̄ %.5f s %.6f, table %v %v", i+1, p.Mean, p.SD, xb[i], sd[i])
		}
	}
	sbar := cc.SigmaHat * C4(5)
	// Example 6.3: x̿ = 74.001, s̄ = 0.0094
	if math.Abs(cc.GrandMean-74.001) > 0.0005 || math.Abs(sbar-0.0094) > 0.00005 {
		t.Errorf("x̿ = %.5f, s̄ = %.6f; Example 6.3: 74.001, 0.0094", cc.GrandMean, sbar)
	}
	for i, p := range cc.Points {
		// Example 6.3: X̄ limits 73.988 and 74.014 mm
		if math.Abs(p.MeanUCL-74.014) > 0.001 || math.Abs(p.MeanLCL-73.988) > 0.001 {
			t.Errorf("subgroup %d X̄ limits %.5f … %.5f; Example 6.3: 73.988 … 74.014", i+1, p.MeanLCL, p.MeanUCL)
		}
		// Example 6.3: s chart CL 0.0094, UCL 0.0196, LCL 0
		if math.Abs(p.SDCenter-0.0094) > 0.0001 || math.Abs(p.SDUCL-0.0196) > 0.0001 || p.SDLCL != 0 {
			t.Errorf("subgroup %d s chart %.5f/%.5f/%.5f; Example 6.3: 0/0.0094/0.0196", i+1, p.SDLCL, p.SDCenter, p.SDUCL)
		}
		// Example 6.3 finds the process in control: no point out
		if p.MeanOut || p.SDOut {
			t.Errorf("subgroup %d flagged out of control; Example 6.3 has none", i+1)
		}
	}
}

// TestXbarSSubgroupStatsUnequal checks the per-subgroup means and SDs for
// the subgroups of 3, 4 and 5 of Montgomery's Table 6.4 (variable sample
// size; published x̄_i to 3 and s_i to 4 decimals, subgroups 1–22 as
// copied in testdata/reference/piston_rings_t6_4.txt), and that every
// subgroup's limits use its own n.
func TestXbarSSubgroupStatsUnequal(t *testing.T) {
	tab := loadRef(t, "piston_rings_t6_4.txt")
	ns, _ := tab.Column("n")
	xb, _ := tab.Column("xbar")
	sd, _ := tab.Column("s")
	var g [][]float64
	for i, nf := range ns {
		var sub []float64
		for _, name := range []string{"x1", "x2", "x3", "x4", "x5"}[:int(nf)] {
			c, _ := tab.Column(name)
			sub = append(sub, c[i])
		}
		g = append(g, sub)
	}
	if len(g) != 22 {
		t.Fatalf("parsed %d subgroups, want 22", len(g))
	}
	cc, err := XbarS(g, ControlOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for i, p := range cc.Points {
		// Table 6.4 published x̄_i, s_i
		if math.Abs(p.Mean-xb[i]) > 0.0005+1e-9 || math.Abs(p.SD-sd[i]) > 0.00005+1e-9 {
			t.Errorf("subgroup %d (n=%d): x̄ %.5f s %.6f, table %v %v", i+1, p.N, p.Mean, p.SD, xb[i], sd[i])
		}
		// limits from the subgroup's own n, against the published factors
		// (testdata/reference/control_chart_constants.txt, 3 decimals):
		// X̄ half width = A3(n)·c4(n)·σ̂, s chart UCL = B6(n)·σ̂
		f := tabRow(t, p.N)
		if got := (p.MeanUCL - p.MeanLCL) / 2 / cc.SigmaHat; math.Abs(got-f.a3*f.c4) > 0.0005*f.c4+0.00005*f.a3+1e-9 {
			t.Errorf("subgroup %d (n=%d): X̄ half width / σ̂ = %.5f, table A3·c4 = %.5f", i+1, p.N, got, f.a3*f.c4)
		}
		if got := p.SDUCL / cc.SigmaHat; math.Abs(got-f.b6) > 0.0005+1e-9 {
			t.Errorf("subgroup %d (n=%d): s UCL / σ̂ = %.5f, table B6 = %.3f", i+1, p.N, got, f.b6)
		}
	}
}

type tabFactors struct{ c4, a3, b6 float64 }

// tabRow returns the published factors for subgroup size n from
// testdata/reference/control_chart_constants.txt.
func tabRow(t *testing.T, n int) tabFactors {
	t.Helper()
	tab := loadRef(t, "control_chart_constants.txt")
	ns, _ := tab.Column("n")
	c4, _ := tab.Column("c4")
	a3, _ := tab.Column("A3")
	b6, _ := tab.Column("B6")
	for i, nf := range ns {
		if int(nf) == n {
			return tabFactors{c4[i], a3[i], b6[i]}
		}
	}
	t.Fatalf("no table row for n = %d", n)
	return tabFactors{}
}

// TestPooledSigmaUnbiasedSim checks the derivation behind SigmaPooled by
// simulation, independent of C4: for lots of 2, 3 and 5 normal values
// (σ = 1, ν = 1 + 2 + 4 = 7) the mean of s_p over 40 000 data sets must be
// c4(ν+1) = c4(8) = 0.9650 from the published table
// (testdata/reference/control_chart_constants.txt), and the mean of σ̂ = 1.
// SD of s_p ≈ √(1 − c4²) ≈ 0.26, so the standard error of either mean is
// ≈ 0.0014; the check allows 4 of them (0.0055), and s_p's bias (0.035) or
// the per-lot c4(n_i) mean (0.875) would fail it.
func TestPooledSigmaUnbiasedSim(t *testing.T) {
	rng := rand.New(rand.NewPCG(2026, 12))
	const reps = 40000
	sizes := []int{2, 3, 5}
	sumSP, sumSigma := 0.0, 0.0
	for range reps {
		g := make([][]float64, len(sizes))
		for i, n := range sizes {
			for range n {
				g[i] = append(g[i], 10+rng.NormFloat64())
			}
		}
		cc, err := XbarS(g, ControlOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if cc.PooledDOF != 7 {
			t.Fatalf("ν = %d, want 7", cc.PooledDOF)
		}
		sumSP += cc.PooledSD
		sumSigma += cc.SigmaHat
	}
	c4 := tabRow(t, 8).c4 // published c4(8) = 0.9650
	if m := sumSP / reps; math.Abs(m-c4) > 0.0055 {
		t.Errorf("mean s_p = %.4f over %d data sets; c4(8) = %.4f (published table)", m, reps, c4)
	}
	if m := sumSigma / reps; math.Abs(m-1) > 0.0055 {
		t.Errorf("mean σ̂ = %.4f over %d data sets, σ = 1", m, reps)
	}
}

// TestXbarSCoverageSim: 3σ limits must hold about 99.73 % of in-control lot
// means (2Φ(3) − 1 = 0.9973, the normal distribution). 300 seeds of 200 lots
// of sizes 2, 3, 4, 5 and 8 (60 000 lot means); with σ̂ from ν ≈ 680 the
// expected share beyond the limits is 0.27 % (±0.02 % standard error;
// the lot's own weight in x̿ lowers it by < 0.01 %). The check allows
// 0.20 … 0.34 %.
func TestXbarSCoverageSim(t *testing.T) {
	sizes := []int{2, 3, 4, 5, 8}
	out, total := 0, 0
	for seed := range uint64(300) {
		rng := rand.New(rand.NewPCG(seed, 7))
		g := make([][]float64, 200)
		for i := range g {
			for range sizes[i%len(sizes)] {
				g[i] = append(g[i], 5+0.2*rng.NormFloat64())
			}
		}
		cc, err := XbarS(g, ControlOptions{NoRunRules: true})
		if err != nil {
			t.Fatal(err)
		}
		for _, p := range cc.Points {
			total++
			if p.Mean < p.MeanLCL || p.Mean > p.MeanUCL {
				out++
			}
		}
	}
	frac := float64(out) / float64(total)
	t.Logf("%d of %d lot means beyond 3σ limits (%.3f %%)", out, total, 100*frac)
	if frac < 0.0020 || frac > 0.0034 {
		t.Errorf("%.3f %% of in-control lot means beyond the 3σ limits; normal: 0.27 %%", 100*frac)
	}
}

// TestXbarSPooledHand is a hand-computed pooled example. Three lots
// {1, 2, 3}, {2, 4}, {3, 5, 7, 9}: sums of squares about the lot means 2, 2
// and 20, ν = 2 + 1 + 3 = 6, s_p² = 24/6 = 4, s_p = 2; x̿ = (6+6+24)/9 = 4.
// σ̂ = s_p/c4(7) = 2/0.9594 = 2.0846 with c4(7) from the published table
// (testdata/reference/control_chart_constants.txt). Lot 3 (n = 4): X̄ limits
// 4 ± 3·2.0846/2 = 0.873 … 7.127; s chart centre c4(4)·σ̂ = 0.9213·2.0846 =
// 1.9206, UCL B6(4)·σ̂ = 2.088·2.0846 = 4.353, LCL 0 (B5(4) = 0, table).
func TestXbarSPooledHand(t *testing.T) {
	cc, err := XbarS([][]float64{{1, 2, 3}, {2, 4}, {3, 5, 7, 9}}, ControlOptions{})
	if err != nil {
		t.Fatal(err)
	}
	near := func(name string, got, want, tol float64) {
		t.Helper()
		if math.Abs(got-want) > tol {
			t.Errorf("%s = %.6f, hand %.6f ± %g", name, got, want, tol)
		}
	}
	if cc.PooledDOF != 6 {
		t.Errorf("ν = %d, hand 6", cc.PooledDOF)
	}
	near("s_p", cc.PooledSD, 2, 1e-12)
	near("x̿", cc.GrandMean, 4, 1e-12)
	// c4(7) = 0.9594 printed to 4 decimals: σ̂ known to ~1e-4
	near("σ̂", cc.SigmaHat, 2.0846, 0.0002)
	p := cc.Points[2]
	near("lot 3 LCL", p.MeanLCL, 0.873, 0.0005)
	near("lot 3 UCL", p.MeanUCL, 7.127, 0.0005)
	near("lot 3 s centre", p.SDCenter, 1.9206, 0.0003)
	near("lot 3 s UCL", p.SDUCL, 4.353, 0.002)
	if p.SDLCL != 0 {
		t.Errorf("lot 3 s LCL = %g, hand 0", p.SDLCL)
	}
}

// TestXbarSFlags: a shifted lot beyond 3σ is flagged (rule 1), a lot with a
// large spread is flagged on the s chart, eight lots on one side trip the
// run rule (Western Electric rule 4, from memory) and rules 2 and 3 fire on
// their patterns. Standardised points are constructed directly so the
// pattern is exact.
func TestXbarSFlags(t *testing.T) {
	// 20 lots of 4 with SD 1 exactly (values m±a, m±b with a²+b² = 1.5):
	// a = 1, b = √0.5 → s² = (2·1 + 2·0.5)/3 = 1.
	lot := func(m float64) []float64 {
		return []float64{m - 1, m + 1, m - math.Sqrt(0.5), m + math.Sqrt(0.5)}
	}
	var g [][]float64
	for i := range 20 {
		m := 0.0
		if i%2 == 1 {
			m = 0.1
		}
		g = append(g, lot(m))
	}
	// Hand: lot 13's SD² = 82/3; s_p² = (19·3·1 + 82)/60 = 139/60, s_p =
	// 1.52206; c4(61) ≈ 240/241 (asymptote (4n−4)/(4n−3), Montgomery, from
	// memory) → σ̂ = 1.52840, SE = σ̂/2 = 0.76420; x̿ = (9·0.1 + 3)/20 =
	// 0.195, so lot 6 sits (3 − 0.195)/0.76420 = 3.67 SE above the centre.
	g[5] = lot(3)
	g[12] = []float64{-5, 5, -4, 4}
	cc, err := XbarS(g, ControlOptions{})
	if err != nil {
		t.Fatal(err)
	}
	p6 := cc.Points[5]
	if z := (p6.Mean - cc.GrandMean) / ((p6.MeanUCL - cc.GrandMean) / 3); math.Abs(z-3.67) > 0.01 {
		t.Errorf("lot 6 at %.4f SE, hand 3.67", z)
	}
	if !p6.MeanOut || !slices.Contains(p6.Signals, RuleBeyondLimits) {
		t.Errorf("lot 6 shifted by 3.67 SE not flagged: %+v", p6)
	}
	if !cc.Points[12].SDOut {
		t.Errorf("lot 13 with SD ≈ 5.2 not flagged on the s chart: %+v", cc.Points[12])
	}
	for i, p := range cc.Points {
		if i != 5 && p.MeanOut {
			t.Errorf("lot %d flagged beyond limits: mean %g limits %g…%g", i+1, p.Mean, p.MeanLCL, p.MeanUCL)
		}
	}

	z := []float64{0.5, 2.5, -0.3, 2.2, 1.5, 1.2, 1.1, 0.4, 0.2, 0.3, 0.1}
	want := map[int][]string{
		3:  {RuleTwoOfThree},   // 2.5 and 2.2 within 3
		5:  {RuleFourOfFive},   // 2.5 2.2 1.5 1.2 of the last 5 beyond 1
		6:  {RuleFourOfFive},   // 2.2 1.5 1.2 1.1 beyond 1
		10: {RuleEightOneSide}, // indices 3..10 all above
	}
	for i := range z {
		got := runRules(z, i)
		if !slices.Equal(got, want[i]) {
			t.Errorf("point %d: rules %q, want %q", i, got, want[i])
		}
	}
}

func TestXbarSErrors(t *testing.T) {
	cases := []struct {
		name   string
		groups [][]float64
		opt    ControlOptions
		want   error
	}{
		{"one subgroup", [][]float64{{1, 2}}, ControlOptions{}, ErrTooFewPoints},
		{"all singletons", [][]float64{{1}, {2}, {3}}, ControlOptions{}, ErrTooFewPoints},
		{"empty subgroup", [][]float64{{1, 2}, {}}, ControlOptions{}, ErrBadInput},
		{"NaN", [][]float64{{1, 2}, {math.NaN(), 1}}, ControlOptions{}, ErrBadInput},
		{"bad sigmas", [][]float64{{1, 2}, {1, 3}}, ControlOptions{Sigmas: -1}, ErrBadInput},
		{"bad estimator", [][]float64{{1, 2}, {1, 3}}, ControlOptions{Estimator: 7}, ErrBadInput},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if _, err := XbarS(c.groups, c.opt); !errors.Is(err, c.want) {
				t.Errorf("error %v, want %v", err, c.want)
			}
		})
	}
	// a singleton lot among others: an X̄ point, no s point
	cc, err := XbarS([][]float64{{1, 2, 3}, {5}}, ControlOptions{})
	if err != nil {
		t.Fatal(err)
	}
	p := cc.Points[1]
	if p.HasSD || p.SDUCL != 0 || math.Abs(p.MeanUCL-p.MeanLCL-6*cc.SigmaHat) > 1e-12 {
		t.Errorf("singleton lot: %+v", p)
	}
}

// TestOneSidedTolerance: the bound uses the one-sided factor of Montgomery
// & Runger Table XII (n = 10, P = 0.95, γ = 0.95: k = 2.911, copied in
// testdata/reference/tolerance_k_onesided_normal.txt): mean 100, SD 2 →
// lower 94.178, upper 105.822 (to the table's 3 decimals of k).
func TestOneSidedTolerance(t *testing.T) {
	lo, err := OneSidedTolerance(100, 2, 10, Lower, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	up, err := OneSidedTolerance(100, 2, 10, Upper, 0.95, 0.95)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(lo.Bound-94.178) > 0.001 || math.Abs(up.Bound-105.822) > 0.001 {
		t.Errorf("bounds %.4f / %.4f, want 94.178 / 105.822 (k = 2.911)", lo.Bound, up.Bound)
	}
	if _, err := OneSidedTolerance(1, 1, 1, Lower, 0, 0); !errors.Is(err, ErrTooFewPoints) {
		t.Errorf("n = 1: %v", err)
	}
	if _, err := OneSidedTolerance(1, -1, 5, Lower, 0, 0); !errors.Is(err, ErrBadInput) {
		t.Errorf("negative SD: %v", err)
	}
}
