package main

import (
	"bufio"
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/cobra"

	"nullbench/procedure/archive"
)

// archiveFilterFlags are the selection flags of list, query and trend.
type archiveFilterFlags struct {
	Part, Lot, Unit, Test, Bench, Verdict string
	Temperature, Frequency                string // numbers; "" = any
	From, To                              string // dates
}

func addArchiveFilterFlags(cmd *cobra.Command, f *archiveFilterFlags, results bool) {
	fl := cmd.Flags()
	fl.StringVar(&f.Part, "part", "", "only this part or board number")
	fl.StringVar(&f.Lot, "lot", "", "only this lot")
	fl.StringVar(&f.Bench, "bench", "", "only campaigns of this bench")
	fl.StringVar(&f.From, "from", "", "only campaigns started on or after this date (YYYY-MM-DD, or RFC 3339 time)")
	fl.StringVar(&f.To, "to", "", "only campaigns started before the end of this date (YYYY-MM-DD, or before this RFC 3339 time)")
	if results {
		fl.StringVar(&f.Unit, "unit", "", "only this unit")
		fl.StringVar(&f.Test, "test", "", "only this test (cmrr, psrr_pos, ...)")
		fl.StringVar(&f.Temperature, "temperature", "", "only this nominal temperature, °C")
		fl.StringVar(&f.Frequency, "frequency", "", "only this stimulus frequency, Hz, within 0.1 % (0: DC results)")
		fl.StringVar(&f.Verdict, "verdict", "", `only this verdict: pass, "conditional pass", "conditional fail", fail, "not judged", "no result"`)
	}
}

func (f archiveFilterFlags) filter() (archive.Filter, error) {
	out := archive.Filter{Part: f.Part, Lot: f.Lot, Unit: f.Unit, Test: f.Test, Bench: f.Bench, Verdict: f.Verdict}
	num := func(flag, s string) (*float64, error) {
		if s == "" {
			return nil, nil
		}
		x, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
		if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
			return nil, withCode(exitUsage, fmt.Errorf("--%s %q: not a number", flag, s))
		}
		return &x, nil
	}
	var err error
	if out.TemperatureC, err = num("temperature", f.Temperature); err != nil {
		return out, err
	}
	if out.FrequencyHz, err = num("frequency", f.Frequency); err != nil {
		return out, err
	}
	if out.From, err = parseArchiveDate("from", f.From, false); err != nil {
		return out, err
	}
	if out.To, err = parseArchiveDate("to", f.To, true); err != nil {
		return out, err
	}
	if !out.From.IsZero() && !out.To.IsZero() && !out.From.Before(out.To) {
		return out, withCode(exitUsage, fmt.Errorf("--from %s is not before --to %s", f.From, f.To))
	}
	if v := out.Verdict; v != "" {
		known := false
		for _, k := range []string{"pass", "conditional pass", "conditional fail", "fail", "not judged", "no result"} {
			known = known || v == k
		}
		if !known {
			return out, withCode(exitUsage, fmt.Errorf(`--verdict %q: give pass, "conditional pass", "conditional fail", fail, "not judged" or "no result"`, v))
		}
	}
	return out, nil
}

// parseArchiveDate reads YYYY-MM-DD (UTC; with end, the day after, so
// --to includes its day) or an RFC 3339 time.
func parseArchiveDate(flag, s string, end bool) (time.Time, error) {
	if s == "" {
		return time.Time{}, nil
	}
	if t, err := time.Parse("2006-01-02", s); err == nil {
		if end {
			t = t.AddDate(0, 0, 1)
		}
		return t, nil
	}
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return time.Time{}, withCode(exitUsage, fmt.Errorf("--%s %q: give a date YYYY-MM-DD or an RFC 3339 time (2026-03-01T08:00:00Z)", flag, s))
	}
	return t, nil
}

type archiveListOptions struct {
	archiveFilterFlags
	Format string
}

func newArchiveListCmd(std streams, ao *archiveOptions) *cobra.Command {
	var o archiveListOptions
	cmd := &cobra.Command{
		Use:   "list",
		Short: "List the archived campaigns",
		Args:  cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return failed(runArchiveList(cmd.Context(), std, ao.DB, o))
		},
	}
	addArchiveFilterFlags(cmd, &o.archiveFilterFlags, false)
	cmd.Flags().StringVar(&o.Format, "format", "table", "output: table, csv or jsonl")
	return cmd
}

