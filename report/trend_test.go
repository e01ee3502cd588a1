package report

import (
	"context"
	"encoding/xml"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"
)

// trendFixture is a hand-made trend: invented part HX4107, three lots of
// CMRR in dB with limits as the statistics code would fill them (the
// numbers are only carried through here; their computation is tested in
// fit and procedure/trend).
func trendFixture() *Trend {
	day := func(d int) time.Time { return time.Date(2026, 3, d, 9, 0, 0, 0, time.UTC) }
	lot := func(name string, d, n int, mean, sd, lcl, ucl float64, out bool, passed int) TrendLot {
		return TrendLot{
			Lot: name, First: day(d), Last: day(d).Add(2 * time.Hour), Benches: []string{"bench-A"},
			N: n, Mean: mean, SD: sd,
			MeanLCL: lcl, MeanUCL: ucl, SDCenter: 0.45, SDLCL: 0, SDUCL: 1.02,
			MeanOut: out, Judged: n, Passed: passed, Yield: float64(passed) / float64(n),
			ToleranceK: 3.4, ToleranceBound: mean - 3.4*sd,
		}
	}
	l3 := lot("L2603", 20, 4, 118.2, 0.9, 119.3, 121.1, true, 3)
	l3.Signals = []string{"1: beyond a control limit"}
	l3.SDOut = false
	return &Trend{
		Title: "Trend HX4107", Generated: day(28), Generator: "nullbench test",
		Selection: "part HX4107", Method: "Shewhart X̄–S control chart (test)", SigmaEstimator: "pooled SD s_p/c4(ν+1)",
		Sigmas: 3, Coverage: 0.95, Confidence: 0.95, RunRules: "Western Electric rules 1–4",
		Charts: []TrendChart{{
			Part: "HX4107", Test: "cmrr", TemperatureC: 25, Quantity: "CMRR", ValueUnit: "dB",
			Convention: "input-referred ratio 20·log10|ΔV_CM/ΔV_IO|", LimitValue: 110, BoundSide: "lower",
			GrandMean: 120.2, PooledSD: 0.5, PooledDOF: 10, SigmaHat: 0.51,
			Lots: []TrendLot{
				lot("L2601", 2, 5, 120.4, 0.4, 119.5, 120.9, false, 5),
				lot("L2602", 9, 5, 120.6, 0.5, 119.5, 120.9, false, 5),
				l3,
			},
		}, {
			Part: "HX4107", Test: "psrr_pos", TemperatureC: 85, Quantity: "PSRR+", ValueUnit: "µV/V",
			Convention: "input-referred coefficient ΔV_IO/ΔV_S, signed", LimitValue: math.NaN(), BoundSide: "upper",
			GrandMean: 1.25, ChartError: "only one lot", PooledSD: math.NaN(), SigmaHat: math.NaN(),
			Lots: []TrendLot{{Lot: "L2601", N: 2, Mean: 1.25, SD: 0.01, MeanLCL: math.NaN(), MeanUCL: math.NaN(),
				SDCenter: math.NaN(), SDLCL: math.NaN(), SDUCL: math.NaN(), Judged: 0, Yield: math.NaN(),
				ToleranceK: 26.26, ToleranceBound: 1.5126}},
		}},
		Repeatability: []Repeatability{{Bench: "bench-A", Part: "HX4107", Test: "cmrr", TemperatureC: 25,
			Quantity: "CMRR", ValueUnit: "dB", SD: 0.12, DOF: 3, Units: 3, Repeats: 6}},
	}
}

func writeTrend(t *testing.T, tr *Trend) (string, *excelize.File) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "trend.xlsx")
	if err := WriteTrendWorkbook(path, tr, TrendOptions{}); err != nil {
		t.Fatalf("WriteTrendWorkbook: %v", err)
	}
	f, err := excelize.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { f.Close() })
	return path, f
}

