package safety

import (
	"fmt"
	"math"
	"strings"

	"nullbench/procedure/plan"
)

// HazardousVolts is the DC voltage above which a terminal is treated as
// hazardous: 60 V DC, the SELV limit of IEC 60950-1 §1.2.8 and the ES1
// limit of IEC 62368-1. IEC 61010-1:2010 (3rd ed.) §6.3.1 uses
// 70 V DC for laboratory equipment; local codes may be stricter: defer to
// them. A plan that takes any terminal above it, to ground or to another
// terminal, runs only with the allow-hazardous option and a confirmation
// typed at a terminal.
const HazardousVolts = 60.0

// A safetyLimit is one condition slack(state) ≥ 0. Every slack is affine
// in a test's level (the states are), which lets safeLevels solve for the
// range of safe levels.
type safetyLimit struct {
	id      string
	slack   func(s plan.BenchState) float64
	problem func(s plan.BenchState) string
	planKey string // the key that sets the limit, for refusals not tied to a level
	fix     string
	hard    bool // an absolute maximum: also checked on every ramp step
}

// slackTolerance absorbs floating-point rounding in level arithmetic.
const slackTolerance = 1e-9

func safetyLimits(p *plan.Plan) []safetyLimit {
	pt := &p.Part
	var ls []safetyLimit
	if pt.MaxSupplySpanVolts > 0 {
		ls = append(ls, safetyLimit{
			id:    "span",
			slack: func(s plan.BenchState) float64 { return pt.MaxSupplySpanVolts - (s.PosVolts - s.NegVolts) },
			problem: func(s plan.BenchState) string {
				return fmt.Sprintf("V+ = %s, V- = %s: the span %s exceeds the part's absolute maximum %g V (part.max_supply_span_volts)",
					plan.FormatVolts(s.PosVolts), plan.FormatVolts(s.NegVolts), plan.FormatMag(s.PosVolts-s.NegVolts), pt.MaxSupplySpanVolts)
			},
			planKey: "part.max_supply_span_volts", fix: "lower the nominal rails or check the rating", hard: true,
		})
	}
	ls = append(ls, safetyLimit{
		id:    "polarity-pos",
		slack: func(s plan.BenchState) float64 { return s.PosVolts },
		problem: func(s plan.BenchState) string {
			return fmt.Sprintf("V+ = %s: the supply_pos channel programs only 0 V or more", plan.FormatVolts(s.PosVolts))
		},
		planKey: "part.nominal_pos_volts", fix: "keep V+ at or above 0 V", hard: true,
	})
	if p.Bench.Roles.SupplyNeg.Negative {
		ls = append(ls, safetyLimit{
			id:    "polarity-neg",
			slack: func(s plan.BenchState) float64 { return -s.NegVolts },
			problem: func(s plan.BenchState) string {
				return fmt.Sprintf("V- = %s, but supply_neg is a negative-rail channel (negative = true) and makes only 0 V or less", plan.FormatVolts(s.NegVolts))
			},
			planKey: "part.nominal_neg_volts", fix: "keep V- at or below 0 V", hard: true,
		})
	} else {
		ls = append(ls, safetyLimit{
			id:    "polarity-neg",
			slack: func(s plan.BenchState) float64 { return s.NegVolts },
			problem: func(s plan.BenchState) string {
				return fmt.Sprintf("V- = %s, but supply_neg is not marked negative = true: a supply channel programs only 0 V or more", plan.FormatVolts(s.NegVolts))
			},
			planKey: "bench.roles.supply_neg",
			fix:     "if that channel is wired floating with its + terminal on ground, set negative = true on bench.roles.supply_neg",
			hard:    true,
		})
	}
	needPos := pt.CMHeadroomPosVolts + pt.CMMarginVolts
	needNeg := pt.CMHeadroomNegVolts + pt.CMMarginVolts
	ls = append(ls,
		safetyLimit{
			id: "cm-pos",
			slack: func(s plan.BenchState) float64 {
				return s.PosVolts - plan.TerminalsOf(p, s).InHighVolts - needPos
			},
			problem: func(s plan.BenchState) string {
				t := plan.TerminalsOf(p, s)
				return fmt.Sprintf("an input at %s is %s below V+ = %s; the common-mode range needs %g V (cm_headroom_pos_volts %g + cm_margin_volts %g)",
					plan.FormatVolts(t.InHighVolts), plan.FormatMag(s.PosVolts-t.InHighVolts), plan.FormatVolts(s.PosVolts), needPos, pt.CMHeadroomPosVolts, pt.CMMarginVolts)
			},
			planKey: "part.cm_headroom_pos_volts", fix: "keep the inputs inside the common-mode range",
		},
		safetyLimit{
			id: "cm-neg",
			slack: func(s plan.BenchState) float64 {
				return plan.TerminalsOf(p, s).InLowVolts - s.NegVolts - needNeg
			},
			problem: func(s plan.BenchState) string {
				t := plan.TerminalsOf(p, s)
				return fmt.Sprintf("an input at %s is %s above V- = %s; the common-mode range needs %g V (cm_headroom_neg_volts %g + cm_margin_volts %g)",
					plan.FormatVolts(t.InLowVolts), plan.FormatMag(t.InLowVolts-s.NegVolts), plan.FormatVolts(s.NegVolts), needNeg, pt.CMHeadroomNegVolts, pt.CMMarginVolts)
			},
			planKey: "part.cm_headroom_neg_volts", fix: "keep the inputs inside the common-mode range",
		},
		safetyLimit{
			id: "beyond-pos",
			slack: func(s plan.BenchState) float64 {
				return s.PosVolts + pt.InputBeyondRailVolts - plan.TerminalsOf(p, s).InHighVolts
			},
			problem: func(s plan.BenchState) string {
				t := plan.TerminalsOf(p, s)
				return fmt.Sprintf("an input at %s is beyond V+ = %s by more than %g V (part.input_beyond_rail_volts): its protection diodes would conduct",
					plan.FormatVolts(t.InHighVolts), plan.FormatVolts(s.PosVolts), pt.InputBeyondRailVolts)
			},
			planKey: "part.input_beyond_rail_volts", fix: "keep every input between the rails", hard: true,
		},
		safetyLimit{
			id: "beyond-neg",
			slack: func(s plan.BenchState) float64 {
				return plan.TerminalsOf(p, s).InLowVolts - s.NegVolts + pt.InputBeyondRailVolts
			},
			problem: func(s plan.BenchState) string {
				t := plan.TerminalsOf(p, s)
				return fmt.Sprintf("an input at %s is beyond V- = %s by more than %g V (part.input_beyond_rail_volts): its protection diodes would conduct",
					plan.FormatVolts(t.InLowVolts), plan.FormatVolts(s.NegVolts), pt.InputBeyondRailVolts)
			},
			planKey: "part.input_beyond_rail_volts", fix: "keep every input between the rails", hard: true,
		},
		safetyLimit{
			id:    "out-pos",
			slack: func(s plan.BenchState) float64 { return s.PosVolts - plan.TerminalsOf(p, s).OutVolts },
			problem: func(s plan.BenchState) string {
				return fmt.Sprintf("the part's output would have to sit at %s, above V+ = %s", plan.FormatVolts(plan.TerminalsOf(p, s).OutVolts), plan.FormatVolts(s.PosVolts))
			},
			planKey: "part.nominal_pos_volts", fix: "keep the output between the rails",
		},
		safetyLimit{
			id:    "out-neg",
			slack: func(s plan.BenchState) float64 { return plan.TerminalsOf(p, s).OutVolts - s.NegVolts },
			problem: func(s plan.BenchState) string {
				return fmt.Sprintf("the part's output would have to sit at %s, below V- = %s", plan.FormatVolts(plan.TerminalsOf(p, s).OutVolts), plan.FormatVolts(s.NegVolts))
			},
			planKey: "part.nominal_neg_volts", fix: "keep the output between the rails",
		},
	)
	if m := p.Fixture.MaxStimulusVolts; m > 0 {
		src := []struct {
			role string
			get  func(plan.BenchState) float64
		}{
			{plan.RoleSourceCM, func(s plan.BenchState) float64 { return s.CMVolts }},
			{plan.RoleSourceDiff, func(s plan.BenchState) float64 { return s.DiffVolts }},
			{plan.RoleSourceRef, func(s plan.BenchState) float64 { return s.RefVolts }},
		}
		for _, sr := range src {
			for _, sign := range []float64{1, -1} {
				ls = append(ls, safetyLimit{
					id:    "stimulus-" + sr.role,
					slack: func(s plan.BenchState) float64 { return m - sign*sr.get(s) },
					problem: func(s plan.BenchState) string {
						return fmt.Sprintf("%s at %s exceeds the fixture's max_stimulus_volts %g V", sr.role, plan.FormatVolts(sr.get(s)), m)
					},
					planKey: "fixture.max_stimulus_volts", fix: "keep every source within ±max_stimulus_volts", hard: true,
				})
			}
		}
	}
	return ls
}

