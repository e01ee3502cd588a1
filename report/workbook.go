package report

import (
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"github.com/xuri/excelize/v2"
)

// Sheet names of the workbook (our own).
const (
	SheetSummary     = "Summary"
	SheetUnits       = "Units"
	SheetResults     = "Results"
	SheetUncertainty = "Uncertainty"
	SheetFits        = "Fits"
	SheetReadings    = "Readings"
	SheetLot         = "Lot"
	SheetConsistency = "Consistency"
	SheetBoard       = "Board"
	SheetTemperature = "Temperature"
	SheetCharts      = "Charts"
	SheetChartData   = "Chart data"
)

// WorkbookOptions tune WriteWorkbook.
type WorkbookOptions struct {
	Charts   ChartOptions // what the native charts show
	NoCharts bool         // leave out the Charts and Chart data sheets
	// TmpDir is where the stream writer spills sheets larger than 16 MB
	// before they are zipped ("" = os.TempDir()).
	TmpDir string
}

// WriteWorkbook writes the campaign's workbook to path (.xlsx) through a
// temporary file renamed into place (WriteFileAtomic), so path is either
// the old file or the complete new one.
func WriteWorkbook(path string, c *Campaign, opt WorkbookOptions) error {
	if !strings.EqualFold(filepath.Ext(path), ".xlsx") {
		return fmt.Errorf("report: workbook %q: the file name must end in .xlsx", path)
	}
	if err := WriteFileAtomic(path, func(w io.Writer) error { return WriteWorkbookTo(w, c, opt) }); err != nil {
		return fmt.Errorf("report: workbook %q: %w", path, err)
	}
	return nil
}

// WriteWorkbookTo writes the campaign's workbook (.xlsx bytes) to w. The
// zip is assembled in memory before it is written (an excelize limit).
func WriteWorkbookTo(w io.Writer, c *Campaign, opt WorkbookOptions) (err error) {
	if c == nil {
		return errors.New("report: no campaign to write")
	}
	f := excelize.NewFile(excelize.Options{TmpDir: opt.TmpDir})
	defer func() {
		if cerr := f.Close(); cerr != nil && err == nil {
			err = fmt.Errorf("report: cleaning up workbook temporary files: %w", cerr)
		}
	}()
	if err := buildWorkbook(f, c, opt); err != nil {
		return err
	}
	if _, err := f.WriteTo(w); err != nil {
		return fmt.Errorf("report: writing workbook: %w", err)
	}
	return nil
}

// buildWorkbook fills f; sheets are created in their final order first.
func buildWorkbook(f *excelize.File, c *Campaign, opt WorkbookOptions) error {
	st, err := newStyles(f)
	if err != nil {
		return err
	}
	temps := distinctTemps(c)
	var plan chartPlan
	if !opt.NoCharts {
		plan = planCharts(c, opt.Charts)
	}
	hasCharts := len(plan.Responses)+len(plan.Histograms)+len(plan.Temperatures)+len(plan.Bodes) > 0

	sheets := []string{SheetSummary}
	if len(c.Units) > 0 {
		sheets = append(sheets, SheetUnits)
	}
	sheets = append(sheets, SheetResults, SheetUncertainty, SheetFits, SheetReadings, SheetLot)
	if len(c.Closures) > 0 {
		sheets = append(sheets, SheetConsistency)
	}
	if len(c.Boards) > 0 {
		sheets = append(sheets, SheetBoard)
	}
	if len(temps) > 1 && len(c.Temperature) > 0 {
		sheets = append(sheets, SheetTemperature)
	}
	if len(c.FreqResults) > 0 {
		sheets = append(sheets, SheetFreq, SheetFreqBudget, SheetFreqFits)
	}
	if len(c.Problems) > 0 {
		sheets = append(sheets, SheetProblems)
	}
	if hasCharts {
		sheets = append(sheets, SheetCharts, SheetChartData)
	}
	if err := f.SetSheetName("Sheet1", SheetSummary); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	for _, s := range sheets[1:] {
		if _, err := f.NewSheet(s); err != nil {
			return fmt.Errorf("report: adding sheet %q: %w", s, err)
		}
	}
	f.SetActiveSheet(0)
	// Document properties first: every page header names the report.
	props := &excelize.DocProperties{
		Title:       cellText(c.Name),
		Subject:     "Common-mode and supply rejection test report",
		Creator:     cellText(c.Generator),
		Description: cellText("Part " + c.Part + ", lot " + c.Lot),
		Identifier:  cellText(c.ReportID),
	}
	if err := f.SetDocProps(props); err != nil {
		return fmt.Errorf("report: document properties: %w", err)
	}

	if err := writeSummary(f, st, c, temps); err != nil {
		return err
	}
	for _, s := range sheets[1:] {
		var err error
		switch s {
		case SheetUnits:
			err = writeUnits(f, st, c)
		case SheetResults:
			err = writeResults(f, st, c)
		case SheetUncertainty:
			err = writeBudgets(f, st, c)
		case SheetFits:
			err = writeFits(f, st, c)
		case SheetReadings:
			err = writeReadings(f, st, c)
		case SheetLot:
			err = writeLot(f, st, c)
		case SheetConsistency:
			err = writeClosures(f, st, c)
		case SheetBoard:
			err = writeBoards(f, st, c)
		case SheetTemperature:
			err = writeTemperature(f, st, c)
		case SheetProblems:
			err = writeProblems(f, st, c)
		case SheetFreq:
			err = writeFreqResults(f, st, c)
		case SheetFreqBudget:
			err = writeFreqBudgets(f, st, c)
		case SheetFreqFits:
			err = writeFreqFits(f, st, c)
		case SheetCharts:
			err = writeCharts(f, st, plan)
		}
		if err != nil {
			return err
		}
	}
	return nil
}

