package report

import (
	"archive/zip"
	"bytes"
	"context"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"
)

// freqCampaign is two units' CMRR at eight log-spaced frequencies from
// 10 Hz to 100 kHz, each a single pole (R₀ 112 dB, f_c 300 Hz; R₀ 104 dB,
// f_c 800 Hz) with the top point of the first unit below the noise floor,
// a limit curve, budgets and pole fits.
func freqCampaign() *Campaign {
	nan := math.NaN()
	c := &Campaign{Name: "frequency workbook test", Part: "HX-4107", Lot: "L-TEST", Generator: "nullbench test"}
	freqs := []float64{10, 37.28, 138.9, 517.9, 1931, 7197, 26830, 100000}
	limits := []float64{90, 90, 90, 88, 80, 68, 57, 45}
	for ui, u := range []struct {
		id      string
		r0, fc  float64
		floorAt int
	}{{"F01", 112, 300, 7}, {"F02", 104, 800, -1}} {
		for i, f := range freqs {
			db := u.r0 - 10*math.Log10(1+(f/u.fc)*(f/u.fc))
			r := FreqResult{Result: Result{Unit: u.id, Test: "cmrr", TemperatureC: 25, CoefficientUVPerV: 1e6 * math.Pow(10, -db/20),
				RatioDB: db, ExpandedUDB: 0.3, ExpandedUDBLow: nan, ExpandedUDBHigh: nan, CoverageK: 2.05, DOFEffective: 30, Resolved: true,
				LowerBoundDB: nan, LimitDB: limits[i], Verdict: VerdictPass, Rule: "guarded"},
				Quantity: "CMRR", FrequencyHz: f, Instrument: "digitizer", PhaseDeg: math.Atan(f/u.fc) * 180 / math.Pi, PhaseExpandedUDeg: 0.5,
				HasPhase: true, Coverage: 0.95, NoiseFloorDB: 150 - 10*float64(i) + float64(ui)}
			if i == u.floorAt {
				r.Resolved, r.RatioDB, r.LowerBoundDB = false, nan, 55.5
				r.Notes = []string{"lower bound: below the noise floor"}
			}
			c.FreqResults = append(c.FreqResults, r)
			c.FreqBudgets = append(c.FreqBudgets, FreqBudgetRow{BudgetRow: BudgetRow{Unit: u.id, Test: "cmrr", TemperatureC: 25,
				Component: "sine fits of the stimulus records (Type A)", Kind: "A", Distribution: "normal", Value: nan, ValueUnit: "dB",
				StdUncertainty: 0.1, Sensitivity: 1, Contribution: 0.1, DOF: 30}, FrequencyHz: f, Quantity: "magnitude"})
		}
		c.FreqFits = append(c.FreqFits, FreqFitRow{Unit: u.id, Test: "cmrr", Quantity: "CMRR", TemperatureC: 25, Points: 8 - ui,
			LowFreqRatioDB: u.r0, LowFreqExpandedUDB: 0.2, CornerHz: u.fc, CornerExpandedUHz: 8, CoverageK: 2.45, CornerResolved: true,
			CornerLowerBoundHz: nan, DCChecked: true, DCRatioDB: u.r0 + 0.05, DCExpandedUDB: 0.1, DCDiffDB: -0.05, DCDiffExpandedUDB: 0.22, DCConsistent: true})
	}
	return c
}