// SafeLevels returns the range of levels [lo, hi] of one sweep of t (part
// as in StateAt) that passes every electrical limit of the plan; ok is
// false when no level does. Infinite bounds mean no limit on that side.
func SafeLevels(p *plan.Plan, t *plan.Test, part string) (lo, hi float64, ok bool) {
	lo, hi = math.Inf(-1), math.Inf(1)
	s0, s1 := plan.StateAt(p, t, part, 0), plan.StateAt(p, t, part, 1)
	for _, l := range safetyLimits(p) {
		g0, g1 := l.slack(s0), l.slack(s1)
		slope := g1 - g0
		switch {
		case math.Abs(slope) < 1e-12:
			if g0 < -slackTolerance {
				return lo, hi, false
			}
		case slope > 0:
			lo = math.Max(lo, -g0/slope)
		default:
			hi = math.Min(hi, g0/-slope)
		}
	}
	return lo, hi, lo <= hi+slackTolerance
}

// SafetyError is a plan refused before any instrument contact: every
// refusal with its file, line and key, and the hazard assessment.
type SafetyError struct {
	Refusals plan.Errors
	Hazard   Hazard
}

func (e *SafetyError) Error() string {
	return fmt.Sprintf("plan refused as unsafe (%d problem(s); no instrument was touched):\n%s", len(e.Refusals), e.Refusals.Error())
}