func checkFormat(f string) error {
	switch f {
	case "table", "csv", "jsonl":
		return nil
	}
	return withCode(exitUsage, fmt.Errorf("--format %q: give table, csv or jsonl", f))
}

func runArchiveList(ctx context.Context, std streams, db string, o archiveListOptions) error {
	if err := checkFormat(o.Format); err != nil {
		return err
	}
	f, err := o.filter()
	if err != nil {
		return err
	}
	s, err := openArchive(ctx, db)
	if err != nil {
		return err
	}
	defer s.Close()
	list, err := s.List(ctx, f)
	if err != nil {
		return withCode(exitFailure, err)
	}
	return writeCampaignList(std.Out, list, o.Format)
}

var campaignListHeader = []string{"campaign", "started", "finished", "part", "lot", "bench", "name", "operator", "results", "readings",
	"temperatures_c", "incomplete", "missing_points", "integrity", "plan_hash", "journal_hash", "journal_path", "tool", "added"}

func writeCampaignList(w io.Writer, list []archive.CampaignInfo, format string) error {
	switch format {
	case "table":
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "ID\tSTARTED\tPART\tLOT\tBENCH\tRESULTS\tREADINGS\tSTATE\tPLAN")
		for _, c := range list {
			state := "complete"
			if c.Incomplete {
				state = fmt.Sprintf("incomplete (%d missing)", c.MissingPoints)
			}
			if c.Integrity != "" {
				state += "; " + c.Integrity
			}
			fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%s\t%d\t%d\t%s\t%s\n", c.ID, c.Started.UTC().Format("2006-01-02 15:04"), c.Part, c.Lot, c.Bench,
				c.Results, c.Readings, state, shortHex(c.PlanHash))
		}
		if err := tw.Flush(); err != nil {
			return err
		}
		fmt.Fprintf(w, "%d campaigns\n", len(list))
		return nil
	case "csv":
		cw := csv.NewWriter(w)
		cw.UseCRLF = true // RFC 4180 §2 item 1
		cw.Write(campaignListHeader)
		for _, c := range list {
			cw.Write([]string{strconv.FormatInt(c.ID, 10), ftimeText(c.Started), ftimeText(c.Finished), c.Part, c.Lot, c.Bench, c.Name, c.Operator,
				strconv.Itoa(c.Results), strconv.Itoa(c.Readings), floatList(c.TemperaturesC, ";"), strconv.FormatBool(c.Incomplete),
				strconv.Itoa(c.MissingPoints), c.Integrity, c.PlanHash, c.JournalHash, c.JournalPath, c.Tool, ftimeText(c.Added)})
		}
		cw.Flush()
		return cw.Error()
	}
	bw := bufio.NewWriter(w)
	enc := json.NewEncoder(bw)
	for _, c := range list {
		if err := enc.Encode(map[string]any{
			"campaign": c.ID, "started": ftimeText(c.Started), "finished": ftimeText(c.Finished), "part": c.Part, "lot": c.Lot,
			"bench": c.Bench, "name": c.Name, "operator": c.Operator, "results": c.Results, "readings": c.Readings,
			"temperatures_c": c.TemperaturesC, "incomplete": c.Incomplete, "missing_points": c.MissingPoints,
			"integrity": c.Integrity, "plan_hash": c.PlanHash, "journal_hash": c.JournalHash, "journal_path": c.JournalPath,
			"tool": c.Tool, "added": ftimeText(c.Added),
		}); err != nil {
			return err
		}
	}
	return bw.Flush()
}

type archiveQueryOptions struct {
	archiveFilterFlags
	Format string
}

func newArchiveQueryCmd(std streams, ao *archiveOptions) *cobra.Command {
	var o archiveQueryOptions
	cmd := &cobra.Command{
		Use:   "query",
		Short: "Print archived results selected by part, lot, unit, test, temperature, frequency, dates, bench or verdict",
		Long: `query prints the archived results the flags select, oldest campaign
first, as a table, CSV (RFC 4180) or JSON lines. Each row carries its
campaign, part, lot, bench and plan hash; CSV and JSON lines add every
figure of the result (coefficient with u and U, ratio with U in dB, k,
ν_eff, lower bound, limit, decision rule, flags and notes), so a result's
statement can be rebuilt from them. Text matches exactly; temperature
within 0.005 °C; frequency within 0.1 % (--frequency 37.28 finds 37.2759 Hz).`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return failed(runArchiveQuery(cmd.Context(), std, ao.DB, o))
		},
	}
	addArchiveFilterFlags(cmd, &o.archiveFilterFlags, true)
	cmd.Flags().StringVar(&o.Format, "format", "table", "output: table, csv or jsonl")
	return cmd
}

