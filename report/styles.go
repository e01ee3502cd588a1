package report

import (
	"fmt"

	"github.com/xuri/excelize/v2"
)

// Number formats. Built-in ids are from ECMA-376 Part 1 §18.8.30 (numFmt):
// 1 = "0", 2 = "0.00", 10 = "0.00%".
const (
	numFmtInteger = 1
	numFmtDB      = 2 // "0.00": ratios, uncertainties and limits in dB
	numFmtPercent = 10
	// fmtUVPerV is a plain decimal to 0.0001 µV/V (the unit is in the
	// column header): 12.3456, never 12.35E+0.
	fmtUVPerV = "0.0000"
	// fmtVolts keeps a 6½-digit meter's resolution on its 100 mV range
	// (100 nV) as a plain decimal in volts.
	fmtVolts = "0.0000000"
	// fmtTime shows a date-time serial as ISO 8601 with milliseconds; the
	// workbook stores times in UTC.
	fmtTime    = `yyyy-mm-dd"T"hh:mm:ss.000`
	fmtCelsius = "0.0"
	fmtK       = "0.00"
	fmtDOF     = "0.0"
	fmtSeconds = "0.000"
	fmtSlope   = "0.0000" // dB/°C
	fmtGain    = "0.000000"
)

// Verdict palette (our own). Each verdict differs from the others in
// lightness and in fill pattern, not in hue alone, and carries its own text
// mark, so it reads for all common colour-vision deficiencies and on a
// greyscale print. Hues are only blue and orange, a pair that stays apart
// under protan, deutan and tritan vision (common practice, no published
// source). Text contrast is at least 4.5:1 against both the fill and, for
// hatches, the white ground (WCAG 2.1 SC 1.4.3; TestVerdictPalette).
//
//	verdict      mark         fill                                         grey  text
//	pass         PASS         solid very light blue #DEEBF7                 ~82 % bold black
//	cond. pass   COND. PASS   diagonal stripes (darkUp) of mid blue         ~69 % bold italic black
//	                          #6BAED6 on white
//	cond. fail   COND. FAIL   dense cross-hatch (darkTrellis) of orange     ~43 % bold italic black
//	                          #E6550D on white
//	fail         FAIL         solid near-black brown #3F1600                 ~2 % bold white
//	not judged   NOT JUDGED   none                                         100 % italic grey #595959
//
// Grey is the approximate relative luminance of the cell as printed
// (stripe coverage taken as ~50 % for darkUp and ~75 % for darkTrellis).
var verdictPalette = [numVerdictKinds]excelize.Style{
	KindPass: {
		Fill: excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{"DEEBF7"}},
		Font: &excelize.Font{Bold: true, Color: "000000"},
	},
	KindConditionalPass: {
		Fill: excelize.Fill{Type: "pattern", Pattern: 8, Color: []string{"6BAED6"}}, // darkUp
		Font: &excelize.Font{Bold: true, Italic: true, Color: "000000"},
	},
	KindConditionalFail: {
		Fill: excelize.Fill{Type: "pattern", Pattern: 10, Color: []string{"E6550D"}}, // darkTrellis
		Font: &excelize.Font{Bold: true, Italic: true, Color: "000000"},
	},
	KindFail: {
		Fill: excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{"3F1600"}},
		Font: &excelize.Font{Bold: true, Color: "FFFFFF"},
	},
	KindNotJudged: {
		Font: &excelize.Font{Italic: true, Color: "595959"},
	},
	KindOther: {
		Font: &excelize.Font{Bold: true},
	},
}

// Series colours for charts and plots: the eight colours of the Okabe–Ito
// palette (M. Okabe and K. Ito, "Color Universal Design (CUD): how to make
// figures and presentations that are friendly to colorblind people",
// 2008), yellow last as it is faint on white. Each unit also gets its own
// marker and dash, so series differ without colour too.
var seriesColours = []string{"0072B2", "D55E00", "009E73", "CC79A7", "56B4E9", "E69F00", "000000", "F0E442"}

