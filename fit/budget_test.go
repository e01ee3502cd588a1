package fit

import (
	"encoding/json"
	"errors"
	"math"
	"strings"
	"testing"
)

// TestStudentTTable checks StudentTQuantile against the NIST/SEMATECH
// e-Handbook §1.3.6.7.2 table of Student's t critical values (via the
// reproduction named in fit/testdata/reference/student_t_quantiles.txt), every
// row and column, to the 3 decimals printed.
func TestStudentTTable(t *testing.T) {
	tab := loadRef(t, "student_t_quantiles.txt")
	nus, ok := tab.Column("nu")
	if !ok || len(nus) < 30 {
		t.Fatalf("nu column: %d rows", len(nus))
	}
	checked := 0
	for ci, name := range tab.Columns {
		if !strings.HasPrefix(name, "t_") {
			continue
		}
		p := mustFloat(t, strings.TrimPrefix(name, "t_"))
		for ri, nu := range nus {
			want := tab.Data[ci][ri]
			got := StudentTQuantile(p, DOF(nu))
			// NIST/SEMATECH e-Handbook t table, 3 decimals.
			if math.Abs(got-want) > 0.0005+1e-9 {
				t.Errorf("t_%v(ν=%v) = %.5f, table %.3f", p, nu, got, want)
			}
			checked++
		}
	}
	if checked < 150 {
		t.Fatalf("only %d table entries checked", checked)
	}
}