func runArchiveQuery(ctx context.Context, std streams, db string, o archiveQueryOptions) error {
	if err := checkFormat(o.Format); err != nil {
		return err
	}
	f, err := o.filter()
	if err != nil {
		return err
	}
	rows, _, err := queryArchive(ctx, db, f)
	if err != nil {
		return err
	}
	return writeResultRows(std.Out, rows, o.Format)
}

// resultRowHeader names the CSV columns and JSON keys of query; the result
// figures use the names of the results export (report/export.go).
var resultRowHeader = []string{"campaign", "started", "part", "lot", "bench", "unit", "test", "temperature_c", "frequency_hz",
	"coefficient_uv_per_v", "coefficient_std_u_uv_per_v", "coefficient_expanded_u_uv_per_v",
	"ratio_db", "expanded_u_db", "coverage_k", "dof_effective", "resolved", "lower_bound_db", "reported_db", "limit_db",
	"phase_deg", "phase_expanded_u_deg", "noise_floor_db", "coverage_probability",
	"verdict", "rule", "flags", "notes", "plan_hash", "journal_hash"}

func writeResultRows(w io.Writer, rows []archive.Row, format string) error {
	switch format {
	case "table":
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
		fmt.Fprintln(tw, "ID\tSTARTED\tPART\tLOT\tBENCH\tUNIT\tTEST\t°C\tHz\tµV/V\tU µV/V\tdB\tU dB\tk\tVERDICT\t")
		for _, r := range rows {
			// Each value is rounded to the last digit of its U (GUM 7.2.6).
			db, uDB := fmtWithU(r.RatioDB, r.ExpandedUDB)
			if !r.Resolved && !math.IsNaN(r.LowerBoundDB) {
				db = "≥" + fmtFixed(r.LowerBoundDB, 1)
			}
			coef, uCoef := fmtWithU(r.CoefficientUVPerV, r.CoefficientExpandedUUVPerV)
			hz := "DC"
			if r.FrequencyHz != 0 {
				hz = fmtHz(r.FrequencyHz)
			}
			fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%s\t%s\t%s\t%g\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t\n", r.Campaign, r.Started.UTC().Format("2006-01-02"),
				r.Part, r.Lot, r.Bench, r.Unit, r.Test, r.TemperatureC, hz, coef, uCoef,
				db, uDB, fmtG(r.CoverageK, 3), r.Verdict)
		}
		if err := tw.Flush(); err != nil {
			return err
		}
		fmt.Fprintf(w, "%d results\n", len(rows))
		return nil
	case "csv":
		cw := csv.NewWriter(w)
		cw.UseCRLF = true // RFC 4180 §2 item 1
		cw.Write(resultRowHeader)
		for _, r := range rows {
			cw.Write([]string{strconv.FormatInt(r.Campaign, 10), ftimeText(r.Started), r.Part, r.Lot, r.Bench, r.Unit, r.Test,
				csvNum(r.TemperatureC), csvNum(r.FrequencyHz), csvNum(r.CoefficientUVPerV), csvNum(r.CoefficientStdUUVPerV),
				csvNum(r.CoefficientExpandedUUVPerV), csvNum(r.RatioDB), csvNum(r.ExpandedUDB), csvNum(r.CoverageK),
				csvNum(r.DOFEffective), strconv.FormatBool(r.Resolved), csvNum(r.LowerBoundDB), csvNum(r.ReportedDB()),
				csvNum(r.LimitDB), csvNum(r.PhaseDeg), csvNum(r.PhaseExpandedUDeg), csvNum(r.NoiseFloorDB), csvNum(r.Coverage), r.Verdict, r.Rule, strings.Join(r.Flags, ";"),
				strings.Join(r.Notes, " | "), r.PlanHash, r.JournalHash})
		}
		cw.Flush()
		return cw.Error()
	}
	bw := bufio.NewWriter(w)
	enc := json.NewEncoder(bw)
	for _, r := range rows {
		notes := r.Notes
		if notes == nil {
			notes = []string{}
		}
		flags := r.Flags
		if flags == nil {
			flags = []string{}
		}
		if err := enc.Encode(map[string]any{
			"campaign": r.Campaign, "started": ftimeText(r.Started), "part": r.Part, "lot": r.Lot, "bench": r.Bench,
			"unit": r.Unit, "test": r.Test, "temperature_c": jsonNum(r.TemperatureC), "frequency_hz": jsonNum(r.FrequencyHz),
			"coefficient_uv_per_v": jsonNum(r.CoefficientUVPerV), "coefficient_std_u_uv_per_v": jsonNum(r.CoefficientStdUUVPerV),
			"coefficient_expanded_u_uv_per_v": jsonNum(r.CoefficientExpandedUUVPerV), "ratio_db": jsonNum(r.RatioDB),
			"expanded_u_db": jsonNum(r.ExpandedUDB), "coverage_k": jsonNum(r.CoverageK), "dof_effective": jsonNum(r.DOFEffective),
			"resolved": r.Resolved, "lower_bound_db": jsonNum(r.LowerBoundDB), "reported_db": jsonNum(r.ReportedDB()),
			"limit_db": jsonNum(r.LimitDB), "phase_deg": jsonNum(r.PhaseDeg), "phase_expanded_u_deg": jsonNum(r.PhaseExpandedUDeg),
			"noise_floor_db": jsonNum(r.NoiseFloorDB), "coverage_probability": jsonNum(r.Coverage), "verdict": r.Verdict, "rule": r.Rule,
			"flags": flags, "notes": notes, "plan_hash": r.PlanHash, "journal_hash": r.JournalHash,
		}); err != nil {
			return err
		}
	}
	return bw.Flush()
}