func TestTrendWorkbookSheetsAndValues(t *testing.T) {
	tr := trendFixture()
	path, f := writeTrend(t, tr)
	s1, s2 := tr.Charts[0].Sheet(1), tr.Charts[1].Sheet(2)
	if s1 != "1 HX4107 cmrr 25°C" || s2 != "2 HX4107 psrr_pos 85°C" {
		t.Fatalf("sheet names %q %q", s1, s2)
	}
	want := []string{SheetTrend, s1, s2, SheetRepeatability}
	if got := f.GetSheetList(); strings.Join(got, "|") != strings.Join(want, "|") {
		t.Fatalf("sheets %q, want %q", got, want)
	}
	// headers name unit and quantity
	for _, h := range []string{"Lot mean x̄ (dB)", "Lot SD s (dB)", "X̄ LCL (dB)", "X̄ UCL (dB)", "s UCL (dB)",
		"Yield (%)", "Lower tolerance bound (dB)", "Limit (dB)"} {
		headerCol(t, f, s1, h)
	}
	for _, h := range []string{"Lot mean x̄ (µV/V)", "Upper tolerance bound (µV/V)"} {
		headerCol(t, f, s2, h)
	}
	// values: lot 3 row (row 4)
	r := rowOf(t, f, s1, map[string]string{"Lot": "L2603"})
	checks := []struct {
		header string
		want   float64
	}{
		{"Lot mean x̄ (dB)", 118.2}, {"X̄ LCL (dB)", 119.3}, {"X̄ UCL (dB)", 121.1},
		{"X̄ centre x̿ (dB)", 120.2}, {"Yield (%)", 0.75}, {"Units (n)", 4},
		{"Lower tolerance bound (dB)", 118.2 - 3.4*0.9},
	}
	for _, c := range checks {
		cell := headerCol(t, f, s1, c.header) + itoa(r)
		if got := cellNum(t, f, s1, cell); math.Abs(got-c.want) > 1e-9 {
			t.Errorf("%s %s = %v, want %v", s1, c.header, got, c.want)
		}
	}
	if got := cellStr(t, f, s1, headerCol(t, f, s1, "Mean beyond limits")+itoa(r)); got != "yes" {
		t.Errorf("L2603 mean beyond limits = %q", got)
	}
	if got := cellStr(t, f, s1, headerCol(t, f, s1, "Run-rule signals")+itoa(r)); got != "1: beyond a control limit" {
		t.Errorf("L2603 signals = %q", got)
	}
	// the key names quantity, unit and convention
	kr := rowWith(t, f, s1, "A", "Quantity")
	if got := cellStr(t, f, s1, "B"+itoa(kr)); !strings.Contains(got, "in dB: input-referred ratio 20·log10|ΔV_CM/ΔV_IO|") {
		t.Errorf("quantity key %q", got)
	}
	// NaN stays empty, never 0
	if got := cellStr(t, f, s2, headerCol(t, f, s2, "X̄ UCL (µV/V)")+"2"); got != "" {
		t.Errorf("a lot without limits shows UCL %q", got)
	}
	// repeatability sheet
	rr := rowOf(t, f, SheetRepeatability, map[string]string{"Bench": "bench-A"})
	if got := cellNum(t, f, SheetRepeatability, headerCol(t, f, SheetRepeatability, "Repeatability SD s_r")+itoa(rr)); got != 0.12 {
		t.Errorf("s_r = %v", got)
	}
	if got := cellNum(t, f, SheetRepeatability, headerCol(t, f, SheetRepeatability, "Degrees of freedom ν")+itoa(rr)); got != 3 {
		t.Errorf("ν = %v", got)
	}
	// the index lists both charts and says why the second has no limits
	ri := rowWith(t, f, SheetTrend, "A", s2)
	if got := cellStr(t, f, SheetTrend, headerCol2(t, f, SheetTrend, ri, "Limits")+itoa(ri)); got != "only one lot" {
		t.Errorf("index limits note %q", got)
	}

	// charts: an X̄ and an s chart on the first sheet, each with the lot
	// series, the centre line and both limits, all from the sheet's columns
	charts := readLineCharts(t, path)
	xc, ok := charts["X̄ chart: HX4107 cmrr CMRR at 25 °C, DC"]
	if !ok {
		t.Fatalf("no X̄ chart; charts: %v", keys(charts))
	}
	sc, ok := charts["s chart: HX4107 cmrr CMRR at 25 °C, DC"]
	if !ok {
		t.Fatalf("no s chart; charts: %v", keys(charts))
	}
	q := "'" + s1 + "'!"
	for _, c := range []struct {
		ch   lineChartXML
		vals []string
	}{
		{xc, []string{q + "$G$2:$G$4", q + "$I$2:$I$4", q + "$J$2:$J$4", q + "$K$2:$K$4"}},
		{sc, []string{q + "$H$2:$H$4", q + "$M$2:$M$4", q + "$N$2:$N$4", q + "$O$2:$O$4"}},
	} {
		ser := c.ch.Ser
		if len(ser) != 4 {
			t.Fatalf("%d series, want 4", len(ser))
		}
		for i, s := range ser {
			if s.Val != c.vals[i] || s.Cat != q+"$A$2:$A$4" {
				t.Errorf("series %d: values %q categories %q, want %q", i, s.Val, s.Cat, c.vals[i])
			}
		}
	}
	// the X̄ axis spans the points and limits (118.2 … 121.1 dB) with a
	// tenth of the span to spare, not from zero
	if len(xc.ValAx) != 1 || !approx(xc.ValAx[0].Min.Val, 117.91) || !approx(xc.ValAx[0].Max.Val, 121.39) {
		t.Errorf("X̄ chart vertical axis %+v, want 117.91 … 121.39", xc.ValAx)
	}
	// a sheet with a single lot still gets its two charts
	if len(charts) != 4 {
		t.Errorf("%d charts, want 4", len(charts))
	}
}

