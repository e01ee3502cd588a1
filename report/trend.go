package report

import (
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	"github.com/xuri/excelize/v2"
)

// Sheet names of the trend workbook (our own); every part × test ×
// temperature gets a sheet of its own, named after it (TrendChart.Sheet).
const (
	SheetTrend         = "Trend"
	SheetRepeatability = "Repeatability"
)

// Trend is what the trend workbook shows: lot-to-lot statistics of stored
// results, one TrendChart per part × test × temperature (and frequency),
// and per-bench repeatability. It is plain data; the statistics are made
// elsewhere (procedure/trend, through fit).
type Trend struct {
	Title     string
	Generated time.Time
	Generator string // tool and version
	// Selection says which stored results were used, in words.
	Selection string
	// Method states the chart method and its source; SigmaEstimator how σ
	// was estimated; Sigmas the limit width (3).
	Method         string
	SigmaEstimator string
	Sigmas         float64
	// Coverage and Confidence of the tolerance bounds (e.g. 0.95, 0.95).
	Coverage, Confidence float64
	// RunRules describes the run rules applied ("" when none).
	RunRules      string
	Charts        []TrendChart
	Repeatability []Repeatability
	Notes         []string
}

// TrendChart is one part × test × temperature × frequency: its lots in
// time order with their control-chart points.
type TrendChart struct {
	Part, Test   string
	TemperatureC float64
	FrequencyHz  float64 // 0: DC
	// Quantity is what the values are, e.g. "CMRR"; ValueUnit is "dB" or
	// "µV/V"; Convention says how they are referred and signed, e.g.
	// "input-referred ratio 20·log10|ΔV_CM/ΔV_IO|; a lower bound where not
	// resolved".
	Quantity, ValueUnit, Convention string
	// LimitValue is the specification limit in ValueUnit (NaN: none);
	// BoundSide "lower" or "upper": which side the tolerance bound is on.
	LimitValue float64
	BoundSide  string
	// Chart-wide values: x̿, s_p with its ν, σ̂.
	GrandMean, PooledSD float64
	PooledDOF           int
	SigmaHat            float64
	// ChartError, when set, says why no control limits could be formed
	// (e.g. a single lot); the lots are still listed.
	ChartError string
	Lots       []TrendLot
}

// TrendLot is one lot on a trend chart. Numbers are in the chart's
// ValueUnit; NaN means not available (printed empty).
type TrendLot struct {
	Lot         string
	First, Last time.Time // first and last measurement of the lot
	Benches     []string
	N           int     // units (one value per unit: the mean of its repeats)
	BoundsOnly  int     // units with no resolved result, only bounds: not in N or any statistic
	Mean, SD    float64 // Mean NaN for N = 0, SD NaN for N < 2
	// X̄ chart limits and s chart centre and limits (NaN when none).
	MeanLCL, MeanUCL       float64
	SDCenter, SDLCL, SDUCL float64
	MeanOut, SDOut         bool
	Signals                []string
	// Judged units, those passing (pass or conditional pass), yield =
	// Passed/Judged (NaN when none judged).
	Judged, Passed int
	Yield          float64
	// ToleranceK and ToleranceBound: one-sided normal tolerance bound
	// (NaN for N < 2).
	ToleranceK, ToleranceBound float64
}

// Repeatability is one bench's repeatability for one part × test ×
// temperature: the pooled SD of units measured more than once on it.
type Repeatability struct {
	Bench, Part, Test string
	TemperatureC      float64
	FrequencyHz       float64
	Quantity          string
	ValueUnit         string
	SD                float64
	DOF               int
	Units             int // units measured at least twice
	Repeats           int // results from those units
}

// Sheet returns the chart's sheet name: "n part test T°C" cut to the 31
// characters a sheet name may have, with characters a sheet name may not
// hold replaced. n (1-based) keeps names unique.
func (c TrendChart) Sheet(n int) string {
	name := fmt.Sprintf("%d %s %s %g°C", n, c.Part, c.Test, c.TemperatureC)
	if c.FrequencyHz != 0 {
		name += " " + hzText(c.FrequencyHz) + "Hz"
	}
	name = strings.Map(func(r rune) rune {
		if strings.ContainsRune(`[]:*?/\'`, r) || r < 0x20 {
			return '_'
		}
		return r
	}, name)
	for utf8.RuneCountInString(name) > 31 {
		_, size := utf8.DecodeLastRuneInString(name)
		name = name[:len(name)-size]
	}
	return strings.TrimSpace(name)
}

