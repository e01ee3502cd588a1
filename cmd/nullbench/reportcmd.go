package main

import (
	"context"
	"fmt"
	"path/filepath"

	"nullbench/procedure/journal"
	"nullbench/procedure/plan"

	"github.com/spf13/cobra"
)

type reportOptions struct {
	Journals []string
	Plan     string
	Force    bool
	outputOptions
}

func newReportCmd(std streams, run func(context.Context, streams, reportOptions) error) *cobra.Command {
	var o reportOptions
	cmd := &cobra.Command{
		Use:   "report RUN-FOLDER|JOURNAL [...]",
		Short: "Rebuild the results, workbook and exports from journals alone",
		Long: `report reads one or more journals (for example a lot and a board measured
in one campaign), refits every reading with the plan each journal belongs
to, and writes the workbook, CSV and JSON-lines exports. No instrument is
contacted. A truncated last line is tolerated and reported.

Given a run folder (the --out of run), it uses the folder's own copies of
the plan and profiles, so the folder can be moved or mailed and reported
on its own. The journal's running hashes are checked, and against the
folder's manifest: a journal edited or cut short is reported as "journal
edited or truncated at line N" (exit status 1, the workbook says so).`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Journals = args
			return failed(run(cmd.Context(), std, o))
		},
	}
	cmd.Flags().StringVar(&o.Plan, "plan", "", "the plan file, when there is one journal (default: the run folder's copy, else the path recorded in the journal)")
	cmd.Flags().BoolVar(&o.Force, "force", false, "write into an --out folder that holds other files")
	addOutputFlags(cmd, &o.outputOptions, "folder for the workbook and exports (default: the first journal's folder)")
	return cmd
}

func runReport(std streams, o reportOptions) error {
	if o.Plan != "" && len(o.Journals) > 1 {
		return withCode(exitUsage, fmt.Errorf("--plan applies to one journal; give journals whose recorded plan paths are right"))
	}
	// A folder stands for its journals: a run folder's journal.jsonl, or
	// every *-journal.jsonl of another (the demo's).
	var journals []string
	for _, a := range o.Journals {
		js, err := journalsIn(a)
		if err != nil {
			return err
		}
		journals = append(journals, js...)
	}
	o.Journals = journals
	if o.Plan != "" && len(o.Journals) > 1 {
		return withCode(exitUsage, fmt.Errorf("--plan applies to one journal; %d given", len(o.Journals)))
	}
	if o.Out == "" {
		o.Out = filepath.Dir(o.Journals[0])
	}
	var (
		recs  []campaignRecord
		plans []*plan.Plan
		own   []string // the journals, their plans and run folders' copies are not foreign files
	)
	for _, j := range o.Journals {
		var (
			p      *plan.Plan
			jc     *journal.Contents
			folder *runFolder
			err    error
		)
		own = append(own, j)
		if rf, ferr := openRunFolder(filepath.Dir(j)); ferr == nil && o.Plan == "" && rf.Manifest.Journal.File == filepath.Base(j) {
			folder = rf
			p, jc, err = planFromFolder(rf, j)
			own = append(own, filepath.Join(rf.Dir, runManifestName), filepath.Join(rf.Dir, runProfilesDir))
		} else {
			p, jc, err = planForJournal(j, o.Plan)
		}
		if err != nil {
			return err
		}
		own, plans = append(own, p.Source), append(plans, p)
		if jc.Truncated {
			fmt.Fprintf(std.Err, "journal %s: line %d is incomplete (the run was stopped while writing it) and was left out\n", j, jc.TruncatedLine)
		}
		rec := campaignRecord{Plan: p, Readings: jc.Readings, ACReadings: jc.ACReadings, Identities: jc.Identities, Started: jc.Header.Started, JournalPath: j, Folder: folder}
		if n := len(jc.Readings); n > 0 {
			rec.Finished = jc.Readings[n-1].Time
		}
		if n := len(jc.ACReadings); n > 0 && jc.ACReadings[n-1].Time.After(rec.Finished) {
			rec.Finished = jc.ACReadings[n-1].Time
		}
		recs = append(recs, rec)
	}
	// The output folder is ours when it is empty but for the journals
	// reported and their plans, or holds a run or report of one of them.
	var outErr error
	for _, p := range plans {
		if outErr = checkOutDir(o.Out, p, o.Force, own...); outErr == nil {
			break
		}
	}
	if outErr != nil {
		return outErr
	}
	return finish(std, o.outputOptions, nil, recs...)
}

// planFromFolder loads a run folder's copy of the plan and checks that the
// journal belongs to it.
func planFromFolder(rf *runFolder, journalPath string) (*plan.Plan, *journal.Contents, error) {
	jc, err := journal.ReadFile(journalPath)
	if err != nil {
		return nil, nil, withCode(exitUsage, err)
	}
	p, err := rf.loadPlan()
	if err != nil {
		return nil, nil, withCode(exitUsage, err)
	}
	if err := journal.CheckPlanMatch(p, jc); err != nil {
		return nil, nil, withCode(exitUsage, err)
	}
	return p, jc, nil
}