// rowWith finds the first row whose cell in column col is text.
func rowWith(t *testing.T, f *excelize.File, sheet, col, text string) int {
	t.Helper()
	rows, err := f.GetRows(sheet)
	if err != nil {
		t.Fatal(err)
	}
	for r := range rows {
		if v, _ := f.GetCellValue(sheet, col+itoa(r+1)); v == text {
			return r + 1
		}
	}
	t.Fatalf("%s: no row with %q in column %s", sheet, text, col)
	return 0
}

// headerCol2 finds a header in row r (a table that does not start at row 1).
func headerCol2(t *testing.T, f *excelize.File, sheet string, r int, header string) string {
	t.Helper()
	rows, err := f.GetRows(sheet)
	if err != nil {
		t.Fatal(err)
	}
	for hr := r - 1; hr >= 1; hr-- {
		for i, h := range rows[hr-1] {
			if h == header {
				col, _ := excelize.ColumnNumberToName(i + 1)
				return col
			}
		}
	}
	t.Fatalf("%s: no header %q above row %d", sheet, header, r)
	return ""
}

type lineChartXML struct {
	Title []string   `xml:"chart>title>tx>rich>p>r>t"`
	Ser   []chartSer `xml:"chart>plotArea>lineChart>ser"`
	ValAx []struct {
		Min struct {
			Val string `xml:"val,attr"`
		} `xml:"scaling>min"`
		Max struct {
			Val string `xml:"val,attr"`
		} `xml:"scaling>max"`
	} `xml:"chart>plotArea>valAx"`
}

// readLineCharts parses every xl/charts/chartN.xml as a line chart, keyed
// by title.
func readLineCharts(t *testing.T, path string) map[string]lineChartXML {
	t.Helper()
	out := map[string]lineChartXML{}
	for name, b := range zipParts(t, path) {
		if !strings.HasPrefix(name, "xl/charts/chart") {
			continue
		}
		var c lineChartXML
		if err := xml.Unmarshal(b, &c); err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		out[strings.Join(c.Title, "")] = c
	}
	return out
}

func approx(s string, want float64) bool {
	v, err := strconv.ParseFloat(s, 64)
	return err == nil && math.Abs(v-want) < 1e-9
}

func itoa(i int) string { return strconv.Itoa(i) }

func keys[V any](m map[string]V) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	return out
}

func TestTrendSheetNames(t *testing.T) {
	cases := []struct {
		c    TrendChart
		n    int
		want string
	}{
		{TrendChart{Part: "HX4107", Test: "cmrr", TemperatureC: 25}, 1, "1 HX4107 cmrr 25°C"},
		{TrendChart{Part: "A/B:C", Test: "x[1]", TemperatureC: -40, FrequencyHz: 1000}, 12, "12 A_B_C x_1_ -40°C 1000Hz"},
		{TrendChart{Part: "VERY-LONG-PART-NUMBER-0123456789", Test: "psrr_neg", TemperatureC: 85}, 3, "3 VERY-LONG-PART-NUMBER-0123456"},
	}
	for _, c := range cases {
		if got := c.c.Sheet(c.n); got != c.want {
			t.Errorf("Sheet = %q, want %q", got, c.want)
		}
		if n := len([]rune(c.c.Sheet(c.n))); n > 31 {
			t.Errorf("%q is %d characters", c.c.Sheet(c.n), n)
		}
	}
}

func TestTrendWorkbookRefusals(t *testing.T) {
	if err := WriteTrendWorkbook(filepath.Join(t.TempDir(), "t.csv"), trendFixture(), TrendOptions{}); err == nil {
		t.Error("a .csv name was accepted")
	}
	if err := WriteTrendWorkbookTo(new(strings.Builder), nil, TrendOptions{}); err == nil {
		t.Error("a nil trend was accepted")
	}
	// an empty trend still writes (index and repeatability sheets)
	_, f := writeTrend(t, &Trend{Title: "empty"})
	if got := f.GetSheetList(); len(got) != 2 {
		t.Errorf("empty trend sheets %q", got)
	}
}

