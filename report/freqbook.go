package report

import (
	"fmt"
	"math"
	"strings"

	"github.com/xuri/excelize/v2"
)

// Sheet names of the frequency-response part of the workbook (present
// only when the campaign has frequency-response results).
const (
	SheetFreq       = "Frequency"
	SheetFreqBudget = "Frequency U"
	SheetFreqFits   = "Pole fits"
)

// freqHeaders are the column headers of the Frequency sheet: every
// figure says what it is, its unit and its convention.
var freqHeaders = []string{
	"Unit", "Test", "Quantity", "Temperature (°C)", "Frequency (Hz)", "Instrument",
	"|k(f)| input-referred (µV/V)", "Ratio 20·log10(10⁶ / |k(f)| in µV/V) (dB)", "Expanded uncertainty U (dB)", "Coverage factor k",
	"Coverage probability", "Effective degrees of freedom", "Resolved", "Lower bound (dB)", "Reported (dB)", "Statement",
	"Noise floor: largest resolvable ratio (dB)", "Phase arg k(f) (°)", "Expanded U of phase (°)",
	"Limit at f (dB)", "Margin to limit (dB)", "Verdict", "Decision rule", "Flags", "Notes",
}

// freqKey explains the Frequency sheet's conventions below its table.
func freqKey() []KeyValue {
	return append(verdictKey(),
		KeyValue{"|k(f)|", "magnitude of the input-referred coefficient at f: fixture output over stimulus at the part, divided by the through calibration and by the fixture's gain at f"},
		KeyValue{"Ratio (dB)", "20·log10(10⁶ / |k(f)| in µV/V) = −20·log10|k(f)| with k in V/V (JEDEC JESD99B); U = k·u (JCGM 100:2008, k from Student's t at ν_eff)"},
		KeyValue{"Phase (°)", "arg k(f): positive when the input-referred response leads the stimulus; empty for an AC voltmeter (magnitude only)"},
		KeyValue{"no: lower bound", "the response is within k standard uncertainties of the noise floor: only the lower bound is a statement about the part"},
		KeyValue{"Noise floor", "from a record with the generator off at f: the largest ratio this setup resolves"},
		KeyValue{"no result", "the point could not be formed; the cause is in Flags"},
	)
}

func writeFreqResults(f *excelize.File, st *styles, c *Campaign) error {
	colStyles := []int{st.text, st.text, st.text, st.celsius, 0, st.text, st.uvpv, st.db, st.db, st.k,
		st.percent, st.dof, st.text, st.db, st.db, st.wrap, st.db, st.db, st.db, st.db, st.db, st.text, st.text, st.wrap, st.wrap}
	widths := []float64{10, 10, 11, 12, 11, 11, 14, 13, 13, 10, 11, 12, 16, 11, 11, 34, 15, 11, 11, 10, 11, 13, 12, 24, 50}
	spec := tableSpec{sheet: SheetFreq, table: "tblFrequency", freezeCols: 2, key: freqKey()}
	for i, h := range freqHeaders {
		spec.cols = append(spec.cols, column{h, widths[i], colStyles[i]})
	}
	spec.rowLines = func(i int) int {
		r := &c.FreqResults[i]
		return max(textLines(strings.Join(r.Flags, "; "), 24), textLines(statement(&r.Result), 34), textLines(strings.Join(r.Notes, NotesSeparator), 50))
	}
	return streamTable(f, st, spec, len(c.FreqResults), func(i int, d []any) {
		r := &c.FreqResults[i]
		rep := r.ReportedDB()
		d[0], d[1], d[2], d[3], d[4], d[5] = r.Unit, r.Test, r.QuantityName(), num(r.TemperatureC), num(r.FrequencyHz), r.Instrument
		d[6], d[7], d[8], d[9], d[10], d[11] = num(r.CoefficientUVPerV), num(r.RatioDB), num(r.ExpandedUDB), num(r.CoverageK), num(r.Coverage), num(r.DOFEffective)
		if r.Verdict != VerdictNoResult {
			d[12] = "yes"
			if !r.Resolved {
				d[12] = excelize.Cell{StyleID: st.attention, Value: "no: lower bound"}
				d[13] = num(r.LowerBoundDB)
			}
			d[14] = num(rep)
			d[15] = statement(&r.Result)
		}
		d[16] = num(r.NoiseFloorDB)
		d[17], d[18] = num(r.PhaseDeg), num(r.PhaseExpandedUDeg)
		d[19] = num(r.LimitDB)
		if !math.IsNaN(r.LimitDB) && !math.IsNaN(rep) {
			d[20] = num(rep - r.LimitDB)
		}
		k := VerdictClass(r.Verdict)
		label := k.Label()
		if k == KindOther {
			label = r.Verdict
		}
		d[21] = excelize.Cell{StyleID: st.verdict[k], Value: label}
		d[22] = r.Rule
		d[23] = joinFlags(r.Flags)
		d[24] = joinNotes(r.Notes)
	})
}

