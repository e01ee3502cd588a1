package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"

	"github.com/spf13/cobra"

	"nullbench/instrument"
	"nullbench/procedure/estimate"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

type checkOptions struct {
	Plan           string
	AllowHazardous bool
	JSON           bool
}

func newCheckCmd(std streams, run func(context.Context, streams, checkOptions) error) *cobra.Command {
	var o checkOptions
	cmd := &cobra.Command{
		Use:   "check PLAN",
		Short: "Validate a plan without touching an instrument and print its step table",
		Long: `check reads and validates a plan, then prints for every test and level the
stimulus, the resulting rails, the common-mode voltage and its margin to each
rail, the highest voltage any terminal sees, and the estimated duration, then
the power sequence and the safety verdict. Per test it predicts, from the
profiles' [figures] (meter noise at the plan's NPLC, its floor, timing), the
standard and expanded uncertainty of the coefficient and the largest ratio
the plan can resolve, and warns when a limit is above it. --json prints
the duration and these predictions as one JSON object with the fields
duration_s and tests (test, duration_s, predicted_u_uv_per_v,
resolvable_db), which scripts may rely on. It exits non-zero when the plan
is invalid (2) or would be refused as unsafe (4).`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Plan = args[0]
			return failed(run(cmd.Context(), std, o))
		},
	}
	cmd.Flags().BoolVar(&o.JSON, "json", false, "print the predicted duration and uncertainty per test as one JSON object instead of the step table")
	cmd.Flags().BoolVar(&o.AllowHazardous, "allow-hazardous", false, "judge the plan as if a hazardous-voltage run had been allowed and confirmed")
	return cmd
}