// jsonNum is x, or nil (JSON null) when NaN or infinite (JSON has no such
// numbers, RFC 8259 §6).
func jsonNum(x float64) any {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return x
}

// csvNum is the shortest form that reads back to x; NaN is empty,
// infinities "+Inf"/"-Inf" (as the results export).
func csvNum(x float64) string {
	if math.IsNaN(x) {
		return ""
	}
	return strconv.FormatFloat(x, 'g', -1, 64)
}

func fmtFixed(x float64, prec int) string {
	if math.IsNaN(x) {
		return "-"
	}
	return strconv.FormatFloat(x, 'f', prec, 64)
}

// fmtWithU prints the expanded uncertainty u with two significant digits
// and x rounded to u's last digit (GUM 7.2.6: "it is usually sufficient
// to quote u_c(y) and U to at most two significant digits"; the estimate
// is rounded consistently with them). Without a finite positive u, x
// gets four significant digits.
func fmtWithU(x, u float64) (xs, us string) {
	if math.IsNaN(u) || math.IsInf(u, 0) || u <= 0 {
		return fmtG(x, 4), fmtG(u, 2)
	}
	d := max(0, 1-int(math.Floor(math.Log10(u))))
	return fmtFixed(x, d), fmtFixed(u, d)
}

// fmtHz prints a frequency with at most five significant digits, no
// exponent and no trailing zeros ("37.276", "26830", "50"); "-" when not
// known.
func fmtHz(f float64) string {
	if math.IsNaN(f) || math.IsInf(f, 0) || f == 0 {
		return fmtG(f, 5)
	}
	d := max(0, 4-int(math.Floor(math.Log10(math.Abs(f)))))
	t := fmtFixed(f, d)
	if strings.Contains(t, ".") {
		t = strings.TrimRight(strings.TrimRight(t, "0"), ".")
	}
	return t
}

func fmtG(x float64, digits int) string {
	if math.IsNaN(x) {
		return "-"
	}
	return strconv.FormatFloat(x, 'g', digits, 64)
}

func ftimeText(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Format(time.RFC3339)
}

func floatList(xs []float64, sep string) string {
	parts := make([]string, len(xs))
	for i, x := range xs {
		parts[i] = strconv.FormatFloat(x, 'g', -1, 64)
	}
	return strings.Join(parts, sep)
}
