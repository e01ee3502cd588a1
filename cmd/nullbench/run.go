package main

import (
	"context"
	"fmt"
	"path/filepath"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"nullbench/procedure/plan"
)

type runOptions struct {
	Plan           string
	AllowHazardous bool
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

Exit status: 0 all judged results pass, 5 some result failed its limit,
2 bad plan or flags, 3 instrument fault, 4 plan refused as unsafe.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Plan = args[0]
			return failed(run(cmd.Context(), std, o))
		},
	}
	addOutputFlags(cmd, &o.outputOptions, "folder for the journal, workbook and exports (default: a new folder named after the plan)")
	cmd.Flags().BoolVar(&o.AllowHazardous, "allow-hazardous", false, "allow a plan above 60 V DC (asks for confirmation at a terminal; see SAFETY.md)")
	return cmd
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
	rec, _, runErr := measure(ctx, std, measureOptions{
		Plan: p, JournalPath: filepath.Join(o.Out, "journal.jsonl"), AllowHazardous: o.AllowHazardous,
	})
	return finish(std, o.outputOptions, runErr, rec)
}

// finish analyses what was measured (also after a failed run: the readings
// taken are worth a report), writes the outputs and picks the exit status.
func finish(std streams, o outputOptions, runErr error, recs ...campaignRecord) error {
	var measured []campaignRecord
	for _, rec := range recs {
		if len(rec.Readings) == 0 {
			continue
		}
		res, err := analyse(rec.Plan, rec.Readings)
		if err != nil {
			if runErr != nil {
				return runErr
			}
			return err
		}
		rec.Results = res
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
	if runErr != nil {
		return runErr
	}
	if anyFailed(c) {
		return withCode(exitOutOfLimits, fmt.Errorf("some results did not pass their limits (see %s)", book))
	}
	return nil
}
