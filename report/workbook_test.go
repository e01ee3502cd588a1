package report

import (
	"archive/zip"
	"bytes"
	"encoding/xml"
	"fmt"
	"io"
	"maps"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"
)

// --- helpers -------------------------------------------------------------

// writeBook writes c to a temporary workbook and opens it with excelize.
func writeBook(t *testing.T, c *Campaign, opt WorkbookOptions) (string, *excelize.File) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "campaign.xlsx")
	if err := WriteWorkbook(path, c, opt); err != nil {
		t.Fatalf("WriteWorkbook: %v", err)
	}
	f, err := excelize.OpenFile(path)
	if err != nil {
		t.Fatalf("reopening %s: %v", path, err)
	}
	t.Cleanup(func() { f.Close() })
	return path, f
}

// zipParts reads every part of an .xlsx package.
func zipParts(t *testing.T, path string) map[string][]byte {
	t.Helper()
	zr, err := zip.OpenReader(path)
	if err != nil {
		t.Fatalf("unzip %s: %v", path, err)
	}
	defer zr.Close()
	parts := map[string][]byte{}
	for _, zf := range zr.File {
		rc, err := zf.Open()
		if err != nil {
			t.Fatalf("unzip %s: %v", zf.Name, err)
		}
		b, err := io.ReadAll(rc)
		rc.Close()
		if err != nil {
			t.Fatalf("unzip %s: %v", zf.Name, err)
		}
		parts[zf.Name] = b
	}
	return parts
}

func cellStr(t *testing.T, f *excelize.File, sheet, cell string) string {
	t.Helper()
	v, err := f.GetCellValue(sheet, cell)
	if err != nil {
		t.Fatalf("%s!%s: %v", sheet, cell, err)
	}
	return v
}

// cellNum reads the stored number (not the formatted text) of a cell.
func cellNum(t *testing.T, f *excelize.File, sheet, cell string) float64 {
	t.Helper()
	v, err := f.GetCellValue(sheet, cell, excelize.Options{RawCellValue: true})
	if err != nil {
		t.Fatalf("%s!%s: %v", sheet, cell, err)
	}
	x, err := strconv.ParseFloat(v, 64)
	if err != nil {
		t.Fatalf("%s!%s = %q: not a number", sheet, cell, v)
	}
	return x
}

// headerCol finds a header in row 1 and returns its column letter.
func headerCol(t *testing.T, f *excelize.File, sheet, header string) string {
	t.Helper()
	rows, err := f.Rows(sheet)
	if err != nil || !rows.Next() {
		t.Fatalf("%s: no rows (%v)", sheet, err)
	}
	head, err := rows.Columns()
	rows.Close()
	if err != nil {
		t.Fatal(err)
	}
	i := slices.Index(head, header)
	if i < 0 {
		t.Fatalf("%s: no header %q in %q", sheet, header, head)
	}
	col, _ := excelize.ColumnNumberToName(i + 1)
	return col
}

// rowOf finds the first row (1-based) whose cells in the given columns
// hold the given texts.
func rowOf(t *testing.T, f *excelize.File, sheet string, match map[string]string) int {
	t.Helper()
	rows, err := f.GetRows(sheet)
	if err != nil {
		t.Fatal(err)
	}
	idx := map[int]string{}
	for h, want := range match {
		idx[slices.Index(rows[0], h)] = want
	}
next:
	for r := 1; r < len(rows); r++ {
		for i, want := range idx {
			if i < 0 || i >= len(rows[r]) || rows[r][i] != want {
				continue next
			}
		}
		return r + 1
	}
	t.Fatalf("%s: no row with %v", sheet, match)
	return 0
}

var single = []float64{25}
var three = []float64{-40, 25, 85}

// sharedBooks holds the fixture workbooks (one and three temperatures,
// default options) that several read-only tests inspect, written once per
// test binary to keep the suite quick under -race.
var sharedBooks = map[int]*sharedBookEntry{}

type sharedBookEntry struct {
	c    *Campaign
	path string
	f    *excelize.File
}

func sharedBook(t *testing.T, temps []float64) (*Campaign, string, *excelize.File) {
	t.Helper()
	if e, ok := sharedBooks[len(temps)]; ok {
		return e.c, e.path, e.f
	}
	dir, err := os.MkdirTemp("", "nullbench-report-test-")
	if err != nil {
		t.Fatal(err)
	}
	c := fixtureCampaign(defaultUnits, temps)
	path := filepath.Join(dir, "campaign.xlsx")
	if err := WriteWorkbook(path, c, WorkbookOptions{}); err != nil {
		t.Fatalf("WriteWorkbook: %v", err)
	}
	f, err := excelize.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	sharedBooks[len(temps)] = &sharedBookEntry{c, path, f}
	return c, path, f
}

func TestMain(m *testing.M) {
	code := m.Run()
	for _, e := range sharedBooks {
		e.f.Close()
		os.RemoveAll(filepath.Dir(e.path))
	}
	os.Exit(code)
}

// --- sheets, headers, panes, tables --------------------------------------

func TestWorkbookSheets(t *testing.T) {
	tests := []struct {
		name  string
		temps []float64
		mod   func(*Campaign)
		opt   WorkbookOptions
		want  []string
	}{
		{"one temperature", single, nil, WorkbookOptions{},
			[]string{"Summary", "Units", "Results", "Uncertainty", "Fits", "Readings", "Lot", "Consistency", "Charts", "Chart data"}},
		{"three temperatures", three, nil, WorkbookOptions{},
			[]string{"Summary", "Units", "Results", "Uncertainty", "Fits", "Readings", "Lot", "Consistency", "Temperature", "Charts", "Chart data"}},
		{"no closures, no units list, no charts", single, func(c *Campaign) { c.Closures, c.Units = nil, nil }, WorkbookOptions{NoCharts: true},
			[]string{"Summary", "Results", "Uncertainty", "Fits", "Readings", "Lot"}},
		{"board rows", single, func(c *Campaign) {
			c.Boards = []BoardRow{{Unit: "U01", TemperatureC: 25, DiffGain: 10, CMRRdB: 70, ResistorLimitDB: 68.79, CombinedLimitDB: 68.55}}
		}, WorkbookOptions{NoCharts: true},
			[]string{"Summary", "Units", "Results", "Uncertainty", "Fits", "Readings", "Lot", "Consistency", "Board"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			c := fixtureCampaign(defaultUnits, tc.temps)
			if tc.mod != nil {
				tc.mod(c)
			}
			_, f := writeBook(t, c, tc.opt)
			if got := f.GetSheetList(); !slices.Equal(got, tc.want) {
				t.Errorf("sheets = %q, want %q", got, tc.want)
			}
			if got := f.GetActiveSheetIndex(); got != 0 {
				t.Errorf("active sheet %d, want the summary (0)", got)
			}
		})
	}
}

