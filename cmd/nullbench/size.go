package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"regexp"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"nullbench/procedure/estimate"
	"nullbench/procedure/plan"
)

type sizeOptions struct {
	Plan     string
	TargetDB float64 // expanded U in dB
	AtDB     float64 // at this ratio
	Out      string  // sized plan file; "" = PLAN with .sized.toml
}

func newSizeCmd(std streams, run func(context.Context, streams, sizeOptions) error) *cobra.Command {
	var o sizeOptions
	cmd := &cobra.Command{
		Use:   "size PLAN --target-u-db U --at DB",
		Short: "Propose levels, readings, NPLC and repeats that reach a target uncertainty in the least bench time",
		Long: `size proposes, for every test of PLAN, the levels (the ends of the test's
safe range, with its centre or at 90 % of them), the order (the plan's or
symmetric), the NPLC, the readings per point and the repeats that reach an
expanded uncertainty of --target-u-db dB on a ratio of --at dB in the least
bench time, by the same prediction check makes (the profiles' [figures],
the part's noise). It prints each test's proposal with its predicted U and
time against the plan as written, and writes the sized plan (the same file
with those five keys of each [[test]] replaced). [[ac_test]] tables are
not sized: they are kept as written and size says so.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Plan = args[0]
			return failed(run(cmd.Context(), std, o))
		},
	}
	cmd.Flags().Float64Var(&o.TargetDB, "target-u-db", 0, "expanded uncertainty (95 %) to reach, in dB")
	cmd.Flags().Float64Var(&o.AtDB, "at", 0, "at this ratio, in dB (e.g. the limit)")
	cmd.Flags().StringVarP(&o.Out, "out", "o", "", "where to write the sized plan (default: PLAN with .sized.toml)")
	return cmd
}

func runSize(std streams, o sizeOptions) error {
	if !(o.TargetDB > 0) || !(o.AtDB > 0) {
		return withCode(exitUsage, errors.New("size: give --target-u-db (> 0) and --at (> 0)"))
	}
	p, err := plan.Load(o.Plan)
	if err != nil {
		return withCode(exitUsage, err)
	}
	figs, problems := planFigures(p)
	for _, pr := range problems {
		fmt.Fprintf(std.Err, "size: %s\n", pr)
	}
	target := estimate.SizeTarget{UDB: o.TargetDB, AtDB: o.AtDB}
	sized, tests := estimate.Size(p, figs, target)
	fmt.Fprintf(std.Out, "target    U = %g dB at %g dB: U ≤ %.3g µV/V on the coefficient\n", o.TargetDB, o.AtDB, target.CoefficientU())
	var before, after float64
	missed := 0
	for _, st := range tests {
		fmt.Fprintf(std.Out, "%s\n", st)
		before += st.BeforeSecs
		after += st.AfterSecs
		if !st.Reached {
			missed++
		}
	}
	n := float64(len(p.Units) * len(p.TemperaturePoints()))
	verb := "saves"
	d := before - after
	if d < 0 {
		verb, d = "needs", -d
	}
	if len(tests) > 0 {
		fmt.Fprintf(std.Out, "per unit and temperature %s (was %s): %s %s; over the campaign (%g unit-temperatures) %s %s\n",
			plan.FormatSeconds(after), plan.FormatSeconds(before), verb, plan.FormatSeconds(d), n, verb, plan.FormatSeconds(d*n))
	} else {
		fmt.Fprintf(std.Out, "no [[test]] tables to size\n")
	}
	if len(p.ACTests) > 0 {
		tl := figs.Timeline(p)
		ac := 0.0
		for _, s := range tl.ACTestSeconds {
			ac += s
		}
		fmt.Fprintf(std.Out, "ac tests  not sized: size proposes settings for [[test]] tables only; the plan's %d [[ac_test]] table(s) are kept as written (%s per unit and temperature, not in the times above; check shows them)\n",
			len(p.ACTests), plan.FormatSeconds(ac))
	}
	text, err := os.ReadFile(o.Plan)
	if err != nil {
		return withCode(exitUsage, err)
	}
	out := o.Out
	if out == "" {
		out = strings.TrimSuffix(o.Plan, ".toml") + ".sized.toml"
	}
	if err := os.WriteFile(out, []byte(rewriteTests(string(text), sized)), 0o644); err != nil {
		return withCode(exitFailure, err)
	}
	if _, err := plan.Load(out); err != nil {
		return withCode(exitFailure, fmt.Errorf("size: the sized plan %s does not load: %w", out, err))
	}
	fmt.Fprintf(std.Out, "wrote     %s\n", out)
	if missed > 0 {
		return withCode(exitFailure, fmt.Errorf("size: %d test(s) cannot reach the target within the safe levels and the settings tried", missed))
	}
	return nil
}

var (
	testHeader = regexp.MustCompile(`(?m)^\s*\[\[test\]\]\s*(#.*)?$`)
	anyHeader  = regexp.MustCompile(`(?m)^\s*\[`)
	sizedKey   = regexp.MustCompile(`(?m)^\s*(levels|order|nplc|readings|repeats)\s*=.*\n`)
)

// rewriteTests replaces levels, order, nplc, readings and repeats of each
// [[test]] table of the plan's text with the sized plan's, keeping every
// other line (and comment) as written.
func rewriteTests(text string, sized *plan.Plan) string {
	locs := testHeader.FindAllStringIndex(text, -1)
	var b strings.Builder
	prev := 0
	for i, loc := range locs {
		if i >= len(sized.Tests) {
			break
		}
		endHeader := loc[1]
		if nl := strings.IndexByte(text[endHeader:], '\n'); nl >= 0 {
			endHeader += nl + 1
		}
		end := len(text)
		if next := anyHeader.FindStringIndex(text[endHeader:]); next != nil {
			end = endHeader + next[0]
		}
		body := sizedKey.ReplaceAllString(text[endHeader:end], "")
		t := sized.Tests[i]
		lv := make([]string, len(t.Levels))
		for j, l := range t.Levels {
			lv[j] = strconv.FormatFloat(l, 'f', -1, 64)
			if !strings.ContainsAny(lv[j], ".e") {
				lv[j] += ".0"
			}
		}
		b.WriteString(text[prev:endHeader])
		fmt.Fprintf(&b, "# sized by nullbench size\nlevels = [%s]\norder = %q\nnplc = %s\nreadings = %d\nrepeats = %d\n",
			strings.Join(lv, ", "), t.Order, tomlNumber(t.NPLC), t.Readings, t.Repeats)
		b.WriteString(body)
		prev = end
	}
	b.WriteString(text[prev:])
	return b.String()
}

func tomlNumber(v float64) string {
	s := strconv.FormatFloat(v, 'f', -1, 64)
	if !strings.ContainsAny(s, ".e") {
		s += ".0"
	}
	return s
}
