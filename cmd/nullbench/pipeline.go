package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"time"

	"nullbench/procedure"
	"nullbench/procedure/analysis"
	"nullbench/procedure/clock"
	"nullbench/procedure/estimate"
	"nullbench/procedure/journal"
	"nullbench/procedure/operator"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
	"nullbench/report"
)

// outputOptions are the flags shared by run, resume, report and demo.
type outputOptions struct {
	Out      string // folder for the workbook, exports and journal
	Plots    string // folder for PNG plots ("" = none)
	JSON     bool   // one JSON object per result on standard output
	NoCharts bool
	// Archive is the results archive (--archive on run, resume and demo)
	// that finish adds the measured campaigns to; "" = none.
	Archive string
}

// analysisInputs takes the instruments' accuracy from the profiles the plan
// names, without contacting them, so that "report" gives the same budget as
// the run that took the readings.
func analysisInputs(p *plan.Plan) (analysis.Inputs, error) {
	return analysisInputsWith(p, planProfiles(p))
}

// analysisInputsWith is analysisInputs with the profiles from resolve (a
// run folder's copies).
func analysisInputsWith(p *plan.Plan, resolve profileResolver) (analysis.Inputs, error) {
	in := analysis.Inputs{StimulusByRole: map[string]estimate.Accuracy{}}
	for _, rb := range roleBindings(p) {
		if rb.binding.Instrument == "" {
			continue
		}
		spec, ok := p.Bench.Instruments[rb.binding.Instrument]
		if !ok {
			continue // validation reports it
		}
		prof, err := resolve(rb.binding.Instrument, spec.Profile)
		if err != nil {
			return in, fmt.Errorf("plan %s, [bench.instrument.%s] profile: %w", p.Source, rb.binding.Instrument, err)
		}
		switch rb.role {
		case "meter":
			if prof.Meter != nil {
				a := prof.Meter.Accuracy
				in.Meter = estimate.Accuracy{GainPPM: a.GainPPM, OffsetVolts: a.OffsetPPMOfRange * 1e-6 * 10}
			}
		case "supply_pos", "supply_neg":
			if prof.Supply != nil {
				a := prof.Supply.Accuracy
				in.StimulusByRole[rb.role] = estimate.Accuracy{GainPPM: a.ReadbackGainPPM, OffsetVolts: a.ReadbackOffsetVolts}
			}
		case "source_cm", "source_diff", "source_ref":
			if prof.Source != nil {
				a := prof.Source.Accuracy
				in.StimulusByRole[rb.role] = estimate.Accuracy{GainPPM: a.ReadbackGainPPM, OffsetVolts: a.ReadbackOffsetVolts}
			}
		}
	}
	return in, nil
}

// analyse fits a plan's readings.
func analyse(p *plan.Plan, readings []journal.Reading) (*analysis.Results, error) {
	return analyseWith(p, readings, planProfiles(p))
}

func analyseWith(p *plan.Plan, readings []journal.Reading, resolve profileResolver) (*analysis.Results, error) {
	if resolve == nil {
		resolve = planProfiles(p)
	}
	in, err := analysisInputsWith(p, resolve)
	if err != nil {
		return nil, withCode(exitUsage, err)
	}
	res, err := analysis.Analyze(p, readings, in)
	if err != nil {
		return nil, withCode(exitFailure, fmt.Errorf("analyse %s: %w", p.Source, err))
	}
	return res, nil
}

// chartOptions draw every unit of a lot of up to chartUnits units in the
// per-unit charts (the lowest ratios first when there are more): enough
// for a screening lot, few enough that the lines stay readable.
const chartUnits = 16

func chartOptions() report.ChartOptions { return report.ChartOptions{MaxUnits: chartUnits} }

