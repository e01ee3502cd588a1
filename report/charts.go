package report

import (
	"fmt"
	"math"
	"slices"

	"github.com/xuri/excelize/v2"
)

// chartDataWriter lays chart series out on the Chart data sheet as blocks
// of rows: Chart | Series | X axis | X | Y axis | Y. Each series is one
// contiguous block, so a chart names it by plain ranges. The series name is
// a reference to the Series cell of the block's first row: excelize writes
// a series name as a formula, so user text (a unit id such as "=1+2") must
// live in a cell, never in the name itself.
type chartDataWriter struct {
	f   *excelize.File
	st  *styles
	row int
	err error
}

// chartDataSheetRef is the quoted sheet name for references.
const chartDataSheetRef = "'" + SheetChartData + "'"

type seriesRefs struct{ Name, X, Y string }

func (w *chartDataWriter) header() {
	w.row = 1
	for i, h := range []string{"Chart", "Series", "X axis", "X", "Y axis", "Y"} {
		cell, _ := excelize.CoordinatesToCellName(i+1, 1)
		w.str(cell, h)
	}
	if w.err == nil {
		w.err = w.f.SetCellStyle(SheetChartData, "A1", "F1", w.st.header)
	}
	for col, wd := range map[string]float64{"A": 48, "B": 16, "C": 22, "D": 14, "E": 22, "F": 14} {
		if w.err == nil {
			w.err = w.f.SetColWidth(SheetChartData, col, col, wd)
		}
	}
	if w.err == nil {
		w.err = w.f.SetPanes(SheetChartData, freezePanes(0, 1))
	}
}

func (w *chartDataWriter) str(cell, v string) {
	if w.err == nil {
		w.err = w.f.SetCellStr(SheetChartData, cell, sharedText(v))
	}
}

// block writes one series; it returns ok=false for an empty series.
func (w *chartDataWriter) block(chart, series, xAxis, yAxis string, pts []xy) (seriesRefs, bool) {
	return w.labelledBlock(chart, series, xAxis, yAxis, nil, pts)
}

// labelledBlock is block with text categories (labels[i] replaces pts[i].X).
func (w *chartDataWriter) labelledBlock(chart, series, xAxis, yAxis string, labels []string, pts []xy) (seriesRefs, bool) {
	if len(pts) == 0 || w.err != nil {
		return seriesRefs{}, false
	}
	first := w.row + 1
	for i, p := range pts {
		w.row++
		r := w.row
		w.str(fmt.Sprintf("A%d", r), chart)
		w.str(fmt.Sprintf("B%d", r), series)
		w.str(fmt.Sprintf("C%d", r), xAxis)
		w.str(fmt.Sprintf("E%d", r), yAxis)
		if labels != nil {
			w.str(fmt.Sprintf("D%d", r), labels[i])
		} else if v, ok := num(p.X).(float64); ok && w.err == nil {
			w.err = w.f.SetCellFloat(SheetChartData, fmt.Sprintf("D%d", r), v, -1, 64)
		}
		if v, ok := num(p.Y).(float64); ok && w.err == nil {
			w.err = w.f.SetCellFloat(SheetChartData, fmt.Sprintf("F%d", r), v, -1, 64)
		}
	}
	last := w.row
	return seriesRefs{
		Name: fmt.Sprintf("%s!$B$%d", chartDataSheetRef, first),
		X:    fmt.Sprintf("%s!$D$%d:$D$%d", chartDataSheetRef, first, last),
		Y:    fmt.Sprintf("%s!$F$%d:$F$%d", chartDataSheetRef, first, last),
	}, true
}

// Chart layout on the Charts sheet: two columns of charts.
const (
	chartWidthPx  = 620
	chartHeightPx = 340
	chartRowsStep = 19 // rows of 20 px per chart, with a gap
)

var markerSymbols = []string{"circle", "square", "triangle", "diamond", "x", "star", "plus", "dash"}

func solid(hex string) excelize.Fill {
	return excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{hex}}
}

func axisTitle(s string) excelize.ChartTitle {
	return excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: s, Font: &excelize.Font{Size: 9}}}}
}

func chartTitle(s string) excelize.ChartTitle {
	return excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: s, Font: &excelize.Font{Size: 11, Bold: true}}}}
}