// --- Summary -------------------------------------------------------------

// summaryWriter writes label/value rows on the Summary sheet with the
// normal (non-stream) API; every text goes through SetCellStr.
type summaryWriter struct {
	f   *excelize.File
	st  *styles
	row int
	err error
}

func (w *summaryWriter) set(col, row int, v any, style int) {
	if w.err != nil {
		return
	}
	cell, _ := excelize.CoordinatesToCellName(col, row)
	switch v := v.(type) {
	case nil:
	case string:
		w.err = w.f.SetCellStr(SheetSummary, cell, sharedText(v))
	case float64:
		switch x := num(v).(type) {
		case float64:
			w.err = w.f.SetCellFloat(SheetSummary, cell, x, -1, 64)
		case string:
			w.err = w.f.SetCellStr(SheetSummary, cell, sharedText(x))
		}
	case int:
		w.err = w.f.SetCellInt(SheetSummary, cell, int64(v))
	default:
		w.err = fmt.Errorf("report: summary cell %s: unexpected %T", cell, v)
	}
	if w.err == nil && style != 0 {
		w.err = w.f.SetCellStyle(SheetSummary, cell, cell, style)
	}
}

// kv writes one label and its value across the value columns.
func (w *summaryWriter) kv(label string, v any, style int) {
	w.row++
	w.set(1, w.row, label, w.st.label)
	if style == 0 {
		style = w.st.wrap
	}
	w.set(2, w.row, v, style)
	if w.err == nil {
		w.err = w.f.MergeCell(SheetSummary, fmt.Sprintf("B%d", w.row), fmt.Sprintf("I%d", w.row))
	}
	if s, ok := v.(string); ok && w.err == nil {
		// Merged cells do not grow with wrapped text: size the row.
		lines := 0
		for _, l := range strings.Split(s, "\n") {
			lines += max(1, (len([]rune(l))+summaryWidth-1)/summaryWidth)
		}
		if lines > 1 {
			w.err = w.f.SetRowHeight(SheetSummary, w.row, 15*float64(min(lines, 20)))
		}
	}
}

// heading starts a block.
func (w *summaryWriter) heading(s string) {
	w.row += 2
	w.set(1, w.row, s, w.st.title)
}

const summaryWidth = 90 // characters across the merged value columns

func isoTime(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Format("2006-01-02T15:04:05.000Z07:00")
}