// writeOutputs writes the workbook, the CSV and JSON-lines exports and,
// when asked, PNG plots, and returns the workbook's path.
func writeOutputs(std streams, o outputOptions, c *report.Campaign) (string, error) {
	if err := os.MkdirAll(o.Out, 0o755); err != nil {
		return "", withCode(exitFailure, err)
	}
	if _, err := report.RemoveStaleTemps(o.Out); err != nil {
		return "", withCode(exitFailure, err)
	}
	book := filepath.Join(o.Out, "campaign.xlsx")
	if err := report.WriteWorkbook(book, c, report.WorkbookOptions{NoCharts: o.NoCharts, Charts: chartOptions()}); err != nil {
		return "", withCode(exitFailure, fmt.Errorf("write the workbook %s: %w", book, err))
	}
	// User text that a spreadsheet would run as a formula (a leading =,
	// +, - or @) is neutralised in the CSV exports, as in the workbook.
	csvOpt := report.CSVOptions{GuardFormulas: true}
	files := []struct {
		name  string
		write func(io.Writer) error
	}{
		{"results.csv", func(w io.Writer) error { return report.WriteResultsCSV(w, c.Results, csvOpt) }},
		{"readings.csv", func(w io.Writer) error { return report.WriteReadingsCSV(w, c.Readings, csvOpt) }},
		{"results.jsonl", func(w io.Writer) error { return report.WriteResultsJSONL(w, c.Results) }},
		{"readings.jsonl", func(w io.Writer) error { return report.WriteReadingsJSONL(w, c.Readings) }},
		{"problems.jsonl", func(w io.Writer) error { return report.WriteProblemsJSONL(w, c.Problems) }},
	}
	if len(c.FreqResults) > 0 {
		files = append(files, []struct {
			name  string
			write func(io.Writer) error
		}{
			{freqOutputs[0], func(w io.Writer) error { return report.WriteFreqResultsCSV(w, c.FreqResults, csvOpt) }},
			{freqOutputs[1], func(w io.Writer) error { return report.WriteFreqResultsJSONL(w, c.FreqResults) }},
		}...)
	}
	for _, f := range files {
		if err := writeFile(filepath.Join(o.Out, f.name), f.write); err != nil {
			return "", withCode(exitFailure, err)
		}
	}
	if o.Plots != "" {
		if _, err := report.WritePlotsWith(o.Plots, c, chartOptions()); err != nil {
			return "", withCode(exitFailure, fmt.Errorf("write plots into %s: %w", o.Plots, err))
		}
	}
	if o.JSON {
		if err := report.WriteResultsJSONL(std.Out, c.Results); err != nil {
			return "", err
		}
		// Frequency-response results follow, one object each, told apart
		// by their frequency_hz key (absent from DC results).
		if err := report.WriteFreqResultsJSONL(std.Out, c.FreqResults); err != nil {
			return "", err
		}
	}
	return book, nil
}

// writeFile writes through a temporary file renamed into place, refusing
// an existing symbolic link (report.WriteFileAtomic).
func writeFile(path string, write func(io.Writer) error) error {
	return report.WriteFileAtomic(path, write)
}

// consent asks for permission to run a hazardous plan. It returns an error
// (exit code: safety) when the plan is hazardous and the operator has not
// allowed it; it never asks without a terminal.
func consent(std streams, in *bufio.Reader, p *plan.Plan, allow bool) (safety.HazardConsent, error) {
	h := safety.AssessHazard(p)
	c := safety.HazardConsent{AllowOption: allow, Interactive: std.IsTerm}
	if !h.Hazardous {
		return c, nil
	}
	if !allow {
		return c, withCode(exitSafety, fmt.Errorf("plan %s takes a terminal to %.1f V (%s), above the %.0f V DC limit for extra-low voltage; "+
			"see SAFETY.md, then run with --allow-hazardous from an interactive terminal", p.Source, h.MaxAcrossVolts, h.Where, safety.HazardousVolts))
	}
	if !std.IsTerm {
		return c, withCode(exitSafety, fmt.Errorf("plan %s is hazardous (%.1f V); it needs an interactive confirmation and there is no terminal", p.Source, h.MaxAcrossVolts))
	}
	fmt.Fprint(std.Err, safety.HazardPrompt(h))
	line, _ := in.ReadString('\n')
	c.Confirmed = safety.HazardAnswerOK(line)
	if !c.Confirmed {
		return c, withCode(exitSafety, errors.New("hazardous plan not confirmed; nothing was switched on"))
	}
	return c, nil
}