func TestWorkbookHeaders(t *testing.T) {
	_, _, f := sharedBook(t, three)
	// Headers users filter on; every quantity carries its unit.
	tests := []struct{ sheet, header string }{
		{SheetResults, "Unit"},
		{SheetResults, "Temperature (°C)"},
		{SheetResults, "Coefficient (µV/V)"},
		{SheetResults, "Ratio (dB)"},
		{SheetResults, "Expanded uncertainty U (dB)"},
		{SheetResults, "Coverage factor k"},
		{SheetResults, "Lower bound (dB)"},
		{SheetResults, "Limit (dB)"},
		{SheetResults, "Verdict"},
		{SheetResults, "Decision rule"},
		{SheetReadings, "Time (UTC, ISO 8601)"},
		{SheetReadings, "Meter (V)"},
		{SheetReadings, "Stimulus read back (V)"},
		{SheetReadings, "Residual from fit (V)"},
		{SheetUncertainty, "Contribution |c·u| (µV/V)"},
		{SheetUncertainty, "Type (GUM A/B)"},
		{SheetFits, "Slope (V/V)"},
		{SheetFits, "Residual SD (V)"},
		{SheetLot, "Lower tolerance bound (dB)"},
		{SheetLot, "Cpl"},
		{SheetConsistency, "Closure (µV/V)"},
		{SheetTemperature, "Slope (dB/°C)"},
		{SheetUnits, "Serial number"},
		{SheetChartData, "Series"},
	}
	for _, tc := range tests {
		t.Run(tc.sheet+"/"+tc.header, func(t *testing.T) {
			headerCol(t, f, tc.sheet, tc.header)
		})
	}
	// Every numeric header on the measurement sheets names a unit, "(n)",
	// "(%)" or is a known dimensionless quantity.
	dimensionless := map[string]bool{"Coverage factor k": true, "Effective degrees of freedom": true, "Degrees of freedom": true,
		"Cpl": true, "Repeat": true, "Step": true, "Readings averaged": true, "Points n": true, "Units n": true}
	for _, sheet := range []string{SheetResults, SheetReadings, SheetFits, SheetLot, SheetConsistency, SheetTemperature} {
		rows, _ := f.GetRows(sheet)
		for i, h := range rows[0] {
			col, _ := excelize.ColumnNumberToName(i + 1)
			if _, err := strconv.ParseFloat(cellStrRaw(f, sheet, col+"2"), 64); err != nil {
				continue // a text column
			}
			if !strings.Contains(h, "(") && !dimensionless[h] {
				t.Errorf("%s: numeric column %q has no unit", sheet, h)
			}
		}
	}
}

func cellStrRaw(f *excelize.File, sheet, cell string) string {
	v, _ := f.GetCellValue(sheet, cell, excelize.Options{RawCellValue: true})
	return v
}

func TestWorkbookPanesAndTables(t *testing.T) {
	c, _, f := sharedBook(t, three)
	tests := []struct {
		sheet      string
		xSplit     int
		table      string
		rows, cols int
	}{
		{SheetResults, 2, "tblResults", len(c.Results), len(resultHeaders)},
		{SheetReadings, 1, "tblReadings", len(c.Readings), 17},
		{SheetUncertainty, 2, "tblUncertainty", len(c.Budgets), 13},
		{SheetFits, 2, "tblFits", len(c.Fits), 17},
		{SheetLot, 2, "tblLot", len(c.LotStats), 16},
		{SheetConsistency, 1, "tblConsistency", len(c.Closures), 9},
		{SheetTemperature, 1, "tblTemperature", len(c.Temperature), 5},
		{SheetUnits, 1, "tblUnits", len(c.Units), 8},
	}
	for _, tc := range tests {
		t.Run(tc.sheet, func(t *testing.T) {
			p, err := f.GetPanes(tc.sheet)
			if err != nil {
				t.Fatal(err)
			}
			if !p.Freeze || p.YSplit != 1 || p.XSplit != tc.xSplit {
				t.Errorf("panes = freeze %v, y %d, x %d; want frozen header row and %d columns", p.Freeze, p.YSplit, p.XSplit, tc.xSplit)
			}
			tables, err := f.GetTables(tc.sheet)
			if err != nil {
				t.Fatal(err)
			}
			last, _ := excelize.CoordinatesToCellName(tc.cols, tc.rows+1)
			if len(tables) != 1 || tables[0].Name != tc.table || tables[0].Range != "A1:"+last {
				t.Errorf("tables = %+v, want %s over A1:%s", tables, tc.table, last)
			}
		})
	}
}

// --- values ----------------------------------------------------------------

