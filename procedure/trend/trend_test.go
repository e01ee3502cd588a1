package trend

import (
	"bufio"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"

	"nullbench/fit"
	"nullbench/report"
)

var day0 = time.Date(2026, 3, 1, 8, 0, 0, 0, time.UTC)

func day(d int) time.Time { return day0.AddDate(0, 0, d) }

// pistonRows reads Montgomery's Table 6.3 (testdata/piston_rings_t6_3.txt,
// 25 subgroups of 5 piston-ring diameters in mm, source in its header) as
// 25 lots of 5 units measured on successive days, in shuffled row order.
// The numbers are carried as "dB" only because a row needs a unit: the
// statistics do not care.
func pistonRows(t *testing.T) []Row {
	t.Helper()
	f, err := os.Open(filepath.Join("testdata", "piston_rings_t6_3.txt"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var rows []Row
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
		fs := strings.Fields(line)
		lot, _ := strconv.Atoi(fs[0])
		for j, v := range fs[1:] {
			x, err := strconv.ParseFloat(v, 64)
			if err != nil {
				t.Fatal(err)
			}
			rows = append(rows, Row{
				Part: "RING-74", Lot: "L" + fs[0], Unit: "u" + strconv.Itoa(j+1), Test: "diameter",
				TemperatureC: 25, Bench: "bench-A", Value: x, ValueUnit: UnitDB, Decision: "not judged",
				Limit: math.NaN(), Date: day(lot),
			})
		}
	}
	if len(rows) != 125 {
		t.Fatalf("read %d values, want 125", len(rows))
	}
	rand.New(rand.NewPCG(1, 2)).Shuffle(len(rows), func(i, j int) { rows[i], rows[j] = rows[j], rows[i] })
	return rows
}

// TestBuildPistonRings: the trend of Montgomery's piston rings (Table 6.3)
// has the X̄ limits of his Example 6.3 (73.988 … 74.014 mm, x̿ = 74.001; from
// memory of the book, computed there from x̿ and s̄ rounded, so compared to
// ±0.001 mm), with the pooled SD (default) and with the mean-of-s estimate
// the example uses, for which the s chart's UCL is the example's 0.0196 mm.
// Lots come out in time order although the rows are shuffled.
func TestBuildPistonRings(t *testing.T) {
	rows := pistonRows(t)
	for _, est := range []fit.SigmaEstimator{fit.SigmaPooled, fit.SigmaMeanS} {
		t.Run(est.String(), func(t *testing.T) {
			tr, err := Build(rows, Options{Estimator: est})
			if err != nil {
				t.Fatal(err)
			}
			if len(tr.Charts) != 1 {
				t.Fatalf("%d charts", len(tr.Charts))
			}
			c := tr.Charts[0]
			if len(c.Lots) != 25 || c.ChartError != "" {
				t.Fatalf("%d lots, chart error %q", len(c.Lots), c.ChartError)
			}
			for i, l := range c.Lots {
				if l.Lot != "L"+strconv.Itoa(i+1) {
					t.Fatalf("lot %d is %s: not in time order", i+1, l.Lot)
				}
				// Example 6.3: X̄ chart 73.988 … 74.014 mm
				if math.Abs(l.MeanUCL-74.014) > 0.001 || math.Abs(l.MeanLCL-73.988) > 0.001 {
					t.Errorf("lot %s limits %.5f … %.5f; Example 6.3: 73.988 … 74.014", l.Lot, l.MeanLCL, l.MeanUCL)
				}
				if l.MeanOut || l.SDOut {
					t.Errorf("lot %s flagged; Example 6.3 finds the process in control", l.Lot)
				}
				if !math.IsNaN(l.Yield) || l.Judged != 0 {
					t.Errorf("lot %s: yield %v of %d judged with no decisions", l.Lot, l.Yield, l.Judged)
				}
			}
			// Example 6.3: x̿ = 74.001
			if math.Abs(c.GrandMean-74.001) > 0.0005 {
				t.Errorf("x̿ = %.5f; Example 6.3: 74.001", c.GrandMean)
			}
			if est == fit.SigmaMeanS {
				// Example 6.3: s chart UCL = 2.089·0.0094 = 0.0196 mm
				if u := c.Lots[0].SDUCL; math.Abs(u-0.0196) > 0.0001 {
					t.Errorf("s UCL = %.5f; Example 6.3: 0.0196", u)
				}
			}
			if c.PooledDOF != 100 {
				t.Errorf("ν = %d, want 25·4 = 100", c.PooledDOF)
			}
		})
	}
}

// TestTrendWorkbookPistonLimits writes the piston-ring trend and reads the
// control limits back from the workbook: Example 6.3's 74.014 and 73.988 mm
// (±0.001, see TestBuildPistonRings).
func TestTrendWorkbookPistonLimits(t *testing.T) {
	tr, err := Build(pistonRows(t), Options{Title: "piston rings", Generated: day(30)})
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "trend.xlsx")
	if err := report.WriteTrendWorkbook(path, tr, report.TrendOptions{}); err != nil {
		t.Fatal(err)
	}
	f, err := excelize.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sheet := tr.Charts[0].Sheet(1)
	head, err := f.GetRows(sheet)
	if err != nil {
		t.Fatal(err)
	}
	col := func(h string) string {
		for i, x := range head[0] {
			if x == h {
				c, _ := excelize.ColumnNumberToName(i + 1)
				return c
			}
		}
		t.Fatalf("no column %q in %q", h, head[0])
		return ""
	}
	read := func(cell string) float64 {
		v, err := f.GetCellValue(sheet, cell, excelize.Options{RawCellValue: true})
		if err != nil {
			t.Fatal(err)
		}
		x, err := strconv.ParseFloat(v, 64)
		if err != nil {
			t.Fatalf("%s = %q", cell, v)
		}
		return x
	}
	for r := 2; r <= 26; r++ {
		ucl, lcl := read(col("X̄ UCL (dB)")+strconv.Itoa(r)), read(col("X̄ LCL (dB)")+strconv.Itoa(r))
		// Montgomery Example 6.3: 74.014 and 73.988
		if math.Abs(ucl-74.014) > 0.001 || math.Abs(lcl-73.988) > 0.001 {
			t.Errorf("row %d: limits %.5f … %.5f; Example 6.3: 73.988 … 74.014", r, lcl, ucl)
		}
	}
}