// measure runs a plan (fresh, or continuing a journal) and returns what it
// measured. It refuses unsafe plans before opening any connection. On a
// failure mid-run the error says which step failed; the readings taken so
// far are returned with it and are in the journal.
type measureOptions struct {
	Plan           *plan.Plan
	JournalPath    string
	Resume         bool
	AllowHazardous bool
	Clock          clock.Clock       // nil: scaled wall clock from the plan
	Log            io.Writer         // nil: none
	Operator       operator.Operator // nil: a LineOperator on the terminal, if there is one
	// RunFolder copies the plan and its profiles beside a new journal
	// (run): the folder can then be re-reported on its own.
	RunFolder bool
	Skip      map[string]string // units to leave out, with the reason
	// Profiles resolves the plan's profile entries (nil: from the plan,
	// relative paths from its folder; resume from a run folder: the
	// folder's copies).
	Profiles profileResolver
}

func measure(ctx context.Context, std streams, o measureOptions) (campaignRecord, *procedure.Outcome, error) {
	p := o.Plan
	rec := campaignRecord{Plan: p, Started: time.Now().UTC(), JournalPath: o.JournalPath}
	// One reader for the terminal, so nothing typed ahead of the hazard
	// question is lost to the operator's prompts.
	in := bufio.NewReader(std.In)
	hc, err := consent(std, in, p, o.AllowHazardous)
	if err != nil {
		return rec, nil, err
	}
	if err := safety.CheckSafetyWith(p, hc); err != nil {
		return rec, nil, safetyExit(err)
	}
	profiles := o.Profiles
	if profiles == nil {
		profiles = planProfiles(p)
	}
	if err := checkBenchWith(p, profiles); err != nil {
		return rec, nil, err
	}
	if why := operator.NeedsOperator(p); why != "" && !std.IsTerm && o.Operator == nil {
		return rec, nil, withCode(exitUsage, fmt.Errorf("plan %s needs an operator at a terminal (%s), and standard input is not a terminal", p.Source, why))
	}
	clk := o.Clock
	if clk == nil {
		clk = clock.NewScaled(p.Bench.TimeScale)
	}

	// The journal records the plan's absolute path: resume and report
	// find it there whatever folder they are started from.
	planPath := p.Source
	if abs, err := filepath.Abs(planPath); err == nil {
		planPath = abs
	}
	header := journal.Header{PlanHash: p.Hash, PlanPath: planPath, ToolVersion: version, Started: rec.Started, TimeScale: p.Bench.TimeScale}
	var (
		jw     *journal.Writer
		resume *journal.Contents
	)
	if o.Resume {
		jw, resume, err = journal.Resume(o.JournalPath, p, header)
		if resume != nil && resume.Truncated {
			fmt.Fprintf(std.Err, "journal %s: line %d was cut short by the interruption and was dropped; that point is measured again\n", o.JournalPath, resume.TruncatedLine)
		}
		if resume != nil && !resume.Header.Started.IsZero() {
			rec.Started = resume.Header.Started
		}
	} else {
		// The folder is made only now, after the plan passed every check.
		if err := os.MkdirAll(filepath.Dir(o.JournalPath), 0o755); err != nil {
			return rec, nil, withCode(exitFailure, err)
		}
		if o.RunFolder {
			if err := copyRunInputs(filepath.Dir(o.JournalPath), p); err != nil {
				return rec, nil, withCode(exitFailure, err)
			}
		}
		jw, err = journal.Open(o.JournalPath, header)
	}
	if err != nil {
		return rec, nil, withCode(exitUsage, err)
	}
	defer jw.Close()

	rig, closeBench, err := openBench(ctx, p, profiles, clk.Sleep)
	if err != nil {
		return rec, nil, withCode(exitInstrument, err)
	}
	defer closeBench()
	rec.Identities = rig.Identities

	op := o.Operator
	if op == nil && std.IsTerm {
		op = &operator.LineOperator{In: in, Out: std.Err}
	}
	figs, _ := planFigures(p) // problems were reported by open already
	out, runErr := procedure.Run(ctx, p, rig, procedure.RunOptions{
		Journal: jw, Resume: resume, Clock: clk, Operator: op, Figures: &figs,
		Progress: newProgress(std.Err, std.IsTerm), Log: o.Log, Consent: hc, Skip: o.Skip,
	})
	rec.Finished = time.Now().UTC()
	if out != nil {
		rec.Readings = out.Readings
		rec.ACReadings = out.ACReadings
	}
	if runErr != nil {
		var se *safety.SafetyError
		switch {
		case errors.As(runErr, &se):
			runErr = withCode(exitSafety, runErr)
		// The runner's error says whether the bench reached its safe state
		// (fault.RunError); never claim it here.
		case ctx.Err() != nil:
			runErr = withCode(exitFailure, fmt.Errorf("%w\nthe journal %s keeps every reading (continue with: nullbench resume %s)", runErr, o.JournalPath, o.JournalPath))
		default:
			runErr = withCode(exitInstrument, fmt.Errorf("%w\nthe journal %s keeps every reading (continue with: nullbench resume %s)", runErr, o.JournalPath, o.JournalPath))
		}
	}
	return rec, out, runErr
}

