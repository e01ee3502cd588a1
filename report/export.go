package report

import (
	"bufio"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"
)

// CSVOptions tune the CSV exports.
type CSVOptions struct {
	// GuardFormulas prefixes text fields that a spreadsheet would take for
	// a formula (starting with '=', '+', '-', '@', tab or carriage return)
	// with an apostrophe. Off by default: the CSV then holds the data
	// verbatim for programs; turn it on when people open the file in a
	// spreadsheet. Numbers are never altered.
	GuardFormulas bool
}

// resultCSVHeader is the header of WriteResultsCSV; the names match the
// JSON-lines keys.
var resultCSVHeader = []string{
	"unit", "test", "temperature_c", "coefficient_uv_per_v", "coefficient_std_u_uv_per_v", "coefficient_expanded_u_uv_per_v",
	"ratio_db", "expanded_u_db", "expanded_u_low_db", "expanded_u_high_db", "coverage_k",
	"dof_effective", "resolved", "lower_bound_db", "reported_db", "limit_db", "verdict", "rule", "flags", "notes",
	"campaign_incomplete", "missing_points",
}

// NotesSeparator joins a result's notes in the CSV notes column (notes are
// sentences that may hold commas and semicolons).
const NotesSeparator = " | "

// readingCSVHeader is the header of WriteReadingsCSV.
var readingCSVHeader = []string{
	"time", "bench_s", "unit", "test", "sweep", "temperature_c", "measured_c", "repeat", "step",
	"set_volts", "read_volts", "meter_volts", "meter_sd_volts", "n", "settle_s", "flags",
}

