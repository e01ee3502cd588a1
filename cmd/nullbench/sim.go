package main

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"slices"
	"strings"

	"github.com/spf13/cobra"

	"nullbench/instrument/sim"
)

// simInstrumentNames are the instruments of the simulated bench, any of
// which --serial may put on a pseudo-terminal.
func simInstrumentNames() []string {
	return []string{sim.NameDMM, sim.NameSupply, sim.NameSource, sim.NameSwitch, sim.NameChamber}
}

type simOptions struct {
	Port      int
	Listen    string
	Serial    string
	BenchOut  string
	DUTFile   string
	Truth     bool
	TimeScale float64
	Seed      int64
}

func newSimCmd(std streams, run func(context.Context, streams, simOptions) error) *cobra.Command {
	var o simOptions
	cmd := &cobra.Command{
		Use:   "sim",
		Short: "Serve a simulated bench (meter, supply, source, switch matrix, chamber) on loopback",
		Long: `sim serves a whole simulated bench until interrupted: a DMM, a two-channel
supply, a three-channel DC source, a relay matrix and a temperature chamber,
each a SCPI instrument on its own TCP port, around a physical model of the
parts under test (an op-amp lot in a nulling loop and a finished board).
It prints one line per instrument with its role and address.

Point "nullbench probe" or a plan's bench section at those addresses;
--bench-out writes a matching bench section. The bench binds loopback only
unless --listen names another address.`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return failed(run(cmd.Context(), std, o))
		},
	}
	f := cmd.Flags()
	f.IntVar(&o.Port, "port", 0, "TCP port of the first instrument (the others follow); 0 picks free ports")
	f.StringVar(&o.Listen, "listen", "127.0.0.1", "address to bind (loopback by default)")
	f.StringVar(&o.Serial, "serial", "", `serve this instrument on a pseudo-terminal instead of TCP ("dmm", "psu", "src", "mux" or "chamber")`)
	f.StringVar(&o.BenchOut, "bench-out", "", "write the matching [bench] section of a plan to this file")
	f.StringVar(&o.DUTFile, "dut", "", "DUT file (TOML) with the true values of the simulated parts; default: the built-in demo lot")
	f.BoolVar(&o.Truth, "truth", false, "print each unit's true values as JSON lines and exit")
	f.Float64Var(&o.TimeScale, "time-scale", 1, "run the bench this many times faster than real time (plans must say the same time_scale)")
	f.Int64Var(&o.Seed, "seed", 0, "seed of the instruments' errors and noise (0: the DUT file's seed)")
	_ = cmd.RegisterFlagCompletionFunc("serial", cobra.FixedCompletions(simInstrumentNames(), cobra.ShellCompDirectiveNoFileComp))
	return cmd
}

func loadDUT(path string) (*sim.DUTFile, error) {
	if path == "" {
		return sim.DefaultDUT(), nil
	}
	d, err := sim.LoadDUT(path)
	if err != nil {
		return nil, withCode(exitUsage, err)
	}
	return d, nil
}

func runSim(ctx context.Context, std streams, o simOptions) error {
	dut, err := loadDUT(o.DUTFile)
	if err != nil {
		return err
	}
	if o.TimeScale <= 0 {
		return withCode(exitUsage, fmt.Errorf("--time-scale must be positive, not %g", o.TimeScale))
	}
	if o.Port < 0 || o.Port > 65535-4 {
		return withCode(exitUsage, fmt.Errorf("--port %d: give 0 for free ports, or the first of five consecutive ports (1 … 65531)", o.Port))
	}
	if o.Serial != "" && !slices.Contains(simInstrumentNames(), o.Serial) {
		return withCode(exitUsage, fmt.Errorf("--serial %q: name one of the bench's instruments: %s", o.Serial, strings.Join(simInstrumentNames(), ", ")))
	}
	bench, err := sim.New(sim.Config{DUT: dut, TimeScale: o.TimeScale, Seed: o.Seed})
	if err != nil {
		return withCode(exitUsage, err)
	}
	defer bench.Close()
	if o.Truth {
		enc := json.NewEncoder(std.Out)
		for _, t := range bench.Truth() {
			if err := enc.Encode(t); err != nil {
				return err
			}
		}
		return nil
	}
	if err := bench.Start(ctx, sim.ServeOptions{ListenHost: o.Listen, FirstPort: o.Port, SerialInstrument: o.Serial}); err != nil {
		return withCode(exitFailure, fmt.Errorf("start the simulated bench: %w", err))
	}
	for _, e := range bench.Endpoints() {
		fmt.Fprintf(std.Out, "%-8s %-8s %-50s profile=%s  %s\n", e.Name, e.Role, e.Address, e.Profile, e.IDN)
	}
	if o.BenchOut != "" {
		if err := os.WriteFile(o.BenchOut, []byte(bench.BenchSection()), 0o644); err != nil {
			return withCode(exitFailure, err)
		}
		fmt.Fprintf(std.Err, "bench section written to %s\n", o.BenchOut)
	}
	fmt.Fprintf(std.Err, "simulated bench running at %g× real time; Ctrl-C to stop\n", bench.TimeScale())
	<-ctx.Done()
	return nil
}
