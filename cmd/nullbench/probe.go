package main

import (
	"context"
	"fmt"
	"time"

	"github.com/spf13/cobra"

	"nullbench/instrument"
)

type probeOptions struct {
	Address  string
	Profiles []string
	Rounds   int
	Timeout  time.Duration
}

func newProbeCmd(std streams, run func(context.Context, streams, probeOptions) error) *cobra.Command {
	var o probeOptions
	cmd := &cobra.Command{
		Use:   "probe ADDRESS",
		Short: "Identify an instrument, match its profile, show its error queue and time a query round trip",
		Long: `probe connects to one instrument, asks *IDN?, says which profile matches
(yours given with --profile first, then the built-in ones), drains and shows
the error queue, and reports the median round trip of *OPC? queries.

Addresses:
  tcp://HOST[:PORT]                       raw SCPI socket, port 5025 by default
  serial:///dev/ttyUSB0?baud=115200&bits=8&parity=none&stop=1`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Address = args[0]
			return failed(run(cmd.Context(), std, o))
		},
	}
	cmd.Flags().StringSliceVar(&o.Profiles, "profile", nil, "profile file(s) to try before the built-in ones")
	cmd.Flags().IntVar(&o.Rounds, "rounds", instrument.DefaultProbeRounds, "number of *OPC? round trips to time")
	cmd.Flags().DurationVar(&o.Timeout, "timeout", 30*time.Second, "give up after this long")
	return cmd
}

func runProbe(ctx context.Context, std streams, o probeOptions) error {
	if o.Rounds < 1 {
		return withCode(exitUsage, fmt.Errorf("--rounds must be at least 1, not %d", o.Rounds))
	}
	if o.Timeout <= 0 {
		return withCode(exitUsage, fmt.Errorf("--timeout must be positive, not %s", o.Timeout))
	}
	if _, err := instrument.ParseAddress(o.Address); err != nil {
		return withCode(exitUsage, err)
	}
	var extra []*instrument.Profile
	for _, path := range o.Profiles {
		p, err := instrument.LoadProfile(path)
		if err != nil {
			return withCode(exitUsage, err)
		}
		extra = append(extra, p)
	}
	ctx, cancel := context.WithTimeout(ctx, o.Timeout)
	defer cancel()
	rep, err := instrument.Probe(ctx, o.Address, extra, o.Rounds)
	// A report is worth printing once the instrument answered; before that
	// the error alone says what went wrong (refused, no such port, ...).
	if err == nil || rep.Identity.Raw != "" {
		if werr := rep.Write(std.Out); werr != nil {
			return werr
		}
	}
	if err != nil {
		return withCode(exitInstrument, fmt.Errorf("probe %s: %w", o.Address, err))
	}
	return nil
}