// handRows: two lots of an invented part, hand-computed below.
//
// Lot L1 (bench A, 2026-03-09): units a..e = 100, 102, 98, 104, 101 dB,
// decisions pass, pass, fail, conditional pass, pass. Mean 101, SD =
// √(20/4) = 2.23607; k(5; 0.95, 0.95) = 4.203 (Montgomery & Runger Table
// XII, one-sided, as in fit/testdata/reference) → lower tolerance bound
// 101 − 4.203·2.23607 = 91.602 dB; yield 4/5 = 0.8.
//
// Lot L2 (2026-03-02, so it comes first): unit x 90.0 and 90.2 on bench A
// and 90.5 on bench B; unit y 91.0, 91.4, 91.2 on bench A; unit z 95 on
// bench B and an unresolved 120 (lower bound) on bench B; unit w only an
// unresolved 130 (lower bound). Not judged.
//
// Lot L3 (2026-03-12): units p, q only unresolved (lower bounds 125, 128).
// Bench A repeatability: x s² = 0.02 (ν 1), y s² = 0.04 (ν 2), s_r² =
// (0.02 + 0.08)/3 = 0.033333, s_r = 0.182574 dB, ν = 3, from 2 units and 5
// results. Bench B: no unit measured twice with values (z's second result
// is a bound), so no row. Bounds are not values, so L2 unit values are
// x (90.0+90.2+90.5)/3 = 90.2333, y 91.2, z 95 (its bound left out); w
// has no value and is counted as bounds only. L3 has no value at all: it
// is listed with its 2 bounds-only units but is no chart point, so the
// chart has L2 and L1 with ν = 2 + 4 = 6. 4 bound results in all.
func handRows() []Row {
	r := func(lot, unit, bench string, v float64, dec string, d int) Row {
		return Row{Part: "HX4107", Lot: lot, Unit: unit, Test: "cmrr", TemperatureC: 25, Bench: bench,
			Value: v, ValueUnit: UnitDB, Decision: dec, Limit: 99, Date: day(d)}
	}
	bound := func(lot, unit string, v float64, d int) Row {
		b := r(lot, unit, "bench-B", v, "not judged", d)
		b.BoundOnly = true
		return b
	}
	return []Row{
		r("L2", "x", "bench-A", 90.0, "not judged", 1),
		r("L2", "x", "bench-A", 90.2, "not judged", 1),
		r("L2", "x", "bench-B", 90.5, "not judged", 3),
		r("L2", "y", "bench-A", 91.0, "not judged", 1),
		r("L2", "y", "bench-A", 91.4, "not judged", 1),
		r("L2", "y", "bench-A", 91.2, "not judged", 1),
		r("L2", "z", "bench-B", 95, "not judged", 2),
		bound("L2", "z", 120, 2),
		bound("L2", "w", 130, 2),
		bound("L3", "p", 125, 11),
		bound("L3", "q", 128, 11),
		r("L1", "a", "bench-A", 100, "pass", 8),
		r("L1", "b", "bench-A", 102, "pass", 8),
		r("L1", "c", "bench-A", 98, "fail", 8),
		r("L1", "d", "bench-A", 104, "conditional pass", 8),
		r("L1", "e", "bench-A", 101, "pass", 8),
		r("L1", "f", "bench-A", math.NaN(), "no result", 8),
	}
}

