package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"os"

	"github.com/spf13/cobra"

	"nullbench/fit"
	"nullbench/procedure/analysis"
)

// fitOptions holds the parsed flags of "nullbench fit".
type fitOptions struct {
	File     string
	Stimulus string
	Gain     float64
	GainTol  float64
	MeterPPM float64
	StimPPM  float64
	StimOffV float64
	JSON     bool
}

func newFitCmd(std streams, run func(context.Context, streams, fitOptions) error) *cobra.Command {
	var o fitOptions
	cmd := &cobra.Command{
		Use:   "fit FILE.csv",
		Short: "Fit readings taken by hand (stimulus volts, measured volts[, seconds]) into a ratio with uncertainty",
		Long: `fit analyses readings taken without automated instruments.

The CSV has one row per point: the stimulus in volts (the common-mode
voltage, or the supply voltage), the measured output in volts and,
optionally, the time in seconds (which adds a drift term to the fit). A
header row is allowed. --gain is the gain from the part's input offset to
the measured value (the noise gain K of a nulling loop; 1 if you measured
the offset directly).`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.File = args[0]
			return failed(run(cmd.Context(), std, o))
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.Stimulus, "stimulus", "", `what was stepped: "cm" (common mode) or "supply"`)
	f.Float64Var(&o.Gain, "gain", 0, "gain from input offset to the measured value, V/V (noise gain K)")
	f.Float64Var(&o.GainTol, "gain-tol", 0, "relative tolerance of --gain (rectangular half-width, 0.001 = 0.1 %)")
	f.Float64Var(&o.MeterPPM, "meter-ppm", 0, "meter gain accuracy, ppm of reading (rectangular)")
	f.Float64Var(&o.StimPPM, "stimulus-ppm", 0, "stimulus accuracy, ppm of the step (rectangular)")
	f.Float64Var(&o.StimOffV, "stimulus-offset", 0, "stimulus offset accuracy, volts (rectangular)")
	f.BoolVar(&o.JSON, "json", false, "print the result as one JSON object")
	_ = cmd.MarkFlagRequired("stimulus")
	_ = cmd.MarkFlagRequired("gain")
	_ = cmd.RegisterFlagCompletionFunc("stimulus", cobra.FixedCompletions([]string{"cm", "supply"}, cobra.ShellCompDirectiveNoFileComp))
	return cmd
}

func runFit(std streams, o fitOptions) error {
	if o.Stimulus != "cm" && o.Stimulus != "supply" {
		return withCode(exitUsage, fmt.Errorf(`--stimulus must be "cm" or "supply", not %q`, o.Stimulus))
	}
	if o.Gain <= 0 {
		return withCode(exitUsage, fmt.Errorf("--gain must be positive (the noise gain K, or 1), not %g", o.Gain))
	}
	f, err := os.Open(o.File)
	if err != nil {
		return withCode(exitUsage, err)
	}
	defer f.Close()
	pts, err := fit.ReadPointsCSV(f)
	if err != nil {
		return withCode(exitUsage, fmt.Errorf("%s: %w", o.File, err))
	}
	if len(pts.StimulusVolts) >= 2 {
		if err := analysis.Plausible(pts.StimulusVolts, pts.MeasuredVolts); err != nil {
			return withCode(exitFailure, fmt.Errorf("%s: %w", o.File, err))
		}
	}
	res, err := fit.HandFit(pts, fit.HandOptions{
		Stimulus:            o.Stimulus,
		Gain:                o.Gain,
		GainTol:             o.GainTol,
		MeterGainPPM:        o.MeterPPM,
		StimulusGainPPM:     o.StimPPM,
		StimulusOffsetVolts: o.StimOffV,
	})
	if err != nil {
		return withCode(exitFailure, fmt.Errorf("%s: %w", o.File, err))
	}
	if o.JSON {
		return writeJSON(std.Out, res)
	}
	return res.WriteText(std.Out)
}

func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetEscapeHTML(false)
	return enc.Encode(v)
}