func writeSummary(f *excelize.File, st *styles, c *Campaign, temps []float64) error {
	w := &summaryWriter{f: f, st: st}
	if err := f.SetColWidth(SheetSummary, "A", "A", 34); err != nil {
		return fmt.Errorf("report: summary: %w", err)
	}
	if err := f.SetColWidth(SheetSummary, "B", "I", 12); err != nil {
		return fmt.Errorf("report: summary: %w", err)
	}
	w.row = 1
	w.set(1, 1, "Common-mode and supply rejection test report", st.title)
	w.heading("Status")
	w.kv("Report identifier", c.ReportID, 0)
	if c.Incomplete {
		w.kv("Campaign", incompleteMark(c), st.attention)
	} else if c.PlannedPoints > 0 {
		w.kv("Campaign", fmt.Sprintf("complete: all %d planned points measured", c.PlannedPoints), 0)
	}
	if c.Integrity != "" {
		w.kv("Journal", c.Integrity, st.attention)
	} else {
		w.kv("Journal", "intact: every record's running hash verifies", 0)
	}
	w.heading("Campaign")
	w.kv("Name", c.Name, 0)
	w.kv("Part", c.Part, 0)
	w.kv("Lot", c.Lot, 0)
	w.kv("Operator", c.Operator, 0)
	w.kv("Started (UTC, ISO 8601)", isoTime(c.Started), 0)
	w.kv("Finished (UTC, ISO 8601)", isoTime(c.Finished), 0)
	if !c.Started.IsZero() && !c.Finished.IsZero() {
		w.kv("Duration (h)", c.Finished.Sub(c.Started).Hours(), st.leftK)
	}
	w.kv("Plan file", c.PlanFile, 0)
	w.kv("Plan hash", c.PlanHash, 0)
	w.kv("Report written by", c.Generator, 0)
	w.kv("Units", len(distinctUnits(c)), st.leftInt)
	w.kv("Temperatures (°C)", joinTemps(temps), 0)
	w.kv("Results", len(c.Results), st.leftInt)
	w.kv("Readings", len(c.Readings), st.leftInt)
	w.kv("Notes", c.Notes, 0)

	w.heading("Fixture")
	fx := c.Fixture
	w.kv("Kind", fx.Kind, 0)
	w.kv("Common mode applied by", fx.CommonMode, 0)
	w.kv("Meter measures", fx.Output, 0)
	w.kv("Noise gain K (V/V)", fx.NoiseGain, st.leftK)
	w.kv("Noise gain tolerance (±, rectangular)", fx.NoiseGainTolerance, st.leftPct)
	w.kv("Largest stimulus allowed (V)", fx.MaxStimulusVolts, st.leftK)
	if fx.Kind == "board" || positive(fx.BoardGain) {
		w.kv("Board differential gain G (V/V)", fx.BoardGain, st.leftK)
		w.kv("Resistor tolerance t", fx.ResistorTolerance, st.leftPct)
		w.kv("Op-amp CMRR, datasheet (dB)", fx.OpAmpCMRRdB, st.leftDB)
	}

	w.heading("Decision and safety")
	w.kv("Decision rule", c.DecisionRule, 0)
	w.kv("Safety", c.SafetyNote, 0)
	writeMethod(w, c.Method)

	if len(c.TestConditions) > 0 {
		w.heading("Test conditions")
		for _, kv := range c.TestConditions {
			w.kv(kv.Label, kv.Value, 0)
		}
	}
	if len(c.Ratings) > 0 {
		w.heading("Part ratings and limits")
		for _, kv := range c.Ratings {
			w.kv(kv.Label, kv.Value, 0)
		}
	}

	// Instruments: Name | Roles | Address (C) | Calibration due (D) |
	// Identity (E:I). Merged cells rule out an Excel table here, so the
	// block gets an autofilter.
	w.heading("Instruments")
	w.row++
	top := w.row
	instrumentRow := func(name, roles, addr, due, idn string, style, dueStyle int) {
		w.set(1, w.row, name, style)
		w.set(2, w.row, roles, style)
		w.set(3, w.row, addr, style)
		w.set(4, w.row, due, dueStyle)
		w.set(5, w.row, idn, style)
		if w.err == nil {
			w.err = f.MergeCell(SheetSummary, fmt.Sprintf("E%d", w.row), fmt.Sprintf("I%d", w.row))
		}
	}
	instrumentRow("Instrument", "Roles", "Address", "Calibration due", "Identity (*IDN? response)", st.header, st.header)
	for _, in := range c.Instruments {
		w.row++
		due, dueStyle := in.CalibrationDue, st.text
		if due == "" {
			due = "not stated"
		} else if d, err := time.Parse("2006-01-02", due); err == nil && !c.Started.IsZero() && c.Started.After(d.AddDate(0, 0, 1)) {
			due, dueStyle = due+" OVERDUE", st.attention
		}
		instrumentRow(in.Name, strings.Join(in.Roles, ", "), in.Address, due, in.Identity, st.text, dueStyle)
	}
	if len(c.Instruments) > 0 && w.err == nil {
		w.err = f.AutoFilter(SheetSummary, fmt.Sprintf("A%d:I%d", top, w.row), nil)
	}

	// Verdict counts by test and temperature.
	w.heading("Verdicts")
	w.row++
	top = w.row
	heads := []string{"Test", "Temperature (°C)"}
	for k := KindPass; k < numVerdictKinds; k++ {
		heads = append(heads, k.Label())
	}
	heads = append(heads, "Total")
	for i, h := range heads {
		style := st.header
		if i >= 2 && i < 2+int(numVerdictKinds) {
			style = st.verdict[i-2]
		}
		w.set(1+i, w.row, h, style)
	}
	if w.err == nil {
		w.err = f.SetRowHeight(SheetSummary, w.row, 30)
	}
	counts := countVerdicts(c)
	var total [numVerdictKinds]int
	for _, vc := range counts {
		w.row++
		w.set(1, w.row, vc.test, st.text)
		w.set(2, w.row, vc.tempC, st.celsius)
		sum := 0
		for k, n := range vc.n {
			w.set(3+k, w.row, n, st.integer)
			sum += n
			total[k] += n
		}
		w.set(3+int(numVerdictKinds), w.row, sum, st.integer)
	}
	if len(counts) > 0 {
		w.row++
		w.set(1, w.row, "all", st.label)
		sum := 0
		for k, n := range total {
			w.set(3+k, w.row, n, st.integer)
			sum += n
		}
		w.set(3+int(numVerdictKinds), w.row, sum, st.integer)
		if w.err == nil {
			last, _ := excelize.CoordinatesToCellName(len(heads), w.row-1)
			w.err = f.AddTable(SheetSummary, &excelize.Table{
				Range: fmt.Sprintf("A%d:%s", top, last), Name: "tblVerdicts",
				StyleName: "TableStyleLight1", ShowRowStripes: ptr(false),
			})
		}
	}

	freqSummary(w, c)

	// Verdict key: the palette, in the workbook itself.
	w.heading("Verdict key")
	key := []struct {
		k    VerdictKind
		text string
	}{
		{KindPass, "inside the acceptance zone of the decision rule"},
		{KindConditionalPass, "inside the limit but within the guard band (ILAC-G8:09/2019 §4.2)"},
		{KindConditionalFail, "outside the limit but within the guard band"},
		{KindFail, "outside the limit by more than the guard band"},
		{KindNotJudged, "no limit set for this test: measured and reported only"},
	}
	for _, e := range key {
		w.row++
		w.set(1, w.row, e.k.Label(), st.verdict[e.k])
		w.set(2, w.row, e.text, 0)
	}
	if len(c.Events) > 0 {
		w.heading("Event log")
		for _, e := range c.Events {
			var parts []string
			if t := isoTime(e.Time); t != "" {
				parts = append(parts, t)
			}
			if e.Unit != "" {
				parts = append(parts, "unit "+e.Unit)
			}
			if !math.IsNaN(e.TemperatureC) {
				parts = append(parts, fmt.Sprintf("%g °C", e.TemperatureC))
			}
			if e.Detail != "" {
				parts = append(parts, e.Detail)
			}
			w.kv(e.Type, strings.Join(parts, ", "), 0)
		}
	}
	w.heading("Approval")
	for _, l := range []string{"Tested by (name, signature)", "Reviewed by (name, signature)", "Date"} {
		w.kv(l, "", 0)
		if w.err == nil {
			w.err = f.SetRowHeight(SheetSummary, w.row, 30)
		}
	}
	if w.err != nil {
		return fmt.Errorf("report: summary sheet: %w", w.err)
	}
	// Page setup last: AutoFilter rewrites the sheet properties.
	if err := printSetup(f, SheetSummary, false); err != nil {
		return err
	}
	if err := f.SetDefinedName(&excelize.DefinedName{
		Name: "_xlnm.Print_Area", RefersTo: fmt.Sprintf("'%s'!$A$1:$I$%d", SheetSummary, w.row), Scope: SheetSummary,
	}); err != nil {
		return fmt.Errorf("report: summary print area: %w", err)
	}
	if err := f.SetPageLayout(SheetSummary, &excelize.PageLayoutOptions{Orientation: ptr("portrait")}); err != nil {
		return fmt.Errorf("report: summary page layout: %w", err)
	}
	return nil
}