func writeFreqBudgets(f *excelize.File, st *styles, c *Campaign) error {
	type key struct {
		u, t, q string
		c, f    int64
	}
	keyOf := func(b *FreqBudgetRow) key {
		return key{b.Unit, b.Test, b.Quantity, tempKey(b.TemperatureC), int64(math.Round(b.FrequencyHz * 1000))}
	}
	// Share of variance = (c_i·u_i)² / Σ(c_j·u_j)² within one budget.
	sum := map[key]float64{}
	for i := range c.FreqBudgets {
		b := &c.FreqBudgets[i]
		if !math.IsNaN(b.Contribution) {
			sum[keyOf(b)] += b.Contribution * b.Contribution
		}
	}
	spec := tableSpec{sheet: SheetFreqBudget, table: "tblFrequencyU", freezeCols: 2, cols: []column{
		{"Unit", 10, st.text}, {"Test", 10, st.text}, {"Temperature (°C)", 12, st.celsius}, {"Frequency (Hz)", 11, 0},
		{"Of (magnitude: ratio in dB; phase: degrees)", 14, st.text},
		{"Component", 60, st.wrap}, {"Type (GUM A/B)", 9, st.text}, {"Distribution", 13, st.text},
		{"Standard uncertainty u (in unit)", 14, st.uvpv}, {"Unit", 7, st.text},
		{"Sensitivity c", 11, st.k}, {"Contribution |c·u| (in unit)", 14, st.uvpv}, {"Share of variance (%)", 11, st.percent},
		{"Degrees of freedom", 11, st.dof},
	}}
	spec.rowLines = func(i int) int { return textLines(c.FreqBudgets[i].Component, 60) }
	return streamTable(f, st, spec, len(c.FreqBudgets), func(i int, d []any) {
		b := &c.FreqBudgets[i]
		q := b.Quantity
		if q == "" {
			q = "magnitude"
		}
		d[0], d[1], d[2], d[3], d[4] = b.Unit, b.Test, num(b.TemperatureC), num(b.FrequencyHz), q
		d[5], d[6], d[7] = b.Component, b.Kind, b.Distribution
		d[8], d[9], d[10], d[11] = num(b.StdUncertainty), b.ValueUnit, num(b.Sensitivity), num(b.Contribution)
		if s := sum[keyOf(b)]; s > 0 {
			d[12] = num(b.Contribution * b.Contribution / s)
		}
		d[13] = num(b.DOF)
	})
}