// TrendOptions tune WriteTrendWorkbook.
type TrendOptions struct {
	TmpDir string // excelize spill folder ("" = os.TempDir())
}

// WriteTrendWorkbook writes the trend workbook to path (.xlsx) through a
// temporary file renamed into place.
func WriteTrendWorkbook(path string, t *Trend, opt TrendOptions) error {
	if !strings.EqualFold(filepath.Ext(path), ".xlsx") {
		return fmt.Errorf("report: trend workbook %q: the file name must end in .xlsx", path)
	}
	if err := WriteFileAtomic(path, func(w io.Writer) error { return WriteTrendWorkbookTo(w, t, opt) }); err != nil {
		return fmt.Errorf("report: trend workbook %q: %w", path, err)
	}
	return nil
}

// WriteTrendWorkbookTo writes the trend workbook (.xlsx bytes) to w.
func WriteTrendWorkbookTo(w io.Writer, t *Trend, opt TrendOptions) (err error) {
	if t == nil {
		return errors.New("report: no trend to write")
	}
	f := excelize.NewFile(excelize.Options{TmpDir: opt.TmpDir})
	defer func() {
		if cerr := f.Close(); cerr != nil && err == nil {
			err = fmt.Errorf("report: cleaning up workbook temporary files: %w", cerr)
		}
	}()
	if err := buildTrend(f, t); err != nil {
		return err
	}
	if _, err := f.WriteTo(w); err != nil {
		return fmt.Errorf("report: writing trend workbook: %w", err)
	}
	return nil
}

// trendWriter writes cells of one sheet with the normal API.
type trendWriter struct {
	f     *excelize.File
	st    *styles
	sheet string
	err   error
}

func (w *trendWriter) set(col, row int, v any, style int) {
	if w.err != nil {
		return
	}
	cell, _ := excelize.CoordinatesToCellName(col, row)
	switch v := v.(type) {
	case nil:
	case string:
		w.err = w.f.SetCellStr(w.sheet, cell, sharedText(v))
	case float64:
		switch x := num(v).(type) {
		case float64:
			w.err = w.f.SetCellFloat(w.sheet, cell, x, -1, 64)
		case string:
			w.err = w.f.SetCellStr(w.sheet, cell, x)
		}
	case int:
		w.err = w.f.SetCellInt(w.sheet, cell, int64(v))
	case time.Time:
		if !v.IsZero() {
			w.err = w.f.SetCellValue(w.sheet, cell, v.UTC())
		}
	default:
		w.err = fmt.Errorf("report: sheet %q cell %s: unexpected %T", w.sheet, cell, v)
	}
	if w.err == nil && style != 0 {
		w.err = w.f.SetCellStyle(w.sheet, cell, cell, style)
	}
}

// trendCol is one column of a lot or repeatability table.
type trendCol struct {
	header string
	width  float64
	style  int
	value  func(i int) any
}

// table writes a header row at row r0 and n rows below it, as a filterable
// table named name; it returns the row after the table.
func (w *trendWriter) table(name string, r0 int, cols []trendCol, n int) int {
	for j, c := range cols {
		w.set(j+1, r0, c.header, w.st.header)
		colName, _ := excelize.ColumnNumberToName(j + 1)
		if w.err == nil {
			w.err = w.f.SetColWidth(w.sheet, colName, colName, c.width)
		}
	}
	if w.err == nil {
		w.err = w.f.SetRowHeight(w.sheet, r0, 45)
	}
	for i := range n {
		for j, c := range cols {
			v := c.value(i)
			style := c.style
			if cell, ok := v.(excelize.Cell); ok {
				v, style = cell.Value, cell.StyleID
			}
			w.set(j+1, r0+1+i, v, style)
		}
	}
	if n > 0 && w.err == nil {
		first, _ := excelize.CoordinatesToCellName(1, r0)
		last, _ := excelize.CoordinatesToCellName(len(cols), r0+n)
		w.err = w.f.AddTable(w.sheet, &excelize.Table{
			Range: first + ":" + last, Name: name, StyleName: "TableStyleLight1", ShowRowStripes: ptr(true),
		})
	}
	return r0 + n + 1
}

func (w *trendWriter) note(row int, label, text string) {
	w.set(1, row, label, w.st.label)
	w.set(2, row, text, w.st.plain)
}

// valueStyle is the number format of a chart's values.
func valueStyle(st *styles, unit string) int {
	if unit == "dB" {
		return st.db
	}
	return st.uvpv
}

