package report

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// ChartOptions choose what the charts (workbook) and plots (PNG) show.
type ChartOptions struct {
	// MaxUnits caps the units drawn in per-unit charts (response, residuals,
	// ratio against temperature). The units with the lowest reported ratio
	// at the chart temperature come first, so the charts show the parts an
	// engineer looks at. 0 means DefaultMaxChartUnits; negative leaves the
	// per-unit charts out.
	MaxUnits int
	// TemperatureC picks the temperature of the response and residual
	// charts; nil picks the campaign temperature nearest 25 °C.
	TemperatureC *float64
	// HistogramBinDB is the bin width of the lot histograms in dB; 0 picks
	// a 1-2-5 width giving about √n bins (5 to 30).
	HistogramBinDB float64
}

// DefaultMaxChartUnits is the default ChartOptions.MaxUnits.
const DefaultMaxChartUnits = 8

// xy is one plotted point.
type xy struct{ X, Y float64 }

// unitSeries is one unit's points in a response chart: the drift-corrected
// output change against stimulus, the fitted curve, and residuals.
//
//	change_i   = MeterVolts_i − Intercept − Drift·(t_i − t0)
//	fitted(x)  = Slope·x + Quadratic·x²
//	residual_i = change_i − fitted(x_i)      (= MeterVolts_i − model_i)
//
// All three in µV at the meter, x = ReadVolts in V.
type unitSeries struct {
	Unit      string
	Points    []xy
	Line      []xy
	Residuals []xy
}

// responseChart is one test (and sweep) at the chart temperature.
type responseChart struct {
	Test, Sweep  string
	TemperatureC float64
	Series       []unitSeries
	OfUnits      int // units with a fit for this chart, before the cap
}

// histogram is the lot distribution of one test at one temperature. Bin
// i covers [Edges[i], Edges[i]+WidthDB); when there is a limit it is a bin
// edge, so every bin lies wholly below or wholly at/above it.
type histogram struct {
	Test         string
	TemperatureC float64
	WidthDB      float64
	Edges        []float64 // lower edge of each bin
	Resolved     []int     // units whose ratio was resolved
	BoundOnly    []int     // units known only by a lower bound
	LimitDB      float64   // NaN: none
	BelowLimit   int       // bins below the limit (the limit is Edges[BelowLimit])
	Skipped      int       // non-finite values left out
}

// tempChart is reported ratio against temperature for one test.
type tempChart struct {
	Test    string
	Series  []namedXY // lowest-ratio units first
	Median  []xy      // the lot's median (from LotStats), may be empty
	Limit   []xy      // the limit at each temperature (25 °C and full range may differ), may be empty
	OfUnits int
}

type namedXY struct {
	Name   string
	Points []xy
}

// chartPlan is everything the charts and plots draw, computed once.
type chartPlan struct {
	Temps        []float64 // distinct nominal temperatures, ascending
	ChartTempC   float64
	Responses    []responseChart
	Histograms   []histogram
	Temperatures []tempChart // only with more than one temperature
	Bodes        []bodeChart // frequency response, per test and temperature
}

type fitKey struct {
	Unit, Test, Sweep string
	T                 int64
}

// planCharts selects and computes the chart data of c.
func planCharts(c *Campaign, opt ChartOptions) chartPlan {
	var p chartPlan
	tests := distinctTests(c)
	p.Temps = distinctTemps(c)
	p.ChartTempC = chartTemperature(p.Temps, opt.TemperatureC)
	maxUnits := opt.MaxUnits
	if maxUnits == 0 {
		maxUnits = DefaultMaxChartUnits
	}

	// Reported value by unit × test × temperature, for ranking.
	reported := map[fitKey]float64{}
	for _, r := range c.Results {
		reported[fitKey{Unit: r.Unit, Test: r.Test, T: tempKey(r.TemperatureC)}] = r.ReportedDB()
	}

	if maxUnits > 0 {
		// One set of response charts per temperature, the chart
		// temperature first.
		p.Responses = responseCharts(c, tests, p.ChartTempC, maxUnits, reported)
		for _, t := range p.Temps {
			if tempKey(t) != tempKey(p.ChartTempC) {
				p.Responses = append(p.Responses, responseCharts(c, tests, t, maxUnits, reported)...)
			}
		}
	}
	for _, test := range tests {
		for _, t := range p.Temps {
			if h, ok := lotHistogram(c, test, t, opt.HistogramBinDB); ok {
				p.Histograms = append(p.Histograms, h)
			}
		}
	}
	if len(p.Temps) > 1 && maxUnits > 0 {
		for _, test := range tests {
			if tc, ok := temperatureChart(c, test, p.ChartTempC, maxUnits, reported); ok {
				p.Temperatures = append(p.Temperatures, tc)
			}
		}
	}
	if maxUnits > 0 {
		p.Bodes = bodeCharts(c, maxUnits)
	}
	return p
}

