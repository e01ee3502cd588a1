package main

import (
	"context"
	"fmt"
	"math"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"nullbench/fit"
	"nullbench/procedure/archive"
	"nullbench/procedure/trend"
	"nullbench/report"
)

type archiveTrendOptions struct {
	archiveFilterFlags
	Out        string
	Value      string // "db" or "uv"
	Sigmas     float64
	Estimator  string // "pooled" or "mean-s"
	NoRunRules bool
	Coverage   float64
	Confidence float64
}

func newArchiveTrendCmd(std streams, ao *archiveOptions) *cobra.Command {
	var o archiveTrendOptions
	cmd := &cobra.Command{
		Use:   "trend --out FILE.xlsx",
		Short: "Write a trend workbook of the archived results: lot-to-lot control charts, yields, tolerance bounds, bench repeatability",
		Long: `trend selects archived results with the same flags as query and writes a
workbook with, per part × test × temperature (× frequency), the lots in time
order on a Shewhart X̄–S chart (lot means and within-lot SDs; chart form:
Montgomery, Introduction to Statistical Quality Control, §6.3; σ̂ from the
pooled SD as s_p/c4(ν+1), our own derivation),
each lot's yield (passed / judged) and one-sided normal tolerance bound, and
per bench the repeatability (pooled SD) of units measured more than once.

A unit is matched across campaigns and benches by its serial number (the
plan's [[unit]] serial), else by its id within the lot. Values are the
reported ratios in dB or, with --value uv, the magnitudes of the
input-referred coefficients in µV/V; results not resolved are only bounds,
left out of the statistics and counted per lot.`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return failed(runArchiveTrend(cmd.Context(), std, ao.DB, o))
		},
	}
	addArchiveFilterFlags(cmd, &o.archiveFilterFlags, true)
	f := cmd.Flags()
	f.StringVar(&o.Out, "out", "", "the workbook to write (.xlsx)")
	f.StringVar(&o.Value, "value", "db", "db: ratios in dB; uv: coefficients in µV/V")
	f.Float64Var(&o.Sigmas, "sigmas", 3, "control limits at this many σ")
	f.StringVar(&o.Estimator, "estimator", "pooled", "σ from the pooled SD (pooled) or the mean of s_i/c4 (mean-s)")
	f.BoolVar(&o.NoRunRules, "no-run-rules", false, "flag only points beyond a limit (no Western Electric run rules)")
	f.Float64Var(&o.Coverage, "coverage", 0.95, "tolerance bounds cover this fraction of the population")
	f.Float64Var(&o.Confidence, "confidence", 0.95, "… with this confidence")
	_ = cmd.MarkFlagRequired("out")
	return cmd
}

func runArchiveTrend(ctx context.Context, std streams, db string, o archiveTrendOptions) error {
	opt := trend.Options{Title: "Trend of archived results", Generator: "nullbench " + version, Generated: time.Now().UTC(),
		Sigmas: o.Sigmas, NoRunRules: o.NoRunRules, Coverage: o.Coverage, Confidence: o.Confidence}
	switch o.Estimator {
	case "pooled":
		opt.Estimator = fit.SigmaPooled
	case "mean-s":
		opt.Estimator = fit.SigmaMeanS
	default:
		return withCode(exitUsage, fmt.Errorf("--estimator %q: give pooled or mean-s", o.Estimator))
	}
	if o.Value != "db" && o.Value != "uv" {
		return withCode(exitUsage, fmt.Errorf("--value %q: give db or uv", o.Value))
	}
	if !(o.Sigmas > 0) || math.IsInf(o.Sigmas, 0) {
		return withCode(exitUsage, fmt.Errorf("--sigmas %g: give a positive number", o.Sigmas))
	}
	for name, p := range map[string]float64{"coverage": o.Coverage, "confidence": o.Confidence} {
		if !(p > 0 && p < 1) {
			return withCode(exitUsage, fmt.Errorf("--%s %g: give a fraction between 0 and 1", name, p))
		}
	}
	if !strings.HasSuffix(strings.ToLower(o.Out), ".xlsx") {
		return withCode(exitUsage, fmt.Errorf("--out %q: the trend workbook's name must end in .xlsx", o.Out))
	}
	f, err := o.filter()
	if err != nil {
		return err
	}
	rows, name, err := queryArchive(ctx, db, f)
	if err != nil {
		return err
	}
	if len(rows) == 0 {
		return withCode(exitFailure, fmt.Errorf("no archived results in %s match the selection (%s)", name, o.describe()))
	}
	opt.Selection = fmt.Sprintf("%s: %s; %d results", name, o.describe(), len(rows))
	tr, err := trend.Build(trendRows(rows, o.Value == "uv"), opt)
	if err != nil {
		return withCode(exitFailure, err)
	}
	if err := report.WriteTrendWorkbook(o.Out, tr, report.TrendOptions{}); err != nil {
		return withCode(exitFailure, err)
	}
	lots := 0
	for _, c := range tr.Charts {
		lots += len(c.Lots)
	}
	fmt.Fprintf(std.Out, "trend: %d results, %d charts (part × test × temperature × frequency), %d lot points, %d bench repeatability rows\nworkbook: %s\n",
		len(rows), len(tr.Charts), lots, len(tr.Repeatability), o.Out)
	return nil
}

// describe is the selection in words, for the workbook.
func (f archiveFilterFlags) describe() string {
	var parts []string
	add := func(name, v string) {
		if v != "" {
			parts = append(parts, name+" "+v)
		}
	}
	add("part", f.Part)
	add("lot", f.Lot)
	add("unit", f.Unit)
	add("test", f.Test)
	add("temperature °C", f.Temperature)
	add("frequency Hz", f.Frequency)
	add("bench", f.Bench)
	add("verdict", f.Verdict)
	add("from", f.From)
	add("to", f.To)
	if len(parts) == 0 {
		return "all results"
	}
	return strings.Join(parts, ", ")
}

// trendRows maps archived results to the trend's rows: the unit is its
// serial when the campaign gave one, so a unit measured again elsewhere
// is the same unit; values in dB (the reported ratio, a lower bound when
// not resolved) or, with uv, the coefficient in µV/V with the limit
// converted from dB (k_max = 10⁶·10^(−L/20) µV/V, JEDEC JESD99B's
// ratio definition turned round).
func trendRows(rows []archive.Row, uv bool) []trend.Row {
	out := make([]trend.Row, 0, len(rows))
	for _, r := range rows {
		unit := r.Serial
		if unit == "" {
			unit = r.Unit
		}
		t := trend.Row{Part: r.Part, Lot: r.Lot, Unit: unit, Test: r.Test, TemperatureC: r.TemperatureC,
			FrequencyHz: r.FrequencyHz, Bench: r.Bench, Decision: r.Verdict, Date: r.Started,
			Value: r.ReportedDB(), ValueUnit: trend.UnitDB, BoundOnly: !r.Resolved, Limit: r.LimitDB}
		if uv {
			t.Value, t.ValueUnit = r.CoefficientUVPerV, trend.UnitUVPerV // unresolved stays BoundOnly
			t.Limit = 1e6 * math.Pow(10, -r.LimitDB/20)
		}
		out = append(out, t)
	}
	return out
}
