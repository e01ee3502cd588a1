package report

import (
	"bytes"
	"cmp"
	"fmt"
	"image/color"
	"math"
	"regexp"
	"slices"
	"strings"

	"github.com/xuri/excelize/v2"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// bodeSeries is one unit's frequency response in a Bode chart: resolved
// ratios (Mag), lower bounds of points below the noise floor (Bound) and
// the phase (Phase), each against frequency in Hz, ascending.
type bodeSeries struct {
	Unit              string
	Mag, Bound, Phase []xy
}

// bodeChart is one test at one temperature: the ratio and the phase of
// the input-referred coefficient against log frequency, one series per
// unit (the lowest ratios first), with the limit at each frequency and the
// noise floor (the lowest over the units drawn: the ratio above which the
// setup resolves nothing for at least one of them).
type bodeChart struct {
	Test, Quantity string
	TemperatureC   float64
	Series         []bodeSeries
	Limit, Floor   []xy
	OfUnits        int
	HasPhase       bool
}

func (b bodeChart) title() string {
	s := fmt.Sprintf("%s against frequency at %g °C", b.Quantity, b.TemperatureC)
	if len(b.Series) < b.OfUnits {
		s += fmt.Sprintf(" (%d lowest of %d units)", len(b.Series), b.OfUnits)
	}
	return s
}

func (b bodeChart) phaseTitle() string {
	s := fmt.Sprintf("%s phase against frequency at %g °C", b.Quantity, b.TemperatureC)
	if len(b.Series) < b.OfUnits {
		s += fmt.Sprintf(" (%d lowest of %d units)", len(b.Series), b.OfUnits)
	}
	return s
}

// Axis titles of the Bode charts; bodeXAxis also marks a chart whose
// horizontal axis is made logarithmic (logFrequencyAxes).
const (
	bodeXAxis     = "Frequency (Hz, logarithmic)"
	bodeMagAxis   = "Ratio 20·log10(10⁶ / |k(f)| in µV/V) (dB)"
	bodePhaseAxis = "Phase arg k(f) (°)"
)

// bodeCharts groups the frequency results by test and temperature (in
// order of first appearance) and keeps at most maxUnits units per chart.
func bodeCharts(c *Campaign, maxUnits int) []bodeChart {
	type key struct {
		test string
		t    int64
	}
	var order []key
	groups := map[key][]FreqResult{}
	for _, r := range c.FreqResults {
		if r.Verdict == VerdictNoResult || math.IsNaN(r.FrequencyHz) || r.FrequencyHz <= 0 {
			continue
		}
		k := key{r.Test, tempKey(r.TemperatureC)}
		if _, ok := groups[k]; !ok {
			order = append(order, k)
		}
		groups[k] = append(groups[k], r)
	}
	var out []bodeChart
	for _, k := range order {
		rs := groups[k]
		bc := bodeChart{Test: k.test, Quantity: rs[0].QuantityName(), TemperatureC: rs[0].TemperatureC}
		lowest := map[string]float64{}
		var units []string
		for _, r := range rs {
			v := r.ReportedDB()
			cur, ok := lowest[r.Unit]
			if !ok {
				units = append(units, r.Unit)
				cur = math.Inf(1)
			}
			if !math.IsNaN(v) {
				lowest[r.Unit] = math.Min(cur, v)
			} else {
				lowest[r.Unit] = cur
			}
		}
		bc.OfUnits = len(units)
		slices.SortStableFunc(units, func(a, b string) int {
			if c := cmp.Compare(lowest[a], lowest[b]); c != 0 {
				return c
			}
			return strings.Compare(a, b)
		})
		if maxUnits > 0 && len(units) > maxUnits {
			units = units[:maxUnits]
		}
		keep := map[string]int{}
		for i, u := range units {
			keep[u] = i
			bc.Series = append(bc.Series, bodeSeries{Unit: u})
		}
		limit := map[float64]float64{}
		floor := map[float64]float64{}
		for _, r := range rs {
			i, ok := keep[r.Unit]
			if !ok {
				continue
			}
			s := &bc.Series[i]
			f := r.FrequencyHz
			switch {
			case r.Resolved && !math.IsNaN(r.RatioDB):
				s.Mag = append(s.Mag, xy{f, r.RatioDB})
			case !math.IsNaN(r.LowerBoundDB):
				s.Bound = append(s.Bound, xy{f, r.LowerBoundDB})
			}
			if r.HasPhase && !math.IsNaN(r.PhaseDeg) {
				s.Phase = append(s.Phase, xy{f, r.PhaseDeg})
				bc.HasPhase = true
			}
			if !math.IsNaN(r.LimitDB) {
				limit[f] = r.LimitDB
			}
			if !math.IsNaN(r.NoiseFloorDB) && !math.IsInf(r.NoiseFloorDB, 0) {
				if cur, ok := floor[f]; !ok || r.NoiseFloorDB < cur {
					floor[f] = r.NoiseFloorDB
				}
			}
		}
		byX := func(a, b xy) int { return cmp.Compare(a.X, b.X) }
		for i := range bc.Series {
			slices.SortFunc(bc.Series[i].Mag, byX)
			slices.SortFunc(bc.Series[i].Bound, byX)
			slices.SortFunc(bc.Series[i].Phase, byX)
		}
		for f, v := range limit {
			bc.Limit = append(bc.Limit, xy{f, v})
		}
		for f, v := range floor {
			bc.Floor = append(bc.Floor, xy{f, v})
		}
		slices.SortFunc(bc.Limit, byX)
		slices.SortFunc(bc.Floor, byX)
		out = append(out, bc)
	}
	return out
}

// frequencyRange is the decades that hold every frequency of b.
func (b bodeChart) frequencyRange() (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, s := range b.Series {
		for _, pts := range [][]xy{s.Mag, s.Bound, s.Phase} {
			for _, p := range pts {
				lo, hi = math.Min(lo, p.X), math.Max(hi, p.X)
			}
		}
	}
	if lo > hi {
		return 1, 10
	}
	lo, hi = math.Pow(10, math.Floor(math.Log10(lo))), math.Pow(10, math.Ceil(math.Log10(hi)))
	if hi <= lo {
		hi = 10 * lo
	}
	return lo, hi
}

// bodeExcelCharts are the magnitude and (when any point has one) phase
// charts of b.
func bodeExcelCharts(dw *chartDataWriter, b bodeChart) []*excelize.Chart {
	lo, hi := b.frequencyRange()
	base := func(title, yAxis string) *excelize.Chart {
		return &excelize.Chart{
			Type:   excelize.Scatter,
			Title:  chartTitle(title),
			Legend: excelize.ChartLegend{Position: "right"},
			XAxis: excelize.ChartAxis{Title: axisTitle(bodeXAxis), MajorGridLines: true, MinorGridLines: true,
				TickLabelPosition: excelize.ChartTickLabelLow, Minimum: ptr(lo), Maximum: ptr(hi)},
			YAxis: excelize.ChartAxis{Title: axisTitle(yAxis), MajorGridLines: true, TickLabelPosition: excelize.ChartTickLabelLow,
				NumFmt: excelize.ChartNumFmt{CustomNumFmt: "0"}},
		}
	}
	title := b.title()
	mag := base(title, bodeMagAxis)
	// The ratios sit far from zero: fit the vertical axis to the data,
	// the limit and the noise floor (so the margin to both shows).
	ylo, yhi := math.Inf(1), math.Inf(-1)
	for _, s := range b.Series {
		for _, p := range append(append(append(slices.Clone(s.Mag), s.Bound...), b.Limit...), b.Floor...) {
			ylo, yhi = math.Min(ylo, p.Y), math.Max(yhi, p.Y)
		}
	}
	if ylo <= yhi {
		mag.YAxis.Minimum, mag.YAxis.Maximum = ptr(10*math.Floor(ylo/10-0.05)), ptr(10*math.Ceil(yhi/10+0.05))
	}
	for i, s := range b.Series {
		colour := seriesColours[i%len(seriesColours)]
		if ref, ok := dw.block(title, s.Unit, bodeXAxis, bodeMagAxis, s.Mag); ok {
			mag.Series = append(mag.Series, excelize.ChartSeries{
				Name: ref.Name, Categories: ref.X, Values: ref.Y, Fill: solid(colour),
				Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 1.25, Dash: dashFor(i)},
				Marker: excelize.ChartMarker{Symbol: markerSymbols[i%len(markerSymbols)], Size: 5, Fill: solid(colour)},
			})
		}
		if ref, ok := dw.block(title, s.Unit+" lower bound", bodeXAxis, bodeMagAxis, s.Bound); ok {
			mag.Series = append(mag.Series, excelize.ChartSeries{
				Name: ref.Name, Categories: ref.X, Values: ref.Y,
				Line:   excelize.LineOptions{Type: excelize.LineNone},
				Marker: excelize.ChartMarker{Symbol: "triangle", Size: 7, Fill: solid("FFFFFF"), Border: excelize.LineOptions{Type: excelize.LineSolid, Width: 1}},
			})
		}
	}
	if ref, ok := dw.block(title, "limit", bodeXAxis, bodeMagAxis, b.Limit); ok {
		mag.Series = append(mag.Series, excelize.ChartSeries{
			Name: ref.Name, Categories: ref.X, Values: ref.Y, Fill: solid("1A1A1A"),
			Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 1.75, Dash: excelize.LineDashDash},
			Marker: excelize.ChartMarker{Symbol: "dash", Size: 8, Fill: solid("1A1A1A")},
		})
	}
	if ref, ok := dw.block(title, "noise floor", bodeXAxis, bodeMagAxis, b.Floor); ok {
		mag.Series = append(mag.Series, excelize.ChartSeries{
			Name: ref.Name, Categories: ref.X, Values: ref.Y, Fill: solid("8C8C8C"),
			Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 1.5, Dash: excelize.LineDashSysDot},
			Marker: excelize.ChartMarker{Symbol: "none"},
		})
	}
	out := []*excelize.Chart{mag}
	if !b.HasPhase {
		return out
	}
	ptitle := b.phaseTitle()
	ph := base(ptitle, bodePhaseAxis)
	ph.YAxis.Minimum, ph.YAxis.Maximum, ph.YAxis.MajorUnit = ptr(-180.0), ptr(180.0), 45
	for i, s := range b.Series {
		colour := seriesColours[i%len(seriesColours)]
		if ref, ok := dw.block(ptitle, s.Unit, bodeXAxis, bodePhaseAxis, s.Phase); ok {
			ph.Series = append(ph.Series, excelize.ChartSeries{
				Name: ref.Name, Categories: ref.X, Values: ref.Y, Fill: solid(colour),
				Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 1.25, Dash: dashFor(i)},
				Marker: excelize.ChartMarker{Symbol: markerSymbols[i%len(markerSymbols)], Size: 5, Fill: solid(colour)},
			})
		}
	}
	return append(out, ph)
}