// distinctTests lists test kinds in order of first appearance (results,
// then fits).
func distinctTests(c *Campaign) []string {
	var out []string
	seen := map[string]bool{}
	add := func(t string) {
		if !seen[t] {
			seen[t] = true
			out = append(out, t)
		}
	}
	for _, r := range c.Results {
		add(r.Test)
	}
	for _, f := range c.Fits {
		add(f.Test)
	}
	return out
}

func distinctTemps(c *Campaign) []float64 {
	seen := map[int64]float64{}
	for _, r := range c.Results {
		seen[tempKey(r.TemperatureC)] = r.TemperatureC
	}
	for _, f := range c.Fits {
		seen[tempKey(f.TemperatureC)] = f.TemperatureC
	}
	out := make([]float64, 0, len(seen))
	for _, v := range seen {
		out = append(out, v)
	}
	slices.Sort(out)
	return out
}

// chartTemperature is the requested temperature or the one nearest 25 °C.
func chartTemperature(temps []float64, want *float64) float64 {
	if want != nil {
		return *want
	}
	best := 25.0
	for i, t := range temps {
		if i == 0 || math.Abs(t-25) < math.Abs(best-25) {
			best = t
		}
	}
	return best
}

// worstUnits ranks units by reported ratio at (test, t), lowest first,
// units without a result last, ties by id; it returns at most n.
func worstUnits(units []string, test string, t float64, reported map[fitKey]float64, n int) []string {
	val := func(u string) float64 {
		v, ok := reported[fitKey{Unit: u, Test: test, T: tempKey(t)}]
		if !ok || math.IsNaN(v) {
			return math.Inf(1)
		}
		return v
	}
	s := slices.Clone(units)
	slices.SortStableFunc(s, func(a, b string) int {
		if c := cmp.Compare(val(a), val(b)); c != 0 {
			return c
		}
		return cmp.Compare(a, b)
	})
	if len(s) > n {
		s = s[:n]
	}
	return s
}

func responseCharts(c *Campaign, tests []string, chartT float64, maxUnits int, reported map[fitKey]float64) []responseChart {
	type chartKey struct{ Test, Sweep string }
	fitsBy := map[chartKey][]*FitRow{}
	var order []chartKey
	for i := range c.Fits {
		f := &c.Fits[i]
		if tempKey(f.TemperatureC) != tempKey(chartT) {
			continue
		}
		k := chartKey{f.Test, f.Sweep}
		if _, ok := fitsBy[k]; !ok {
			order = append(order, k)
		}
		fitsBy[k] = append(fitsBy[k], f)
	}
	// Charts follow the test order, then sweep order of appearance.
	slices.SortStableFunc(order, func(a, b chartKey) int {
		return cmp.Compare(slices.Index(tests, a.Test), slices.Index(tests, b.Test))
	})

	chosen := map[fitKey]*unitSeries{}
	var charts []responseChart
	for _, k := range order {
		fits := fitsBy[k]
		units := make([]string, len(fits))
		for i, f := range fits {
			units[i] = f.Unit
		}
		rc := responseChart{Test: k.Test, Sweep: k.Sweep, TemperatureC: chartT, OfUnits: len(units)}
		for _, u := range worstUnits(units, k.Test, chartT, reported, maxUnits) {
			rc.Series = append(rc.Series, unitSeries{Unit: u})
		}
		charts = append(charts, rc)
		ci := len(charts) - 1
		for si := range charts[ci].Series {
			s := &charts[ci].Series[si]
			chosen[fitKey{Unit: s.Unit, Test: k.Test, Sweep: k.Sweep, T: tempKey(chartT)}] = s
		}
	}
	if len(chosen) == 0 {
		return charts
	}
	// One pass over the readings collects the chosen units' points.
	fitOf := map[fitKey]*FitRow{}
	for i := range c.Fits {
		f := &c.Fits[i]
		k := fitKey{Unit: f.Unit, Test: f.Test, Sweep: f.Sweep, T: tempKey(f.TemperatureC)}
		if _, ok := chosen[k]; ok {
			fitOf[k] = f
		}
	}
	xr := map[fitKey][2]float64{}
	for i := range c.Readings {
		r := &c.Readings[i]
		k := fitKey{Unit: r.Unit, Test: r.Test, Sweep: r.Sweep, T: tempKey(r.TemperatureC)}
		s, ok := chosen[k]
		if !ok {
			continue
		}
		f := fitOf[k]
		change := r.MeterVolts - f.Intercept - f.DriftVPerS*(r.BenchSeconds-f.DriftOriginSeconds)
		res := change - fittedChange(f, r.ReadVolts)
		s.Points = append(s.Points, xy{r.ReadVolts, change * 1e6})
		s.Residuals = append(s.Residuals, xy{r.ReadVolts, res * 1e6})
		lim, seen := xr[k]
		if !seen {
			lim = [2]float64{r.ReadVolts, r.ReadVolts}
		}
		lim[0], lim[1] = math.Min(lim[0], r.ReadVolts), math.Max(lim[1], r.ReadVolts)
		xr[k] = lim
	}
	// Fitted curve over the stimulus span: 2 points for a line, 21 when a
	// quadratic term bends it.
	for k, s := range chosen {
		lim, ok := xr[k]
		if !ok {
			continue
		}
		f := fitOf[k]
		n := 2
		if f.Quadratic != 0 {
			n = 21
		}
		for i := 0; i < n; i++ {
			x := lim[0] + (lim[1]-lim[0])*float64(i)/float64(n-1)
			s.Line = append(s.Line, xy{x, fittedChange(f, x) * 1e6})
		}
	}
	return charts
}