// writeCharts writes the chart data and adds the native charts.
func writeCharts(f *excelize.File, st *styles, plan chartPlan) error {
	dw := &chartDataWriter{f: f, st: st}
	dw.header()
	var charts []*excelize.Chart
	var combos [][]*excelize.Chart
	add := func(c *excelize.Chart, combo ...*excelize.Chart) {
		if len(c.Series) > 0 {
			charts = append(charts, c)
			combos = append(combos, combo)
		}
	}
	for _, rc := range plan.Responses {
		add(responseExcelChart(dw, rc, false))
		add(responseExcelChart(dw, rc, true))
	}
	for _, tc := range plan.Temperatures {
		add(temperatureExcelChart(dw, tc))
	}
	for _, h := range plan.Histograms {
		add(histogramExcelChart(dw, h))
	}
	for _, b := range plan.Bodes {
		for _, c := range bodeExcelCharts(dw, b) {
			add(c)
		}
	}
	if dw.err != nil {
		return fmt.Errorf("report: chart data: %w", dw.err)
	}
	if err := f.SetColWidth(SheetCharts, "A", "Z", 10); err != nil {
		return fmt.Errorf("report: charts: %w", err)
	}
	if err := printSetup(f, SheetCharts, false); err != nil {
		return err
	}
	if err := printSetup(f, SheetChartData, true); err != nil {
		return err
	}
	for i, c := range charts {
		col := 1 + (i%2)*10
		row := 1 + (i/2)*chartRowsStep
		cell, _ := excelize.CoordinatesToCellName(col, row)
		c.Dimension = excelize.ChartDimension{Width: chartWidthPx, Height: chartHeightPx}
		c.Format = excelize.GraphicOptions{PrintObject: ptr(true), OffsetX: 4, OffsetY: 4}
		if err := f.AddChart(SheetCharts, cell, c, combos[i]...); err != nil {
			return fmt.Errorf("report: chart %d (%s): %w", i+1, titleText(c), err)
		}
	}
	if _, err := logFrequencyAxes(f); err != nil {
		return err
	}
	return nil
}

func titleText(c *excelize.Chart) string {
	if len(c.Title.Paragraph) > 0 {
		return c.Title.Paragraph[0].Text
	}
	return ""
}

// responseExcelChart is the stimulus/response chart (points and fitted
// curve per unit) or, with residuals, the residual chart.
func responseExcelChart(dw *chartDataWriter, rc responseChart, residuals bool) *excelize.Chart {
	title, yAxis := rc.title(), "Output change at meter (µV)"
	if residuals {
		title, yAxis = rc.residualTitle(), "Residual at meter (µV)"
	}
	const xAxis = "Stimulus (V)"
	c := &excelize.Chart{
		Type:   excelize.Scatter,
		Title:  chartTitle(title),
		Legend: excelize.ChartLegend{Position: "right"},
		XAxis:  excelize.ChartAxis{Title: axisTitle(xAxis), MajorGridLines: true, TickLabelPosition: excelize.ChartTickLabelLow},
		YAxis:  excelize.ChartAxis{Title: axisTitle(yAxis), MajorGridLines: true, TickLabelPosition: excelize.ChartTickLabelLow},
	}
	for i, s := range rc.Series {
		colour := seriesColours[i%len(seriesColours)]
		pts := s.Points
		if residuals {
			pts = s.Residuals
		}
		if ref, ok := dw.block(title, s.Unit, xAxis, yAxis, pts); ok {
			c.Series = append(c.Series, excelize.ChartSeries{
				Name: ref.Name, Categories: ref.X, Values: ref.Y,
				Line:   excelize.LineOptions{Type: excelize.LineNone},
				Marker: excelize.ChartMarker{Symbol: markerSymbols[i%len(markerSymbols)], Size: 5, Fill: solid(colour)},
			})
		}
		if residuals {
			continue
		}
		if ref, ok := dw.block(title, s.Unit+" fit", xAxis, yAxis, s.Line); ok {
			c.Series = append(c.Series, excelize.ChartSeries{
				Name: ref.Name, Categories: ref.X, Values: ref.Y,
				Fill:   solid(colour),
				Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 1.25, Dash: dashFor(i)},
				Marker: excelize.ChartMarker{Symbol: "none"},
			})
		}
	}
	return c
}

func dashFor(i int) excelize.LineDashType {
	d := []excelize.LineDashType{excelize.LineDashSolid, excelize.LineDashDash, excelize.LineDashSysDot, excelize.LineDashLgDashDot}
	return d[i%len(d)]
}