func positive(v float64) bool { return v > 0 && !math.IsInf(v, 1) }

type verdictCount struct {
	test  string
	tempC float64
	n     [numVerdictKinds]int
}

func countVerdicts(c *Campaign) []verdictCount {
	type key struct {
		test string
		t    int64
	}
	idx := map[key]int{}
	var out []verdictCount
	for _, r := range c.Results {
		k := key{r.Test, tempKey(r.TemperatureC)}
		i, ok := idx[k]
		if !ok {
			i = len(out)
			idx[k] = i
			out = append(out, verdictCount{test: r.Test, tempC: r.TemperatureC})
		}
		out[i].n[VerdictClass(r.Verdict)]++
	}
	tests := distinctTests(c)
	slices.SortStableFunc(out, func(a, b verdictCount) int {
		if d := slices.Index(tests, a.test) - slices.Index(tests, b.test); d != 0 {
			return d
		}
		switch {
		case a.tempC < b.tempC:
			return -1
		case a.tempC > b.tempC:
			return 1
		}
		return 0
	})
	return out
}

func distinctUnits(c *Campaign) []string {
	seen := map[string]bool{}
	var out []string
	for _, r := range c.Results {
		if !seen[r.Unit] {
			seen[r.Unit] = true
			out = append(out, r.Unit)
		}
	}
	if len(out) == 0 {
		for _, u := range c.Units {
			out = append(out, u.ID)
		}
	}
	return out
}

func joinTemps(t []float64) string {
	s := make([]string, len(t))
	for i, v := range t {
		s[i] = fmt.Sprintf("%g", v)
	}
	return strings.Join(s, ", ")
}

// --- Tables ---------------------------------------------------------------