// residualVolts is MeterVolts minus the fit model at reading r.
func residualVolts(f *FitRow, r *Reading) float64 {
	return r.MeterVolts - f.Intercept - f.DriftVPerS*(r.BenchSeconds-f.DriftOriginSeconds) - fittedChange(f, r.ReadVolts)
}

func fittedChange(f *FitRow, x float64) float64 { return f.SlopeVPerV*x + f.Quadratic*x*x }

// lotHistogram bins the reported ratios of test at t. Bins are aligned so
// that the limit, when there is one, is a bin edge; a value equal to the
// limit counts in the bin above it (a minimum limit is met at equality).
func lotHistogram(c *Campaign, test string, t float64, binDB float64) (histogram, bool) {
	h := histogram{Test: test, TemperatureC: t, LimitDB: math.NaN()}
	type val struct {
		v        float64
		resolved bool
	}
	var vals []val
	for _, r := range c.Results {
		if r.Test != test || tempKey(r.TemperatureC) != tempKey(t) {
			continue
		}
		if !math.IsNaN(r.LimitDB) && !math.IsInf(r.LimitDB, 0) {
			h.LimitDB = r.LimitDB
		}
		v := r.ReportedDB()
		if math.IsNaN(v) || math.IsInf(v, 0) {
			h.Skipped++
			continue
		}
		vals = append(vals, val{v, r.Resolved})
	}
	if len(vals) == 0 {
		return h, false
	}
	lo, hi := vals[0].v, vals[0].v
	for _, v := range vals {
		lo, hi = math.Min(lo, v.v), math.Max(hi, v.v)
	}
	if !math.IsNaN(h.LimitDB) {
		lo, hi = math.Min(lo, h.LimitDB), math.Max(hi, h.LimitDB)
	}
	w := binDB
	if w <= 0 {
		target := math.Min(30, math.Max(5, math.Ceil(math.Sqrt(float64(len(vals))))))
		w = niceWidth((hi - lo) / target)
	}
	h.WidthDB = w
	origin := 0.0 // a bin edge
	if !math.IsNaN(h.LimitDB) {
		origin = h.LimitDB
	}
	bin := func(v float64) float64 { return math.Floor((v - origin) / w) }
	first, last := bin(lo), bin(hi)
	nb := int(last-first) + 1
	h.Edges = make([]float64, nb)
	h.Resolved = make([]int, nb)
	h.BoundOnly = make([]int, nb)
	for i := range h.Edges {
		h.Edges[i] = origin + (first+float64(i))*w
	}
	for _, v := range vals {
		i := min(max(int(bin(v.v)-first), 0), nb-1)
		if v.resolved {
			h.Resolved[i]++
		} else {
			h.BoundOnly[i]++
		}
	}
	if !math.IsNaN(h.LimitDB) {
		h.BelowLimit = int(-first)
	}
	return h, true
}

