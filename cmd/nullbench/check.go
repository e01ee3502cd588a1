package main

import (
	"context"
	"errors"
	"fmt"

	"github.com/spf13/cobra"

	"nullbench/instrument"
	"nullbench/procedure/plan"
)

type checkOptions struct {
	Plan           string
	AllowHazardous bool
}

func newCheckCmd(std streams, run func(context.Context, streams, checkOptions) error) *cobra.Command {
	var o checkOptions
	cmd := &cobra.Command{
		Use:   "check PLAN",
		Short: "Validate a plan without touching an instrument and print its step table",
		Long: `check reads and validates a plan, then prints for every test and level the
stimulus, the resulting rails, the common-mode voltage and its margin to each
rail, the highest voltage any terminal sees, and the estimated duration, then
the power sequence and the safety verdict. It exits non-zero when the plan
is invalid (2) or would be refused as unsafe (4).`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Plan = args[0]
			return failed(run(cmd.Context(), std, o))
		},
	}
	cmd.Flags().BoolVar(&o.AllowHazardous, "allow-hazardous", false, "judge the plan as if a hazardous-voltage run had been allowed and confirmed")
	return cmd
}

func runCheck(std streams, o checkOptions) error {
	p, err := plan.Load(o.Plan)
	if err != nil {
		return withCode(exitUsage, err)
	}
	if err := plan.WriteCheck(std.Out, p); err != nil {
		return err
	}
	if err := checkBench(p); err != nil {
		return err
	}
	consent := plan.HazardConsent{AllowOption: o.AllowHazardous, Interactive: o.AllowHazardous, Confirmed: o.AllowHazardous}
	err = plan.CheckSafetyWith(p, consent)
	if h := plan.AssessHazard(p); o.AllowHazardous && h.Hazardous {
		// The step table above judges without consent and says REFUSED
		// for the hazard; say what the exit status judges.
		verdict := "the plan is safe apart from that"
		if err != nil {
			verdict = "the plan is still refused for its other problems"
		}
		fmt.Fprintf(std.Out, "consent   --allow-hazardous: the %.0f V hazard is accepted for this judgement and %s; "+
			"run still refuses it without an interactive terminal and a typed confirmation\n", h.MaxAcrossVolts, verdict)
	}
	return safetyExit(err)
}

// safetyExit maps a safety check's error to the exit code scripts expect.
func safetyExit(err error) error {
	if err == nil {
		return nil
	}
	var se *plan.SafetyError
	if errors.As(err, &se) {
		return withCode(exitSafety, err)
	}
	return withCode(exitUsage, err)
}

// benchProfile describes a profile for plan.CheckBench.
func benchProfile(_ string, profile string) (plan.BenchProfile, error) {
	prof, err := instrument.ResolveProfile(profile)
	if err != nil {
		return plan.BenchProfile{}, err
	}
	bp := plan.BenchProfile{Roles: map[string]bool{}}
	for _, r := range prof.Roles() {
		bp.Roles[r] = true
	}
	if prof.Supply != nil {
		bp.Roles["supply"] = true
		bp.SupplyChannels, bp.SupplyMaxAmps = prof.Supply.Channels, prof.Supply.MaxAmps
	}
	if prof.Source != nil {
		bp.Roles["source"] = true
		bp.SourceChannels = prof.Source.Channels
	}
	return bp, nil
}

// checkBench checks the plan against its instruments' profiles.
func checkBench(p *plan.Plan) error {
	if err := plan.CheckBench(p, benchProfile); err != nil {
		return withCode(exitUsage, err)
	}
	return nil
}
