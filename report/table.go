package report

import (
	"fmt"
	"math"
	"strings"
	"time"

	"github.com/xuri/excelize/v2"
)

// column is one column of a streamed table: its header (with the unit), its
// width in characters and the style (number format) its cells inherit.
type column struct {
	header string
	width  float64
	style  int
}

// tableSpec is one sheet holding one table.
type tableSpec struct {
	sheet      string
	table      string // table name, unique in the workbook
	cols       []column
	freezeCols int // leading columns kept in view (0: header row only)
	// key is written below the table, one blank row after it: what each
	// verdict and flag on the sheet means (label, explanation).
	key []KeyValue
	// rowLines, when set, gives the text lines of data row i: the row is
	// made that tall, since a wrapped cell in a streamed row does not grow
	// it by itself.
	rowLines func(i int) int
}

// streamTable writes a sheet with excelize's stream writer: widths, column
// styles and the frozen header go in before the first SetRow, then the
// header row, then n data rows in order, then the table (filter buttons)
// and Flush. fill writes row i into dst (len(cols), all nil on entry) and
// may put excelize.Cell values where a cell needs its own style.
func streamTable(f *excelize.File, st *styles, spec tableSpec, n int, fill func(i int, dst []any)) error {
	if err := printSetup(f, spec.sheet, true); err != nil {
		return err
	}
	sw, err := f.NewStreamWriter(spec.sheet)
	if err != nil {
		return fmt.Errorf("report: sheet %q: %w", spec.sheet, err)
	}
	for i, c := range spec.cols {
		if err := sw.SetColWidth(i+1, i+1, c.width); err != nil {
			return fmt.Errorf("report: sheet %q column %q: %w", spec.sheet, c.header, err)
		}
		if c.style != 0 {
			if err := sw.SetColStyle(i+1, i+1, c.style); err != nil {
				return fmt.Errorf("report: sheet %q column %q: %w", spec.sheet, c.header, err)
			}
		}
	}
	if err := sw.SetPanes(freezePanes(spec.freezeCols, 1)); err != nil {
		return fmt.Errorf("report: sheet %q: freezing header: %w", spec.sheet, err)
	}
	head := make([]any, len(spec.cols))
	for i, c := range spec.cols {
		head[i] = c.header
	}
	if err := sw.SetRow("A1", head, excelize.RowOpts{StyleID: st.header, Height: headerHeight(spec.cols)}); err != nil {
		return fmt.Errorf("report: sheet %q header: %w", spec.sheet, err)
	}
	row := make([]any, len(spec.cols))
	for i := 0; i < n; i++ {
		clear(row)
		fill(i, row)
		for j, v := range row {
			switch v := v.(type) {
			case string:
				row[j] = cellText(v)
			case excelize.Cell:
				if t, ok := v.Value.(string); ok {
					v.Value = cellText(t)
					row[j] = v
				}
			}
		}
		cell, _ := excelize.CoordinatesToCellName(1, i+2)
		var opts []excelize.RowOpts
		if spec.rowLines != nil {
			if n := spec.rowLines(i); n > 1 {
				opts = append(opts, excelize.RowOpts{Height: 15 * float64(min(n, 20))})
			}
		}
		if err := sw.SetRow(cell, row, opts...); err != nil {
			return fmt.Errorf("report: sheet %q row %d: %w", spec.sheet, i+2, err)
		}
	}
	if len(spec.key) > 0 {
		// The explanation starts in the first column past the longest
		// label, so no label runs under it.
		longest := 0
		for _, kv := range spec.key {
			longest = max(longest, len([]rune(kv.Label)))
		}
		textCol, span := 1, spec.cols[0].width
		for textCol < len(spec.cols) && span < float64(longest+1) {
			span += spec.cols[textCol].width
			textCol++
		}
		r := n + 3
		cell, _ := excelize.CoordinatesToCellName(1, r)
		if err := sw.SetRow(cell, []any{excelize.Cell{StyleID: st.label, Value: "Key"}}); err != nil {
			return fmt.Errorf("report: sheet %q key: %w", spec.sheet, err)
		}
		for _, kv := range spec.key {
			r++
			cell, _ := excelize.CoordinatesToCellName(1, r)
			label := any(excelize.Cell{StyleID: st.label, Value: cellText(kv.Label)})
			if k := VerdictClass(kv.Label); k != KindOther {
				label = excelize.Cell{StyleID: st.verdict[k], Value: k.Label()}
			}
			vals := make([]any, textCol+1)
			vals[0], vals[textCol] = label, excelize.Cell{StyleID: st.plain, Value: cellText(kv.Value)}
			if err := sw.SetRow(cell, vals); err != nil {
				return fmt.Errorf("report: sheet %q key: %w", spec.sheet, err)
			}
		}
	}
	if n > 0 {
		last, _ := excelize.CoordinatesToCellName(len(spec.cols), n+1)
		if err := sw.AddTable(&excelize.Table{
			Range: "A1:" + last, Name: spec.table, StyleName: "TableStyleLight1",
			ShowRowStripes: ptr(true),
		}); err != nil {
			return fmt.Errorf("report: sheet %q table: %w", spec.sheet, err)
		}
	}
	if err := sw.Flush(); err != nil {
		return fmt.Errorf("report: sheet %q: %w", spec.sheet, err)
	}
	return nil
}