func buildTrend(f *excelize.File, t *Trend) error {
	st, err := newStyles(f)
	if err != nil {
		return err
	}
	if err := f.SetSheetName("Sheet1", SheetTrend); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	names := make([]string, len(t.Charts))
	seen := map[string]bool{SheetTrend: true, SheetRepeatability: true}
	for i, c := range t.Charts {
		names[i] = c.Sheet(i + 1)
		if seen[strings.ToLower(names[i])] {
			return fmt.Errorf("report: trend sheet name %q is used twice", names[i])
		}
		seen[strings.ToLower(names[i])] = true
		if _, err := f.NewSheet(names[i]); err != nil {
			return fmt.Errorf("report: adding sheet %q: %w", names[i], err)
		}
	}
	if _, err := f.NewSheet(SheetRepeatability); err != nil {
		return fmt.Errorf("report: adding sheet %q: %w", SheetRepeatability, err)
	}
	if err := f.SetDocProps(&excelize.DocProperties{
		Title:   cellText(t.Title),
		Subject: "Lot-to-lot trend of common-mode and supply rejection results",
		Creator: cellText(t.Generator),
	}); err != nil {
		return fmt.Errorf("report: document properties: %w", err)
	}
	if err := writeTrendIndex(f, st, t, names); err != nil {
		return err
	}
	for i, c := range t.Charts {
		if err := writeTrendChart(f, st, t, c, names[i], i+1); err != nil {
			return err
		}
	}
	return writeRepeatability(f, st, t)
}

func writeTrendIndex(f *excelize.File, st *styles, t *Trend, names []string) error {
	w := &trendWriter{f: f, st: st, sheet: SheetTrend}
	if err := printSetup(f, SheetTrend, false); err != nil {
		return err
	}
	w.set(1, 1, t.Title, st.title)
	r := 3
	kv := func(label string, v any, style int) {
		w.set(1, r, label, st.label)
		w.set(2, r, v, style)
		r++
	}
	kv("Generated (UTC)", t.Generated, st.time)
	kv("Generator", t.Generator, st.plain)
	kv("Selection", t.Selection, st.plain)
	kv("Chart method", t.Method, st.plain)
	kv("σ estimate", t.SigmaEstimator, st.plain)
	kv("Control limits (standard errors)", t.Sigmas, st.k)
	kv("Run rules", t.RunRules, st.plain)
	kv("Tolerance bound coverage", t.Coverage, st.percent)
	kv("Tolerance bound confidence", t.Confidence, st.percent)
	for _, n := range t.Notes {
		kv("Note", n, st.plain)
	}
	r++
	charts := t.Charts
	outLots := func(c TrendChart) int {
		n := 0
		for _, l := range c.Lots {
			if l.MeanOut || l.SDOut || len(l.Signals) > 0 {
				n++
			}
		}
		return n
	}
	cols := []trendCol{
		{"Sheet", 26, st.text, func(i int) any { return names[i] }},
		// wide enough for the generation time in the block above
		{"Part", 24, st.text, func(i int) any { return charts[i].Part }},
		{"Test", 12, st.text, func(i int) any { return charts[i].Test }},
		{"Temperature (°C)", 11, st.celsius, func(i int) any { return charts[i].TemperatureC }},
		{"Frequency (Hz, 0 = DC)", 11, st.k, func(i int) any { return charts[i].FrequencyHz }},
		{"Quantity", 10, st.text, func(i int) any { return charts[i].Quantity }},
		{"Unit", 7, st.text, func(i int) any { return charts[i].ValueUnit }},
		{"Convention", 40, st.wrap, func(i int) any { return charts[i].Convention }},
		{"Lots", 7, st.integer, func(i int) any { return len(charts[i].Lots) }},
		{"Lots with a signal", 10, st.integer, func(i int) any { return outLots(charts[i]) }},
		{"Latest lot yield (%)", 10, st.percent, func(i int) any {
			if l := charts[i].Lots; len(l) > 0 {
				return l[len(l)-1].Yield
			}
			return nil
		}},
		{"Limits", 30, st.wrap, func(i int) any { return charts[i].ChartError }},
	}
	w.table("TrendIndex", r, cols, len(charts))
	if w.err == nil {
		w.err = f.SetColWidth(SheetTrend, "A", "A", 30)
	}
	if w.err != nil {
		return fmt.Errorf("report: sheet %q: %w", SheetTrend, w.err)
	}
	return nil
}