func writeUnits(f *excelize.File, st *styles, c *Campaign) error {
	vs := UnitVerdicts(c, c.ReferenceTests...)
	missing := map[string]int{}
	channel := map[string]string{}
	notes := map[string]string{}
	for _, u := range c.Units {
		missing[u.ID], channel[u.ID], notes[u.ID] = u.MissingPoints, u.Channel, u.Notes
	}
	spec := tableSpec{sheet: SheetUnits, table: "tblUnits", freezeCols: 1, cols: []column{
		{"Unit", 12, st.text}, {"Serial number", 16, st.text}, {"Switch channel", 9, st.text},
		{"Verdict", 14, st.text}, {"Deciding result", 48, st.wrap}, {"Reason", 50, st.wrap},
		{"Points not measured", 11, st.integer}, {"Notes", 30, st.wrap},
	}}
	if c.Incomplete {
		spec.cols = append(spec.cols, column{incompleteMark(c), 40, st.text})
	}
	spec.key = append(verdictKey(),
		KeyValue{"SKIPPED", "left out on purpose (socket empty, part cracked); not a failure"},
		KeyValue{"INCOMPLETE", "some of the unit's planned points were not measured: no verdict can be given"},
		KeyValue{"NO RESULT", "a result could not be formed (stuck meter, stimulus that did not move, no part / no gain); see Reason"},
		KeyValue{"Deciding result", "the result with the most severe verdict, or with the least margin to its limit"},
	)
	spec.rowLines = func(i int) int {
		return max(textLines(vs[i].Worst, 48), textLines(vs[i].Reason, 50), textLines(notes[vs[i].Unit], 30))
	}
	err := streamTable(f, st, spec, len(vs), func(i int, d []any) {
		v := &vs[i]
		k := VerdictClass(v.Verdict)
		label := k.Label()
		if k == KindOther {
			label = strings.ToUpper(v.Verdict)
		}
		d[0], d[1], d[2] = v.Unit, v.Serial, channel[v.Unit]
		d[3] = excelize.Cell{StyleID: st.verdict[k], Value: label}
		d[4], d[5], d[6], d[7] = v.Worst, v.Reason, missing[v.Unit], notes[v.Unit]
	})
	if err != nil {
		return err
	}
	return nil
}

// incompleteMark is the INCOMPLETE statement of a campaign with points
// not measured.
func incompleteMark(c *Campaign) string {
	return fmt.Sprintf("INCOMPLETE: %d of %d planned points not measured", c.MissingPoints, c.PlannedPoints)
}

// resultHeaders are the Results sheet headers, in order.
var resultHeaders = []string{
	"Unit", "Test", "Temperature (°C)", "Coefficient (µV/V)", "Standard uncertainty u of coefficient (µV/V)",
	"Expanded uncertainty U of coefficient (µV/V)",
	"Ratio (dB)", "Expanded uncertainty U (dB)", "U below (dB)", "U above (dB)", "Coverage factor k",
	"Effective degrees of freedom", "Resolved", "Lower bound (dB)", "Reported (dB)", "Statement",
	"Limit (dB)", "Margin to limit (dB)", "Verdict", "Decision rule", "Flags", "Notes",
	"Predicted U of coefficient (µV/V)", "Achieved / predicted U",
}

func writeResults(f *excelize.File, st *styles, c *Campaign) error {
	// Widths in characters hold the longest value each column shows
	// ("no: lower bound", "COND. FAIL"); the rule, Flags and Notes wrap.
	colStyles := []int{st.text, st.text, st.celsius, st.uvpv, st.uvpv, st.uvpv, st.db, st.db, st.db, st.db, st.k,
		st.dof, st.text, st.db, st.db, st.text, st.db, st.db, st.text, st.wrap, st.wrap, st.wrap, st.uvpv, st.k}
	widths := []float64{12, 17, 12, 14, 16, 16, 11, 13, 10, 10, 10, 12, 16, 11, 11, 40, 10, 11, 13, 24, 30, 40, 16, 12}
	spec := tableSpec{sheet: SheetResults, table: "tblResults", freezeCols: 2}
	spec.key = append(verdictKey(),
		KeyValue{"no: lower bound", "|coefficient| < k·u: the ratio is not resolved and only its one-sided lower bound is stated"},
		KeyValue{"curvature", "flag: the quadratic term of the fit is significant (the part is not linear over the sweep)"},
		KeyValue{"span-dependent", "flag: the slope over the inner and the full span disagree"},
		KeyValue{"N flagged points", "flag: points that did not settle within the time-out and were kept"},
		KeyValue{"A_OL corrected", "flag: corrected for the finite open-loop gain (nulling loop)"},
		KeyValue{"limit over the full temperature range", "flag: judged against the [limits_full_range] value, not the 25 °C one"},
		KeyValue{"no result", "the result could not be formed; the cause is in Flags"},
	)
	for i, h := range resultHeaders {
		spec.cols = append(spec.cols, column{h, widths[i], colStyles[i]})
	}
	spec.rowLines = func(i int) int {
		r := &c.Results[i]
		return max(textLines(strings.Join(r.Flags, "; "), 30), textLines(r.Rule, 24), textLines(statement(r), 40), textLines(strings.Join(r.Notes, NotesSeparator), 40))
	}
	return streamTable(f, st, spec, len(c.Results), func(i int, d []any) {
		r := &c.Results[i]
		rep := r.ReportedDB()
		d[0], d[1], d[2] = r.Unit, r.Test, num(r.TemperatureC)
		d[3], d[4], d[5] = num(r.CoefficientUVPerV), num(r.CoefficientStdUUVPerV), num(r.CoefficientExpandedUUVPerV)
		d[6], d[7], d[8], d[9] = num(r.RatioDB), num(r.ExpandedUDB), num(r.ExpandedUDBLow), num(r.ExpandedUDBHigh)
		d[10], d[11] = num(r.CoverageK), num(r.DOFEffective)
		d[12] = "yes"
		if !r.Resolved {
			d[12] = excelize.Cell{StyleID: st.attention, Value: "no: lower bound"}
			d[13] = num(r.LowerBoundDB)
		}
		d[14] = num(rep)
		d[15] = statement(r)
		d[16] = num(r.LimitDB)
		if !math.IsNaN(r.LimitDB) {
			d[17] = num(rep - r.LimitDB)
		}
		k := VerdictClass(r.Verdict)
		label := k.Label()
		if k == KindOther {
			label = r.Verdict
		}
		d[18] = excelize.Cell{StyleID: st.verdict[k], Value: label}
		d[19] = r.Rule
		d[20] = joinFlags(r.Flags)
		d[21] = joinNotes(r.Notes)
		d[22] = num(r.PredictedUUVPerV)
		if r.PredictedUUVPerV > 0 && !math.IsNaN(r.CoefficientExpandedUUVPerV) {
			d[23] = num(r.CoefficientExpandedUUVPerV / r.PredictedUUVPerV)
		}
	})
}