// styles holds the style ids of one workbook (created once each).
type styles struct {
	header, title, label, text, wrap     int
	db, uvpv, volts, time, celsius, k    int
	dof, seconds, integer, percent, gain int
	slope, plain                         int
	verdict                              [numVerdictKinds]int
	attention                            int // "yes" in mismatch/flag columns
	// Left-aligned numbers for the summary's label/value rows.
	leftInt, leftK, leftPct, leftDB int
}

func newStyles(f *excelize.File) (*styles, error) {
	var s styles
	var err error
	add := func(dst *int, st *excelize.Style) {
		if err != nil {
			return
		}
		*dst, err = f.NewStyle(st)
	}
	custom := func(code string) *excelize.Style { return &excelize.Style{CustomNumFmt: &code} }
	border := []excelize.Border{{Type: "bottom", Color: "000000", Style: 2}}
	thin := []excelize.Border{
		{Type: "left", Color: "7F7F7F", Style: 1}, {Type: "right", Color: "7F7F7F", Style: 1},
		{Type: "top", Color: "7F7F7F", Style: 1}, {Type: "bottom", Color: "7F7F7F", Style: 1},
	}
	add(&s.header, &excelize.Style{
		Font:      &excelize.Font{Bold: true},
		Border:    border,
		Alignment: &excelize.Alignment{WrapText: true, Vertical: "top"},
	})
	add(&s.title, &excelize.Style{Font: &excelize.Font{Bold: true, Size: 14}})
	add(&s.label, &excelize.Style{Font: &excelize.Font{Bold: true}, Alignment: &excelize.Alignment{Vertical: "top"}})
	add(&s.text, &excelize.Style{NumFmt: 49}) // "@": text (ECMA-376 §18.8.30)
	add(&s.wrap, &excelize.Style{NumFmt: 49, Alignment: &excelize.Alignment{WrapText: true, Vertical: "top"}})
	add(&s.db, &excelize.Style{NumFmt: numFmtDB})
	add(&s.uvpv, custom(fmtUVPerV))
	add(&s.volts, custom(fmtVolts))
	add(&s.time, custom(fmtTime))
	add(&s.celsius, custom(fmtCelsius))
	add(&s.k, custom(fmtK))
	add(&s.dof, custom(fmtDOF))
	add(&s.seconds, custom(fmtSeconds))
	add(&s.integer, &excelize.Style{NumFmt: numFmtInteger})
	add(&s.percent, &excelize.Style{NumFmt: numFmtPercent})
	add(&s.gain, custom(fmtGain))
	add(&s.slope, custom(fmtSlope))
	add(&s.plain, &excelize.Style{})
	for k := range verdictPalette {
		st := verdictPalette[k]
		st.Border = thin
		st.Alignment = &excelize.Alignment{Horizontal: "center"}
		add(&s.verdict[k], &st)
	}
	// Attention ("yes" in a mismatch column, "no: lower bound", flags):
	// bold text on a light orange ground, lighter than any verdict fill.
	add(&s.attention, &excelize.Style{
		Fill:   excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{"FDE0C5"}},
		Font:   &excelize.Font{Bold: true, Color: "000000"},
		Border: thin,
	})
	for _, p := range []struct {
		dst *int
		st  excelize.Style
	}{
		{&s.leftInt, excelize.Style{NumFmt: numFmtInteger}},
		{&s.leftK, excelize.Style{CustomNumFmt: ptr(fmtK)}},
		{&s.leftPct, excelize.Style{CustomNumFmt: ptr("0.000%")}},
		{&s.leftDB, excelize.Style{NumFmt: numFmtDB}},
	} {
		p.st.Alignment = &excelize.Alignment{Horizontal: "left", Vertical: "top"}
		add(p.dst, &p.st)
	}
	if err != nil {
		return nil, fmt.Errorf("report: creating workbook styles: %w", err)
	}
	return &s, nil
}