// logFrequencyAxes makes the horizontal axis of every Bode chart (those
// titled bodeXAxis) logarithmic, base 10. excelize v2.11 writes
// ChartAxis.LogBase for the vertical axis only, so the chart part is
// edited after AddChart: a <c:logBase val="10"/> as the first child of the
// horizontal value axis's <c:scaling> (ECMA-376 Part 1 §21.2.2.90
// logBase, §21.2.2.195 scaling: logBase comes before orientation). The
// horizontal axis of an excelize scatter chart is the valAx with axId
// 100000000.
func logFrequencyAxes(f *excelize.File) (int, error) {
	marker := []byte(bodeXAxis)
	n := 0
	var err error
	f.Pkg.Range(func(k, v any) bool {
		name, ok := k.(string)
		if !ok || !strings.HasPrefix(name, "xl/charts/chart") {
			return true
		}
		b, ok := v.([]byte)
		if !ok || !bytes.Contains(b, marker) {
			return true
		}
		m := xScaling.FindSubmatchIndex(b)
		if m == nil {
			err = fmt.Errorf("report: chart part %s: no horizontal value axis to make logarithmic", name)
			return false
		}
		prefix := b[m[2]:m[3]] // "c:" or "" (default namespace)
		nb := make([]byte, 0, len(b)+40)
		nb = append(nb, b[:m[1]]...)
		nb = append(nb, fmt.Sprintf(`<%slogBase val="10"></%slogBase>`, prefix, prefix)...)
		nb = append(nb, b[m[1]:]...)
		f.Pkg.Store(name, nb)
		n++
		return true
	})
	return n, err
}

