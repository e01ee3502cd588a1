package main

import (
	"context"
	"fmt"
	"path/filepath"

	"github.com/spf13/cobra"
)

type reportOptions struct {
	Journals []string
	Plan     string
	outputOptions
}

func newReportCmd(std streams, run func(context.Context, streams, reportOptions) error) *cobra.Command {
	var o reportOptions
	cmd := &cobra.Command{
		Use:   "report JOURNAL [JOURNAL...]",
		Short: "Rebuild the results, workbook and exports from journals alone",
		Long: `report reads one or more journals (for example a lot and a board measured
in one campaign), refits every reading with the plan each journal belongs
to, and writes the workbook, CSV and JSON-lines exports. No instrument is
contacted. A truncated last line is tolerated and reported.`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Journals = args
			return failed(run(cmd.Context(), std, o))
		},
	}
	cmd.Flags().StringVar(&o.Plan, "plan", "", "the plan file, when there is one journal (default: the path recorded in the journal)")
	addOutputFlags(cmd, &o.outputOptions, "folder for the workbook and exports (default: the first journal's folder)")
	return cmd
}

func runReport(std streams, o reportOptions) error {
	if o.Plan != "" && len(o.Journals) > 1 {
		return withCode(exitUsage, fmt.Errorf("--plan applies to one journal; give journals whose recorded plan paths are right"))
	}
	if o.Out == "" {
		o.Out = filepath.Dir(o.Journals[0])
	}
	var recs []campaignRecord
	for _, j := range o.Journals {
		p, jc, err := planForJournal(j, o.Plan)
		if err != nil {
			return err
		}
		if jc.Truncated {
			fmt.Fprintf(std.Err, "journal %s: line %d is incomplete (the run was stopped while writing it) and was left out\n", j, jc.TruncatedLine)
		}
		rec := campaignRecord{Plan: p, Readings: jc.Readings, Identities: jc.Identities, Started: jc.Header.Started}
		if n := len(jc.Readings); n > 0 {
			rec.Finished = jc.Readings[n-1].Time
		}
		recs = append(recs, rec)
	}
	return finish(std, o.outputOptions, nil, recs...)
}