func TestWorkbookResultValues(t *testing.T) {
	c := fixtureCampaign(defaultUnits, single)
	_, _, f := sharedBook(t, single)
	col := func(h string) string { return headerCol(t, f, SheetResults, h) }
	tests := []struct {
		unit, test string
		verdict    string
		resolved   string
		reported   float64
		margin     float64 // NaN: no limit
		statement  string
	}{
		{"U02", "cmrr", "PASS", "yes", 118, 8, "118.00 dB, U = 1.00 dB (k = 2.00)"},
		{"U04", "cmrr", "COND. PASS", "yes", 110.5, 0.5, "110.50 dB, U = 1.00 dB (k = 2.00)"},
		{"U05", "cmrr", "COND. FAIL", "yes", 109.5, -0.5, "109.50 dB, U = 1.00 dB (k = 2.00)"},
		{"U06", "cmrr", "FAIL", "yes", 105, -5, "105.00 dB, U = 1.00 dB (k = 2.00)"},
		{"U07", "cmrr", "PASS", "no: lower bound", 140, 30, "≥ 140.00 dB (not resolved)"},
		{"U02", "psrr_pos", "NOT JUDGED", "yes", 108, math.NaN(), "108.00 dB, U = 1.00 dB (k = 2.00)"},
	}
	for _, tc := range tests {
		t.Run(tc.unit+"/"+tc.test, func(t *testing.T) {
			r := strconv.Itoa(rowOf(t, f, SheetResults, map[string]string{"Unit": tc.unit, "Test": tc.test}))
			if got := cellStr(t, f, SheetResults, col("Verdict")+r); got != tc.verdict {
				t.Errorf("verdict %q, want %q", got, tc.verdict)
			}
			if got := cellStr(t, f, SheetResults, col("Resolved")+r); got != tc.resolved {
				t.Errorf("resolved %q, want %q", got, tc.resolved)
			}
			if got := cellNum(t, f, SheetResults, col("Reported (dB)")+r); math.Abs(got-tc.reported) > 1e-9 {
				t.Errorf("reported %v, want %v", got, tc.reported)
			}
			if got := cellStr(t, f, SheetResults, col("Statement")+r); got != tc.statement {
				t.Errorf("statement %q, want %q", got, tc.statement)
			}
			m := cellStrRaw(f, SheetResults, col("Margin to limit (dB)")+r)
			lim := cellStrRaw(f, SheetResults, col("Limit (dB)")+r)
			if math.IsNaN(tc.margin) {
				if m != "" || lim != "" {
					t.Errorf("margin %q, limit %q; want both empty (no limit)", m, lim)
				}
			} else if got := cellNum(t, f, SheetResults, col("Margin to limit (dB)")+r); math.Abs(got-tc.margin) > 1e-9 {
				t.Errorf("margin %v, want %v", got, tc.margin)
			}
		})
	}
	// The coefficient is stored at full precision: 105 dB is 10^(6-105/20) µV/V.
	r := strconv.Itoa(rowOf(t, f, SheetResults, map[string]string{"Unit": "U06", "Test": "cmrr"}))
	want := math.Pow(10, 6-105.0/20)
	if got := cellNum(t, f, SheetResults, col("Coefficient (µV/V)")+r); math.Abs(got-want) > 1e-12*want {
		t.Errorf("U06 coefficient %v µV/V, want %v", got, want)
	}
	// An infinite ν_eff is written as text "inf", not a number.
	c.Results[0].DOFEffective = math.Inf(1)
	_, f2 := writeBook(t, c, WorkbookOptions{NoCharts: true})
	if got := cellStr(t, f2, SheetResults, headerCol(t, f2, SheetResults, "Effective degrees of freedom")+"2"); got != "inf" {
		t.Errorf("infinite degrees of freedom written as %q, want \"inf\"", got)
	}
}

func TestWorkbookReadings(t *testing.T) {
	c := fixtureCampaign(defaultUnits, single)
	_, f := writeBook(t, c, WorkbookOptions{NoCharts: true})
	rows, err := f.GetRows(SheetReadings, excelize.Options{RawCellValue: true})
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != len(c.Readings)+1 {
		t.Fatalf("%d reading rows, want %d", len(rows)-1, len(c.Readings))
	}
	h := rows[0]
	iTime, iRes, iUnit, iFlags := slices.Index(h, "Time (UTC, ISO 8601)"), slices.Index(h, "Residual from fit (V)"), slices.Index(h, "Unit"), slices.Index(h, "Flags")
	// Readings per unit × test × temperature come in blocks of 10; the
	// fixture adds devVolts(i) to the model, so the residual the report
	// computes must be exactly that (to float rounding, 1e-12 V).
	per := len(fixtureLevels) * fixtureRepeats
	for i, rd := range c.Readings {
		row := rows[i+1]
		if row[iUnit] != rd.Unit {
			t.Fatalf("row %d unit %q, want %q (order must be kept)", i+2, row[iUnit], rd.Unit)
		}
		// 1900 date system (ECMA-376 Part 1 §18.17.4.1): after
		// 1900-03-01 the serial is days since 1899-12-30. excelize's
		// ExcelDateToTime rounds to whole seconds, so convert here.
		serial, _ := strconv.ParseFloat(row[iTime], 64)
		want := float64(rd.Time.Sub(time.Date(1899, 12, 30, 0, 0, 0, 0, time.UTC))) / float64(24*time.Hour)
		if math.Abs(serial-want)*86400 > 1e-3 {
			t.Errorf("row %d time serial %.9f, want %.9f (±1 ms)", i+2, serial, want)
		}
		res, _ := strconv.ParseFloat(row[iRes], 64)
		if want := devVolts(i % per); math.Abs(res-want) > 1e-12 {
			t.Errorf("row %d residual %g V, want %g V", i+2, res, want)
		}
		wantFlags := strings.Join(rd.Flags, "; ")
		gotFlags := ""
		if iFlags < len(row) {
			gotFlags = row[iFlags]
		}
		if gotFlags != wantFlags {
			t.Errorf("row %d flags %q, want %q", i+2, gotFlags, wantFlags)
		}
	}
	// The time is shown as ISO 8601 text by its number format.
	if got := cellStr(t, f, SheetReadings, "A2"); got != "2026-03-02T08:30:00.000" {
		t.Errorf("A2 shows %q, want 2026-03-02T08:30:00.000", got)
	}
}

func TestWorkbookSummary(t *testing.T) {
	c := fixtureCampaign(defaultUnits, three)
	_, f := writeBook(t, c, WorkbookOptions{NoCharts: true})
	rows, err := f.GetRows(SheetSummary)
	if err != nil {
		t.Fatal(err)
	}
	value := func(label string) string {
		for _, r := range rows {
			if len(r) > 1 && r[0] == label {
				return r[1]
			}
		}
		t.Fatalf("summary has no %q", label)
		return ""
	}
	tests := []struct{ label, want string }{
		{"Name", c.Name},
		{"Part", "HX-4107"},
		{"Operator", c.Operator},
		{"Plan hash", c.PlanHash},
		{"Started (UTC, ISO 8601)", "2026-03-02T08:30:00.000Z"},
		{"Decision rule", c.DecisionRule},
		{"Safety", c.SafetyNote},
		{"Notes", c.Notes},
		{"Temperatures (°C)", "-40, 25, 85"},
	}
	for _, tc := range tests {
		if got := value(tc.label); got != tc.want {
			t.Errorf("%s = %q, want %q", tc.label, got, tc.want)
		}
	}
	// Every instrument's identity string, verbatim.
	for _, in := range c.Instruments {
		found := false
		for _, r := range rows {
			found = found || slices.Contains(r, in.Identity)
		}
		if !found {
			t.Errorf("identity %q of %s not in the summary", in.Identity, in.Name)
		}
	}
	// Verdict counts: cmrr at each temperature has 5 pass (U01–U03, U07,
	// U08), 1 conditional pass, 1 conditional fail, 1 fail; psrr_pos is
	// not judged; the last row adds up all 48 results.
	var hdr []string
	var counts [][]string
	for i, r := range rows {
		if len(r) > 2 && r[0] == "Test" && r[1] == "Temperature (°C)" {
			hdr = r
			counts = rows[i+1:]
			break
		}
	}
	if hdr == nil {
		t.Fatal("no verdict table in the summary")
	}
	wantHdr := []string{"Test", "Temperature (°C)", "PASS", "COND. PASS", "COND. FAIL", "FAIL", "NOT JUDGED", "OTHER", "Total"}
	if !slices.Equal(hdr, wantHdr) {
		t.Fatalf("verdict header %q, want %q", hdr, wantHdr)
	}
	want := [][]string{
		{"cmrr", "-40.0", "5", "1", "1", "1", "0", "0", "8"},
		{"cmrr", "25.0", "5", "1", "1", "1", "0", "0", "8"},
		{"cmrr", "85.0", "5", "1", "1", "1", "0", "0", "8"},
		{"psrr_pos", "-40.0", "0", "0", "0", "0", "8", "0", "8"},
		{"psrr_pos", "25.0", "0", "0", "0", "0", "8", "0", "8"},
		{"psrr_pos", "85.0", "0", "0", "0", "0", "8", "0", "8"},
		{"all", "", "15", "3", "3", "3", "24", "0", "48"},
	}
	for i, w := range want {
		if i >= len(counts) || !slices.Equal(counts[i][:len(w)], w) {
			t.Errorf("verdict row %d = %q, want %q", i, counts[min(i, len(counts)-1)], w)
		}
	}
}