// Unwrap lets errors.As find each refusal.
func (e *SafetyError) Unwrap() []error { return e.Refusals.Unwrap() }

// Hazard says whether a plan takes any terminal above HazardousVolts.
type Hazard struct {
	Hazardous        bool
	MaxToGroundVolts float64 // highest |voltage| of any pin or source to ground
	MaxAcrossVolts   float64 // highest voltage between any two of them (or ground)
	Where            string  // the step where MaxAcrossVolts occurs
}

// AssessHazard scans the nominal state and every level of every test.
func AssessHazard(p *plan.Plan) Hazard {
	var h Hazard
	look := func(s plan.BenchState, where string) {
		t := plan.TerminalsOf(p, s)
		g, a := t.MaxToGroundVolts(s), t.AcrossVolts(s)
		h.MaxToGroundVolts = math.Max(h.MaxToGroundVolts, g)
		if a > h.MaxAcrossVolts || h.Where == "" {
			h.MaxAcrossVolts = a
			h.Where = fmt.Sprintf("%s: V+ = %s, V- = %s, inputs %s … %s, output %s",
				where, plan.FormatVolts(s.PosVolts), plan.FormatVolts(s.NegVolts), plan.FormatVolts(t.InLowVolts), plan.FormatVolts(t.InHighVolts), plan.FormatVolts(t.OutVolts))
		}
	}
	look(plan.NominalState(p), "nominal rails")
	for i := range p.Tests {
		t := &p.Tests[i]
		for _, sw := range plan.Sweeps(t) {
			for _, l := range sw.Levels {
				look(plan.StateAt(p, t, sw.Part, l), fmt.Sprintf("%s (%s%s) level %s", plan.TestKey(i), t.Kind, plan.PartSuffix(sw.Part), plan.FormatVolts(l)))
			}
		}
	}
	for i := range p.ACTests {
		t := &p.ACTests[i]
		for j, s := range plan.ACPeakStates(p, t) {
			look(s, fmt.Sprintf("%s (%s) sine %s peak", plan.ACTestKey(i), t.Kind, [2]string{"positive", "negative"}[j]))
		}
	}
	h.Hazardous = h.MaxAcrossVolts > HazardousVolts || h.MaxToGroundVolts > HazardousVolts
	return h
}