func writeFreqFits(f *excelize.File, st *styles, c *Campaign) error {
	spec := tableSpec{sheet: SheetFreqFits, table: "tblPoleFits", freezeCols: 2, cols: []column{
		{"Unit", 10, st.text}, {"Test", 10, st.text}, {"Quantity", 11, st.text}, {"Temperature (°C)", 12, st.celsius},
		{"Frequencies fitted", 10, st.integer},
		{"Low-frequency ratio R₀ (dB)", 13, st.db}, {"Expanded U of R₀ (dB)", 12, st.db},
		{"Corner f_c (Hz)", 12, 0}, {"Expanded U of f_c (Hz)", 12, 0}, {"Coverage factor k", 10, st.k},
		{"Corner resolved", 10, st.text}, {"Corner above (Hz, one-sided 95 %)", 14, 0},
		{"DC ratio (dB)", 11, st.db}, {"Expanded U of DC ratio (dB)", 12, st.db},
		{"R₀ − DC (dB)", 11, st.db}, {"Expanded U of difference (dB)", 12, st.db}, {"DC check", 13, st.text},
		{"Note", 60, st.wrap},
	}, key: []KeyValue{
		{"Model", "ratio(f) = R₀ − 10·log10(1 + (f/f_c)²) dB: one real pole, |k(f)| = |k₀|·√(1 + (f/f_c)²) (Sedra & Smith, Microelectronic Circuits, single-time-constant networks), weighted least squares over the resolved frequencies"},
		{"DC check", "agrees when |R₀ − DC| ≤ √(U_DC² + U_R₀²) (an E_n ≤ 1 comparison, ISO/IEC 17043 B.4.1.1)"},
	}}
	spec.rowLines = func(i int) int {
		r := &c.FreqFits[i]
		return textLines(strings.TrimSpace(r.Note+" "+r.DCNote), 60)
	}
	return streamTable(f, st, spec, len(c.FreqFits), func(i int, d []any) {
		r := &c.FreqFits[i]
		q := r.Quantity
		if q == "" {
			q = r.Test
		}
		d[0], d[1], d[2], d[3], d[4] = r.Unit, r.Test, q, num(r.TemperatureC), r.Points
		// The corner and its U as GUM 7.2.6 has them: U to two
		// significant digits, f_c to the same decimal place.
		corner, uCorner, _, _ := RoundToU(r.CornerHz, r.CornerExpandedUHz)
		d[5], d[6], d[7], d[8], d[9] = num(r.LowFreqRatioDB), num(r.LowFreqExpandedUDB), num(corner), num(uCorner), num(r.CoverageK)
		if !math.IsNaN(r.LowFreqRatioDB) {
			d[10] = yesNo(r.CornerResolved, 0)
		}
		// A lower bound is rounded down (three significant digits) so
		// that the shorter figure still bounds f_c from below.
		d[11] = num(floorSig(r.CornerLowerBoundHz, 3))
		check := "not checked"
		if r.DCChecked {
			d[12], d[13], d[14], d[15] = num(r.DCRatioDB), num(r.DCExpandedUDB), num(r.DCDiffDB), num(r.DCDiffExpandedUDB)
			check = "agrees"
			if !r.DCConsistent {
				check = "DISAGREES"
			}
		}
		d[16] = check
		if !r.DCConsistent && r.DCChecked {
			d[16] = excelize.Cell{StyleID: st.attention, Value: check}
		}
		d[17] = strings.TrimSpace(strings.Join(nonEmpty(r.Note, r.DCNote), "; "))
	})
}

func nonEmpty(ss ...string) []string {
	var out []string
	for _, s := range ss {
		if s != "" {
			out = append(out, s)
		}
	}
	return out
}

// freqSummary is the Summary sheet's frequency-response section: how
// many points pass and the lowest reported ratio per quantity, with its
// frequency.
func freqSummary(w *summaryWriter, c *Campaign) {
	if len(c.FreqResults) == 0 {
		return
	}
	w.heading("Frequency response")
	counts := map[VerdictKind]int{}
	type low struct {
		r  FreqResult
		ok bool
	}
	lowest := map[string]low{}
	var order []string
	for _, r := range c.FreqResults {
		if r.Verdict == VerdictNoResult {
			continue
		}
		counts[VerdictClass(r.Verdict)]++
		q := r.QuantityName()
		cur, seen := lowest[q]
		if !seen {
			order = append(order, q)
		}
		if !cur.ok || r.ReportedDB() < cur.r.ReportedDB() {
			lowest[q] = low{r, true}
		}
	}
	w.kv("Points (unit × test × frequency)", fmt.Sprintf("%d: %d pass, %d conditional pass, %d conditional fail, %d fail, %d not judged",
		len(c.FreqResults), counts[KindPass], counts[KindConditionalPass], counts[KindConditionalFail], counts[KindFail], counts[KindNotJudged]), 0)
	for _, q := range order {
		r := lowest[q].r
		s := fmt.Sprintf("%s at %s Hz, unit %s", statement(&r.Result), FormatHz(r.FrequencyHz), r.Unit)
		if !math.IsNaN(r.LimitDB) {
			s += fmt.Sprintf(" (limit %.2f dB: %s)", r.LimitDB, r.Verdict)
		}
		w.kv("Lowest "+q, s, 0)
	}
	w.kv("Sheets", fmt.Sprintf("%s (one row per unit × frequency), %s (budgets), %s (single-pole fits and the DC check)", SheetFreq, SheetFreqBudget, SheetFreqFits), 0)
}