// anyFailed says whether any judged result failed its limit.
func anyFailed(c *report.Campaign) bool {
	for _, r := range c.Results {
		if k := report.VerdictClass(r.Verdict); k == report.KindFail || k == report.KindConditionalFail {
			return true
		}
	}
	for _, r := range c.FreqResults {
		if k := report.VerdictClass(r.Verdict); k == report.KindFail || k == report.KindConditionalFail {
			return true
		}
	}
	return false
}

// printSummary writes the short summary a person reads after a campaign.
func printSummary(w io.Writer, c *report.Campaign, book string) {
	// cmrr_uncorrected is left out of the unit verdicts and the lowest
	// figures where a corrected cmrr of the same unit and temperature
	// stands beside it; without one it is the only common-mode figure.
	type ut struct {
		unit string
		t    float64
	}
	hasCMRR := map[ut]bool{}
	for _, r := range c.Results {
		if r.Test == plan.TestCMRR {
			hasCMRR[ut{r.Unit, r.TemperatureC}] = true
		}
	}
	shadowed := func(r report.Result) bool {
		return r.Test == analysis.ResultCMRRUncorrected && hasCMRR[ut{r.Unit, r.TemperatureC}]
	}
	counts := map[report.VerdictKind]int{}
	for _, r := range c.Results {
		counts[report.VerdictClass(r.Verdict)]++
	}
	fmt.Fprintf(w, "\n%s — %s, lot %s\n", c.Name, c.Part, c.Lot)
	if c.Incomplete {
		fmt.Fprintf(w, "INCOMPLETE: %d of %d planned points not measured (resume the journal to finish)\n", c.MissingPoints, c.PlannedPoints)
	}
	if c.Integrity != "" {
		fmt.Fprintf(w, "WARNING: %s\n", c.Integrity)
	}
	for _, u := range c.Units {
		if u.Skipped != "" {
			fmt.Fprintf(w, "unit %s skipped: %s\n", u.ID, u.Skipped)
		}
	}
	if len(c.Results) > 0 || len(c.FreqResults) == 0 {
		fmt.Fprintf(w, "results: %d pass, %d conditional pass, %d conditional fail, %d fail, %d not judged\n",
			counts[report.KindPass], counts[report.KindConditionalPass], counts[report.KindConditionalFail], counts[report.KindFail], counts[report.KindNotJudged])
	}
	if len(c.FreqResults) > 0 {
		fc := map[report.VerdictKind]int{}
		noResult := 0
		for _, r := range c.FreqResults {
			if r.Verdict == VerdictNoResult {
				noResult++
				continue
			}
			fc[report.VerdictClass(r.Verdict)]++
		}
		fmt.Fprintf(w, "frequency results (unit × test × frequency): %d pass, %d conditional pass, %d conditional fail, %d fail, %d not judged",
			fc[report.KindPass], fc[report.KindConditionalPass], fc[report.KindConditionalFail], fc[report.KindFail], fc[report.KindNotJudged])
		if noResult > 0 {
			fmt.Fprintf(w, ", %d no result", noResult)
		}
		fmt.Fprintln(w)
	}
	// Units by their verdict (report.UnitVerdicts: the most severe ILAC-G8
	// zone, or skipped, incomplete, no result).
	byKind := map[report.VerdictKind][]string{}
	other := map[string][]string{}
	var otherOrder []string
	for _, v := range report.UnitVerdicts(c, c.ReferenceTests...) {
		switch k := report.VerdictClass(v.Verdict); k {
		case report.KindNotJudged:
		case report.KindOther:
			if len(other[v.Verdict]) == 0 {
				otherOrder = append(otherOrder, v.Verdict)
			}
			other[v.Verdict] = append(other[v.Verdict], v.Unit)
		default:
			byKind[k] = append(byKind[k], v.Unit)
		}
	}
	fmt.Fprintf(w, "units:   %d pass, %d conditional pass, %d conditional fail, %d fail",
		len(byKind[report.KindPass]), len(byKind[report.KindConditionalPass]), len(byKind[report.KindConditionalFail]), len(byKind[report.KindFail]))
	for _, o := range otherOrder {
		fmt.Fprintf(w, ", %d %s", len(other[o]), o)
	}
	fmt.Fprintln(w)
	for _, k := range []report.VerdictKind{report.KindFail, report.KindConditionalFail, report.KindConditionalPass} {
		if len(byKind[k]) > 0 {
			fmt.Fprintf(w, "  %s: %s\n", k.Label(), strings.Join(byKind[k], " "))
		}
	}
	for _, o := range otherOrder {
		fmt.Fprintf(w, "  %s: %s\n", strings.ToUpper(o), strings.Join(other[o], " "))
	}
	worst := map[string]report.Result{}
	var order []string
	for _, r := range c.Results {
		if r.Verdict == VerdictNoResult {
			fmt.Fprintf(w, "  NO RESULT %s %s at %g °C: %s\n", r.Unit, r.Test, r.TemperatureC, strings.Join(r.Flags, "; "))
			continue
		}
		if shadowed(r) {
			continue
		}
		cur, ok := worst[r.Test]
		if !ok {
			order = append(order, r.Test)
		}
		if !ok || r.ReportedDB() < cur.ReportedDB() {
			worst[r.Test] = r
		}
	}
	for _, t := range order {
		r := worst[t]
		mark := ""
		if !r.Resolved {
			mark = "≥ "
		}
		limit := ""
		if !math.IsNaN(r.LimitDB) {
			limit = fmt.Sprintf(" (limit %.1f dB: %s)", r.LimitDB, r.Verdict)
		}
		fmt.Fprintf(w, "  lowest %-16s %s%7.2f dB ± %.2f  unit %s at %.0f °C%s\n", t, mark, r.ReportedDB(), r.ExpandedUDB, r.Unit, r.TemperatureC, limit)
	}
	// Problems not shown above as NO RESULT: lot-wide ones, those of a
	// result that exists but could not be judged, and any other.
	shown := map[string]bool{}
	for _, r := range c.Results {
		if r.Verdict == VerdictNoResult {
			shown[fmt.Sprintf("%s/%s/%g/%s", r.Unit, r.Test, r.TemperatureC, strings.Join(r.Flags, "; "))] = true
		}
	}
	for _, pr := range c.Problems {
		if shown[fmt.Sprintf("%s/%s/%g/%s", pr.Unit, pr.Test, pr.TemperatureC, pr.Problem)] {
			continue
		}
		who := pr.Unit
		if who == "" {
			who = "lot"
		}
		at := ""
		if !math.IsNaN(pr.TemperatureC) {
			at = fmt.Sprintf(" at %g °C", pr.TemperatureC)
		}
		fmt.Fprintf(w, "  PROBLEM %s %s%s: %s\n", who, pr.Test, at, pr.Problem)
	}
	if n := len(c.Problems); n > 0 {
		fmt.Fprintf(w, "problems: %d (the %s sheet, problems.jsonl); the exit status says so (%d)\n", n, report.SheetProblems, exitProblems)
	}
	if n := notedResults(c); n > 0 {
		fmt.Fprintf(w, "notes:   %d of %d results carry notes (the notes list in the JSON lines, the Notes column of the CSV and the Results sheet)\n", n, len(c.Results))
	}
	if book != "" {
		fmt.Fprintf(w, "workbook: %s\n", book)
	}
}

// notedResults counts the results that carry analysis notes.
func notedResults(c *report.Campaign) int {
	n := 0
	for _, r := range c.Results {
		if len(r.Notes) > 0 {
			n++
		}
	}
	return n
}