func TestBuildHand(t *testing.T) {
	tr, err := Build(handRows(), Options{})
	if err != nil {
		t.Fatal(err)
	}
	near := func(name string, got, want, tol float64) {
		t.Helper()
		if math.Abs(got-want) > tol {
			t.Errorf("%s = %.6f, hand %.6f", name, got, want)
		}
	}
	c := tr.Charts[0]
	if len(c.Lots) != 3 || c.Lots[0].Lot != "L2" || c.Lots[1].Lot != "L1" || c.Lots[2].Lot != "L3" {
		t.Fatalf("lots %+v", c.Lots)
	}
	l2, l1, l3 := c.Lots[0], c.Lots[1], c.Lots[2]
	if l1.N != 5 || l1.Judged != 5 || l1.Passed != 4 {
		t.Errorf("L1 n %d judged %d passed %d; hand 5, 5, 4", l1.N, l1.Judged, l1.Passed)
	}
	near("L1 yield", l1.Yield, 0.8, 1e-12)
	near("L1 mean", l1.Mean, 101, 1e-12)
	near("L1 SD", l1.SD, math.Sqrt(5), 1e-12)
	// k = 4.203 printed to 3 decimals: bound known to ±0.0005·2.236
	near("L1 lower tolerance bound", l1.ToleranceBound, 91.602, 0.0015)
	if c.BoundSide != "lower" || c.LimitValue != 99 {
		t.Errorf("bound side %q, limit %v", c.BoundSide, c.LimitValue)
	}
	if l2.N != 3 || l2.BoundsOnly != 1 || l2.Judged != 0 || !math.IsNaN(l2.Yield) {
		t.Errorf("L2: %+v", l2)
	}
	near("L2 mean", l2.Mean, (90.2333333333333+91.2+95)/3, 1e-9)
	// hand: deviations −1.91111, −0.94444, 2.85556 from 92.14444, Σ² = 12.69852, /2 → s = 2.51977
	near("L2 SD", l2.SD, 2.51977, 1e-5)
	// L3: only bounds, listed without values or limits
	if l3.N != 0 || l3.BoundsOnly != 2 || !math.IsNaN(l3.Mean) || !math.IsNaN(l3.MeanUCL) || !math.IsNaN(l3.ToleranceBound) {
		t.Errorf("L3 (bounds only): %+v", l3)
	}
	if strings.Join(l2.Benches, ",") != "bench-A,bench-B" {
		t.Errorf("L2 benches %q", l2.Benches)
	}
	if !l2.First.Equal(day(1)) || !l2.Last.Equal(day(3)) {
		t.Errorf("L2 dates %v … %v", l2.First, l2.Last)
	}
	// control limits exist (ν = 4 + 2) and use each lot's own n
	if c.PooledDOF != 6 || c.ChartError != "" {
		t.Errorf("ν = %d, chart error %q", c.PooledDOF, c.ChartError)
	}
	near("L1 half width", (l1.MeanUCL-l1.MeanLCL)/2, 3*c.SigmaHat/math.Sqrt(5), 1e-9)
	near("L2 half width", (l2.MeanUCL-l2.MeanLCL)/2, 3*c.SigmaHat/math.Sqrt(3), 1e-9)

	if len(tr.Repeatability) != 1 {
		t.Fatalf("repeatability rows %+v, hand: one (bench A)", tr.Repeatability)
	}
	rp := tr.Repeatability[0]
	if rp.Bench != "bench-A" || rp.DOF != 3 || rp.Units != 2 || rp.Repeats != 5 {
		t.Errorf("repeatability %+v; hand bench-A ν 3, 2 units, 5 results", rp)
	}
	near("s_r", rp.SD, math.Sqrt(0.1/3), 1e-9)
	if len(tr.Notes) != 2 || !strings.Contains(tr.Notes[0], "1 results without a value") || !strings.Contains(tr.Notes[1], "4 results not resolved") {
		t.Errorf("notes %q", tr.Notes)
	}
}