func mustFloat(t *testing.T, s string) float64 {
	t.Helper()
	v, err := parseNum(s)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// TestCoverageFactorGUMTableG2 checks k = t_p(ν) at 95.45 % and 95 % against
// GUM Table G.2, to the 2 decimals given.
func TestCoverageFactorGUMTableG2(t *testing.T) {
	cases := []struct {
		nu   DOF
		p    float64
		want float64
	}{
		{5, 0.9545, 2.65}, {10, 0.9545, 2.28}, {20, 0.9545, 2.13}, {50, 0.9545, 2.05}, {InfDOF, 0.9545, 2.00}, // GUM Table G.2 (JCGM 100:2008 (GUM))
		{10, 0.95, 2.23}, {InfDOF, 0.95, 1.96}, // GUM Table G.2 (JCGM 100:2008 (GUM))
	}
	for _, c := range cases {
		if got := CoverageFactor(c.nu, c.p); math.Abs(got-c.want) > 0.005 {
			t.Errorf("k(ν=%v, p=%v) = %.4f, GUM G.2 %.2f", float64(c.nu), c.p, got, c.want)
		}
	}
	if !math.IsNaN(CoverageFactor(0, 0.95)) || !math.IsNaN(StudentTQuantile(1.2, 5)) {
		t.Error("invalid ν or p should give NaN")
	}
}

// TestDBFromRel: u_dB = (20/ln10)·u_rel; JCGM 100:2008 (GUM): 1 % → 0.087 dB,
// 5 % → 0.434 dB, 10 % → 0.869 dB (to the 3 decimals given).
func TestDBFromRel(t *testing.T) {
	for _, c := range []struct{ rel, db float64 }{{0.01, 0.087}, {0.05, 0.434}, {0.10, 0.869}} {
		if got := DBFromRel(c.rel); math.Abs(got-c.db) > 0.0005 {
			t.Errorf("%v → %.4f dB, JCGM 100:2008 (GUM) %.3f", c.rel, got, c.db)
		}
	}
}

// TestWelchSatterthwaite: algebraic cases of GUM eq. G.2b.
func TestWelchSatterthwaite(t *testing.T) {
	cases := []struct {
		name string
		u    []float64
		dof  []DOF
		want DOF
	}{
		{"two equal, ν=10 each → 20", []float64{1, 1}, []DOF{10, 10}, 20},
		{"one finite only", []float64{3}, []DOF{7}, 7},
		{"Type B dominates: 1 & 3 (ν=4, ∞) → 4·10²/1 = 400", []float64{1, 3}, []DOF{4, InfDOF}, 400},
		{"all infinite", []float64{1, 2}, []DOF{InfDOF, InfDOF}, InfDOF},
		{"all zero", []float64{0, 0}, []DOF{3, 3}, InfDOF},
		{"tiny values do not underflow", []float64{1e-90, 1e-90}, []DOF{5, 5}, 10},
	}
	for _, c := range cases {
		got := WelchSatterthwaite(c.u, c.dof)
		if c.want.IsInf() {
			if !got.IsInf() {
				t.Errorf("%s: %v, want inf", c.name, float64(got))
			}
			continue
		}
		if math.Abs(float64(got-c.want)) > 1e-9*float64(c.want) {
			t.Errorf("%s: %v, want %v", c.name, float64(got), float64(c.want))
		}
	}
}

func TestCombineErrors(t *testing.T) {
	ok := BudgetRow{Name: "a", Kind: "A", StdUncertainty: 1, Sensitivity: 1, DOF: 3}
	cases := []struct {
		name string
		row  BudgetRow
		cov  float64
	}{
		{"negative u", BudgetRow{Name: "x", Kind: "B", StdUncertainty: -1, Sensitivity: 1, DOF: InfDOF}, 0},
		{"zero dof", BudgetRow{Name: "x", Kind: "A", StdUncertainty: 1, Sensitivity: 1}, 0},
		{"bad kind", BudgetRow{Name: "x", Kind: "C", StdUncertainty: 1, Sensitivity: 1, DOF: 2}, 0},
		{"NaN sensitivity", BudgetRow{Name: "x", Kind: "A", StdUncertainty: 1, Sensitivity: math.NaN(), DOF: 2}, 0},
		{"coverage 1", ok, 1},
	}
	for _, c := range cases {
		_, err := Combine("m", "u", 0, []BudgetRow{c.row}, c.cov)
		if !errors.Is(err, ErrBadInput) {
			t.Errorf("%s: err = %v", c.name, err)
		}
	}
}

// TestCombineRSS: u_c² = Σ(c_i u_i)² (GUM 5.1.2), contributions |c|·u,
// k from ν_eff, U = k·u_c.
func TestCombineRSS(t *testing.T) {
	rows := []BudgetRow{
		{Name: "A", Kind: "A", Distribution: DistT, StdUncertainty: 0.3, Sensitivity: -10, DOF: 9},
		{Name: "B", Kind: "B", Distribution: DistRectangular, StdUncertainty: RectangularStdUnc(2 * math.Sqrt(3)), Sensitivity: 2, DOF: InfDOF},
	}
	b, err := Combine("m", "µV/V", 1, rows, 0)
	if err != nil {
		t.Fatal(err)
	}
	// contributions 3 and 4 → u_c = 5; ν_eff = 5⁴/(3⁴/9) = 625/9.
	if b.Rows[0].Contribution != 3 || math.Abs(b.Rows[1].Contribution-4) > 1e-15 {
		t.Errorf("contributions %v, %v", b.Rows[0].Contribution, b.Rows[1].Contribution)
	}
	if math.Abs(b.CombinedStdUnc-5) > 1e-14 || math.Abs(float64(b.EffectiveDOF)-625.0/9) > 1e-9 {
		t.Errorf("u_c %v ν_eff %v", b.CombinedStdUnc, float64(b.EffectiveDOF))
	}
	if k := CoverageFactor(625.0/9, 0.95); b.CoverageK != k || math.Abs(b.ExpandedU-5*k) > 1e-14 || b.CoverageProbability != 0.95 {
		t.Errorf("k %v U %v p %v", b.CoverageK, b.ExpandedU, b.CoverageProbability)
	}
}

// TestGUMH3 checks the straight-line calibration of GUM (JCGM 100:2008)
// Annex H.3 (data and published results via the reproductions named in
// fit/testdata/reference/gum_h3_thermometer_calibration.txt): b(t) = y1 + y2·(t − t0),
// t0 = 20 °C. Each value must round to the digits the GUM prints.
func TestGUMH3(t *testing.T) {
	tab := loadRef(t, "gum_h3_thermometer_calibration.txt")
	tk, _ := tab.Column("t_k")
	bk, _ := tab.Column("b_k")
	if len(tk) != 11 {
		t.Fatalf("%d readings, GUM H.3 has 11", len(tk))
	}
	x := make([]float64, len(tk))
	for i, v := range tk {
		x[i] = v - 20
	}
	f, err := Line(x, bk, LineOptions{})
	if err != nil {
		t.Fatal(err)
	}
	corr := f.Model.Cov[0][1] / (f.Intercept.StdErr * f.Slope.StdErr)
	b30, u30 := f.Model.PredictStdUnc(30 - 20)
	checks := []struct {
		name      string
		got, want float64
		halfULP   float64
	}{
		{"y1 °C", f.Intercept.Value, -0.1712, 0.00005},    // GUM H.3: y1 = −0.1712 °C
		{"u(y1) °C", f.Intercept.StdErr, 0.0029, 0.00005}, // GUM H.3: u(y1) = 0.0029 °C
		{"y2", f.Slope.Value, 0.00218, 0.000005},          // GUM H.3: y2 = 0.00218
		{"u(y2)", f.Slope.StdErr, 0.00067, 0.000005},      // GUM H.3: u(y2) = 0.00067
		{"r(y1,y2)", corr, -0.930, 0.0005},                // GUM H.3: r = −0.930
		{"b(30 °C)", b30, -0.1494, 0.00005},               // GUM H.3: b(30 °C) = −0.1494 °C
		{"u[b(30 °C)]", u30, 0.0041, 0.00005},             // GUM H.3: u = 0.0041 °C
	}
	for _, c := range checks {
		if math.Abs(c.got-c.want) > c.halfULP {
			t.Errorf("%s = %.6g, GUM H.3 %v", c.name, c.got, c.want)
		}
	}
	if f.DOF != 9 { // GUM H.3: 9 degrees of freedom
		t.Errorf("dof %d, GUM H.3 9", f.DOF)
	}
	// The same slope's Type A row in a coefficient budget (K = 1): u = u(y2)·10⁶.
	b, err := CoefficientBudget(f, BudgetInputs{NoiseGain: 1})
	if err != nil {
		t.Fatal(err)
	}
	if len(b.Rows) != 1 || b.EffectiveDOF != 9 || math.Abs(b.CoverageK-2.262) > 0.0005 { // t_0.975(9) = 2.262, NIST/SEMATECH table
		t.Errorf("rows %d ν %v k %v", len(b.Rows), float64(b.EffectiveDOF), b.CoverageK)
	}
}

// fakeLine returns a LineFit with the given slope, standard error, DOF and
// span, for budget tests.
func fakeLine(slope, se float64, dof int, span float64) LineFit {
	return LineFit{Slope: Term{Name: "slope", Value: slope, StdErr: se}, SlopeIndex: 1, N: dof + 2, DOF: dof, XMin: -span / 2, XMax: span / 2, XSpan: span}
}

func TestCoefficientBudgetRows(t *testing.T) {
	// slope 0.01 V/V through K = 1000 → k = 10 µV/V (100 dB).
	f := fakeLine(0.01, 1e-5, 8, 20)
	b, err := CoefficientBudget(f, BudgetInputs{NoiseGain: 1000, NoiseGainTolRel: 0.001, MeterGainPPM: 50, StimulusGainPPM: 300, StimulusOffsetVolts: 0.005})
	if err != nil {
		t.Fatal(err)
	}
	if b.Unit != "µV/V" || math.Abs(b.Value-10) > 1e-12 {
		t.Fatalf("value %v %s", b.Value, b.Unit)
	}
	want := map[string]float64{
		"slope of fit (repeatability, Type A)": 1e-5 * 1e6 / 1000, // se·10⁶/K = 0.01 µV/V
		"noise gain tolerance":                 10 * 0.001 / math.Sqrt(3),
		"meter gain accuracy":                  10 * 50e-6 / math.Sqrt(3),
		"stimulus gain accuracy":               10 * 300e-6 / math.Sqrt(3),
		"stimulus offset per setting":          10 * math.Sqrt2 * 0.005 / math.Sqrt(3) / 20,
	}
	if len(b.Rows) != len(want) {
		t.Fatalf("%d rows", len(b.Rows))
	}
	sum := 0.0
	for _, r := range b.Rows {
		w, ok := want[r.Name]
		if !ok {
			t.Errorf("unexpected row %q", r.Name)
			continue
		}
		if math.Abs(r.Contribution-w) > 1e-12*w {
			t.Errorf("%s: contribution %v, want %v", r.Name, r.Contribution, w)
		}
		if (r.Kind == "B") != r.DOF.IsInf() {
			t.Errorf("%s: kind %s dof %v", r.Name, r.Kind, float64(r.DOF))
		}
		sum += w * w
	}
	if math.Abs(b.CombinedStdUnc-math.Sqrt(sum)) > 1e-12 {
		t.Errorf("u_c %v want %v", b.CombinedStdUnc, math.Sqrt(sum))
	}
	if _, err := CoefficientBudget(f, BudgetInputs{NoiseGain: 0}); !errors.Is(err, ErrBadInput) {
		t.Errorf("zero gain: %v", err)
	}
	if _, err := CoefficientBudget(f, BudgetInputs{NoiseGain: 1, MeterGainPPM: -1}); !errors.Is(err, ErrBadInput) {
		t.Errorf("negative ppm: %v", err)
	}
}

func TestRejectionFromBudget(t *testing.T) {
	mk := func(k, u float64, dof DOF) Budget {
		b, err := Combine("k", "µV/V", k, []BudgetRow{{Name: "a", Kind: "A", StdUncertainty: u, Sensitivity: 1, DOF: dof}}, 0)
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	t.Run("resolved small u", func(t *testing.T) {
		// k = −10 µV/V (sign kept), u = 0.1 µV/V, ν = ∞ → 100 dB,
		// U_dB = 8.686·1.96·0.01 (JCGM 100:2008 (GUM) first order).
		r, err := RejectionFromBudget(mk(-10, 0.1, InfDOF))
		if err != nil {
			t.Fatal(err)
		}
		if !r.Resolved || r.Asymmetric || r.CoefficientUVPerV != -10 || math.Abs(r.RatioDB-100) > 1e-12 {
			t.Fatalf("%+v", r)
		}
		wantU := 20 / math.Ln10 * 1.959964 * 0.01
		if math.Abs(r.ExpandedUDB-wantU) > 1e-5 || math.Abs(r.StdUncDB-0.0868589) > 1e-6 {
			t.Errorf("U_dB %v (want %v), u_dB %v", r.ExpandedUDB, wantU, r.StdUncDB)
		}
		if !(r.LowerDB < r.RatioDB && r.RatioDB < r.UpperDB) || r.LowerBoundDB != r.LowerDB {
			t.Errorf("limits %v %v %v", r.LowerDB, r.RatioDB, r.UpperDB)
		}
	})
	t.Run("asymmetric", func(t *testing.T) {
		// u = 1 of k = 10 µV/V: U/|k| ≈ 0.2 > 0.1 → exact limits
		// −20·log10(10 ± 1.96) µV/V.
		r, _ := RejectionFromBudget(mk(10, 1, InfDOF))
		if !r.Resolved || !r.Asymmetric {
			t.Fatalf("%+v", r)
		}
		U := 1.959963984540054
		if math.Abs(r.LowerDB-(-20*math.Log10((10+U)*1e-6))) > 1e-9 || math.Abs(r.UpperDB-(-20*math.Log10((10-U)*1e-6))) > 1e-9 {
			t.Errorf("limits %v %v", r.LowerDB, r.UpperDB)
		}
		if r.UpperDB-r.RatioDB <= r.RatioDB-r.LowerDB {
			t.Error("upper side should be wider in dB")
		}
	})
	t.Run("unresolved JCGM 100:2008 (GUM)", func(t *testing.T) {
		// JCGM 100:2008 (GUM) (EURACHEM/CITAC CG4 App. F): ΔV_CM = 20 V, ΔV_OS = 0.3 µV,
		// u = 0.5 µV, k = 2 → CMRR ≥ 20/(1.3 µV) = 1.54e7 = 143.7 dB.
		// As a coefficient: k = 0.3/20 µV/V, U = 2·0.5/20 µV/V.
		b := Budget{Unit: "µV/V", Value: 0.3 / 20, CombinedStdUnc: 0.5 / 20, CoverageK: 2, ExpandedU: 1.0 / 20, EffectiveDOF: InfDOF}
		r, err := RejectionFromBudget(b)
		if err != nil {
			t.Fatal(err)
		}
		if r.Resolved || r.RatioDB != 0 || r.UpperDB != 0 || r.ExpandedUDB != 0 {
			t.Errorf("unresolved result carries a ratio: %+v", r)
		}
		if math.Abs(r.LowerBoundDB-143.7) > 0.05 {
			t.Errorf("lower bound %.3f dB, JCGM 100:2008 (GUM) 143.7", r.LowerBoundDB)
		}
		if js, err := json.Marshal(r); err != nil || strings.Contains(string(js), "Inf") {
			t.Errorf("json %s %v", js, err)
		}
	})
	t.Run("zero and zero", func(t *testing.T) {
		if _, err := RejectionFromBudget(Budget{Unit: "µV/V"}); !errors.Is(err, ErrBadInput) {
			t.Errorf("err %v", err)
		}
		if _, err := RejectionFromBudget(Budget{Unit: "V", Value: 1}); !errors.Is(err, ErrBadInput) {
			t.Errorf("unit: err %v", err)
		}
	})
}

func TestDOFJSON(t *testing.T) {
	in := []DOF{InfDOF, 9, 12.5}
	js, err := json.Marshal(in)
	if err != nil {
		t.Fatal(err)
	}
	if string(js) != `["inf",9,12.5]` {
		t.Errorf("json %s", js)
	}
	var back []DOF
	if err := json.Unmarshal(js, &back); err != nil {
		t.Fatal(err)
	}
	if !back[0].IsInf() || back[1] != 9 || back[2] != 12.5 {
		t.Errorf("round trip %v", back)
	}
	if err := json.Unmarshal([]byte(`"many"`), &back[0]); err == nil {
		t.Error("accepted \"many\"")
	}
	if _, err := json.Marshal(DOF(math.NaN())); err == nil {
		t.Error("NaN marshalled")
	}
}