// writeTrendChart writes a part × test sheet: the lot table, its key, the
// X̄ chart and the s chart beside it, drawn from the table's own columns.
func writeTrendChart(f *excelize.File, st *styles, t *Trend, c TrendChart, sheet string, n int) error {
	if err := printSetup(f, sheet, true); err != nil {
		return err
	}
	w := &trendWriter{f: f, st: st, sheet: sheet}
	u := c.ValueUnit
	vs := valueStyle(st, u)
	lots := c.Lots
	flag := func(b bool) any { return yesNo(b, st.attention) }
	bound := "Lower"
	if c.BoundSide == "upper" {
		bound = "Upper"
	}
	cols := []trendCol{
		{"Lot", 14, st.text, func(i int) any { return lots[i].Lot }},
		{"First measured (UTC)", 24, st.time, func(i int) any { return lots[i].First }},
		{"Last measured (UTC)", 24, st.time, func(i int) any { return lots[i].Last }},
		{"Benches", 16, st.text, func(i int) any { return strings.Join(lots[i].Benches, ", ") }},
		{"Units (n)", 7, st.integer, func(i int) any { return lots[i].N }},
		{"Units with bounds only (n)", 9, st.integer, func(i int) any { return lots[i].BoundsOnly }},
		{fmt.Sprintf("Lot mean x̄ (%s)", u), 11, vs, func(i int) any { return lots[i].Mean }},
		{fmt.Sprintf("Lot SD s (%s)", u), 10, vs, func(i int) any { return lots[i].SD }},
		{fmt.Sprintf("X̄ centre x̿ (%s)", u), 11, vs, func(int) any { return c.GrandMean }},
		{fmt.Sprintf("X̄ LCL (%s)", u), 11, vs, func(i int) any { return lots[i].MeanLCL }},
		{fmt.Sprintf("X̄ UCL (%s)", u), 11, vs, func(i int) any { return lots[i].MeanUCL }},
		{"Mean beyond limits", 9, st.text, func(i int) any { return flag(lots[i].MeanOut) }},
		{fmt.Sprintf("s centre c4·σ̂ (%s)", u), 11, vs, func(i int) any { return lots[i].SDCenter }},
		{fmt.Sprintf("s LCL (%s)", u), 10, vs, func(i int) any { return lots[i].SDLCL }},
		{fmt.Sprintf("s UCL (%s)", u), 10, vs, func(i int) any { return lots[i].SDUCL }},
		{"SD beyond limits", 9, st.text, func(i int) any { return flag(lots[i].SDOut) }},
		{"Run-rule signals", 28, st.wrap, func(i int) any { return joinFlags(lots[i].Signals) }},
		{"Judged units (n)", 8, st.integer, func(i int) any { return lots[i].Judged }},
		{"Passed units (n)", 8, st.integer, func(i int) any { return lots[i].Passed }},
		{"Yield (%)", 9, st.percent, func(i int) any { return lots[i].Yield }},
		{"Tolerance factor k", 9, st.k, func(i int) any { return lots[i].ToleranceK }},
		{fmt.Sprintf("%s tolerance bound (%s)", bound, u), 12, vs, func(i int) any { return lots[i].ToleranceBound }},
		{fmt.Sprintf("Limit (%s)", u), 10, vs, func(int) any { return c.LimitValue }},
	}
	end := w.table(fmt.Sprintf("Lots%d", n), 1, cols, len(lots))
	if w.err == nil {
		w.err = f.SetPanes(sheet, freezePanes(1, 1))
	}
	r := end + 1
	w.set(1, r, "Key", st.label)
	r++
	key := []KeyValue{
		{Label: "Quantity", Value: fmt.Sprintf("%s of %s, %s at %g °C%s, in %s: %s.", c.Quantity, c.Part, c.Test, c.TemperatureC, freqText(c.FrequencyHz), u, c.Convention)},
		{Label: "Lot values", Value: "One value per unit: the mean of its resolved results in the lot (repeats on one or several benches). A result not resolved (a ratio known only by its lower bound, a coefficient not told apart from zero) is not a value: it is left out of the lot mean, SD, control limits and tolerance bound. A unit with no resolved result is counted under 'Units with bounds only' and not in n; a lot with none has no chart point."},
		{Label: "Chart", Value: t.Method},
		{Label: "σ̂", Value: fmt.Sprintf("%s: s_p = %s %s with ν = %d, σ̂ = %s %s.", t.SigmaEstimator, fmtVal(c.PooledSD), u, c.PooledDOF, fmtVal(c.SigmaHat), u)},
		{Label: "X̄ limits", Value: fmt.Sprintf("x̿ ± %g·σ̂/√n for each lot's own n (x̿ = %s %s, the mean of all units).", t.Sigmas, fmtVal(c.GrandMean), u)},
		{Label: "s limits", Value: fmt.Sprintf("centre c4(n)·σ̂, limits B5(n)·σ̂ and B6(n)·σ̂ at ±%g standard errors; none for a lot of one unit.", t.Sigmas)},
		{Label: "Run rules", Value: t.RunRules},
		{Label: "Yield", Value: "Passed / judged units; a unit passes when every judged result of it is a pass or a conditional pass (ILAC-G8:09/2019 §4.2)."},
		{Label: "Tolerance bound", Value: fmt.Sprintf("%s one-sided normal tolerance bound x̄ %s k·s covering %g %% of units with %g %% confidence, k from the non-central t (Owen 1963).", bound, map[bool]string{true: "+", false: "−"}[bound == "Upper"], 100*t.Coverage, 100*t.Confidence)},
	}
	if c.ChartError != "" {
		key = append(key, KeyValue{Label: "No limits", Value: c.ChartError})
	}
	for _, kv := range key {
		w.note(r, kv.Label, kv.Value)
		r++
	}
	if w.err != nil {
		return fmt.Errorf("report: sheet %q: %w", sheet, w.err)
	}
	if len(lots) == 0 {
		return nil
	}
	// Charts to the right of the key, below the table: column A holds the
	// lot names (categories); series names are the header cells.
	ref := func(col int) (name, values string) {
		cn, _ := excelize.ColumnNumberToName(col)
		q := "'" + strings.ReplaceAll(sheet, "'", "''") + "'"
		return fmt.Sprintf("%s!$%s$1", q, cn), fmt.Sprintf("%s!$%s$2:$%s$%d", q, cn, cn, len(lots)+1)
	}
	_, cats := ref(1)
	series := func(col int, colour string, dash excelize.LineDashType, marker bool) excelize.ChartSeries {
		name, vals := ref(col)
		s := excelize.ChartSeries{
			Name: name, Categories: cats, Values: vals, Fill: solid(colour),
			Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 1.25, Dash: dash},
			Marker: excelize.ChartMarker{Symbol: "none"},
		}
		if marker {
			s.Line.Width = 1.75
			s.Marker = excelize.ChartMarker{Symbol: "circle", Size: 6, Fill: solid(colour)}
		}
		return s
	}
	lineChart := func(title, yAxis string, s ...excelize.ChartSeries) *excelize.Chart {
		return &excelize.Chart{
			Type:         excelize.Line,
			Title:        chartTitle(title),
			Legend:       excelize.ChartLegend{Position: "bottom"},
			Dimension:    excelize.ChartDimension{Width: chartWidthPx, Height: chartHeightPx},
			Format:       excelize.GraphicOptions{PrintObject: ptr(true), OffsetX: 4, OffsetY: 4},
			XAxis:        excelize.ChartAxis{Title: axisTitle("Lot (time order)"), TickLabelPosition: excelize.ChartTickLabelLow},
			YAxis:        excelize.ChartAxis{Title: axisTitle(yAxis), MajorGridLines: true, TickLabelPosition: excelize.ChartTickLabelLow},
			Series:       s,
			ShowBlanksAs: "gap",
		}
	}
	head := fmt.Sprintf("%s %s %s at %g °C%s", c.Part, c.Test, c.Quantity, c.TemperatureC, freqText(c.FrequencyHz))
	xbar := lineChart("X̄ chart: "+head, fmt.Sprintf("Lot mean (%s)", u),
		series(7, "0072B2", excelize.LineDashSolid, true),
		series(9, "000000", excelize.LineDashSolid, false),
		series(10, "D55E00", excelize.LineDashDash, false),
		series(11, "D55E00", excelize.LineDashDash, false))
	schart := lineChart("s chart: "+head, fmt.Sprintf("Lot SD (%s)", u),
		series(8, "009E73", excelize.LineDashSolid, true),
		series(13, "000000", excelize.LineDashSolid, false),
		series(14, "D55E00", excelize.LineDashDash, false),
		series(15, "D55E00", excelize.LineDashDash, false))
	// Lot means sit far from zero (a ratio near 120 dB): fit the X̄ chart's
	// vertical axis to the points and limits, with a tenth of their span to
	// spare, so no spreadsheet starts it at zero.
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, l := range lots {
		for _, v := range []float64{l.Mean, l.MeanLCL, l.MeanUCL, c.GrandMean} {
			if !math.IsNaN(v) && !math.IsInf(v, 0) {
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
		}
	}
	if lo <= hi {
		pad := (hi - lo) / 10
		if pad == 0 {
			pad = math.Max(math.Abs(hi)/1000, 1e-9)
		}
		xbar.YAxis.Minimum, xbar.YAxis.Maximum = ptr(lo-pad), ptr(hi+pad)
	}
	at := r + 1
	for i, ch := range []*excelize.Chart{xbar, schart} {
		cell, _ := excelize.CoordinatesToCellName(1+i*8, at)
		if err := f.AddChart(sheet, cell, ch); err != nil {
			return fmt.Errorf("report: sheet %q chart %q: %w", sheet, titleText(ch), err)
		}
	}
	return nil
}