// writeMethod writes the method statement under its own heading, one
// paragraph per row (nothing when there is none).
func writeMethod(w *summaryWriter, method []string) {
	if len(method) == 0 {
		return
	}
	w.heading("Method")
	for _, p := range method {
		w.row++
		w.set(1, w.row, p, 0)
	}
}

// joinNotes joins a result's notes for one cell (NotesSeparator, as in
// the CSV).
func joinNotes(n []string) string { return strings.Join(n, NotesSeparator) }

// statement is the result in words, e.g. "121.35 dB, U = 0.42 dB (k = 2.00)"
// or "≥ 143.70 dB (not resolved)".
func statement(r *Result) string {
	if !r.Resolved {
		if math.IsNaN(r.LowerBoundDB) {
			return "not resolved"
		}
		return fmt.Sprintf("≥ %.2f dB (not resolved)", r.LowerBoundDB)
	}
	if math.IsNaN(r.RatioDB) {
		return ""
	}
	s := fmt.Sprintf("%.2f dB", r.RatioDB)
	switch {
	case !math.IsNaN(r.ExpandedUDBLow) && !math.IsNaN(r.ExpandedUDBHigh):
		s += fmt.Sprintf(", U = −%.2f/+%.2f dB", r.ExpandedUDBLow, r.ExpandedUDBHigh)
	case !math.IsNaN(r.ExpandedUDB):
		s += fmt.Sprintf(", U = %.2f dB", r.ExpandedUDB)
	default:
		return s
	}
	if !math.IsNaN(r.CoverageK) {
		s += fmt.Sprintf(" (k = %.2f)", r.CoverageK)
	}
	return s
}

func writeBudgets(f *excelize.File, st *styles, c *Campaign) error {
	type key struct {
		u, t string
		c    int64
	}
	// Share of variance = (c_i·u_i)² / Σ(c_j·u_j)² within one budget.
	sum := map[key]float64{}
	for _, b := range c.Budgets {
		if !math.IsNaN(b.Contribution) {
			sum[key{b.Unit, b.Test, tempKey(b.TemperatureC)}] += b.Contribution * b.Contribution
		}
	}
	spec := tableSpec{sheet: SheetUncertainty, table: "tblUncertainty", freezeCols: 2, cols: []column{
		{"Unit", 12, st.text}, {"Test", 12, st.text}, {"Temperature (°C)", 12, st.celsius},
		{"Component", 28, st.text}, {"Type (GUM A/B)", 9, st.text}, {"Distribution", 13, st.text},
		{"Value (in unit of value)", 14, st.volts}, {"Unit of value", 10, st.text},
		{"Standard uncertainty u (in unit of value)", 16, st.volts},
		{"Sensitivity c ((µV/V) per unit of value)", 16, st.volts},
		{"Contribution |c·u| (µV/V)", 14, st.uvpv}, {"Share of variance (%)", 11, st.percent},
		{"Degrees of freedom", 11, st.dof},
	}}
	return streamTable(f, st, spec, len(c.Budgets), func(i int, d []any) {
		b := &c.Budgets[i]
		d[0], d[1], d[2], d[3], d[4], d[5] = b.Unit, b.Test, num(b.TemperatureC), b.Component, b.Kind, b.Distribution
		d[6], d[7], d[8], d[9], d[10] = num(b.Value), b.ValueUnit, num(b.StdUncertainty), num(b.Sensitivity), num(b.Contribution)
		if s := sum[key{b.Unit, b.Test, tempKey(b.TemperatureC)}]; s > 0 {
			d[11] = num(b.Contribution * b.Contribution / s)
		}
		d[12] = num(b.DOF)
	})
}