// HazardConsent records how the operator allowed a hazardous plan: the
// allow-hazardous option given, from an interactive terminal, and the
// confirmation typed there. The command line fills it; a plan above
// HazardousVolts runs only with all three.
type HazardConsent struct {
	AllowOption bool
	Interactive bool
	Confirmed   bool
}

// HazardPrompt is the question to put to the operator before a hazardous
// plan; HazardAnswerOK judges the reply.
func HazardPrompt(h Hazard) string {
	return fmt.Sprintf("DANGER: this plan puts %s across the bench (%s to ground), above the %g V DC limit of safety extra-low voltage (SELV/ES1).\n"+
		"Worst step: %s.\nCheck guarding, insulation and interlocks, and local rules. Type \"yes\" to energise: ",
		plan.FormatMag(h.MaxAcrossVolts), plan.FormatMag(h.MaxToGroundVolts), HazardousVolts, h.Where)
}

// HazardAnswerOK accepts exactly "yes" (any case, surrounding space
// ignored).
func HazardAnswerOK(answer string) bool { return strings.EqualFold(strings.TrimSpace(answer), "yes") }

// CheckSafety refuses a plan that would harm the part or the operator,
// computed from the plan alone, before any instrument contact. It is
// CheckSafetyWith with no consent: hazardous plans are refused.
func CheckSafety(p *plan.Plan) error { return CheckSafetyWith(p, HazardConsent{}) }