func runCheck(std streams, o checkOptions) error {
	p, err := plan.Load(o.Plan)
	if err != nil {
		return withCode(exitUsage, err)
	}
	figs, problems := planFigures(p)
	for _, pr := range problems {
		fmt.Fprintf(std.Err, "check: %s\n", pr)
	}
	if o.JSON {
		if err := plan.Validate(p); err != nil {
			return withCode(exitUsage, err)
		}
		if err := writeCheckJSON(std.Out, p, figs); err != nil {
			return err
		}
	} else if err := estimate.WriteCheck(std.Out, p, figs); err != nil {
		return err
	}
	if err := checkBench(p); err != nil {
		return err
	}
	consent := safety.HazardConsent{AllowOption: o.AllowHazardous, Interactive: o.AllowHazardous, Confirmed: o.AllowHazardous}
	err = safety.CheckSafetyWith(p, consent)
	if h := safety.AssessHazard(p); o.AllowHazardous && h.Hazardous {
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
	var se *safety.SafetyError
	if errors.As(err, &se) {
		return withCode(exitSafety, err)
	}
	return withCode(exitUsage, err)
}

// benchProfile describes a profile for plan.CheckBench.
func benchProfile(prof *instrument.Profile) plan.BenchProfile {
	bp := plan.BenchProfile{Roles: map[string]bool{}, Templates: prof.TemplateKeys()}
	for _, r := range prof.Roles() {
		bp.Roles[r] = true
	}
	if prof.Supply != nil {
		bp.Roles["supply"] = true
		bp.SupplyChannels, bp.SupplyMaxAmps = prof.Supply.Channels, prof.Supply.MaxAmps
		bp.SupplyNegativeChannels = prof.Supply.NegativeChannels
	}
	if prof.Source != nil {
		bp.Roles["source"] = true
		bp.SourceChannels = prof.Source.Channels
	}
	return bp
}

// checkBench checks the plan against its instruments' profiles.
func checkBench(p *plan.Plan) error { return checkBenchWith(p, planProfiles(p)) }

// checkBenchWith is checkBench with the profiles from resolve.
func checkBenchWith(p *plan.Plan, resolve profileResolver) error {
	lookup := func(name, profile string) (plan.BenchProfile, error) {
		prof, err := resolve(name, profile)
		if err != nil {
			return plan.BenchProfile{}, err
		}
		return benchProfile(prof), nil
	}
	if err := plan.CheckBench(p, lookup); err != nil {
		return withCode(exitUsage, err)
	}
	return safetyExit(safety.CheckRatings(p, outputRatings(p, resolve)))
}

// outputRatings gives each bound supply and source role the voltage
// rating (max_volts) of its instrument's profile, for safety.CheckRatings.
// A profile that cannot be resolved is left out: CheckBench has said so.
func outputRatings(p *plan.Plan, resolve profileResolver) map[string]safety.Rating {
	out := map[string]safety.Rating{}
	for _, role := range []string{plan.RoleSupplyPos, plan.RoleSupplyNeg, plan.RoleSourceCM, plan.RoleSourceDiff, plan.RoleSourceRef} {
		b := p.Bench.Roles.Get(role)
		if !b.Bound() {
			continue
		}
		spec := p.Bench.Instruments[b.Instrument]
		prof, err := resolve(b.Instrument, spec.Profile)
		if err != nil {
			continue
		}
		r := safety.Rating{From: fmt.Sprintf("instrument %s, profile %q", b.Instrument, spec.Profile)}
		switch {
		case (role == plan.RoleSupplyPos || role == plan.RoleSupplyNeg) && prof.Supply != nil:
			r.MaxVolts = prof.Supply.MaxVolts
		case prof.Source != nil:
			r.MaxVolts = prof.Source.MaxVolts
		}
		out[role] = r
	}
	return out
}

// checkJSON is `check --json`: field names are fixed so that scripts can
// rely on them.
type checkJSON struct {
	Plan      string          `json:"plan"`
	DurationS float64         `json:"duration_s"`
	WallS     float64         `json:"wall_s"`
	Tests     []checkTestJSON `json:"tests"`
	// ACTests are the [[ac_test]] tables' durations (no uncertainty
	// prediction: check predicts the DC tests' only).
	ACTests     []checkACTestJSON `json:"ac_tests,omitempty"`
	Warnings    []string          `json:"warnings"`
	SafetyError string            `json:"safety_error,omitempty"`
}

type checkTestJSON struct {
	Test string `json:"test"`
	// DurationS is the test's share of the campaign (every unit and
	// temperature).
	DurationS float64 `json:"duration_s"`
	// PredictedUUVPerV is the expanded uncertainty (95 %) of the
	// coefficient near zero, µV/V.
	PredictedUUVPerV    float64  `json:"predicted_u_uv_per_v"`
	PredictedStdUUVPerV float64  `json:"predicted_std_u_uv_per_v"`
	ResolvableDB        float64  `json:"resolvable_db"`
	LimitDB             *float64 `json:"limit_db,omitempty"`
}

type checkACTestJSON struct {
	Test        string  `json:"test"`
	Frequencies int     `json:"frequencies"`
	DurationS   float64 `json:"duration_s"` // every unit and temperature
}

func writeCheckJSON(w io.Writer, p *plan.Plan, f estimate.Figures) error {
	pr := estimate.Predict(p, f)
	out := checkJSON{Plan: p.Source, DurationS: round3(pr.TotalSeconds), WallS: round3(pr.WallSeconds), Warnings: pr.Warnings()}
	if out.Warnings == nil {
		out.Warnings = []string{}
	}
	out.Tests = []checkTestJSON{}
	for _, t := range pr.Tests {
		tj := checkTestJSON{Test: t.Kind, DurationS: round3(t.Seconds), PredictedUUVPerV: t.ExpandedUUVPerV,
			PredictedStdUUVPerV: t.StdUncUVPerV, ResolvableDB: round3(t.ResolvableDB)}
		if t.HasLimit {
			l := t.LimitDB
			tj.LimitDB = &l
		}
		out.Tests = append(out.Tests, tj)
	}
	for i, t := range p.ACTests {
		out.ACTests = append(out.ACTests, checkACTestJSON{Test: t.Kind, Frequencies: len(t.Frequencies()), DurationS: round3(pr.Timeline.ACTestCampaignSeconds[i])})
	}
	if err := safety.CheckSafety(p); err != nil {
		out.SafetyError = err.Error()
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(out)
}

func round3(x float64) float64 { return math.Round(x*1000) / 1000 }