func freqText(hz float64) string {
	if hz == 0 {
		return ", DC"
	}
	return ", " + hzText(hz) + " Hz"
}

// hzText prints a frequency to 4 significant figures without an exponent
// (37.275937203149404 → "37.28", 26830.4 → "26830", 0.1 → "0.1"): enough to
// tell the points of a sweep of up to a few hundred points a decade apart.
func hzText(hz float64) string {
	if hz == 0 || math.IsNaN(hz) || math.IsInf(hz, 0) {
		return strconv.FormatFloat(hz, 'g', -1, 64)
	}
	e := int(math.Floor(math.Log10(math.Abs(hz))))
	var r float64
	if e <= 3 {
		p := math.Pow10(3 - e)
		r = math.Round(hz*p) / p
	} else {
		p := math.Pow10(e - 3)
		r = math.Round(hz/p) * p
	}
	return strconv.FormatFloat(r, 'f', -1, 64)
}

func fmtVal(v float64) string {
	if math.IsNaN(v) {
		return "—"
	}
	return fmt.Sprintf("%.4g", v)
}

func writeRepeatability(f *excelize.File, st *styles, t *Trend) error {
	if err := printSetup(f, SheetRepeatability, true); err != nil {
		return err
	}
	w := &trendWriter{f: f, st: st, sheet: SheetRepeatability}
	rs := t.Repeatability
	cols := []trendCol{
		{"Bench", 18, st.text, func(i int) any { return rs[i].Bench }},
		{"Part", 14, st.text, func(i int) any { return rs[i].Part }},
		{"Test", 12, st.text, func(i int) any { return rs[i].Test }},
		{"Temperature (°C)", 11, st.celsius, func(i int) any { return rs[i].TemperatureC }},
		{"Frequency (Hz, 0 = DC)", 11, st.k, func(i int) any { return rs[i].FrequencyHz }},
		{"Quantity", 10, st.text, func(i int) any { return rs[i].Quantity }},
		{"Unit", 7, st.text, func(i int) any { return rs[i].ValueUnit }},
		{"Repeatability SD s_r", 12, st.plain, func(i int) any {
			return excelize.Cell{StyleID: valueStyle(st, rs[i].ValueUnit), Value: num(rs[i].SD)}
		}},
		{"Degrees of freedom ν", 10, st.integer, func(i int) any { return rs[i].DOF }},
		{"Units measured twice or more", 12, st.integer, func(i int) any { return rs[i].Units }},
		{"Results from them", 10, st.integer, func(i int) any { return rs[i].Repeats }},
	}
	end := w.table("Repeatability", 1, cols, len(rs))
	if w.err == nil {
		w.err = f.SetPanes(SheetRepeatability, freezePanes(0, 1))
	}
	r := end + 1
	w.set(1, r, "Key", st.label)
	w.note(r+1, "s_r", "Pooled SD of units measured more than once on the bench (same part, test and temperature): s_r² = Σ(n_j−1)s_j²/Σ(n_j−1), ν = Σ(n_j−1) (GUM JCGM 100:2008 4.2.8; the repeatability variance of ISO 5725-2). In the row's unit: dB for ratios, µV/V for input-referred coefficients.")
	if len(rs) == 0 {
		w.note(r+2, "None", "No unit was measured twice on one bench in the selection.")
	}
	if w.err != nil {
		return fmt.Errorf("report: sheet %q: %w", SheetRepeatability, w.err)
	}
	return nil
}