// TestWorkbookFrequencySheetsAndBodeCharts: the frequency results get
// their three sheets, and the Bode charts (magnitude and phase) carry the
// units, the limit and the noise floor against a base-10 logarithmic
// frequency axis.
func TestWorkbookFrequencySheetsAndBodeCharts(t *testing.T) {
	c := freqCampaign()
	// The second unit's corner as a fit gives it, unrounded: the sheet
	// quotes it with U to two significant digits and f_c to match
	// (JCGM 100:2008 7.2.6).
	c.FreqFits[1].CornerHz, c.FreqFits[1].CornerExpandedUHz = 815.371370628783, 9.1063104792092
	var buf bytes.Buffer
	if err := WriteWorkbookTo(&buf, c, WorkbookOptions{}); err != nil {
		t.Fatal(err)
	}
	f, err := excelize.OpenReader(bytes.NewReader(buf.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sheets := f.GetSheetList()
	for _, s := range []string{SheetFreq, SheetFreqBudget, SheetFreqFits, SheetCharts} {
		if !slices.Contains(sheets, s) {
			t.Fatalf("sheets %v lack %q", sheets, s)
		}
	}
	rows, _ := f.GetRows(SheetFreq)
	if rows[0][4] != "Frequency (Hz)" || rows[0][7] != "Ratio 20·log10(10⁶ / |k(f)| in µV/V) (dB)" || rows[0][17] != "Phase arg k(f) (°)" {
		t.Errorf("Frequency header %q", rows[0])
	}
	data := 0
	for _, r := range rows[1:] {
		if len(r) == 0 {
			break
		}
		data++
	}
	if data != len(c.FreqResults) {
		t.Errorf("%d data rows on %s, want %d", data, SheetFreq, len(c.FreqResults))
	}
	// F01 at 100 kHz: a lower bound, stated as one.
	if r := rows[8]; r[0] != "F01" || r[4] != "100000" || r[12] != "no: lower bound" || !strings.HasPrefix(r[15], "≥ 55.50 dB") {
		t.Errorf("lower-bound row %q", r)
	}
	fits, _ := f.GetRows(SheetFreqFits)
	if len(fits) < 3 || fits[1][0] != "F01" || fits[1][7] != "300" || fits[1][16] != "agrees" {
		t.Errorf("pole fits %q", fits)
	}
	if len(fits) >= 3 && (fits[2][7] != "815.4" || fits[2][8] != "9.1") {
		t.Errorf("second unit's corner %q ± %q Hz, want 815.4 ± 9.1 (GUM 7.2.6)", fits[2][7], fits[2][8])
	}
	budget, _ := f.GetRows(SheetFreqBudget)
	if len(budget) < 17 || budget[1][3] != "10" || budget[1][4] != "magnitude" {
		t.Errorf("frequency budget rows %q", budget[:min(3, len(budget))])
	}
	summary, _ := f.GetRows(SheetSummary)
	if !strings.Contains(joinRows(summary), "Lowest CMRR") {
		t.Error("the Summary sheet has no frequency-response section")
	}

	// The chart parts: one magnitude and one phase chart, each with the
	// logarithmic frequency axis; the magnitude chart names the limit
	// and the noise floor series (their names are cells on Chart data).
	zr, err := zip.NewReader(bytes.NewReader(buf.Bytes()), int64(buf.Len()))
	if err != nil {
		t.Fatal(err)
	}
	logCharts := 0
	for _, zf := range zr.File {
		if !strings.HasPrefix(zf.Name, "xl/charts/chart") {
			continue
		}
		rc, _ := zf.Open()
		b, _ := io.ReadAll(rc)
		rc.Close()
		if !bytes.Contains(b, []byte(bodeXAxis)) {
			continue
		}
		x := regexp.MustCompile(`<(c:)?valAx><(c:)?axId val="100000000"></(c:)?axId><(c:)?scaling><(c:)?logBase val="10">`).Match(b)
		y := regexp.MustCompile(`<(c:)?axId val="100000001"></(c:)?axId><(c:)?scaling><(c:)?logBase`).Match(b)
		if !x || y {
			t.Errorf("%s: frequency axis logarithmic %v, ratio axis logarithmic %v", zf.Name, x, y)
		}
		logCharts++
	}
	if logCharts != 2 {
		t.Errorf("%d Bode charts with a logarithmic frequency axis, want 2 (magnitude, phase)", logCharts)
	}
	cd, _ := f.GetRows(SheetChartData)
	names := map[string]bool{}
	for _, r := range cd {
		if len(r) > 1 && strings.Contains(r[0], "against frequency") {
			names[r[1]] = true
		}
	}
	for _, s := range []string{"F01", "F02", "limit", "noise floor", "F01 lower bound"} {
		if !names[s] {
			t.Errorf("Bode chart data lack the series %q (have %v)", s, names)
		}
	}
}

func joinRows(rows [][]string) string {
	var b strings.Builder
	for _, r := range rows {
		b.WriteString(strings.Join(r, "\t"))
		b.WriteByte('\n')
	}
	return b.String()
}

// TestWorkbookWithBodeChartsOpensInLibreOffice converts the workbook to
// PDF with LibreOffice (headless): it opens, the Frequency sheet prints,
// and the magnitude chart's frequency axis is labelled in decades (10,
// 100, …, 100000: a logarithmic axis; a linear one from 10 Hz to 100 kHz
// would be labelled 20000, 40000, …). Skipped only when no libreoffice
// binary is found (.ci/run installs libreoffice-calc and poppler-utils).
func TestWorkbookWithBodeChartsOpensInLibreOffice(t *testing.T) {
	lo, err := exec.LookPath("libreoffice")
	if err != nil {
		if lo, err = exec.LookPath("soffice"); err != nil {
			t.Skip("libreoffice not found (CI installs libreoffice-calc)")
		}
	}
	pdftotext, err := exec.LookPath("pdftotext")
	if err != nil {
		t.Fatal("libreoffice is here but pdftotext is not: install poppler-utils (as .ci/run does)")
	}
	dir := t.TempDir()
	book := filepath.Join(dir, "freq.xlsx")
	if err := WriteWorkbook(book, freqCampaign(), WorkbookOptions{}); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, lo, "--headless", "--norestore", "-env:UserInstallation=file://"+filepath.Join(dir, "lo-profile"),
		"--convert-to", "pdf", "--outdir", dir, book)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("libreoffice --convert-to pdf: %v\n%s", err, out)
	}
	pdf := filepath.Join(dir, "freq.pdf")
	if fi, err := os.Stat(pdf); err != nil || fi.Size() == 0 {
		t.Fatalf("no PDF: %v", err)
	}
	txt, err := exec.CommandContext(ctx, pdftotext, "-layout", pdf, "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	text := string(txt)
	for _, want := range []string{"CMRR against frequency at 25 °C", bodeXAxis, "Noise floor:", "noise floor", "F01 lower bound"} {
		if !strings.Contains(text, want) {
			t.Errorf("the PDF does not show %q", want)
		}
	}
	i := strings.Index(text, "CMRR against frequency at 25 °C")
	if i < 0 {
		return
	}
	chart := text[i:min(len(text), i+4000)]
	if !regexp.MustCompile(`\b1000\b`).MatchString(chart) || !regexp.MustCompile(`\b10000\b`).MatchString(chart) || regexp.MustCompile(`\b20000\b`).MatchString(chart) {
		t.Errorf("the magnitude chart's frequency axis is not labelled in decades:\n%s", chart)
	}
}

// TestWritePlotsBode: --plots writes the Bode plots as PNG, the frequency
// axis logarithmic with its labelled ticks at the decades.
func TestWritePlotsBode(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "plots")
	files, err := WritePlots(dir, freqCampaign())
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, f := range files {
		names = append(names, filepath.Base(f))
		checkPNG(t, f)
	}
	if want := []string{"01-bode-ratio-cmrr-25C.png", "02-bode-phase-cmrr-25C.png"}; !slices.Equal(names, want) {
		t.Fatalf("files %q, want %q", names, want)
	}
	bc := bodeCharts(freqCampaign(), DefaultMaxChartUnits)
	ps, err := bodePlots(bc[0])
	if err != nil {
		t.Fatal(err)
	}
	var labels []string
	for _, tk := range ps[0].X.Tick.Marker.Ticks(ps[0].X.Min, ps[0].X.Max) {
		if tk.Label != "" {
			labels = append(labels, tk.Label)
		}
	}
	if want := []string{"10", "100", "1000", "10000", "100000"}; !slices.Equal(labels, want) || ps[0].X.Min != 10 || ps[0].X.Max != 1e5 {
		t.Errorf("frequency axis %g … %g labelled %q, want decades %q", ps[0].X.Min, ps[0].X.Max, labels, want)
	}
	if len(bc[0].Limit) != 8 || len(bc[0].Floor) != 8 || bc[0].Floor[0].Y != 150 {
		t.Errorf("limit %v, noise floor %v (the lowest of the units at each frequency)", bc[0].Limit, bc[0].Floor)
	}
}

// TestFreqSummaryNamesFrequencyPlainly: the Summary sheet names the
// frequency of the lowest ratio to five significant digits in plain
// decimals, not with every digit of a log-spaced set point (or %g's
// exponent form).
func TestFreqSummaryNamesFrequencyPlainly(t *testing.T) {
	c := freqCampaign()
	c.FreqResults[7].FrequencyHz = 26826.957952797256 // F01's lower bound, the lowest reported ratio
	var buf bytes.Buffer
	if err := WriteWorkbookTo(&buf, c, WorkbookOptions{}); err != nil {
		t.Fatal(err)
	}
	f, err := excelize.OpenReader(bytes.NewReader(buf.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	summary, _ := f.GetRows(SheetSummary)
	if s := joinRows(summary); !strings.Contains(s, "at 26827 Hz, unit F01") {
		t.Errorf("the Summary sheet's lowest CMRR does not name 26827 Hz:\n%s", s)
	}
}