// niceWidth rounds w up to 1, 2 or 5 times a power of ten (minimum 0.01 dB).
func niceWidth(w float64) float64 {
	if !(w > 0.01) {
		return 0.01
	}
	p := math.Pow(10, math.Floor(math.Log10(w)))
	for _, m := range []float64{1, 2, 5, 10} {
		if m*p >= w*(1-1e-12) {
			return m * p
		}
	}
	return 10 * p
}

func temperatureChart(c *Campaign, test string, chartT float64, maxUnits int, reported map[fitKey]float64) (tempChart, bool) {
	tc := tempChart{Test: test}
	byUnit := map[string][]xy{}
	var units []string
	for _, r := range c.Results {
		if r.Test != test {
			continue
		}
		if _, ok := byUnit[r.Unit]; !ok {
			units = append(units, r.Unit)
		}
		byUnit[r.Unit] = append(byUnit[r.Unit], xy{r.TemperatureC, r.ReportedDB()})
	}
	if len(units) == 0 {
		return tc, false
	}
	tc.OfUnits = len(units)
	for _, u := range worstUnits(units, test, chartT, reported, maxUnits) {
		pts := byUnit[u]
		slices.SortFunc(pts, func(a, b xy) int { return cmp.Compare(a.X, b.X) })
		tc.Series = append(tc.Series, namedXY{Name: u, Points: finitePoints(pts)})
	}
	var med []xy
	for _, l := range c.LotStats {
		if l.Test == test && !math.IsNaN(l.Median) {
			med = append(med, xy{l.TemperatureC, l.Median})
		}
	}
	slices.SortFunc(med, func(a, b xy) int { return cmp.Compare(a.X, b.X) })
	tc.Median = finitePoints(med)
	lim := map[int64]xy{}
	for _, r := range c.Results {
		if r.Test == test && !math.IsNaN(r.LimitDB) {
			lim[tempKey(r.TemperatureC)] = xy{r.TemperatureC, r.LimitDB}
		}
	}
	for _, v := range lim {
		tc.Limit = append(tc.Limit, v)
	}
	slices.SortFunc(tc.Limit, func(a, b xy) int { return cmp.Compare(a.X, b.X) })
	return tc, true
}

func finitePoints(p []xy) []xy {
	out := p[:0:0]
	for _, v := range p {
		if !math.IsNaN(v.Y) && !math.IsInf(v.Y, 0) {
			out = append(out, v)
		}
	}
	return out
}

// Titles shared by workbook charts and PNG plots.

func (rc responseChart) title() string {
	return fmt.Sprintf("%s%s at %s: output change against stimulus (%s)", rc.Test, sweepSuffix(rc.Sweep), celsius(rc.TemperatureC), unitsShown(len(rc.Series), rc.OfUnits))
}

func (rc responseChart) residualTitle() string {
	return fmt.Sprintf("%s%s at %s: fit residuals (%s)", rc.Test, sweepSuffix(rc.Sweep), celsius(rc.TemperatureC), unitsShown(len(rc.Series), rc.OfUnits))
}

func (h histogram) title() string {
	lim := "no limit"
	if !math.IsNaN(h.LimitDB) {
		lim = fmt.Sprintf("limit %.2f dB", h.LimitDB)
	}
	return fmt.Sprintf("%s at %s: lot distribution, %.3g dB bins, %s", h.Test, celsius(h.TemperatureC), h.WidthDB, lim)
}

func (tc tempChart) title() string {
	return fmt.Sprintf("%s: reported ratio against temperature (%s)", tc.Test, unitsShown(len(tc.Series), tc.OfUnits))
}

func sweepSuffix(s string) string {
	if s == "" {
		return ""
	}
	return " (" + s + " sweep)"
}

func celsius(t float64) string { return fmt.Sprintf("%g °C", t) }

func unitsShown(shown, of int) string {
	if shown >= of {
		if of == 1 {
			return "1 unit"
		}
		return fmt.Sprintf("%d units", of)
	}
	return fmt.Sprintf("lowest %d of %d units", shown, of)
}