// WriteResultsCSV writes one row per result as RFC 4180 CSV (CRLF line
// ends, fields quoted when needed; a line break inside text is written as
// CRLF and a lone carriage return is dropped, as encoding/csv does). Numbers use the shortest form that
// reads back to the same float64; NaN is an empty field; infinities are
// "+Inf"/"-Inf". Flags are joined with ';'.
func WriteResultsCSV(w io.Writer, results []Result, opt CSVOptions) error {
	cw := newCSV(w)
	t := opt.text
	if err := cw.Write(resultCSVHeader); err != nil {
		return fmt.Errorf("report: results CSV header: %w", err)
	}
	for i := range results {
		r := &results[i]
		rec := []string{
			t(r.Unit), t(r.Test), fnum(r.TemperatureC), fnum(r.CoefficientUVPerV), fnum(r.CoefficientStdUUVPerV), fnum(r.CoefficientExpandedUUVPerV),
			fnum(r.RatioDB), fnum(r.ExpandedUDB), fnum(r.ExpandedUDBLow), fnum(r.ExpandedUDBHigh), fnum(r.CoverageK),
			fnum(r.DOFEffective), strconv.FormatBool(r.Resolved), fnum(r.LowerBoundDB), fnum(r.ReportedDB()),
			fnum(r.LimitDB), t(r.Verdict), t(r.Rule), t(strings.Join(r.Flags, ";")),
			t(strings.Join(r.Notes, NotesSeparator)),
			strconv.FormatBool(r.Incomplete), strconv.Itoa(r.MissingPoints),
		}
		if err := cw.Write(rec); err != nil {
			return fmt.Errorf("report: results CSV row %d (unit %q): %w", i+1, r.Unit, err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("report: results CSV: %w", err)
	}
	return nil
}

// WriteReadingsCSV writes one row per reading as RFC 4180 CSV; times are
// RFC 3339 (ISO 8601) in UTC with nanoseconds.
func WriteReadingsCSV(w io.Writer, readings []Reading, opt CSVOptions) error {
	cw := newCSV(w)
	t := opt.text
	if err := cw.Write(readingCSVHeader); err != nil {
		return fmt.Errorf("report: readings CSV header: %w", err)
	}
	rec := make([]string, len(readingCSVHeader))
	for i := range readings {
		r := &readings[i]
		rec = append(rec[:0], ftime(r.Time), fnum(r.BenchSeconds), t(r.Unit), t(r.Test), t(r.Sweep),
			fnum(r.TemperatureC), fnum(r.MeasuredC), strconv.Itoa(r.Repeat), strconv.Itoa(r.Step),
			fnum(r.SetVolts), fnum(r.ReadVolts), fnum(r.MeterVolts), fnum(r.MeterSDVolts), strconv.Itoa(r.N),
			fnum(r.SettleSeconds), t(strings.Join(r.Flags, ";")))
		if err := cw.Write(rec); err != nil {
			return fmt.Errorf("report: readings CSV row %d: %w", i+1, err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("report: readings CSV: %w", err)
	}
	return nil
}

func newCSV(w io.Writer) *csv.Writer {
	cw := csv.NewWriter(w)
	cw.UseCRLF = true // RFC 4180 §2 item 1
	return cw
}

func (o CSVOptions) text(s string) string {
	if o.GuardFormulas && s != "" && strings.ContainsRune("=+-@\t\r", rune(s[0])) {
		return "'" + s
	}
	return s
}

func fnum(v float64) string {
	if math.IsNaN(v) {
		return ""
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

func ftime(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Format(time.RFC3339Nano)
}

// jnum is a JSON number that is null when NaN or infinite (JSON has no
// such numbers, RFC 8259 §6).
type jnum float64

func (v jnum) MarshalJSON() ([]byte, error) {
	f := float64(v)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}

// resultJSON is one line of WriteResultsJSONL.
type resultJSON struct {
	Unit                       string   `json:"unit"`
	Test                       string   `json:"test"`
	TemperatureC               jnum     `json:"temperature_c"`
	CoefficientUVPerV          jnum     `json:"coefficient_uv_per_v"`
	CoefficientStdUUVPerV      jnum     `json:"coefficient_std_u_uv_per_v"`
	CoefficientExpandedUUVPerV jnum     `json:"coefficient_expanded_u_uv_per_v"`
	RatioDB                    jnum     `json:"ratio_db"`
	ExpandedUDB                jnum     `json:"expanded_u_db"`
	ExpandedUDBLow             jnum     `json:"expanded_u_low_db"`
	ExpandedUDBHigh            jnum     `json:"expanded_u_high_db"`
	CoverageK                  jnum     `json:"coverage_k"`
	DOFEffective               jnum     `json:"dof_effective"`
	Resolved                   bool     `json:"resolved"`
	LowerBoundDB               jnum     `json:"lower_bound_db"`
	ReportedDB                 jnum     `json:"reported_db"`
	LimitDB                    jnum     `json:"limit_db"`
	Verdict                    string   `json:"verdict"`
	Rule                       string   `json:"rule"`
	Flags                      []string `json:"flags,omitempty"`
	// Error is the cause of a result that could not be formed (verdict
	// "no result"); absent otherwise.
	Error string `json:"error,omitempty"`
	// Notes is always present (an empty list when the result has none).
	Notes              []string `json:"notes"`
	CampaignIncomplete bool     `json:"campaign_incomplete"`
	MissingPoints      int      `json:"missing_points"`
	PredictedUUVPerV   jnum     `json:"predicted_u_uv_per_v"`
}

// resultLine is r as one line of WriteResultsJSONL.
func resultLine(r *Result) resultJSON {
	return resultJSON{
		Unit: r.Unit, Test: r.Test, TemperatureC: jnum(r.TemperatureC),
		CoefficientUVPerV: jnum(r.CoefficientUVPerV), CoefficientStdUUVPerV: jnum(r.CoefficientStdUUVPerV),
		RatioDB: jnum(r.RatioDB), ExpandedUDB: jnum(r.ExpandedUDB), ExpandedUDBLow: jnum(r.ExpandedUDBLow),
		ExpandedUDBHigh: jnum(r.ExpandedUDBHigh), CoverageK: jnum(r.CoverageK), DOFEffective: jnum(r.DOFEffective),
		Resolved: r.Resolved, LowerBoundDB: jnum(r.LowerBoundDB), ReportedDB: jnum(r.ReportedDB()),
		LimitDB: jnum(r.LimitDB), Verdict: r.Verdict, Rule: r.Rule, Flags: r.Flags,
		CoefficientExpandedUUVPerV: jnum(r.CoefficientExpandedUUVPerV), Notes: notesOrEmpty(r.Notes),
		CampaignIncomplete: r.Incomplete, MissingPoints: r.MissingPoints,
		PredictedUUVPerV: jnum(r.PredictedUUVPerV), Error: resultError(r),
	}
}

// readingJSON is one line of WriteReadingsJSONL.
type readingJSON struct {
	Time          string   `json:"time,omitempty"` // RFC 3339, UTC
	BenchSeconds  jnum     `json:"bench_s"`
	Unit          string   `json:"unit"`
	Test          string   `json:"test"`
	Sweep         string   `json:"sweep,omitempty"`
	TemperatureC  jnum     `json:"temperature_c"`
	MeasuredC     jnum     `json:"measured_c"`
	Repeat        int      `json:"repeat"`
	Step          int      `json:"step"`
	SetVolts      jnum     `json:"set_volts"`
	ReadVolts     jnum     `json:"read_volts"`
	MeterVolts    jnum     `json:"meter_volts"`
	MeterSDVolts  jnum     `json:"meter_sd_volts"`
	N             int      `json:"n"`
	SettleSeconds jnum     `json:"settle_s"`
	Flags         []string `json:"flags,omitempty"`
}

// WriteResultsJSONL writes one JSON object per result per line. NaN and
// infinities are null; Resolved and LowerBoundDB tell a bound from a value.
func WriteResultsJSONL(w io.Writer, results []Result) error {
	bw := bufio.NewWriter(w)
	enc := json.NewEncoder(bw)
	enc.SetEscapeHTML(false)
	for i := range results {
		r := &results[i]
		if err := enc.Encode(resultLine(r)); err != nil {
			return fmt.Errorf("report: results JSON line %d (unit %q): %w", i+1, r.Unit, err)
		}
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("report: results JSON lines: %w", err)
	}
	return nil
}

// WriteReadingsJSONL writes one JSON object per reading per line.
func WriteReadingsJSONL(w io.Writer, readings []Reading) error {
	bw := bufio.NewWriter(w)
	enc := json.NewEncoder(bw)
	enc.SetEscapeHTML(false)
	for i := range readings {
		r := &readings[i]
		if err := enc.Encode(readingJSON{
			Time: ftime(r.Time), BenchSeconds: jnum(r.BenchSeconds), Unit: r.Unit, Test: r.Test, Sweep: r.Sweep,
			TemperatureC: jnum(r.TemperatureC), MeasuredC: jnum(r.MeasuredC), Repeat: r.Repeat, Step: r.Step,
			SetVolts: jnum(r.SetVolts), ReadVolts: jnum(r.ReadVolts), MeterVolts: jnum(r.MeterVolts),
			MeterSDVolts: jnum(r.MeterSDVolts), N: r.N, SettleSeconds: jnum(r.SettleSeconds), Flags: r.Flags,
		}); err != nil {
			return fmt.Errorf("report: readings JSON line %d: %w", i+1, err)
		}
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("report: readings JSON lines: %w", err)
	}
	return nil
}

// resultError is the cause of a result that could not be formed: its
// flags, where addProblems-style callers put the problem; "" for a result.
func resultError(r *Result) string {
	if r.Verdict != VerdictNoResult {
		return ""
	}
	if len(r.Flags) == 0 {
		return "no result"
	}
	return strings.Join(r.Flags, "; ")
}

// notesOrEmpty returns notes, or an empty list for none, so that the JSON
// key is always a list.
func notesOrEmpty(n []string) []string {
	if n == nil {
		return []string{}
	}
	return n
}
