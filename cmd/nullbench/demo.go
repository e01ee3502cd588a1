package main

import (
	"context"
	_ "embed"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"nullbench/instrument/sim"
	"nullbench/procedure/plan"
)

//go:embed demo/lot.toml
var demoLotPlan string

//go:embed demo/board.toml
var demoBoardPlan string

//go:embed demo/freq.toml
var demoFreqPlan string

// demoFreqLot is the simulated lot of the frequency-response campaign: op-amps
// in a noise-gain stage, on a second simulated bench of their own.
//
//go:embed demo/freq_lot.toml
var demoFreqLot string

type demoOptions struct {
	DUT       string
	TimeScale float64
	Seed      int64
	outputOptions
}

func newDemoCmd(std streams, run func(context.Context, streams, demoOptions) error) *cobra.Command {
	var o demoOptions
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Run a complete invented campaign on a simulated bench started in-process",
		Long: `demo starts the simulated bench in this process and measures an invented
campaign on it, exactly as "run" measures a plan on real instruments: an
op-amp lot on a switch matrix in a nulling loop (cmrr, psrr_pos, psrr_neg,
psrr_sym and aol at 25, 85 and -40 °C), then one finished board (with its
CMRR at 50 and 60 Hz), then, on a second simulated bench, three op-amps in
a noise-gain stage against frequency (cmrr, psrr_pos and psrr_neg at 8
frequencies from 10 Hz to 100 kHz, the frequency response printed after
the summary). It writes
the plans, journals, workbook and exports into --out and prints a summary.

--dut replaces the simulated parts with your own (keys cmrr_db, psrr_pos_db,
psrr_neg_db per [[unit]], true values at 25 °C), so you can check the
results against a truth of your own; "nullbench sim --dut FILE --truth"
prints what the simulation holds.`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return failed(run(cmd.Context(), std, o))
		},
	}
	addOutputFlags(cmd, &o.outputOptions, "folder for everything the demo writes (default: a new folder under the current one)")
	addArchiveFlag(cmd, &o.outputOptions)
	cmd.Flags().StringVar(&o.DUT, "dut", "", "DUT file (TOML) describing the simulated parts; default: the built-in demo lot")
	cmd.Flags().Float64Var(&o.TimeScale, "time-scale", 10000, "run the simulated bench and the plan's waits this many times faster than real time")
	cmd.Flags().Int64Var(&o.Seed, "seed", 0, "seed of the simulated instruments' errors and noise (0: the DUT file's)")
	return cmd
}

func runDemo(ctx context.Context, std streams, o demoOptions) error {
	dut, err := loadDUT(o.DUT)
	if err != nil {
		return err
	}
	if o.TimeScale <= 0 {
		return withCode(exitUsage, fmt.Errorf("--time-scale must be positive, not %g", o.TimeScale))
	}
	if o.Out == "" {
		o.Out = fmt.Sprintf("nullbench-demo-%s", time.Now().UTC().Format("20060102T150405Z"))
	}
	if err := os.MkdirAll(o.Out, 0o755); err != nil {
		return withCode(exitFailure, err)
	}
	bench, err := sim.New(sim.Config{DUT: dut, TimeScale: o.TimeScale, Seed: o.Seed})
	if err != nil {
		return withCode(exitUsage, err)
	}
	defer bench.Close()
	if err := bench.Start(ctx, sim.ServeOptions{}); err != nil {
		return withCode(exitFailure, fmt.Errorf("start the simulated bench: %w", err))
	}
	fmt.Fprintf(std.Err, "simulated bench on loopback, %g× real time:\n", bench.TimeScale())
	for _, e := range bench.Endpoints() {
		fmt.Fprintf(std.Err, "  %-8s %-8s %s\n", e.Name, e.Role, e.Address)
	}

	plans, err := writeDemoPlans(o.Out, bench, dut, o.TimeScale)
	if err != nil {
		return withCode(exitFailure, err)
	}
	// The frequency-response campaign: three op-amps in a noise-gain stage
	// on a second simulated bench (its lot is built in, whatever --dut says).
	freqPath, closeFreq, err := startFreqDemo(ctx, std, o)
	if err != nil {
		return err
	}
	defer closeFreq()
	plans = append(plans, freqPath)
	var recs []campaignRecord
	var runErr error
	for _, path := range plans {
		p, err := plan.Load(path)
		if err != nil {
			return withCode(exitFailure, fmt.Errorf("demo plan: %w", err))
		}
		fmt.Fprintf(std.Err, "\n%s: %s\n", p.Campaign.Name, path)
		journal := strings.TrimSuffix(path, "-plan.toml") + "-journal.jsonl"
		rec, _, err := measure(ctx, std, measureOptions{Plan: p, JournalPath: journal})
		recs = append(recs, rec)
		if err != nil {
			runErr = err
			break
		}
	}
	err = finish(std, o.outputOptions, runErr, recs...)
	var ee *exitError
	if errors.As(err, &ee) && ee.code == exitOutOfLimits {
		return nil // failing parts are part of the demo's story
	}
	return err
}

