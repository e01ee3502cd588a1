package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

type resumeOptions struct {
	Journal        string
	Plan           string
	AllowHazardous bool
	outputOptions
}

func newResumeCmd(std streams, run func(context.Context, streams, resumeOptions) error) *cobra.Command {
	var o resumeOptions
	cmd := &cobra.Command{
		Use:   "resume RUN-FOLDER|JOURNAL",
		Short: "Continue a stopped run from its journal without repeating finished points",
		Long: `resume reads a journal left by an interrupted run, checks that it belongs
to the plan (the plan named in the journal, or --plan), and continues the
campaign: points already in the journal are not measured again. A torn last
line (the run was killed while writing it) is reported and that point is
measured again. The workbook is written beside the journal. A journal that
already ended complete (the run was killed while it wrote the workbook) is
not measured again: resume writes the workbook and exports from it, as
report does.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Journal = args[0]
			return failed(run(cmd.Context(), std, o))
		},
	}
	cmd.Flags().StringVar(&o.Plan, "plan", "", "the plan file (default: the path recorded in the journal)")
	cmd.Flags().BoolVar(&o.AllowHazardous, "allow-hazardous", false, "allow a plan above 60 V DC (asks for confirmation at a terminal; see SAFETY.md)")
	addOutputFlags(cmd, &o.outputOptions, "folder for the workbook and exports (default: the journal's folder)")
	addArchiveFlag(cmd, &o.outputOptions)
	return cmd
}

// planForJournal loads the plan a journal belongs to and checks they match.
func planForJournal(journalPath, planPath string) (*plan.Plan, *journal.Contents, error) {
	jc, err := journal.ReadFile(journalPath)
	if err != nil {
		return nil, nil, withCode(exitUsage, err)
	}
	recorded := planPath == ""
	if recorded {
		planPath = jc.Header.PlanPath
	}
	p, err := plan.Load(planPath)
	if err != nil {
		if recorded {
			err = fmt.Errorf("%w\n(%s is the plan recorded in the journal %s; if it has moved, give its path with --plan)", err, planPath, journalPath)
		}
		return nil, nil, withCode(exitUsage, err)
	}
	if err := journal.CheckPlanMatch(p, jc); err != nil {
		return nil, nil, withCode(exitUsage, err)
	}
	return p, jc, nil
}

func runResume(ctx context.Context, std streams, o resumeOptions) error {
	if fi, err := os.Stat(o.Journal); err == nil && fi.IsDir() {
		o.Journal = filepath.Join(o.Journal, runJournalName)
	}
	var (
		p        *plan.Plan
		jc       *journal.Contents
		err      error
		profiles profileResolver
	)
	if rf, ferr := openRunFolder(filepath.Dir(o.Journal)); ferr == nil && o.Plan == "" {
		// The folder's copies of the profiles, checked against their
		// hashes: a relative entry would otherwise be looked up beside
		// the folder's copy of the plan.
		p, jc, err = planFromFolder(rf, o.Journal)
		profiles = rf.resolver()
	} else {
		p, jc, err = planForJournal(o.Journal, o.Plan)
	}
	if err != nil {
		return err
	}
	if o.Out == "" {
		o.Out = filepath.Dir(o.Journal)
	}
	if jc != nil && jc.End != nil && jc.End.Status == journal.EndComplete {
		// Every point is measured; what may be missing is the workbook
		// and the exports (a kill while they were written). Write them
		// from the journal, exactly as report does.
		fmt.Fprintf(std.Err, "journal %s: the run already ended complete; nothing to measure. Writing the workbook and exports from the journal into %s (as nullbench report %s does)\n",
			o.Journal, o.Out, o.Journal)
		return runReport(std, reportOptions{Journals: []string{o.Journal}, Plan: o.Plan, outputOptions: o.outputOptions})
	}
	rec, _, runErr := measure(ctx, std, measureOptions{Plan: p, JournalPath: o.Journal, Resume: true, AllowHazardous: o.AllowHazardous, Profiles: profiles})
	return finish(std, o.outputOptions, runErr, rec)
}