// TestTrendWorkbookLibreOffice: LibreOffice opens the trend workbook and
// converts it to PDF (headless); the PDF text shows the lot table. Skipped
// only when no libreoffice binary is found (CI installs libreoffice-calc).
func TestTrendWorkbookLibreOffice(t *testing.T) {
	lo, err := exec.LookPath("libreoffice")
	if err != nil {
		if lo, err = exec.LookPath("soffice"); err != nil {
			t.Skip("libreoffice not found (CI installs libreoffice-calc)")
		}
	}
	path, _ := writeTrend(t, trendFixture())
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	out := t.TempDir()
	cmd := exec.CommandContext(ctx, lo, "--headless", "--norestore", "-env:UserInstallation=file://"+filepath.Join(t.TempDir(), "lo-profile"),
		"--convert-to", "pdf", "--outdir", out, path)
	if b, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("libreoffice --convert-to pdf: %v\n%s", err, b)
	}
	pdf := filepath.Join(out, "trend.pdf")
	fi, err := os.Stat(pdf)
	if err != nil || fi.Size() == 0 {
		t.Fatalf("no PDF: %v", err)
	}
	pdftotext, err := exec.LookPath("pdftotext")
	if err != nil {
		t.Logf("PDF of %d bytes; pdftotext not found, text not checked", fi.Size())
		return
	}
	txt, err := exec.CommandContext(ctx, pdftotext, "-layout", pdf, "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"L2603", "bench-A", "HX4107", "Page 1 of"} {
		if !strings.Contains(string(txt), want) {
			t.Errorf("the PDF does not show %q", want)
		}
	}
	if strings.Contains(string(txt), "###") {
		t.Errorf("the PDF shows ### (a clipped number):\n%s", txt)
	}
}

// TestTrendHzText: frequencies print to 4 significant figures without an
// exponent (rounding half away from zero, as printed by hand).
func TestTrendHzText(t *testing.T) {
	for _, c := range []struct {
		hz   float64
		want string
	}{
		{37.275937203149404, "37.28"}, {26830.4, "26830"}, {26835, "26840"}, {0.1, "0.1"},
		{1000, "1000"}, {123456789, "123500000"}, {0.0012345, "0.001235"}, {10, "10"}, {99.996, "100"},
	} {
		if got := hzText(c.hz); got != c.want {
			t.Errorf("hzText(%v) = %q, want %q", c.hz, got, c.want)
		}
	}
}

// TestTrendKeyFrequencyAndBounds: a chart at a sweep frequency names it
// rounded in its sheet name, key and chart title, and the key says that
// results known only as bounds are left out of the statistics.
func TestTrendKeyFrequencyAndBounds(t *testing.T) {
	tr := trendFixture()
	tr.Charts = tr.Charts[:1]
	tr.Charts[0].FrequencyHz = 37.275937203149404
	tr.Charts[0].Lots[0].BoundsOnly = 2
	path, f := writeTrend(t, tr)
	s1 := tr.Charts[0].Sheet(1)
	if s1 != "1 HX4107 cmrr 25°C 37.28Hz" {
		t.Fatalf("sheet name %q", s1)
	}
	kr := rowWith(t, f, s1, "A", "Quantity")
	if got := cellStr(t, f, s1, "B"+itoa(kr)); !strings.Contains(got, "at 25 °C, 37.28 Hz, in dB") {
		t.Errorf("quantity key %q", got)
	}
	lr := rowWith(t, f, s1, "A", "Lot values")
	if got := cellStr(t, f, s1, "B"+itoa(lr)); !strings.Contains(got, "left out of the lot mean, SD, control limits and tolerance bound") {
		t.Errorf("lot values key %q", got)
	}
	r := rowOf(t, f, s1, map[string]string{"Lot": "L2601"})
	if got := cellNum(t, f, s1, headerCol(t, f, s1, "Units with bounds only (n)")+itoa(r)); got != 2 {
		t.Errorf("bounds-only units = %v", got)
	}
	if _, ok := readLineCharts(t, path)["X̄ chart: HX4107 cmrr CMRR at 25 °C, 37.28 Hz"]; !ok {
		t.Errorf("no X̄ chart titled with 37.28 Hz; charts: %v", keys(readLineCharts(t, path)))
	}
}
