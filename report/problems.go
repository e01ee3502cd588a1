package report

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"

	"github.com/xuri/excelize/v2"
)

// SheetProblems lists what the analysis could not do (written only when
// there is something to list).
const SheetProblems = "Problems"

// Problem is something the analysis could not do, with its cause: a group
// of readings that gave no result (a stuck meter, too few valid points, a
// fit that failed), a result not judged and why, lot or temperature
// statistics that could not be formed. Unit is "" for a lot-wide problem;
// TemperatureC is NaN for one not tied to a temperature.
type Problem struct {
	Unit         string  // user text
	Test         string  // result name
	Part         string  // board sweep ("cm", "diff") or ""
	TemperatureC float64 // NaN: not tied to one temperature
	Problem      string  // cause first
}

// problemJSON is one line of WriteProblemsJSONL.
type problemJSON struct {
	Unit         string `json:"unit"`
	Test         string `json:"test"`
	Part         string `json:"part,omitempty"`
	TemperatureC jnum   `json:"temperature_c"`
	Problem      string `json:"problem"`
}

// WriteProblemsJSONL writes one JSON object per problem per line (keys
// unit, test, part, temperature_c, problem); nothing when there is none.
func WriteProblemsJSONL(w io.Writer, problems []Problem) error {
	bw := bufio.NewWriter(w)
	enc := json.NewEncoder(bw)
	enc.SetEscapeHTML(false)
	for i := range problems {
		p := &problems[i]
		if err := enc.Encode(problemJSON{Unit: p.Unit, Test: p.Test, Part: p.Part, TemperatureC: jnum(p.TemperatureC), Problem: p.Problem}); err != nil {
			return fmt.Errorf("report: problems JSON line %d: %w", i+1, err)
		}
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("report: problems JSON lines: %w", err)
	}
	return nil
}

// writeProblems fills the Problems sheet: one row per problem.
func writeProblems(f *excelize.File, st *styles, c *Campaign) error {
	spec := tableSpec{sheet: SheetProblems, table: "tblProblems", freezeCols: 2, cols: []column{
		{"Unit", 12, st.text}, {"Test", 17, st.text}, {"Sweep", 8, st.text},
		{"Temperature (°C)", 12, st.celsius}, {"Problem", 90, st.wrap},
	}}
	spec.key = []KeyValue{
		{"Unit", "empty for a problem of the whole lot (lot statistics, temperature coefficient)"},
		{"Problem", "what the analysis could not do, cause first; such a result is never a pass"},
	}
	spec.rowLines = func(i int) int { return textLines(c.Problems[i].Problem, 90) }
	return streamTable(f, st, spec, len(c.Problems), func(i int, d []any) {
		p := &c.Problems[i]
		unit := p.Unit
		if unit == "" {
			unit = "(lot)"
		}
		d[0], d[1], d[2], d[3], d[4] = unit, p.Test, p.Part, num(p.TemperatureC), p.Problem
	})
}