func writeFits(f *excelize.File, st *styles, c *Campaign) error {
	spec := tableSpec{sheet: SheetFits, table: "tblFits", freezeCols: 2, cols: []column{
		{"Unit", 12, st.text}, {"Test", 12, st.text}, {"Sweep", 8, st.text}, {"Temperature (°C)", 12, st.celsius},
		{"Points n", 8, st.integer}, {"Intercept (V)", 14, st.volts}, {"Slope (V/V)", 14, st.volts},
		{"Std. uncertainty of slope (V/V)", 14, st.volts}, {"Drift (V/s)", 14, st.volts},
		{"Std. uncertainty of drift (V/s)", 14, st.volts}, {"Quadratic (V/V²)", 14, st.volts},
		{"Std. uncertainty of quadratic (V/V²)", 14, st.volts}, {"Residual SD (V)", 14, st.volts},
		{"Degrees of freedom", 10, st.integer}, {"Largest deviation (µV)", 12, st.uvpv},
		{"Quadratic significant", 11, st.text}, {"Span mismatch", 10, st.text},
	}}
	return streamTable(f, st, spec, len(c.Fits), func(i int, d []any) {
		r := &c.Fits[i]
		d[0], d[1], d[2], d[3], d[4] = r.Unit, r.Test, r.Sweep, num(r.TemperatureC), r.N
		d[5], d[6], d[7], d[8], d[9] = num(r.Intercept), num(r.SlopeVPerV), num(r.SlopeU), num(r.DriftVPerS), num(r.DriftU)
		d[10], d[11], d[12], d[13], d[14] = num(r.Quadratic), num(r.QuadraticU), num(r.ResidualSDVolts), r.DOF, num(r.MaxDeviationUV)
		d[15], d[16] = yesNo(r.QuadraticSignificant, st.attention), yesNo(r.SpanMismatch, st.attention)
	})
}

func writeReadings(f *excelize.File, st *styles, c *Campaign) error {
	fits := make(map[fitKey]*FitRow, len(c.Fits))
	for i := range c.Fits {
		r := &c.Fits[i]
		fits[fitKey{r.Unit, r.Test, r.Sweep, tempKey(r.TemperatureC)}] = r
	}
	spec := tableSpec{sheet: SheetReadings, table: "tblReadings", freezeCols: 1, cols: []column{
		{"Time (UTC, ISO 8601)", 24, st.time}, {"Bench time (s)", 11, st.seconds},
		{"Unit", 12, st.text}, {"Test", 12, st.text}, {"Sweep", 8, st.text},
		{"Temperature (°C)", 12, st.celsius}, {"Measured temperature (°C)", 12, st.celsius},
		{"Repeat", 7, st.integer}, {"Step", 7, st.integer},
		{"Stimulus set (V)", 14, st.volts}, {"Stimulus read back (V)", 14, st.volts},
		{"Meter (V)", 14, st.volts}, {"Meter SD (V)", 14, st.volts}, {"Readings averaged", 9, st.integer},
		{"Settling (s)", 9, st.seconds}, {"Residual from fit (V)", 14, st.volts}, {"Flags", 20, st.text},
	}}
	return streamTable(f, st, spec, len(c.Readings), func(i int, d []any) {
		r := &c.Readings[i]
		d[0], d[1], d[2], d[3], d[4] = when(r.Time), num(r.BenchSeconds), r.Unit, r.Test, r.Sweep
		d[5], d[6], d[7], d[8] = num(r.TemperatureC), num(r.MeasuredC), r.Repeat, r.Step
		d[9], d[10], d[11], d[12], d[13] = num(r.SetVolts), num(r.ReadVolts), num(r.MeterVolts), num(r.MeterSDVolts), r.N
		d[14] = num(r.SettleSeconds)
		if fr := fits[fitKey{r.Unit, r.Test, r.Sweep, tempKey(r.TemperatureC)}]; fr != nil {
			d[15] = num(residualVolts(fr, r))
		}
		if len(r.Flags) > 0 {
			d[16] = excelize.Cell{StyleID: st.attention, Value: strings.Join(r.Flags, "; ")}
		}
	})
}