// --- number formats and verdict styles ------------------------------------

func TestWorkbookNumberFormats(t *testing.T) {
	_, _, f := sharedBook(t, single)
	// Built-in ids per ECMA-376 Part 1 §18.8.30: 2 = "0.00", 10 = "0.00%".
	tests := []struct {
		sheet, header string
		numFmt        int
		custom        string
	}{
		{SheetResults, "Ratio (dB)", 2, ""},
		{SheetResults, "Expanded uncertainty U (dB)", 2, ""},
		{SheetResults, "Limit (dB)", 2, ""},
		{SheetResults, "Coefficient (µV/V)", 0, "0.0000"},
		{SheetResults, "Coverage factor k", 0, "0.00"},
		{SheetResults, "Temperature (°C)", 0, "0.0"},
		{SheetReadings, "Time (UTC, ISO 8601)", 0, `yyyy-mm-dd"T"hh:mm:ss.000`},
		{SheetReadings, "Meter (V)", 0, "0.0000000"},
		{SheetReadings, "Stimulus set (V)", 0, "0.0000000"},
		{SheetUncertainty, "Contribution |c·u| (µV/V)", 0, "0.0000"},
		{SheetUncertainty, "Share of variance (%)", 10, ""},
		{SheetFits, "Slope (V/V)", 0, "0.0000000"},
		{SheetLot, "Mean (dB)", 2, ""},
	}
	for _, tc := range tests {
		t.Run(tc.sheet+"/"+tc.header, func(t *testing.T) {
			cell := headerCol(t, f, tc.sheet, tc.header) + "2"
			id, err := f.GetCellStyle(tc.sheet, cell)
			if err != nil {
				t.Fatal(err)
			}
			st, err := f.GetStyle(id)
			if err != nil {
				t.Fatal(err)
			}
			got := ""
			if st.CustomNumFmt != nil {
				got = *st.CustomNumFmt
			}
			if got != tc.custom || (tc.custom == "" && st.NumFmt != tc.numFmt) {
				t.Errorf("%s: numFmt %d custom %q, want %d %q", cell, st.NumFmt, got, tc.numFmt, tc.custom)
			}
		})
	}
}

// relativeLuminance of an sRGB colour "RRGGBB", per WCAG 2.1 (W3C
// Recommendation, definition "relative luminance").
func relativeLuminance(hex string) float64 {
	v, _ := strconv.ParseUint(hex, 16, 32)
	lin := func(c uint64) float64 {
		s := float64(c) / 255
		if s <= 0.03928 {
			return s / 12.92
		}
		return math.Pow((s+0.055)/1.055, 2.4)
	}
	return 0.2126*lin(v>>16&0xFF) + 0.7152*lin(v>>8&0xFF) + 0.0722*lin(v&0xFF)
}

// contrast is the WCAG 2.1 contrast ratio (L1 + 0.05)/(L2 + 0.05).
func contrast(a, b string) float64 {
	la, lb := relativeLuminance(a), relativeLuminance(b)
	return (math.Max(la, lb) + 0.05) / (math.Min(la, lb) + 0.05)
}

func TestVerdictPalette(t *testing.T) {
	// WCAG 2.1 states black on white is 21:1; check our formula on it.
	if got := contrast("000000", "FFFFFF"); math.Abs(got-21) > 1e-9 {
		t.Fatalf("contrast(black, white) = %v, want 21 (WCAG 2.1)", got)
	}
	_, _, f := sharedBook(t, single)
	verdictCol := headerCol(t, f, SheetResults, "Verdict")
	styleOf := func(unit string) *excelize.Style {
		r := strconv.Itoa(rowOf(t, f, SheetResults, map[string]string{"Unit": unit, "Test": "cmrr"}))
		id, err := f.GetCellStyle(SheetResults, verdictCol+r)
		if err != nil {
			t.Fatal(err)
		}
		st, err := f.GetStyle(id)
		if err != nil {
			t.Fatal(err)
		}
		return st
	}
	tests := []struct {
		unit    string
		kind    VerdictKind
		pattern int // ECMA-376 ST_PatternType as excelize numbers it: 1 solid, 8 darkUp, 10 darkTrellis
	}{
		{"U02", KindPass, 1},
		{"U04", KindConditionalPass, 8},
		{"U05", KindConditionalFail, 10},
		{"U06", KindFail, 1},
	}
	seen := map[int]VerdictKind{}
	for _, tc := range tests {
		st := styleOf(tc.unit)
		if st.Fill.Pattern != tc.pattern {
			t.Errorf("%v fill pattern %d, want %d", tc.kind, st.Fill.Pattern, tc.pattern)
		}
		if st.Font == nil || !st.Font.Bold {
			t.Errorf("%v: verdict text not bold", tc.kind)
		}
		fill := strings.TrimPrefix(st.Fill.Color[0], "FF")
		text := strings.TrimPrefix(st.Font.Color, "FF")
		// Text contrast at least 4.5:1 (WCAG 2.1 SC 1.4.3) against the
		// fill colour and, for hatches, against their white ground too.
		if cr := contrast(fill, text); cr < 4.5 {
			t.Errorf("%v: text %s on %s has contrast %.1f:1, want ≥ 4.5:1", tc.kind, text, fill, cr)
		}
		if tc.pattern != 1 {
			if cr := contrast("FFFFFF", text); cr < 4.5 {
				t.Errorf("%v: text %s on the hatch's white ground has contrast %.1f:1", tc.kind, text, cr)
			}
		}
		if k, dup := seen[tc.pattern*1000+int(relativeLuminance(fill)*100)]; dup {
			t.Errorf("%v and %v share fill pattern and lightness", tc.kind, k)
		}
		seen[tc.pattern*1000+int(relativeLuminance(fill)*100)] = tc.kind
	}
	// Pass and fail are both solid: they must differ in lightness, not
	// hue only, to survive a greyscale print.
	pass, fail := styleOf("U02"), styleOf("U06")
	if d := relativeLuminance(strings.TrimPrefix(pass.Fill.Color[0], "FF")) - relativeLuminance(strings.TrimPrefix(fail.Fill.Color[0], "FF")); d < 0.5 {
		t.Errorf("pass and fail fills differ by %.2f in relative luminance, want ≥ 0.5", d)
	}
}

