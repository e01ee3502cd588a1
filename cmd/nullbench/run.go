package main

import (
	"context"
	"fmt"
	"path/filepath"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"nullbench/procedure/plan"
	"nullbench/report"
)

type runOptions struct {
	Plan           string
	AllowHazardous bool
	Force          bool
	Skip           []string // UNIT or UNIT=REASON
	outputOptions
}

func addOutputFlags(cmd *cobra.Command, o *outputOptions, outHelp string) {
	f := cmd.Flags()
	f.StringVar(&o.Out, "out", "", outHelp)
	f.StringVar(&o.Plots, "plots", "", "also write PNG plots into this folder")
	f.BoolVar(&o.JSON, "json", false, "print one JSON object per result on standard output (progress and summary go to standard error)")
	f.BoolVar(&o.NoCharts, "no-charts", false, "leave the charts out of the workbook")
}

func newRunCmd(std streams, run func(context.Context, streams, runOptions) error) *cobra.Command {
	var o runOptions
	cmd := &cobra.Command{
		Use:   "run PLAN",
		Short: "Measure a plan on the instruments it names and write the journal and workbook",
		Long: `run checks the plan (refusing it before any instrument contact if it is
unsafe), connects to the instruments of its bench section, powers the part
up in a safe order, steps the stimulus through drift-cancelling sequences,
journals every reading, powers down, fits the results and writes the
workbook, CSV and JSON-lines exports into --out.

Exit status: 0 all judged results pass (DC and, for [[ac_test]] tables,
each frequency), 5 some result failed its limit,
2 bad plan or flags, 3 instrument fault, 4 plan refused as unsafe.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Plan = args[0]
			return failed(run(cmd.Context(), std, o))
		},
	}
	addOutputFlags(cmd, &o.outputOptions, "folder for the journal, workbook and exports (default: a new folder named after the plan)")
	cmd.Flags().BoolVar(&o.AllowHazardous, "allow-hazardous", false, "allow a plan above 60 V DC (asks for confirmation at a terminal; see SAFETY.md)")
	cmd.Flags().BoolVar(&o.Force, "force", false, "write into an --out folder that holds other files (files of the same names are replaced)")
	addArchiveFlag(cmd, &o.outputOptions)
	cmd.Flags().StringArrayVar(&o.Skip, "skip", nil, "leave a unit out: UNIT or UNIT=REASON (socket empty, part cracked); repeatable")
	return cmd
}

// parseSkips turns --skip values into unit → reason, checking the units.
func parseSkips(p *plan.Plan, vals []string) (map[string]string, error) {
	if len(vals) == 0 {
		return nil, nil
	}
	out := map[string]string{}
	for _, v := range vals {
		id, reason, _ := strings.Cut(v, "=")
		id = strings.TrimSpace(id)
		found := false
		for _, u := range p.Units {
			found = found || u.ID == id
		}
		if !found {
			return nil, withCode(exitUsage, fmt.Errorf("--skip %q: plan %s has no unit %q", v, p.Source, id))
		}
		out[id] = strings.TrimSpace(reason)
	}
	return out, nil
}

func defaultOutDir(plan string) string {
	base := strings.TrimSuffix(filepath.Base(plan), filepath.Ext(plan))
	return fmt.Sprintf("nullbench-%s-%s", base, time.Now().UTC().Format("20060102T150405Z"))
}

func runRun(ctx context.Context, std streams, o runOptions) error {
	p, err := plan.Load(o.Plan)
	if err != nil {
		return withCode(exitUsage, err)
	}
	if o.Out == "" {
		o.Out = defaultOutDir(o.Plan)
	}
	skips, err := parseSkips(p, o.Skip)
	if err != nil {
		return err
	}
	if err := checkOutDir(o.Out, p, o.Force); err != nil {
		return err
	}
	if o.Force {
		if err := clearRun(o.Out); err != nil {
			return withCode(exitFailure, err)
		}
	}
	rec, _, runErr := measure(ctx, std, measureOptions{
		Plan: p, JournalPath: filepath.Join(o.Out, runJournalName), AllowHazardous: o.AllowHazardous,
		RunFolder: true, Skip: skips,
	})
	return finish(std, o.outputOptions, runErr, rec)
}

// finish analyses what was measured (also after a failed run: the readings
// taken are worth a report), writes the outputs and picks the exit status.
func finish(std streams, o outputOptions, runErr error, recs ...campaignRecord) error {
	var measured []campaignRecord
	var integrity error
	for _, rec := range recs {
		journalState(std, &rec)
		if rec.Integrity != nil && integrity == nil {
			integrity = rec.Integrity
		}
		if len(rec.Readings) == 0 && len(rec.ACReadings) == 0 {
			continue
		}
		var resolve profileResolver
		if rec.Folder != nil {
			resolve = rec.Folder.resolver()
		}
		res, err := analyseWith(rec.Plan, rec.Readings, resolve)
		if err != nil {
			if runErr != nil {
				return runErr
			}
			return err
		}
		rec.Results = res
		if err := analyseFreq(&rec, resolve); err != nil {
			if runErr != nil {
				return runErr
			}
			return err
		}
		measured = append(measured, rec)
	}
	if len(measured) == 0 {
		return runErr
	}
	c := toReport(measured...)
	book, err := writeOutputs(std, o, c)
	if err != nil {
		if runErr != nil {
			return runErr
		}
		return err
	}
	summary := std.Out
	if o.JSON {
		summary = std.Err // standard output carries the JSON lines
	}
	printSummary(summary, c, book)
	for _, rec := range measured {
		printFreqSummary(summary, rec)
	}
	if m, err := readManifest(o.Out); (err != nil || m.Plan.File == "") && len(measured) > 0 {
		// Not a run folder (the demo's, or a report written away from
		// its run folder): the manifest lists each journal with its plan,
		// so a later report of the same plans may write here.
		if err := writeOutputManifest(o.Out, measured, outputsOf(c)); err != nil {
			return withCode(exitFailure, fmt.Errorf("write the output folder's manifest: %w", err))
		}
	}
	for _, rec := range measured {
		if rec.Journal == nil || rec.Completeness == nil || !sameDir(filepath.Dir(rec.JournalPath), o.Out) {
			continue
		}
		if err := sealRunFolder(o.Out, rec.JournalPath, rec.Journal, *rec.Completeness, outputsOf(c)); err != nil {
			return withCode(exitFailure, fmt.Errorf("update the run folder's manifest: %w", err))
		}
	}
	archiveErr := archiveMeasured(std, o.Archive, runErr, measured)
	if runErr != nil {
		return runErr
	}
	if integrity != nil {
		return withCode(exitFailure, fmt.Errorf("%w: the workbook %s says so on its Summary sheet; compare the journal with a backup", integrity, book))
	}
	if archiveErr != nil {
		return archiveErr
	}
	if anyFailed(c) {
		return withCode(exitOutOfLimits, fmt.Errorf("some results did not pass their limits (see %s)", book))
	}
	if n := len(c.Problems); n > 0 {
		return withCode(exitProblems, fmt.Errorf("%d result(s) could not be formed or judged (the %s sheet of %s, problems.jsonl)", n, report.SheetProblems, book))
	}
	return nil
}