// CheckSafetyWith validates the plan, then checks the nominal state and
// every level of every test and refuses when
//
//   - a current limit is missing or ≤ 0, or the part's maximum span or the
//     fixture's maximum stimulus is not given;
//   - the supply span V+ - V- exceeds part.max_supply_span_volts;
//   - a rail has the wrong polarity for its channel (V+ < 0; V- > 0 on a
//     negative-rail channel; V- < 0 on a channel not marked negative);
//   - an input leaves the common-mode range: V+ - Vin ≥ cm_headroom_pos +
//     cm_margin and Vin - V- ≥ cm_headroom_neg + cm_margin must hold;
//   - an input goes beyond a rail by more than input_beyond_rail_volts;
//   - the output would have to sit outside the rails;
//   - a source exceeds ±fixture.max_stimulus_volts;
//   - any terminal exceeds HazardousVolts to ground or to another terminal,
//     unless consent has all three parts.
//
// It returns a *SafetyError listing every refusal, Errors when the plan
// is not valid, or nil.
func CheckSafetyWith(p *plan.Plan, consent HazardConsent) error {
	if err := plan.Validate(p); err != nil {
		return err
	}
	var rs plan.Errors
	refuse := func(key string, line int, fix, format string, args ...any) {
		if line == 0 {
			line = p.KeyLine(key)
		}
		rs = append(rs, &plan.Error{File: p.Source, Line: line, Key: key, Problem: fmt.Sprintf(format, args...), Fix: fix})
	}
	pt := &p.Part
	if pt.CurrentLimitAmps <= 0 {
		refuse("part.current_limit_amps", 0, "set current_limit_amps under [part], e.g. 0.05 (the part's supply current with margin)",
			"no supply current limit (%g A): a fault would draw the supplies' full current", pt.CurrentLimitAmps)
	}
	if pt.SupplyAmpsMin < 0 || pt.SupplyAmpsMax < 0 || (pt.SupplyAmpsMax > 0 && pt.SupplyAmpsMin > pt.SupplyAmpsMax) {
		refuse("part.supply_amps_min", 0, "give 0 ≤ supply_amps_min ≤ supply_amps_max (amps per rail), or leave them out",
			"supply current window %g A … %g A is not a window", pt.SupplyAmpsMin, pt.SupplyAmpsMax)
	}
	if pt.CurrentLimitAmps > 0 && pt.SupplyAmpsMin >= pt.CurrentLimitAmps {
		refuse("part.supply_amps_min", 0, "the expected supply current must lie below current_limit_amps",
			"supply_amps_min %g A is not below the current limit %g A", pt.SupplyAmpsMin, pt.CurrentLimitAmps)
	}
	if pt.MaxSupplySpanVolts <= 0 {
		refuse("part.max_supply_span_volts", 0, "copy the absolute maximum supply span (V+ - V-) from the part's datasheet",
			"the part's absolute maximum supply span is not given")
	}
	if p.Fixture.MaxStimulusVolts <= 0 {
		refuse("fixture.max_stimulus_volts", 0, "give the largest |voltage| any source may apply to the fixture, e.g. 12",
			"the fixture's maximum stimulus is not given")
	}
	limits := safetyLimits(p)
	nominal := plan.NominalState(p)
	nominalBad := map[string]bool{}
	for _, l := range limits {
		if l.slack(nominal) < -slackTolerance && !nominalBad[l.id] {
			nominalBad[l.id] = true
			refuse(l.planKey, 0, l.fix, "at the nominal rails: %s", l.problem(nominal))
		}
	}
	for i := range p.Tests {
		t := &p.Tests[i]
		parts := []string{""}
		if t.Kind == plan.TestBoardCMRR {
			parts = []string{plan.PartCM, plan.PartDiff}
		}
		for _, part := range parts {
			key, levels := plan.TestKey(i)+".levels", t.Levels
			if part == plan.PartDiff {
				key, levels = plan.TestKey(i)+".diff_levels", t.DiffLevels
			}
			lo, hi, any := SafeLevels(p, t, part)
			fix := fmt.Sprintf("keep %s within %s … %s", key, plan.FormatVolts(lo), plan.FormatVolts(hi))
			if !any {
				fix = "no level of this test is safe with these rails and limits; check [part] and [fixture]"
			}
			for _, l := range limits {
				if nominalBad[l.id] {
					continue
				}
				var bad []int
				worst := -1
				for j, x := range levels {
					g := l.slack(plan.StateAt(p, t, part, x))
					if g < -slackTolerance {
						bad = append(bad, j)
						if worst < 0 || g < l.slack(plan.StateAt(p, t, part, levels[worst])) {
							worst = j
						}
					}
				}
				if worst < 0 {
					continue
				}
				msg := fmt.Sprintf("%s level %s: %s", t.Kind+plan.PartSuffix(part), plan.FormatVolts(levels[worst]), l.problem(plan.StateAt(p, t, part, levels[worst])))
				if len(bad) > 1 {
					others := make([]string, 0, len(bad)-1)
					for _, j := range bad {
						if j != worst {
							others = append(others, plan.FormatVolts(levels[j]))
						}
					}
					msg += " (also at " + strings.Join(others, ", ") + ")"
				}
				refuse(key, p.ElemLine(key, worst), fix, "%s", msg)
			}
		}
	}
	checkACSafety(p, limits, nominalBad, refuse)
	h := AssessHazard(p)
	if h.Hazardous {
		switch {
		case !consent.AllowOption:
			refuse("part", 0, "if the bench is built for it, run with the allow-hazardous option from a terminal and confirm",
				"%s across the bench (%s to ground) exceeds %g V DC (SELV/ES1; IEC 61010-1 allows 70 V DC; local codes may differ): %s",
				plan.FormatMag(h.MaxAcrossVolts), plan.FormatMag(h.MaxToGroundVolts), HazardousVolts, h.Where)
		case !consent.Interactive:
			refuse("part", 0, "run it from an interactive terminal, where the confirmation can be typed",
				"%s exceeds %g V DC: the allow-hazardous option also needs a confirmation typed at a terminal, and there is none",
				plan.FormatMag(h.MaxAcrossVolts), HazardousVolts)
		case !consent.Confirmed:
			refuse("part", 0, "answer \"yes\" only when the bench is guarded for it",
				"%s exceeds %g V DC and the operator did not confirm", plan.FormatMag(h.MaxAcrossVolts), HazardousVolts)
		}
	}
	if len(rs) == 0 {
		return nil
	}
	return &SafetyError{Refusals: rs.Sorted(), Hazard: h}
}
