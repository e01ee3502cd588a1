package main

import (
	"context"
	"fmt"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"nullbench/instrument"
)

type probeOptions struct {
	Address  string
	Profiles []string
	Rounds   int
	Timeout  time.Duration
	// Exercise runs the dry exercise of the --profile file after the probe.
	Exercise bool
	Channel  string
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
  serial:///dev/ttyUSB0?baud=115200&bits=8&parity=none&stop=1

With --exercise and one --profile file that matches the instrument, it then
tries the profile out dry: it switches outputs off and programs them to 0 V,
opens relays, sends every read and configure template of the profile once,
and shows each command with its reply and the error-queue entries it
caused, then which templates the instrument rejected (exit status 2 when
any was). It never turns an output on, never closes a relay and never
moves a chamber. --channel names the channel to fill {channel} with
(default: the first one the profile lists; a switch needs one for its open
and query templates).`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Address = args[0]
			return failed(run(cmd.Context(), std, o))
		},
	}
	cmd.Flags().StringSliceVar(&o.Profiles, "profile", nil, "profile file(s) to try before the built-in ones")
	cmd.Flags().IntVar(&o.Rounds, "rounds", instrument.DefaultProbeRounds, "number of *OPC? round trips to time")
	cmd.Flags().BoolVar(&o.Exercise, "exercise", false, "after probing, send each read/configure template of the --profile file once, outputs kept off")
	cmd.Flags().StringVar(&o.Channel, "channel", "", "with --exercise: the channel to fill {channel} with")
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
	if o.Exercise && len(o.Profiles) != 1 {
		return withCode(exitUsage, fmt.Errorf("--exercise needs exactly one --profile file, not %d", len(o.Profiles)))
	}
	if o.Channel != "" && !o.Exercise {
		return withCode(exitUsage, fmt.Errorf("--channel is for --exercise"))
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
	if !o.Exercise {
		return nil
	}
	if rep.Profile != extra[0] {
		return withCode(exitUsage, fmt.Errorf("exercise: %s: its idn_pattern %q does not match %q; not sending its commands to another instrument",
			extra[0].File, extra[0].IDNPattern, rep.Identity.Raw))
	}
	ex, err := instrument.ExerciseAt(ctx, o.Address, extra[0], instrument.ExerciseOptions{Channel: o.Channel})
	if werr := ex.Write(std.Out); werr != nil {
		return werr
	}
	if err != nil {
		return withCode(exitInstrument, fmt.Errorf("exercise %s: %w", o.Address, err))
	}
	if rej := ex.Rejected(); len(rej) > 0 {
		return withCode(exitUsage, fmt.Errorf("exercise: %s: the instrument rejected %s; fix these templates from its manual", extra[0].File, strings.Join(rej, ", ")))
	}
	return nil
}