func temperatureExcelChart(dw *chartDataWriter, tc tempChart) *excelize.Chart {
	title := tc.title()
	const xAxis, yAxis = "Temperature (°C)", "Reported ratio (dB)"
	c := &excelize.Chart{
		Type:   excelize.Scatter,
		Title:  chartTitle(title),
		Legend: excelize.ChartLegend{Position: "right"},
		XAxis:  excelize.ChartAxis{Title: axisTitle(xAxis), MajorGridLines: true, TickLabelPosition: excelize.ChartTickLabelLow},
		YAxis:  excelize.ChartAxis{Title: axisTitle(yAxis), MajorGridLines: true, TickLabelPosition: excelize.ChartTickLabelLow, NumFmt: excelize.ChartNumFmt{CustomNumFmt: "0.0"}},
	}
	// Ratios sit far from zero: fit the vertical axis to the data, in
	// whole dB with 1 dB to spare.
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, s := range append(slices.Clone(tc.Series), namedXY{Points: tc.Median}, namedXY{Points: tc.Limit}) {
		for _, p := range s.Points {
			lo, hi = math.Min(lo, p.Y), math.Max(hi, p.Y)
		}
	}
	if lo <= hi {
		c.YAxis.Minimum, c.YAxis.Maximum = ptr(math.Floor(lo-1)), ptr(math.Ceil(hi+1))
	}
	for i, s := range tc.Series {
		colour := seriesColours[i%len(seriesColours)]
		if ref, ok := dw.block(title, s.Name, xAxis, yAxis, s.Points); ok {
			c.Series = append(c.Series, excelize.ChartSeries{
				Name: ref.Name, Categories: ref.X, Values: ref.Y, Fill: solid(colour),
				Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 1, Dash: dashFor(i)},
				Marker: excelize.ChartMarker{Symbol: markerSymbols[i%len(markerSymbols)], Size: 6, Fill: solid(colour)},
			})
		}
	}
	if ref, ok := dw.block(title, "lot median", xAxis, yAxis, tc.Median); ok {
		c.Series = append(c.Series, excelize.ChartSeries{
			Name: ref.Name, Categories: ref.X, Values: ref.Y, Fill: solid("000000"),
			Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 2.5},
			Marker: excelize.ChartMarker{Symbol: "none"},
		})
	}
	if ref, ok := dw.block(title, "limit", xAxis, yAxis, tc.Limit); ok {
		c.Series = append(c.Series, excelize.ChartSeries{
			Name: ref.Name, Categories: ref.X, Values: ref.Y, Fill: solid("1A1A1A"),
			Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 1.5, Dash: excelize.LineDashDash},
			Marker: excelize.ChartMarker{Symbol: "dash", Size: 8, Fill: solid("1A1A1A")},
		})
	}
	return c
}

// histogramExcelChart is a stacked column chart of bin counts (resolved
// units, with units known only by a lower bound stacked on top) with the
// limit as a category of its own between the last bin below it and the
// first bin at or above it, where a dark bar as tall as the tallest bin
// marks it (the count series are blank there, so nothing stacks on it).
// Categories are the bins as text, "from–to" in dB, and "limit L".
func histogramExcelChart(dw *chartDataWriter, h histogram) *excelize.Chart {
	title := h.title()
	const xAxis, yAxis = "Reported ratio (dB)", "Units"
	c := &excelize.Chart{
		Type:     excelize.ColStacked,
		Title:    chartTitle(title),
		Legend:   excelize.ChartLegend{Position: "bottom"},
		XAxis:    excelize.ChartAxis{Title: axisTitle(xAxis)},
		YAxis:    excelize.ChartAxis{Title: axisTitle(yAxis), MajorGridLines: true, NumFmt: excelize.ChartNumFmt{CustomNumFmt: "0"}},
		GapWidth: ptr(uint(15)),
		Overlap:  ptr(100),
	}
	hasLimit := !math.IsNaN(h.LimitDB)
	var labels []string
	var res, bnd, lim []xy
	tallest, anyBound := 0, false
	limitCategory := func() {
		labels = append(labels, fmt.Sprintf("limit %.2f", h.LimitDB))
		res = append(res, xy{h.LimitDB, math.NaN()})
		bnd = append(bnd, xy{h.LimitDB, math.NaN()})
		lim = append(lim, xy{h.LimitDB, 0}) // height set below
	}
	for i, e := range h.Edges {
		if hasLimit && i == h.BelowLimit {
			limitCategory()
		}
		labels = append(labels, fmt.Sprintf("%.2f–%.2f", e, e+h.WidthDB))
		res = append(res, xy{e, float64(h.Resolved[i])})
		bnd = append(bnd, xy{e, float64(h.BoundOnly[i])})
		lim = append(lim, xy{e, math.NaN()})
		tallest = max(tallest, h.Resolved[i]+h.BoundOnly[i])
		anyBound = anyBound || h.BoundOnly[i] > 0
	}
	if hasLimit && h.BelowLimit == len(h.Edges) {
		limitCategory()
	}
	for i := range lim {
		if !math.IsNaN(lim[i].Y) {
			lim[i].Y = float64(max(tallest, 1))
		}
	}
	type colSeries struct {
		name   string
		pts    []xy
		colour string
	}
	series := []colSeries{{"resolved", res, "0072B2"}}
	if anyBound {
		series = append(series, colSeries{"lower bound only", bnd, "F5C99B"})
	}
	if hasLimit {
		series = append(series, colSeries{fmt.Sprintf("limit %.2f dB", h.LimitDB), lim, "1A1A1A"})
	}
	for _, s := range series {
		if ref, ok := dw.labelledBlock(title, s.name, xAxis, yAxis, labels, s.pts); ok {
			c.Series = append(c.Series, excelize.ChartSeries{
				Name: ref.Name, Categories: ref.X, Values: ref.Y, Fill: solid(s.colour),
			})
		}
	}
	return c
}