func TestVerdictClass(t *testing.T) {
	tests := []struct {
		in   string
		want VerdictKind
	}{
		{"pass", KindPass}, {"PASS", KindPass}, {" Pass ", KindPass},
		{"conditional pass", KindConditionalPass}, {"Conditional-Pass", KindConditionalPass}, {"conditional_pass", KindConditionalPass},
		{"cond. pass", KindConditionalPass}, {"COND_FAIL", KindConditionalFail}, {"conditional  fail", KindConditionalFail},
		{"fail", KindFail}, {"FAIL", KindFail},
		{"not judged", KindNotJudged}, {"not_judged", KindNotJudged}, {"", KindNotJudged}, {"none", KindNotJudged},
		{"inconclusive", KindOther}, {"passed", KindOther},
	}
	for _, tc := range tests {
		if got := VerdictClass(tc.in); got != tc.want {
			t.Errorf("VerdictClass(%q) = %v, want %v", tc.in, got, tc.want)
		}
	}
}

// --- charts ----------------------------------------------------------------

type chartSer struct {
	Name string `xml:"tx>strRef>f"`
	XVal string `xml:"xVal>strRef>f"`
	YVal string `xml:"yVal>numRef>f"`
	Cat  string `xml:"cat>strRef>f"`
	Val  string `xml:"val>numRef>f"`
}

type chartXML struct {
	Title   []string `xml:"chart>title>tx>rich>p>r>t"`
	Scatter []struct {
		Ser []chartSer `xml:"ser"`
	} `xml:"chart>plotArea>scatterChart"`
	Bar []struct {
		Grouping struct {
			Val string `xml:"val,attr"`
		} `xml:"grouping"`
		Ser []chartSer `xml:"ser"`
	} `xml:"chart>plotArea>barChart"`
}

func (c chartXML) series() []chartSer {
	var out []chartSer
	for _, s := range c.Scatter {
		out = append(out, s.Ser...)
	}
	for _, b := range c.Bar {
		out = append(out, b.Ser...)
	}
	return out
}

// readCharts parses every xl/charts/chartN.xml, keyed by title.
func readCharts(t *testing.T, path string) map[string]chartXML {
	t.Helper()
	out := map[string]chartXML{}
	for name, b := range zipParts(t, path) {
		if !strings.HasPrefix(name, "xl/charts/chart") {
			continue
		}
		var c chartXML
		if err := xml.Unmarshal(b, &c); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if len(c.Title) != 1 {
			t.Fatalf("%s: title %q", name, c.Title)
		}
		out[c.Title[0]] = c
	}
	return out
}

var rangeRE = regexp.MustCompile(`^'Chart data'!\$([A-Z]+)\$(\d+)(?::\$([A-Z]+)\$(\d+))?$`)

// rangeValues reads the cells a chart reference names; it fails the test
// unless the reference is a single column on the Chart data sheet.
func rangeValues(t *testing.T, f *excelize.File, ref string) []string {
	t.Helper()
	m := rangeRE.FindStringSubmatch(ref)
	if m == nil {
		t.Fatalf("chart reference %q is not a range on 'Chart data'", ref)
	}
	r1, _ := strconv.Atoi(m[2])
	r2 := r1
	if m[3] != "" {
		if m[3] != m[1] {
			t.Fatalf("chart reference %q spans columns", ref)
		}
		r2, _ = strconv.Atoi(m[4])
	}
	var out []string
	for r := r1; r <= r2; r++ {
		v, err := f.GetCellValue(SheetChartData, m[1]+strconv.Itoa(r), excelize.Options{RawCellValue: true})
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, v)
	}
	return out
}

func floats(t *testing.T, s []string) []float64 {
	t.Helper()
	out := make([]float64, len(s))
	for i, v := range s {
		if v == "" {
			out[i] = math.NaN()
			continue
		}
		x, err := strconv.ParseFloat(v, 64)
		if err != nil {
			t.Fatalf("chart value %q: %v", v, err)
		}
		out[i] = x
	}
	return out
}