func writeLot(f *excelize.File, st *styles, c *Campaign) error {
	spec := tableSpec{sheet: SheetLot, table: "tblLot", freezeCols: 2, cols: []column{
		{"Test", 12, st.text}, {"Temperature (°C)", 12, st.celsius}, {"Units n", 8, st.integer},
		{"Lower bounds only (n)", 10, st.integer}, {"Mean (dB)", 10, st.db}, {"SD (dB)", 9, st.db},
		{"Min (dB)", 10, st.db}, {"Median (dB)", 10, st.db}, {"Max (dB)", 10, st.db}, {"Limit (dB)", 10, st.db},
		{"Cpl", 8, st.k}, {"Lower tolerance bound (dB)", 13, st.db}, {"Coverage (%)", 10, st.percent},
		{"Confidence (%)", 10, st.percent}, {"Predicted yield (%)", 10, st.percent}, {"Outliers", 30, st.text},
	}}
	return streamTable(f, st, spec, len(c.LotStats), func(i int, d []any) {
		l := &c.LotStats[i]
		d[0], d[1], d[2], d[3] = l.Test, num(l.TemperatureC), l.N, l.Unresolved
		d[4], d[5], d[6], d[7], d[8], d[9] = num(l.Mean), num(l.SD), num(l.Min), num(l.Median), num(l.Max), num(l.LimitDB)
		d[10], d[11], d[12], d[13], d[14] = num(l.Cpl), num(l.ToleranceBoundDB), num(l.Coverage), num(l.Confidence), num(l.Yield)
		d[15] = joinFlags(l.Outliers)
	})
}

func writeClosures(f *excelize.File, st *styles, c *Campaign) error {
	spec := tableSpec{sheet: SheetConsistency, table: "tblConsistency", freezeCols: 1, cols: []column{
		{"Unit", 12, st.text}, {"Temperature (°C)", 12, st.celsius},
		{"Supply-shift coefficient (µV/V)", 15, st.uvpv}, {"Sum of single-rail coefficients (µV/V)", 16, st.uvpv},
		{"Closure (µV/V)", 13, st.uvpv}, {"Std. uncertainty of closure (µV/V)", 15, st.uvpv},
		{"Mismatch", 10, st.text}, {"CMRR by supply shift (dB)", 13, st.db}, {"CMRR without open-loop-gain term (dB)", 16, st.db},
	}}
	return streamTable(f, st, spec, len(c.Closures), func(i int, d []any) {
		r := &c.Closures[i]
		d[0], d[1], d[2], d[3], d[4], d[5] = r.Unit, num(r.TemperatureC), num(r.ShiftUVPerV), num(r.SumUVPerV), num(r.ClosureUVPerV), num(r.ClosureU)
		d[6], d[7], d[8] = yesNo(r.Mismatch, st.attention), num(r.CMRRUncorrectedDB), num(r.CMRRCorrectedDB)
	})
}

func writeBoards(f *excelize.File, st *styles, c *Campaign) error {
	spec := tableSpec{sheet: SheetBoard, table: "tblBoard", freezeCols: 1, cols: []column{
		{"Unit", 12, st.text}, {"Temperature (°C)", 12, st.celsius},
		{"Differential gain (V/V)", 13, st.gain}, {"Std. uncertainty of differential gain (V/V)", 15, st.volts},
		{"Common-mode gain (V/V)", 14, st.volts}, {"Std. uncertainty of common-mode gain (V/V)", 15, st.volts},
		{"CMRR (dB)", 10, st.db}, {"Expanded uncertainty U (dB)", 12, st.db},
		{"Resistor-matching worst case (1+G)/(4t) (dB)", 16, st.db},
		{"Resistors and op-amp worst case (dB)", 15, st.db}, {"Below worst case", 10, st.text},
	}}
	return streamTable(f, st, spec, len(c.Boards), func(i int, d []any) {
		b := &c.Boards[i]
		d[0], d[1], d[2], d[3], d[4], d[5] = b.Unit, num(b.TemperatureC), num(b.DiffGain), num(b.DiffGainU), num(b.CommonModeGain), num(b.CommonModeGainU)
		d[6], d[7], d[8], d[9], d[10] = num(b.CMRRdB), num(b.ExpandedUDB), num(b.ResistorLimitDB), num(b.CombinedLimitDB), yesNo(b.BelowWorstCase, st.attention)
	})
}

func writeTemperature(f *excelize.File, st *styles, c *Campaign) error {
	spec := tableSpec{sheet: SheetTemperature, table: "tblTemperature", freezeCols: 1, cols: []column{
		{"Unit", 12, st.text}, {"Test", 12, st.text}, {"Slope (dB/°C)", 12, st.slope},
		{"Std. uncertainty of slope (dB/°C)", 14, st.slope}, {"Repeatability (dB)", 12, st.db},
	}}
	return streamTable(f, st, spec, len(c.Temperature), func(i int, d []any) {
		t := &c.Temperature[i]
		d[0], d[1], d[2], d[3], d[4] = t.Unit, t.Test, num(t.SlopeDBPerC), num(t.SlopeU), num(t.RepeatabilityDB)
	})
}

// verdictKey explains each verdict class (ILAC-G8:09/2019 §4.2 zones).
func verdictKey() []KeyValue {
	return []KeyValue{
		{VerdictPass, "inside the acceptance zone of the decision rule"},
		{VerdictConditionalPass, "inside the limit but within the guard band (ILAC-G8:09/2019 §4.2)"},
		{VerdictConditionalFail, "outside the limit but within the guard band"},
		{VerdictFail, "outside the limit by more than the guard band"},
		{VerdictNotJudged, "no limit set for this test: measured and reported only"},
	}
}