// printSetup prints a sheet landscape, one page wide, and, for tables,
// repeats the header row on every page. For a streamed sheet it must run
// before NewStreamWriter, which copies these settings.
func printSetup(f *excelize.File, sheet string, headerRow bool) error {
	if err := f.SetPageLayout(sheet, &excelize.PageLayoutOptions{
		Orientation: ptr("landscape"), FitToWidth: ptr(1), FitToHeight: ptr(0),
	}); err != nil {
		return fmt.Errorf("report: sheet %q page layout: %w", sheet, err)
	}
	if err := f.SetSheetProps(sheet, &excelize.SheetPropsOptions{FitToPage: ptr(true)}); err != nil {
		return fmt.Errorf("report: sheet %q page layout: %w", sheet, err)
	}
	// Header: report and sheet; footer: page n of m (the &-codes of
	// ECMA-376 Part 1 §18.3.1.39 headerFooter).
	if err := f.SetHeaderFooter(sheet, &excelize.HeaderFooterOptions{
		OddHeader: "&L&A&R" + headerText(f),
		OddFooter: "&LPrinted &D&RPage &P of &N",
	}); err != nil {
		return fmt.Errorf("report: sheet %q header and footer: %w", sheet, err)
	}
	if !headerRow {
		return nil
	}
	if err := f.SetDefinedName(&excelize.DefinedName{
		Name: "_xlnm.Print_Titles", RefersTo: "'" + sheet + "'!$1:$1", Scope: sheet,
	}); err != nil {
		return fmt.Errorf("report: sheet %q print titles: %w", sheet, err)
	}
	return nil
}

// freezePanes keeps the first rows and columns in view.
func freezePanes(cols, rows int) *excelize.Panes {
	tl, _ := excelize.CoordinatesToCellName(cols+1, rows+1)
	p := &excelize.Panes{Freeze: true, XSplit: cols, YSplit: rows, TopLeftCell: tl, ActivePane: "bottomLeft"}
	if cols > 0 {
		p.ActivePane = "bottomRight"
	}
	p.Selection = []excelize.Selection{{SQRef: tl, ActiveCell: tl, Pane: p.ActivePane}}
	return p
}

// headerHeight gives wrapped headers room for two or three lines.
func headerHeight(cols []column) float64 {
	lines := 1.0
	for _, c := range cols {
		if l := math.Ceil(float64(len([]rune(c.header))) / math.Max(c.width, 1)); l > lines {
			lines = l
		}
	}
	return 15 * math.Min(lines, 3)
}

// num is a numeric cell value: nil (empty cell) for NaN, the text "inf" or
// "-inf" for infinities, which a workbook cannot hold as numbers.
func num(v float64) any {
	switch {
	case math.IsNaN(v):
		return nil
	case math.IsInf(v, 1):
		return "inf"
	case math.IsInf(v, -1):
		return "-inf"
	}
	return v
}

// when is a date-time cell: UTC serial (shown by fmtTime), or nil for a
// zero time.
func when(t time.Time) any {
	if t.IsZero() {
		return nil
	}
	return t.UTC()
}

// yesNo writes a flag as words; "yes" may take an attention style.
func yesNo(b bool, attention int) any {
	if b {
		if attention != 0 {
			return excelize.Cell{StyleID: attention, Value: "yes"}
		}
		return "yes"
	}
	return "no"
}

// joinFlags lists flags in one cell.
func joinFlags(fl []string) any {
	if len(fl) == 0 {
		return nil
	}
	return strings.Join(fl, "; ")
}

func ptr[T any](v T) *T { return &v }

// headerText is the page-header text naming the report (its document
// title), with '&' doubled as header codes require.
func headerText(f *excelize.File) string {
	id := f.GetSheetName(0)
	if p, err := f.GetDocProps(); err == nil && p.Title != "" {
		id = p.Title
		if p.Identifier != "" {
			id += " · report " + p.Identifier
		}
	}
	return strings.ReplaceAll(id, "&", "&&")
}

// textLines is the number of lines text takes wrapped at width characters.
func textLines(text string, width float64) int {
	n := 0
	for _, l := range strings.Split(text, "\n") {
		n += max(1, int(math.Ceil(float64(len([]rune(l)))/math.Max(width-1, 1))))
	}
	return n
}