func TestWorkbookCharts(t *testing.T) {
	c, path, f := sharedBook(t, three)
	charts := readCharts(t, path)
	// 2 tests × 3 temperatures × (response + residuals) + 2 temperature
	// charts + 2 tests × 3 temperatures of histograms.
	if len(charts) != 20 {
		t.Errorf("%d charts, want 20: %q", len(charts), slices.Sorted(maps.Keys(charts)))
	}
	// Units ranked by cmrr at 25 °C, lowest first (fixtureRatios).
	ranked := []string{"U06", "U05", "U04", "U03", "U02", "U01", "U08", "U07"}

	t.Run("response", func(t *testing.T) {
		ch, ok := charts["cmrr at 25 °C: output change against stimulus (8 units)"]
		if !ok {
			t.Fatalf("no cmrr response chart; have %q", slices.Sorted(maps.Keys(charts)))
		}
		ser := ch.series()
		if len(ser) != 2*len(ranked) {
			t.Fatalf("%d series, want points and fit for 8 units", len(ser))
		}
		for i, u := range ranked {
			pts, fit := ser[2*i], ser[2*i+1]
			if got := rangeValues(t, f, pts.Name); got[0] != u {
				t.Errorf("series %d named %q, want %q", 2*i, got[0], u)
			}
			if got := rangeValues(t, f, fit.Name); got[0] != u+" fit" {
				t.Errorf("series %d named %q, want %q", 2*i+1, got[0], u+" fit")
			}
			// Points: x = read-back stimulus; y = the fixture's own model
			// of the change, (slope·x + quadratic·x² + deviation)·10⁶ µV.
			ui := slices.Index(defaultUnits, u)
			var fr FitRow
			for _, f := range c.Fits {
				if f.Unit == u && f.Test == "cmrr" && f.TemperatureC == 25 {
					fr = f
				}
			}
			xs, ys := floats(t, rangeValues(t, f, pts.XVal)), floats(t, rangeValues(t, f, pts.YVal))
			if len(xs) != len(fixtureLevels)*fixtureRepeats || len(ys) != len(xs) {
				t.Fatalf("%s: %d x and %d y values", u, len(xs), len(ys))
			}
			for j, x := range xs {
				wantX := fixtureLevels[j%len(fixtureLevels)] + 1e-4
				wantY := (fr.SlopeVPerV*wantX + fr.Quadratic*wantX*wantX + devVolts(j)) * 1e6
				if x != wantX || math.Abs(ys[j]-wantY) > 1e-6 {
					t.Errorf("%s point %d = (%v, %v), want (%v, %v)", u, j, x, ys[j], wantX, wantY)
				}
			}
			fx, fy := floats(t, rangeValues(t, f, fit.XVal)), floats(t, rangeValues(t, f, fit.YVal))
			wantN := 2
			if ui == 2 {
				wantN = 21 // U03 has a quadratic term: the curve is sampled
			}
			if len(fx) != wantN || fx[0] != -10+1e-4 || fx[len(fx)-1] != 10+1e-4 {
				t.Errorf("%s fit spans %v, want %d points from -9.9999 to 10.0001", u, fx, wantN)
			}
			for j := range fx {
				if want := (fr.SlopeVPerV*fx[j] + fr.Quadratic*fx[j]*fx[j]) * 1e6; math.Abs(fy[j]-want) > 1e-6 {
					t.Errorf("%s fit(%v) = %v, want %v", u, fx[j], fy[j], want)
				}
			}
		}
	})

	t.Run("residuals", func(t *testing.T) {
		ch, ok := charts["cmrr at 25 °C: fit residuals (8 units)"]
		if !ok {
			t.Fatal("no cmrr residual chart")
		}
		ser := ch.series()
		if len(ser) != len(ranked) {
			t.Fatalf("%d series, want 8", len(ser))
		}
		for _, s := range ser {
			ys := floats(t, rangeValues(t, f, s.YVal))
			for j, y := range ys {
				if want := devVolts(j) * 1e6; math.Abs(y-want) > 1e-6 {
					t.Errorf("%v residual %d = %v µV, want %v µV", rangeValues(t, f, s.Name), j, y, want)
				}
			}
		}
	})

	t.Run("histogram", func(t *testing.T) {
		ch, ok := charts["cmrr at 25 °C: lot distribution, 10 dB bins, limit 110.00 dB"]
		if !ok {
			t.Fatalf("no cmrr histogram at 25 °C; have %q", slices.Sorted(maps.Keys(charts)))
		}
		if len(ch.Bar) != 1 || ch.Bar[0].Grouping.Val != "stacked" {
			t.Fatalf("histogram is not a stacked column chart: %+v", ch.Bar)
		}
		ser := ch.series()
		names := []string{}
		for _, s := range ser {
			names = append(names, rangeValues(t, f, s.Name)[0])
		}
		if !slices.Equal(names, []string{"resolved", "lower bound only", "limit 110.00 dB"}) {
			t.Fatalf("series %q", names)
		}
		cats := rangeValues(t, f, ser[0].Cat)
		res, bnd, lim := floats(t, rangeValues(t, f, ser[0].Val)), floats(t, rangeValues(t, f, ser[1].Val)), floats(t, rangeValues(t, f, ser[2].Val))
		// The limit is a category of its own, between bins wholly below
		// and bins at or above it; counts add up to the lot.
		li := slices.IndexFunc(lim, func(v float64) bool { return !math.IsNaN(v) })
		if li < 0 || cats[li] != "limit 110.00" {
			t.Fatalf("limit bar at %d (categories %q)", li, cats)
		}
		below, total := 0.0, 0.0
		for i := range cats {
			if i == li {
				if !math.IsNaN(res[i]) || !math.IsNaN(bnd[i]) {
					t.Errorf("counts at the limit category: %v %v", res[i], bnd[i])
				}
				continue
			}
			if !math.IsNaN(lim[i]) {
				t.Errorf("limit bar also at %q", cats[i])
			}
			var lo, hi float64
			if _, err := fmt.Sscanf(strings.Replace(cats[i], "–", " ", 1), "%f %f", &lo, &hi); err != nil || hi-lo != 10 {
				t.Fatalf("category %q is not a 10 dB bin", cats[i])
			}
			total += res[i] + bnd[i]
			if i < li {
				below += res[i] + bnd[i]
				if hi > 110 {
					t.Errorf("bin %q before the limit overlaps it", cats[i])
				}
			} else if lo < 110 {
				t.Errorf("bin %q after the limit category", cats[i])
			}
		}
		// U05 (109.5 dB) and U06 (105 dB) are below 110 dB.
		if below != 2 || total != 8 {
			t.Errorf("%v units below the limit of %v; want 2 of 8", below, total)
		}
	})

	t.Run("temperature", func(t *testing.T) {
		ch, ok := charts["cmrr: reported ratio against temperature (8 units)"]
		if !ok {
			t.Fatal("no cmrr temperature chart")
		}
		ser := ch.series()
		if len(ser) != 10 {
			t.Fatalf("%d series, want 8 units + lot median + limit", len(ser))
		}
		if got := rangeValues(t, f, ser[8].Name)[0]; got != "lot median" {
			t.Errorf("series 9 %q, want lot median", got)
		}
		// The limit is drawn as a line across the temperatures.
		if got := rangeValues(t, f, ser[9].Name)[0]; got != "limit" {
			t.Errorf("last series %q, want limit", got)
		}
		for i, y := range floats(t, rangeValues(t, f, ser[9].YVal)) {
			if y != 110 {
				t.Errorf("limit point %d at %v dB, want the fixture's 110 dB", i, y)
			}
		}
		xs := floats(t, rangeValues(t, f, ser[0].XVal))
		ys := floats(t, rangeValues(t, f, ser[0].YVal))
		for i, x := range xs {
			want := 105 + fixtureTemperatureShift*(x-25) // U06
			if x != three[i] || math.Abs(ys[i]-want) > 1e-9 {
				t.Errorf("U06 point %d = (%v, %v), want (%v, %v)", i, x, ys[i], three[i], want)
			}
		}
	})

	t.Run("references stay on the chart data sheet", func(t *testing.T) {
		for title, ch := range charts {
			for _, s := range ch.series() {
				for _, ref := range []string{s.Name, s.XVal, s.YVal, s.Cat, s.Val} {
					if ref != "" && !rangeRE.MatchString(ref) {
						t.Errorf("%s: reference %q", title, ref)
					}
				}
			}
		}
	})
}