// TestBuildCoefficients: µV/V coefficients enter by magnitude, their
// tolerance bound is an upper one; a chart with one lot has no limits and
// says why.
func TestBuildCoefficients(t *testing.T) {
	rows := []Row{
		{Part: "HX4107", Lot: "L1", Unit: "a", Test: "psrr_pos", TemperatureC: 85, Value: -2, ValueUnit: UnitUVPerV, Decision: "pass", Limit: math.NaN(), Date: day(1)},
		{Part: "HX4107", Lot: "L1", Unit: "b", Test: "psrr_pos", TemperatureC: 85, Value: -3, ValueUnit: UnitUVPerV, Decision: "pass", Limit: math.NaN(), Date: day(1)},
	}
	tr, err := Build(rows, Options{})
	if err != nil {
		t.Fatal(err)
	}
	c := tr.Charts[0]
	l := c.Lots[0]
	if l.Mean != 2.5 || c.BoundSide != "upper" || l.ToleranceBound <= l.Mean {
		t.Errorf("mean %v side %q bound %v", l.Mean, c.BoundSide, l.ToleranceBound)
	}
	if c.ChartError == "" || !math.IsNaN(l.MeanUCL) {
		t.Errorf("one lot: chart error %q, UCL %v", c.ChartError, l.MeanUCL)
	}
	if _, err := Build([]Row{{Part: "P", ValueUnit: "V", Value: 1}}, Options{}); err == nil || !strings.Contains(err.Error(), `"V"`) {
		t.Errorf("a value in volts: %v", err)
	}
}

// TestQuantityConventions: each test's convention names its own quantity
// (JEDEC JESD99B: k_CMR for common-mode rejection, k_SVR and its reciprocal
// k_SVS for supply rejection; the open-loop gain is a gain, not a
// rejection ratio — symbols from memory).
func TestQuantityConventions(t *testing.T) {
	cases := []struct {
		test, unit    string
		want, mustNot []string
	}{
		{"cmrr", UnitDB, []string{"k_CMR", "ΔV_IC/ΔV_IO"}, []string{"k_SV"}},
		{"cmrr", UnitUVPerV, []string{"ΔV_IO/ΔV_IC", "reciprocal of JESD99B's k_CMR"}, []string{"k_SVS", "k_SVR"}},
		{"psrr_pos", UnitDB, []string{"k_SVR", "ΔV_S/ΔV_IO"}, []string{"k_CMR", "k_SVS"}},
		{"psrr_neg", UnitUVPerV, []string{"k_SVS", "ΔV_IO/ΔV_S"}, []string{"k_CMR"}},
		{"aol", UnitDB, []string{"open-loop gain", "ΔV_O/ΔV_IO", "not a rejection ratio"}, []string{"k_CMR", "k_SVR"}},
		{"aol", UnitUVPerV, []string{"ΔV_IO/ΔV_O"}, []string{"k_CMR", "k_SV"}},
		{"board_cmrr", UnitDB, []string{"A_d/|A_cm|"}, []string{"k_SV"}},
		{"cmrr_uncorrected", UnitDB, []string{"k_c + k_o", "not corrected"}, []string{"k_SV", "k_CMR"}},
	}
	for _, c := range cases {
		_, conv := quantity(chartKey{test: c.test, unit: c.unit})
		for _, w := range c.want {
			if !strings.Contains(conv, w) {
				t.Errorf("%s %s: convention %q lacks %q", c.test, c.unit, conv, w)
			}
		}
		for _, w := range c.mustNot {
			if strings.Contains(conv, w) {
				t.Errorf("%s %s: convention %q names %q", c.test, c.unit, conv, w)
			}
		}
	}
}

// TestBuildCoefficientBoundsOnly: an unresolved coefficient (µV/V) is not a
// value either: with units 2, 3 µV/V and an unresolved 0.4 µV/V the lot
// mean is 2.5 (hand), not 1.8, and the unit is counted as bounds only.
func TestBuildCoefficientBoundsOnly(t *testing.T) {
	row := func(u string, v float64, bound bool) Row {
		return Row{Part: "HX4107", Lot: "L1", Unit: u, Test: "psrr_pos", TemperatureC: 25, Value: v, ValueUnit: UnitUVPerV,
			BoundOnly: bound, Decision: "pass", Limit: math.NaN(), Date: day(1)}
	}
	tr, err := Build([]Row{row("a", 2, false), row("b", -3, false), row("c", 0.4, true)}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	l := tr.Charts[0].Lots[0]
	if l.N != 2 || l.BoundsOnly != 1 || l.Mean != 2.5 || l.Judged != 3 {
		t.Errorf("lot %+v; hand n 2, bounds only 1, mean 2.5, judged 3", l)
	}
}
