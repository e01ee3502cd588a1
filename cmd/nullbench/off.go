package main

import (
	"context"
	"errors"
	"fmt"

	"github.com/spf13/cobra"

	"nullbench/procedure"
	"nullbench/procedure/clock"
	"nullbench/procedure/fault"
	"nullbench/procedure/plan"
)

type offOptions struct {
	Plan string
}

func newOffCmd(std streams, run func(context.Context, streams, offOptions) error) *cobra.Command {
	var o offOptions
	return &cobra.Command{
		Use:   "off PLAN",
		Short: "Bring a bench left on to its safe state in the plan's order, without measuring",
		Long: `off connects to the instruments of the plan's bench section and brings
them to the safe state, as a run does after a fault: every source read back,
ramped to 0 V in steps of at most safety.ramp_step_volts and switched off,
then the supplies the same way, then the switch opened and the chamber set
back to ambient_c. A switch whose profile has open_all gets it, and off
says "every switch channel open"; without open_all it opens the plan's
unit channels one by one (read back where the profile has query_closed)
and says which, and that a relay closed by other means may remain closed. Use it after a crash or when a bench was left on by
hand. It measures nothing and writes no journal.

Exit status: 0 the bench is in its safe state, 2 bad plan, 3 some
instrument did not answer (the message names it: check it by hand).`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Plan = args[0]
			return failed(run(cmd.Context(), std, o))
		},
	}
}

func runOff(ctx context.Context, std streams, o offOptions) error {
	p, err := plan.Load(o.Plan)
	if err != nil {
		return withCode(exitUsage, err)
	}
	if err := checkBench(p); err != nil {
		return err
	}
	clk := clock.NewScaled(p.Bench.TimeScale)
	rig, closeBench, err := openBench(ctx, p, planProfiles(p), clk.Sleep)
	if err != nil {
		return withCode(exitInstrument, err)
	}
	defer closeBench()
	rep, err := procedure.Off(ctx, p, rig, procedure.OffOptions{Clock: clk})
	if rep != nil {
		for _, a := range rep.Actions {
			fmt.Fprintln(std.Out, a)
		}
	}
	if err != nil {
		// The error says whether an output may still be on ("SAFE STATE
		// NOT REACHED") or only relays or the like could not be set.
		var se *fault.SafeStateError
		if errors.As(err, &se) {
			if !se.Hazard && rep != nil && rep.Relays != "" {
				err = fmt.Errorf("%w\n    - switch: %s", err, rep.Relays)
			}
			return withCode(exitInstrument, err)
		}
		return withCode(exitInstrument, fmt.Errorf("the bench may NOT be in its safe state; check these outputs by hand:\n%w", err))
	}
	switch {
	case rep.Relays == "":
		fmt.Fprintln(std.Out, "the bench is in its safe state: every source and supply at 0 V and off")
	case rep.EveryChannelOpen:
		fmt.Fprintln(std.Out, "the bench is in its safe state: every source and supply at 0 V and off, every switch channel open")
	default:
		fmt.Fprintf(std.Out, "every source and supply is at 0 V and off; switch: %s\n", rep.Relays)
	}
	return nil
}