func TestWorkbookChartCap(t *testing.T) {
	tests := []struct {
		name       string
		maxUnits   int
		wantCharts int
		wantTitle  string
		wantSeries int
	}{
		{"three units", 3, 6, "cmrr at 25 °C: output change against stimulus (lowest 3 of 8 units)", 6},
		{"no per-unit charts", -1, 2, "cmrr at 25 °C: lot distribution, 10 dB bins, limit 110.00 dB", 3},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			path, _ := writeBook(t, fixtureCampaign(defaultUnits, single), WorkbookOptions{Charts: ChartOptions{MaxUnits: tc.maxUnits}})
			charts := readCharts(t, path)
			if len(charts) != tc.wantCharts {
				t.Errorf("%d charts, want %d", len(charts), tc.wantCharts)
			}
			ch, ok := charts[tc.wantTitle]
			if !ok {
				t.Fatalf("no chart %q; have %q", tc.wantTitle, slices.Sorted(maps.Keys(charts)))
			}
			if n := len(ch.series()); n != tc.wantSeries {
				t.Errorf("%d series, want %d", n, tc.wantSeries)
			}
		})
	}
}

// --- text safety -------------------------------------------------------------

func TestTextStaysText(t *testing.T) {
	c := fixtureCampaign(hostileUnits(), single)
	c.Operator = "@SUM(A1)"
	c.Notes = "=1+2"
	c.Lot = "+x"
	c.Instruments[0].Identity = "-y"
	c.Units[0].Serial = "=HYPERLINK(\"http://example.invalid\")"
	path, f := writeBook(t, c, WorkbookOptions{})

	hostile := append(slices.Clone(hostileTexts), c.Units[0].Serial)
	// Where each hostile text must appear at least once.
	wantOn := []string{SheetSummary, SheetUnits, SheetResults, SheetUncertainty, SheetFits, SheetReadings, SheetChartData}
	for _, sheet := range f.GetSheetList() {
		rows, err := f.GetRows(sheet)
		if err != nil {
			t.Fatal(err)
		}
		seen := 0
		for r, row := range rows {
			for ci, v := range row {
				if !slices.Contains(hostile, v) {
					continue
				}
				seen++
				cell, _ := excelize.CoordinatesToCellName(ci+1, r+1)
				if fo, err := f.GetCellFormula(sheet, cell); err != nil || fo != "" {
					t.Errorf("%s!%s (%q) has formula %q (%v)", sheet, cell, v, fo, err)
				}
				if ty, _ := f.GetCellType(sheet, cell); ty != excelize.CellTypeInlineString && ty != excelize.CellTypeSharedString {
					t.Errorf("%s!%s (%q) has cell type %v, want a string", sheet, cell, v, ty)
				}
			}
		}
		if slices.Contains(wantOn, sheet) && seen == 0 {
			t.Errorf("%s: no hostile text found; the test checks nothing there", sheet)
		}
	}
	// No worksheet holds any formula at all.
	for name, b := range zipParts(t, path) {
		if strings.HasPrefix(name, "xl/worksheets/sheet") && regexp.MustCompile(`<f[ >]`).Match(b) {
			t.Errorf("%s contains a formula element", name)
		}
		if strings.HasPrefix(name, "xl/charts/chart") {
			// Series names are references to cells, never the text itself.
			for _, m := range regexp.MustCompile(`<f>([^<]*)</f>`).FindAllSubmatch(b, -1) {
				ref := strings.ReplaceAll(string(m[1]), "&#39;", "'")
				if !rangeRE.MatchString(ref) {
					t.Errorf("%s: chart formula %q is not a cell range", name, ref)
				}
			}
		}
	}
}

// TestTextRoundTrip writes awkward text through both write paths (the
// summary's shared strings and the streamed tables' inline strings) and
// reads it back.
func TestTextRoundTrip(t *testing.T) {
	tests := []struct{ name, in, want string }{
		{"formula-like", "=1+2", "=1+2"},
		{"at sign", "@SUM(A1)", "@SUM(A1)"},
		{"spaces kept", "  padded  ", "  padded  "},
		{"markup", "<b>&amp;</b>", "<b>&amp;</b>"},
		{"newlines", "line 1\r\nline 2\n", "line 1\r\nline 2\n"},
		{"OOXML escape literal", "_x0041_", "_x0041_"},
		{"chained escape literals, shared path", "a_x0041_x0042_b", "a_x0041_x0042_b"},
		{"escaped underscore literal", "_x005F_", "_x005F_"},
		{"control character", "a\x01b", "a\uFFFDb"},
		{"invalid UTF-8", "id\xff", "id\uFFFD"},
		{"emoji", "unit \U0001F600", "unit \U0001F600"},
		{"too long", strings.Repeat("ab", 20000), strings.Repeat("ab", 20000)[:maxCellUTF16]},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := roundTrip(t, tc.in)
			if got.summary != tc.want {
				t.Errorf("summary: wrote %q, read %q, want %q", short(tc.in), short(got.summary), short(tc.want))
			}
			// The stream writer's own escaping cannot express chained
			// "_xHHHH_xHHHH_" (excelize v2.11.1); see doc on cellText.
			if got.stream != tc.want && !strings.Contains(tc.name, "chained") {
				t.Errorf("stream: wrote %q, read %q, want %q", short(tc.in), short(got.stream), short(tc.want))
			}
		})
	}
}

func short(s string) string {
	if len(s) > 40 {
		return s[:40] + "…"
	}
	return s
}

type roundTripped struct{ summary, stream string }

// roundTrip writes s through the summary writer (shared strings) and the
// table streamer (inline strings) that WriteWorkbook uses, saves, reopens
// and reads both cells back.
func roundTrip(t testing.TB, s string) roundTripped {
	t.Helper()
	f := excelize.NewFile()
	defer f.Close()
	st, err := newStyles(f)
	if err != nil {
		t.Fatal(err)
	}
	if err := f.SetSheetName("Sheet1", SheetSummary); err != nil {
		t.Fatal(err)
	}
	if _, err := f.NewSheet(SheetUnits); err != nil {
		t.Fatal(err)
	}
	w := &summaryWriter{f: f, st: st}
	w.kv("Notes", s, 0)
	if w.err != nil {
		t.Fatal(w.err)
	}
	spec := tableSpec{sheet: SheetUnits, table: "tblUnits", cols: []column{{"Notes", 20, st.text}}}
	if err := streamTable(f, st, spec, 1, func(_ int, d []any) { d[0] = s }); err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := f.Write(&buf); err != nil {
		t.Fatal(err)
	}
	g, err := excelize.OpenReader(&buf)
	if err != nil {
		t.Fatal(err)
	}
	defer g.Close()
	var out roundTripped
	out.summary, _ = g.GetCellValue(SheetSummary, "B1")
	out.stream, _ = g.GetCellValue(SheetUnits, "A2")
	return out
}