// writeDemoPlans fills the embedded plan templates with the simulated
// bench's addresses, the simulated part's ratings and its units, and writes
// them into dir, where the user can read and rerun them.
func writeDemoPlans(dir string, bench *sim.Bench, dut *sim.DUTFile, timeScale float64) ([]string, error) {
	truth := bench.Truth()
	section := bench.BenchSection()
	part := dut.Part
	num := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

	var opamps, boards []sim.UnitTruth
	for _, t := range truth {
		if t.Kind == "board" {
			boards = append(boards, t)
		} else if t.Fixture == plan.FixtureNullingLoop {
			opamps = append(opamps, t)
		}
	}
	var paths []string
	if len(opamps) > 0 {
		gain := opamps[0].NoiseGain
		for _, u := range opamps[1:] {
			if u.NoiseGain != gain {
				return nil, fmt.Errorf("the demo needs one noise gain for the whole lot; units %s and %s differ", opamps[0].ID, u.ID)
			}
		}
		// Supply steps leave a self-heating tail with the die's time
		// constant: wait 8 τ (see demo/lot.toml).
		tau := part.DieTauSeconds
		if tau <= 0 {
			tau = 2
		}
		text := strings.NewReplacer("{{LOT}}", dut.LotID, "{{NOISE_GAIN}}", num(gain),
			"{{SUPPLY_DWELL}}", num(8*tau)).Replace(demoLotPlan)
		var b strings.Builder
		b.WriteString(text)
		// The datasheet's quiescent current, with a wide window: a part in
		// the socket draws it, an empty socket nothing (checked at power-up).
		iqMin, iqMax := part.QuiescentAmps/4, math.Min(5*part.QuiescentAmps, 0.015)
		fmt.Fprintf(&b, "\n[part]\nnumber = %q\nnominal_pos_volts = %s\nnominal_neg_volts = %s\nmax_supply_span_volts = %s\n"+
			"cm_headroom_pos_volts = %s\ncm_headroom_neg_volts = %s\ncm_margin_volts = 0.5\ncurrent_limit_amps = 0.02\ninput_beyond_rail_volts = %s\n"+
			"supply_amps_min = %s\nsupply_amps_max = %s\n"+
			"noise_nv_per_rthz = 10.0   # input noise density of the (invented) part's data sheet, for check's prediction\n"+
			"flicker_corner_hz = 3.0    # its 1/f corner (same data sheet)\n",
			part.Number, num(part.NominalPosVolts), num(part.NominalNegVolts), num(part.MaxSupplySpanVolts),
			num(part.CMHeadroomPosVolts), num(part.CMHeadroomNegVolts), num(part.InputBeyondRailVolts),
			num(iqMin), num(iqMax))
		writeUnits(&b, opamps)
		b.WriteString("\n" + section)
		path := filepath.Join(dir, "lot-plan.toml")
		if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
			return nil, err
		}
		paths = append(paths, path)
	}
	for i, bt := range boards {
		if bt.Board == nil || i >= len(dut.Boards) {
			continue
		}
		spec := dut.Boards[i]
		text := strings.NewReplacer(
			"{{BOARD_GAIN}}", num(spec.Gain), "{{RESISTOR_TOL}}", num(spec.ResistorTolerance),
			"{{OPAMP_CMRR_DB}}", num(spec.OpAmp.CMRRdB), "{{BOARD_NUMBER}}", spec.Number,
			"{{MAX_SPAN}}", num(part.MaxSupplySpanVolts), "{{CM_HEAD_POS}}", num(part.CMHeadroomPosVolts),
			"{{CM_HEAD_NEG}}", num(part.CMHeadroomNegVolts), "{{BEYOND_RAIL}}", num(part.InputBeyondRailVolts),
			"{{IQ_MIN}}", num(part.QuiescentAmps/4), "{{IQ_MAX}}", num(math.Min(5*part.QuiescentAmps, 0.04)),
		).Replace(demoBoardPlan)
		var b strings.Builder
		b.WriteString(text)
		writeUnits(&b, []sim.UnitTruth{bt})
		b.WriteString("\n" + withACRoles(section))
		path := filepath.Join(dir, fmt.Sprintf("board-%s-plan.toml", bt.ID))
		if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
			return nil, err
		}
		paths = append(paths, path)
	}
	if len(paths) == 0 {
		return nil, errors.New("the DUT file lists no op-amp in a nulling loop and no board: nothing for the demo to measure")
	}
	_ = timeScale // carried by the bench section's time_scale
	return paths, nil
}

func writeUnits(b *strings.Builder, units []sim.UnitTruth) {
	for _, u := range units {
		fmt.Fprintf(b, "\n[[unit]]\nid = %q\nchannel = %q\n", u.ID, u.Channel)
	}
}

// withACRoles binds the simulated bench's generator (output 1, the
// common-mode node) and digitizer in a bench section.
func withACRoles(section string) string {
	return strings.Replace(section, "[bench.roles]\n",
		"[bench.roles]\ngenerator   = { instrument = \""+sim.NameGen+"\", channel = \"1\" }\ndigitizer   = { instrument = \""+sim.NameDig+"\" }\n", 1)
}

// startFreqDemo starts the frequency campaign's simulated bench and writes
// its plan into o.Out; the returned function stops the bench.
func startFreqDemo(ctx context.Context, std streams, o demoOptions) (string, func(), error) {
	dut, err := sim.ParseDUT([]byte(demoFreqLot), "freq_lot.toml")
	if err != nil {
		return "", nil, withCode(exitFailure, fmt.Errorf("built-in frequency lot: %w", err))
	}
	bench, err := sim.New(sim.Config{DUT: dut, TimeScale: o.TimeScale, Seed: o.Seed})
	if err != nil {
		return "", nil, withCode(exitUsage, err)
	}
	if err := bench.Start(ctx, sim.ServeOptions{}); err != nil {
		bench.Close()
		return "", nil, withCode(exitFailure, fmt.Errorf("start the frequency campaign's simulated bench: %w", err))
	}
	var b strings.Builder
	b.WriteString(demoFreqPlan)
	writeUnits(&b, bench.Truth())
	b.WriteString("\n" + withACRoles(bench.BenchSection()))
	path := filepath.Join(o.Out, "freq-plan.toml")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		bench.Close()
		return "", nil, withCode(exitFailure, err)
	}
	return path, func() { bench.Close() }, nil
}
