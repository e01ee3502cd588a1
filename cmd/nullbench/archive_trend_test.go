package main

import (
	"bufio"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"

	"nullbench/procedure/archive"
	"nullbench/report"
)

// trendCampaign is an invented campaign with one result per unit: serial
// → value (dB), all "not judged".
func trendCampaign(key, part, lot, test, bench string, day int, units [][2]string, values []float64) *archive.Campaign {
	h := sha256.Sum256([]byte(key))
	started := time.Date(2026, 3, 1, 8, 0, 0, 0, time.UTC).AddDate(0, 0, day)
	c := &archive.Campaign{JournalHash: hex.EncodeToString(h[:]), Part: part, Lot: lot, Bench: bench, Name: key,
		Started: started, Finished: started.Add(time.Hour), TemperaturesC: []float64{25}}
	for i, u := range units {
		c.Units = append(c.Units, archive.Unit{ID: u[0], Serial: u[1]})
		c.Results = append(c.Results, archive.Result{Unit: u[0], Test: test, TemperatureC: 25,
			CoefficientUVPerV: 1e6 * math.Pow(10, -values[i]/20), CoefficientStdUUVPerV: math.NaN(), CoefficientExpandedUUVPerV: math.NaN(),
			RatioDB: values[i], ExpandedUDB: math.NaN(), CoverageK: math.NaN(), DOFEffective: math.NaN(), Resolved: true,
			LowerBoundDB: math.NaN(), LimitDB: math.NaN(), PhaseDeg: math.NaN(), Verdict: "not judged", Rule: "guarded"})
	}
	return c
}