// TestTextRoundTripWorkbook checks the same through WriteWorkbookTo once.
func TestTextRoundTripWorkbook(t *testing.T) {
	const s = "=1+2 _x0041_ \x01"
	c := &Campaign{Notes: s, Units: []UnitInfo{{ID: "U01", Notes: s}}}
	var buf bytes.Buffer
	if err := WriteWorkbookTo(&buf, c, WorkbookOptions{}); err != nil {
		t.Fatal(err)
	}
	f, err := excelize.OpenReader(&buf)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	want := cellText(s)
	rows, _ := f.GetRows(SheetSummary)
	found := false
	for _, r := range rows {
		if len(r) > 1 && r[0] == "Notes" {
			found = true
			if r[1] != want {
				t.Errorf("summary notes %q, want %q", r[1], want)
			}
		}
	}
	if !found {
		t.Error("no notes in the summary")
	}
	if got := cellStr(t, f, SheetUnits, "H2"); got != want {
		t.Errorf("unit notes %q, want %q", got, want)
	}
}

func FuzzCellText(f *testing.F) {
	for _, s := range []string{"=1+2", "@SUM(A1)", "+x", "-y", "_x0041_", "a\x01b", " x ", "\xff", "HX-4107 #3"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		if len(s) > 2000 {
			return
		}
		want := cellText(s)
		got := roundTrip(t, s)
		if got.summary != want {
			t.Errorf("summary: wrote %q, read %q, want %q", s, got.summary, want)
		}
		if got.stream != want && !chainedXstring(want) {
			t.Errorf("stream: wrote %q, read %q, want %q", s, got.stream, want)
		}
	})
}

// chainedXstring reports "_xHHHH_xHHHH_"-style text, which excelize's
// stream writer cannot escape (a known limit, see TestTextRoundTrip).
func chainedXstring(s string) bool {
	return regexp.MustCompile(`_x[0-9a-fA-F]{4}_x[0-9a-fA-F]{4}_`).MatchString(s)
}

// --- files -----------------------------------------------------------------

func TestWriteWorkbookErrors(t *testing.T) {
	dir := t.TempDir()
	c := fixtureCampaign(defaultUnits, single)
	tests := []struct {
		name, path string
		c          *Campaign
		wantInErr  string
	}{
		{"wrong extension", filepath.Join(dir, "report.csv"), c, "must end in .xlsx"},
		{"missing directory", filepath.Join(dir, "no", "such", "report.xlsx"), c, filepath.Join(dir, "no", "such", "report.xlsx")},
		{"no campaign", filepath.Join(dir, "empty.xlsx"), nil, "no campaign"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := WriteWorkbook(tc.path, tc.c, WorkbookOptions{})
			if err == nil || !strings.Contains(err.Error(), tc.wantInErr) {
				t.Errorf("error %v, want one mentioning %q", err, tc.wantInErr)
			}
		})
	}
	// Nothing half-written is left behind.
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		t.Errorf("left behind: %s", e.Name())
	}
}

func TestWriteWorkbookReplaces(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "campaign.xlsx")
	if err := os.WriteFile(path, []byte("old"), 0o640); err != nil {
		t.Fatal(err)
	}
	if err := WriteWorkbook(path, fixtureCampaign(defaultUnits, single), WorkbookOptions{NoCharts: true}); err != nil {
		t.Fatal(err)
	}
	fi, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if fi.Mode().Perm() != 0o640 {
		t.Errorf("mode %v, want the replaced file's 0640", fi.Mode().Perm())
	}
	f, err := excelize.OpenFile(path)
	if err != nil {
		t.Fatalf("replaced file is not a workbook: %v", err)
	}
	f.Close()
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("directory holds %d files, want 1 (no temporary left)", len(entries))
	}
}

// TestWorkbookNotesAndMethod: a result's notes reach the Results sheet's
// Notes column (joined as in the CSV), an unresolved result's ratio cell
// is empty, the coefficient's standard and expanded uncertainties have
// their own labelled columns, and the method statement is on the Summary
// sheet under its heading.
func TestWorkbookNotesAndMethod(t *testing.T) {
	c := fixtureCampaign(defaultUnits, single)
	c.Results[0].Notes = []string{"k_c + k_o, not CMRR", "drift term dropped (too few levels)"}
	c.Results[0].CoefficientExpandedUUVPerV = 0.125
	c.Method = []string{"Coefficient: least-squares slope.", "Unresolved: only the lower bound."}
	var unresolved int = -1
	for i := range c.Results {
		if !c.Results[i].Resolved {
			c.Results[i].RatioDB = math.NaN()
			unresolved = i
			break
		}
	}
	_, f := writeBook(t, c, WorkbookOptions{NoCharts: true})
	col := func(h string) string { return headerCol(t, f, SheetResults, h) }
	if got := cellStr(t, f, SheetResults, col("Notes")+"2"); got != "k_c + k_o, not CMRR | drift term dropped (too few levels)" {
		t.Errorf("notes cell %q", got)
	}
	if got := cellNum(t, f, SheetResults, col("Expanded uncertainty U of coefficient (µV/V)")+"2"); got != 0.125 {
		t.Errorf("expanded U of the coefficient %v", got)
	}
	col("Standard uncertainty u of coefficient (µV/V)")
	if unresolved < 0 {
		t.Fatal("fixture has no unresolved result")
	}
	if got := cellStrRaw(f, SheetResults, col("Ratio (dB)")+strconv.Itoa(unresolved+2)); got != "" {
		t.Errorf("unresolved ratio cell %q, want empty", got)
	}
	rows, err := f.GetRows(SheetSummary)
	if err != nil {
		t.Fatal(err)
	}
	at := -1
	for i, r := range rows {
		if len(r) > 0 && r[0] == "Method" {
			at = i
		}
	}
	if at < 0 || at+2 >= len(rows) || rows[at+1][0] != c.Method[0] || rows[at+2][0] != c.Method[1] {
		t.Errorf("no method section with the paragraphs (heading at row %d)", at+1)
	}
}