// xScaling finds the <scaling> of the horizontal value axis (axId
// 100000000), with or without the chart namespace prefix.
var xScaling = regexp.MustCompile(`<((?:c:)?)valAx><(?:c:)?axId val="100000000"></(?:c:)?axId><(?:c:)?scaling>`)

// bodePlots are the PNG magnitude and (when any point has one) phase
// plots of b: against a base-10 logarithmic frequency axis (gonum
// plot.LogScale with ticks at the decades), the limit dashed black, the
// noise floor dotted grey, lower bounds as open triangles.
func bodePlots(b bodeChart) ([]*plot.Plot, error) {
	lo, hi := b.frequencyRange()
	logX := func(p *plot.Plot) {
		p.X.Scale = plot.LogScale{}
		p.X.Tick.Marker = plot.LogTicks{Prec: -1}
		p.X.Min, p.X.Max = lo, hi
	}
	title := b.title()
	mag := newPlot(title, bodeXAxis, bodeMagAxis)
	logX(mag)
	entries := 0
	for i, s := range b.Series {
		col := hexColour(seriesColours[i%len(seriesColours)])
		if xys := toXYs(s.Mag); len(xys) > 0 {
			ln, sc, err := plotter.NewLinePoints(xys)
			if err != nil {
				return nil, fmt.Errorf("report: plot %q unit %q: %w", title, s.Unit, err)
			}
			ln.Color, ln.Dashes = col, dashes[i%len(dashes)]
			sc.Color, sc.Shape, sc.Radius = col, glyphs[i%len(glyphs)], vg.Points(2.5)
			mag.Add(ln, sc)
			mag.Legend.Add(s.Unit, ln, sc)
			entries++
		}
		if xys := toXYs(s.Bound); len(xys) > 0 {
			sc, err := plotter.NewScatter(xys)
			if err != nil {
				return nil, fmt.Errorf("report: plot %q unit %q bounds: %w", title, s.Unit, err)
			}
			sc.Color, sc.Shape, sc.Radius = col, draw.TriangleGlyph{}, vg.Points(3.5)
			mag.Add(sc)
			mag.Legend.Add(s.Unit+" lower bound", sc)
			entries++
		}
	}
	if xys := toXYs(b.Limit); len(xys) > 0 {
		ln, err := plotter.NewLine(xys)
		if err != nil {
			return nil, fmt.Errorf("report: plot %q limit: %w", title, err)
		}
		ln.Color, ln.Width, ln.Dashes = color.Black, vg.Points(1.5), []vg.Length{vg.Points(6), vg.Points(3)}
		mag.Add(ln)
		mag.Legend.Add("limit", ln)
		entries++
	}
	if xys := toXYs(b.Floor); len(xys) > 0 {
		ln, err := plotter.NewLine(xys)
		if err != nil {
			return nil, fmt.Errorf("report: plot %q noise floor: %w", title, err)
		}
		ln.Color, ln.Width, ln.Dashes = color.Gray{Y: 120}, vg.Points(1.5), []vg.Length{vg.Points(1), vg.Points(2)}
		mag.Add(ln)
		mag.Legend.Add("noise floor", ln)
		entries++
	}
	mag.Legend.Left = false // ratios fall with frequency: the top right is empty
	legendRoom(mag, entries)
	out := []*plot.Plot{mag}
	if !b.HasPhase {
		return out, nil
	}
	ptitle := b.phaseTitle()
	ph := newPlot(ptitle, bodeXAxis, bodePhaseAxis)
	logX(ph)
	for i, s := range b.Series {
		xys := toXYs(s.Phase)
		if len(xys) == 0 {
			continue
		}
		col := hexColour(seriesColours[i%len(seriesColours)])
		ln, sc, err := plotter.NewLinePoints(xys)
		if err != nil {
			return nil, fmt.Errorf("report: plot %q unit %q: %w", ptitle, s.Unit, err)
		}
		ln.Color, ln.Dashes = col, dashes[i%len(dashes)]
		sc.Color, sc.Shape, sc.Radius = col, glyphs[i%len(glyphs)], vg.Points(2.5)
		ph.Add(ln, sc)
		ph.Legend.Add(s.Unit, ln, sc)
	}
	ph.Y.Min, ph.Y.Max = -180, 180
	ph.Y.Tick.Marker = plot.ConstantTicks(phaseTicks())
	return append(out, ph), nil
}

// phaseTicks are labelled ticks every 45° from −180° to 180°.
func phaseTicks() []plot.Tick {
	var t []plot.Tick
	for v := -180; v <= 180; v += 45 {
		t = append(t, plot.Tick{Value: float64(v), Label: fmt.Sprintf("%d", v)})
	}
	return t
}