// readPistonRings reads Montgomery's Table 6.3 (testdata/reference, source
// in its header): 25 subgroups of 5 piston-ring diameters.
func readPistonRings(t *testing.T) [][]float64 {
	t.Helper()
	f, err := os.Open(filepath.Join("testdata", "reference", "piston_rings_t6_3.txt"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out [][]float64
	sc := bufio.NewScanner(f)
	header := false
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		if !header {
			header = true
			continue
		}
		var g []float64
		for _, v := range strings.Fields(line)[1:] {
			x, err := strconv.ParseFloat(v, 64)
			if err != nil {
				t.Fatal(err)
			}
			g = append(g, x)
		}
		out = append(out, g)
	}
	if len(out) != 25 {
		t.Fatalf("%d subgroups, want 25", len(out))
	}
	return out
}

// sheetColumn returns the raw values below the header cell named header
// on sheet, down to the first empty one.
func sheetColumn(t *testing.T, f *excelize.File, sheet, header string) []string {
	t.Helper()
	rows, err := f.GetRows(sheet)
	if err != nil {
		t.Fatal(err)
	}
	for r, row := range rows {
		for c, v := range row {
			if v != header {
				continue
			}
			var out []string
			for rr := r + 1; rr < len(rows); rr++ {
				cell, _ := excelize.CoordinatesToCellName(c+1, rr+1)
				x, err := f.GetCellValue(sheet, cell, excelize.Options{RawCellValue: true})
				if err != nil || x == "" {
					break
				}
				out = append(out, x)
			}
			return out
		}
	}
	t.Fatalf("sheet %q has no column %q", sheet, header)
	return nil
}

// TestArchiveTrendWorkbook stores Montgomery's piston rings as 25 lots
// (one campaign each) and four campaigns that measure two units again,
// under other unit ids, on two benches; "archive trend" then writes the
// workbook, whose control limits and repeatability are checked against
// the published and hand-computed figures.
func TestArchiveTrendWorkbook(t *testing.T) {
	ctx := context.Background()
	db := filepath.Join(t.TempDir(), "trend.db")
	s, err := archive.Open(ctx, db)
	if err != nil {
		t.Fatal(err)
	}
	for i, g := range readPistonRings(t) {
		lot := fmt.Sprintf("R%02d", i+1)
		var units [][2]string
		for j := range g {
			units = append(units, [2]string{fmt.Sprintf("U%d", j+1), fmt.Sprintf("%s-%d", lot, j+1)})
		}
		if _, _, err := s.Add(ctx, trendCampaign("piston "+lot, "RING-74", lot, "diameter", "bench-A", i, units, g)); err != nil {
			t.Fatal(err)
		}
	}
	// Units with serials SX and SY of lot L2 measured four times (invented
	// values): on bench A SX 90.0, 90.2 and SY 91.0, 91.4, 91.2; on bench B
	// SX 90.5. Hand computation: bench A s_x² = 0.02 (ν 1), s_y² = 0.04
	// (ν 2), s_r = √((1·0.02 + 2·0.04)/3) = 0.182574 dB, ν = 3, 2 units, 5
	// results; bench B has no unit measured twice.
	for _, c := range []*archive.Campaign{
		trendCampaign("rep 1", "HX-4107", "L2", "cmrr", "bench-A", 30, [][2]string{{"U1", "SX"}, {"U2", "SY"}}, []float64{90.0, 91.0}),
		trendCampaign("rep 2", "HX-4107", "L2", "cmrr", "bench-A", 31, [][2]string{{"U1", "SY"}, {"U2", "SX"}}, []float64{91.4, 90.2}),
		trendCampaign("rep 3", "HX-4107", "L2", "cmrr", "bench-A", 32, [][2]string{{"U7", "SY"}}, []float64{91.2}),
		trendCampaign("rep 4", "HX-4107", "L2", "cmrr", "bench-B", 33, [][2]string{{"U3", "SX"}}, []float64{90.5}),
	} {
		if _, _, err := s.Add(ctx, c); err != nil {
			t.Fatal(err)
		}
	}
	s.Close()

	out := filepath.Join(t.TempDir(), "trend.xlsx")
	args := []string{"archive", "--db", db, "trend", "--out", out}
	r := cliExec(t, args...)
	cliWantCode(t, r, exitOK, args...)
	if !strings.Contains(r.out, "131 results, 2 charts (part × test × temperature × frequency)") || !strings.Contains(r.out, "1 bench repeatability rows") {
		t.Errorf("summary: %s", r.out)
	}
	f, err := excelize.OpenFile(out)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()

	sheet := report.TrendChart{Part: "RING-74", Test: "diameter", TemperatureC: 25}.Sheet(2)
	ucl, lcl := sheetColumn(t, f, sheet, "X̄ UCL (dB)"), sheetColumn(t, f, sheet, "X̄ LCL (dB)")
	lots := sheetColumn(t, f, sheet, "Lot")
	if len(ucl) != 25 || len(lcl) != 25 || lots[0] != "R01" || lots[24] != "R25" {
		t.Fatalf("%d lots (%v), %d/%d limits", len(lots), lots, len(ucl), len(lcl))
	}
	for i := range ucl {
		u, _ := strconv.ParseFloat(ucl[i], 64)
		l, _ := strconv.ParseFloat(lcl[i], 64)
		// Montgomery, Introduction to Statistical Quality Control, Example
		// 6.3: X̄ chart 73.988 … 74.014 mm (from memory of the book, see
		// the data file's header; computed there from rounded x̿ and s̄,
		// so ±0.001).
		if math.Abs(u-74.014) > 0.001 || math.Abs(l-73.988) > 0.001 {
			t.Errorf("lot %s: X̄ limits %.5f … %.5f; Example 6.3: 73.988 … 74.014", lots[i], l, u)
		}
	}

	benches := sheetColumn(t, f, report.SheetRepeatability, "Bench")
	sr := sheetColumn(t, f, report.SheetRepeatability, "Repeatability SD s_r")
	dof := sheetColumn(t, f, report.SheetRepeatability, "Degrees of freedom ν")
	if len(benches) != 1 || benches[0] != "bench-A" {
		t.Fatalf("repeatability rows for %v, want bench-A only", benches)
	}
	if x, _ := strconv.ParseFloat(sr[0], 64); math.Abs(x-0.182574) > 1e-6 || dof[0] != "3" {
		t.Errorf("bench-A repeatability %s dB with ν %s; hand computation 0.182574 dB, ν 3", sr[0], dof[0])
	}

	// Selections that match nothing, or bad options, say so.
	for _, tc := range []struct {
		args []string
		code int
		want string
	}{
		{[]string{"--part", "HX-9999"}, exitFailure, "no archived results"},
		{[]string{"--estimator", "median"}, exitUsage, "--estimator"},
		{[]string{"--coverage", "1.5"}, exitUsage, "--coverage"},
	} {
		args := append([]string{"archive", "--db", db, "trend", "--out", out}, tc.args...)
		r := cliExec(t, args...)
		cliWantCode(t, r, tc.code, args...)
		if !strings.Contains(r.err, tc.want) {
			t.Errorf("%v: %s", tc.args, r.err)
		}
	}
	args = []string{"archive", "--db", db, "trend", "--out", filepath.Join(t.TempDir(), "trend.csv")}
	cliWantCode(t, cliExec(t, args...), exitUsage, args...)
}
