package analysis

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"

	"nullbench/fit"
	"nullbench/procedure/estimate"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// ResultCMRRUncorrected names the common-mode result before the
// open-loop-gain correction. It is reported beside the corrected "cmrr"
// whenever the method lets the output move against the rails (supply shift,
// or input drive on a noise-gain stage) and an aol result of the same unit
// and temperature exists; it is judged against the cmrr limit.
const ResultCMRRUncorrected = "cmrr_uncorrected"

// Inputs are what Analyze needs beyond the plan and the readings:
// the instruments' accuracy specifications for the Type B rows of the
// uncertainty budgets (GUM 4.3; half-widths of rectangular distributions,
// u = a/√3, GUM 4.3.7), and a few analysis settings.
type Inputs struct {
	// Meter is the meter's accuracy. Its gain (reading) part enters every
	// coefficient (c = −k); its offset part is constant during a sweep and
	// falls into the fit's intercept, so it is not a row of any budget. The
	// gain is the same meter for every test of a unit, so it is one shared
	// input in combined results: it cancels in the board ratios A_cm/A_d and
	// ΔV_out/A_d, and scales a closure only by the closure itself.
	Meter estimate.Accuracy
	// Stimulus is the accuracy of the stimulus values the fit uses (the
	// read-back value when a reading was read back, else the programmed
	// one), for every stimulus role not in StimulusByRole. Its gain part is
	// a budget row; its offset part is constant during a sweep and falls
	// into the intercept, like the meter's, so it is not a row.
	Stimulus estimate.Accuracy
	// StimulusByRole overrides Stimulus per role (RoleSupplyPos,
	// RoleSupplyNeg, RoleSourceCM, RoleSourceDiff, RoleSourceRef). Tests that
	// move both rails (cmrr by supply shift, psrr_sym) use the larger gain
	// and the larger offset of the two supply roles.
	StimulusByRole map[string]estimate.Accuracy
	// Coverage is the two-sided coverage probability of expanded
	// uncertainties (0 → 0.95, GUM 6.2; ILAC-G8 assumes 95 %).
	Coverage float64
	// TemperatureGapC splits readings of one temperature index into separate
	// conditions where their measured temperatures are more than this far
	// apart (single linkage; 0 → 2 °C). The runner normally keeps one
	// condition per index; the split guards against readings whose index
	// was not set.
	TemperatureGapC float64
	// WorstUnits is how many of the lowest results per test the summary
	// lists (0 → 3).
	WorstUnits int
}

// Defaults of Inputs.
const (
	DefaultTemperatureGapC = 2.0
	DefaultWorstUnits      = 3
)

// Results is everything the analysis found, as plain values for the report.
// Slices are in a fixed order: by unit (plan order), temperature condition,
// then result name (ResultNames order).
type Results struct {
	Campaign    string  `json:"campaign"`
	LotID       string  `json:"lot_id"`
	PartNumber  string  `json:"part_number"`
	PlanHash    string  `json:"plan_hash"`
	FixtureKind string  `json:"fixture_kind"`
	CommonMode  string  `json:"common_mode"`
	NoiseGain   float64 `json:"noise_gain"`
	// DecisionRule is the ILAC-G8 rule every decision used.
	DecisionRule fit.Rule `json:"decision_rule"`
	// CoverageProbability of every expanded uncertainty.
	CoverageProbability float64 `json:"coverage_probability"`

	// Conditions are the temperature conditions found in the readings.
	Conditions []Condition `json:"conditions"`
	// Ratios: one per unit × result name × condition, including the derived
	// cmrr (A_OL corrected), cmrr_uncorrected and psrr_worst.
	Ratios []RatioResult `json:"ratios"`
	// Closures: nulling-loop consistency per unit × condition.
	Closures []ClosureResult `json:"closures"`
	// Boards: A_d, A_cm and the CMRR limits per unit × condition.
	Boards []BoardResult `json:"boards"`
	// Lot: statistics per result name × condition over the units.
	Lot []LotResult `json:"lot"`
	// Temperature: dB/°C per result name, for the lot and each unit.
	Temperature []TemperatureResult `json:"temperature"`
	// Repeatability: pooled SD of the per-repeat results per name ×
	// condition (tests with repeats ≥ 2).
	Repeatability []RepeatabilityResult `json:"repeatability"`
	Summary       Summary               `json:"summary"`
	// Problems are groups that could not be analysed, and why.
	Problems []Problem `json:"problems"`
}

// Condition is one temperature condition of the campaign: the readings of
// one temperature index whose measured temperatures lie together.
type Condition struct {
	TempIndex int `json:"temp_index"`
	// SetPointC is the plan's temperature point for the index (the
	// measured mean when the index is outside the plan's list).
	SetPointC float64 `json:"set_point_c"`
	// TemperatureC is the mean measured temperature of all readings of the
	// condition, rounded to 0.1 °C; it labels results.
	TemperatureC float64 `json:"temperature_c"`
	// MinC, MaxC: the measured range.
	MinC     float64 `json:"min_c"`
	MaxC     float64 `json:"max_c"`
	Readings int     `json:"readings"`
}

// RatioResult is one rejection (or open-loop gain) result: the line fitted
// to one unit's sweep at one temperature, the signed input-referred
// coefficient with its GUM budget, the ratio in dB with its expanded
// uncertainty (or a one-sided lower bound when unresolved), nonlinearity
// figures, and the decision against the plan's limit.
type RatioResult struct {
	Unit string `json:"unit"`
	// Name is the test kind, or a derived name: cmrr (A_OL corrected when
	// AOLCorrected), cmrr_uncorrected, psrr_worst.
	Name string `json:"name"`
	// Quantity in words: "CMRR", "PSRR+", "PSRR−", "PSRR (symmetric)",
	// "A_OL", "board CMRR", "board PSRR+", "board PSRR−".
	Quantity string `json:"quantity"`
	// Condition indexes Results.Conditions.
	Condition    int     `json:"condition"`
	TempIndex    int     `json:"temp_index"`
	TemperatureC float64 `json:"temperature_c"`
	// MeanTemperatureC is the mean measured temperature of this sweep.
	MeanTemperatureC float64 `json:"mean_temperature_c"`
	Fixture          string  `json:"fixture"`
	// Stimulus states the sign convention: what the coefficient is "ΔV_IO
	// per volt of".
	Stimulus     string `json:"stimulus"`
	StimulusRole string `json:"stimulus_role"`
	// NoiseGain is the divisor from meter volts to the input: K of the
	// nulling loop or noise-gain stage, the measured (or nominal) A_d for
	// board results.
	NoiseGain float64 `json:"noise_gain"`
	// DiffGainNominal: a board PSRR referred by the nominal board_gain
	// because no differential sweep of the unit was found.
	DiffGainNominal bool `json:"diff_gain_nominal"`
	// Points used in the fit; ExcludedPoints (overload, non-finite);
	// FlaggedPoints (settle timeout, used); ReadBackPoints (stimulus read
	// back).
	Points         int  `json:"points"`
	ExcludedPoints int  `json:"excluded_points"`
	FlaggedPoints  int  `json:"flagged_points"`
	ReadBackPoints int  `json:"read_back_points"`
	DriftFitted    bool `json:"drift_fitted"`
	QuadFitted     bool `json:"quad_fitted"`
	// Line is the fit of meter volts against stimulus volts (the cm sweep
	// for board_cmrr).
	Line fit.LineFit `json:"line"`
	// Rejection: coefficient (µV/V, signed per Stimulus), standard and
	// expanded uncertainty, k, ν_eff, ratio in dB with U, resolved flag,
	// lower bound, and the full budget.
	Rejection fit.Rejection `json:"rejection"`
	// Nonlinearity of the sweep (NonlinearityChecked false when it could
	// not be evaluated).
	Nonlinearity        fit.Nonlinearity `json:"nonlinearity"`
	NonlinearityChecked bool             `json:"nonlinearity_checked"`
	// AOLCorrected: the cmrr coefficient is k_c = k − k_o with k_o from the
	// aol result; AOLTermUVPerV = −k_o is what was added.
	AOLCorrected  bool    `json:"aol_corrected"`
	AOLTermUVPerV float64 `json:"aol_term_uv_per_v"`
	// RailLeakCorrected: the two rails' read-backs showed unequal steps and
	// the leak through the other rail combination (RailLeakUVPerV, the
	// change of the coefficient) was taken out (analysis_rails.go).
	RailLeakCorrected bool    `json:"rail_leak_corrected,omitempty"`
	RailLeakUVPerV    float64 `json:"rail_leak_uv_per_v,omitempty"`
	// DerivedFrom names the results a derived result was formed from.
	DerivedFrom []string `json:"derived_from,omitempty"`
	// Repeats: the result of each repeat fitted alone (repeats ≥ 2).
	Repeats []RepeatValue `json:"repeats,omitempty"`
	// Judged is false when the plan has no limit for the name.
	Judged   bool         `json:"judged"`
	Decision fit.Decision `json:"decision"`
	// LimitScope says which limit judged it: plan.LimitScopeRoom (25 °C)
	// or plan.LimitScopeFullRange.
	LimitScope string   `json:"limit_scope,omitempty"`
	Notes      []string `json:"notes,omitempty"`
}

// ValueDB returns the figure to report in dB: the ratio when resolved,
// otherwise the one-sided lower bound (lowerBound true).
func (r *RatioResult) ValueDB() (db float64, lowerBound bool) {
	if r.Rejection.Resolved {
		return r.Rejection.RatioDB, false
	}
	return r.Rejection.LowerBoundDB, true
}

// RepeatValue is one repeat of a sweep fitted alone.
type RepeatValue struct {
	Repeat            int     `json:"repeat"`
	Points            int     `json:"points"`
	CoefficientUVPerV float64 `json:"coefficient_uv_per_v"`
	// RatioDB = 20·log10(10⁶/|k|); RatioDefined false when k is exactly 0.
	RatioDB      float64 `json:"ratio_db"`
	RatioDefined bool    `json:"ratio_defined"`
}

// Problem is a group of readings that gave no result, or a reading
// that could not be placed, with the reason. TempIndex is −1 for a problem
// not tied to one temperature (e.g. a temperature coefficient).
type Problem struct {
	Unit         string  `json:"unit"`
	Test         string  `json:"test"`
	Part         string  `json:"part,omitempty"`
	TempIndex    int     `json:"temp_index"`
	TemperatureC float64 `json:"temperature_c"`
	Problem      string  `json:"problem"`
}

// ResultNames lists the result names in report order.
func ResultNames() []string {
	return []string{plan.TestCMRR, ResultCMRRUncorrected, plan.TestPSRRPos, plan.TestPSRRNeg, plan.PsrrWorst,
		plan.TestPSRRSym, plan.TestAOL, plan.TestBoardCMRR, plan.TestBoardPSRRPos, plan.TestBoardPSRRNeg}
}

// limitName is the [limits] key that judges a result name.
func limitName(name string) string {
	if name == ResultCMRRUncorrected {
		return plan.TestCMRR
	}
	return name
}

// Analyze fits the readings of a run and judges them by the plan.
//
// Readings are grouped by unit, test (and Part for board_cmrr) and
// temperature condition (TempIndex, split further where measured
// temperatures lie more than Inputs.TemperatureGapC apart). Each
// group is fitted by fit.Line with the test's drift and quadratic options
// against the read-back stimulus where it was read back, else the
// programmed one; readings flagged overload or with non-finite values are
// left out and counted. A group that cannot be fitted becomes an
// Problem, not an error. Analyze returns an error only when the
// plan itself cannot be analysed (nil, unknown fixture or rule, no noise
// gain).
//
// What it produces: one straight
// line fit per unit × test × temperature condition, referred to the input
// and judged against the plan's limits, then the cross-checks between tests
// of one unit (nulling-loop closure, open-loop-gain correction, worst PSRR),
// the board figures, and the lot and temperature statistics.
//
// Sign conventions. Every coefficient is signed and input referred, in µV
// of ΔV_IO per volt of the named stimulus, with the level semantics of
// plan.StateAt (plan/state.go). With b1 the fitted slope of meter volts against
// stimulus volts and K the fixture's noise gain (E0 − V_CM = K·V_IO):
//
//	cmrr, supply_shift:  rails at nominal − L, inputs at ground, so the inputs
//	                     sit +L from the rails' centre: ΔV_CM = +L and
//	                     k = b1/K per volt of ΔV_CM. The output (held at
//	                     ground) also moves +L against the rails, so
//	                     k = k_c + k_o (derived from
//	                     k_c + k_p + k_n + k_o = 0, no published source).
//	cmrr, input_drive:   V_CM = L at the inputs: k = b1/K per volt of V_CM;
//	                     k = k_c in the nulling loop (output held), k_c + k_o
//	                     in a noise-gain stage (its output follows V_CM).
//	psrr_pos:            V+ = nominal + d: k_p = b1/K per volt of V+.
//	psrr_neg:            V− = nominal − d (a positive d grows |V−|): per volt
//	                     of the rail V− itself the rail moves by −d, so
//	                     k_n = −b1/K.
//	psrr_sym:            V+ up d/2, V− down d/2: b1/K per volt of supply
//	                     span, = (k_p − k_n)/2 (derived, as above).
//	aol:                 the part's output follows the auxiliary reference
//	                     r: k_o = b1/K per volt of output, A_OL = 1/|k_o|.
//	board_cmrr:          A_d = slope of the diff sweep, A_cm = slope of the
//	                     cm sweep (output volts per input volt); k = A_cm/A_d
//	                     per volt of V_CM, CMRR = |A_d/A_cm| (JESD99B).
//	board_psrr_pos/neg:  ΔV_out/A_d per volt of V+ (resp. of V− itself,
//	                     hence the same sign flip as psrr_neg).
//
// Ratios use the magnitude: ratio = 1/|k|, dB = 20·log10(10⁶/|k µV/V|)
// (JEDEC JESD99B k_CMR, k_SVR).
//
// Derived results: where the cmrr method measures k_c + k_o and an aol
// result of the same unit and condition exists, "cmrr" is the corrected
// k_c = k − k_o and the measured value is kept as "cmrr_uncorrected" (both
// judged against the cmrr limit); "psrr_worst" is the lower-dB of psrr_pos
// and psrr_neg, judged against its own limit.
func Analyze(p *plan.Plan, readings []journal.Reading, acc Inputs) (*Results, error) {
	if p == nil {
		return nil, errors.New("analysis: no plan")
	}
	rule, err := decisionRule(p.Decision.Rule)
	if err != nil {
		return nil, err
	}
	switch p.Fixture.Kind {
	case plan.FixtureNullingLoop, plan.FixtureNoiseGain:
		if !(p.Fixture.NoiseGain > 0) || math.IsInf(p.Fixture.NoiseGain, 0) {
			return nil, fmt.Errorf("analysis: fixture.noise_gain is %g in plan %s; give K = 1 + Rf/Ri of the fixture", p.Fixture.NoiseGain, planName(p))
		}
	case plan.FixtureBoard:
	default:
		return nil, fmt.Errorf("analysis: unknown fixture.kind %q in plan %s; use %q, %q or %q",
			p.Fixture.Kind, planName(p), plan.FixtureNullingLoop, plan.FixtureNoiseGain, plan.FixtureBoard)
	}
	cov := acc.Coverage
	if cov == 0 {
		cov = fit.DefaultCoverage
	}
	if !(cov > 0 && cov < 1) {
		return nil, fmt.Errorf("analysis: coverage probability %g is not in (0, 1)", acc.Coverage)
	}
	a := &analyzer{p: p, acc: acc, cov: cov, rule: rule}
	a.res = &Results{
		Campaign: p.Campaign.Name, LotID: p.Campaign.Lot, PartNumber: p.Part.Number, PlanHash: p.Hash,
		FixtureKind: p.Fixture.Kind, CommonMode: p.Fixture.CommonMode, NoiseGain: p.Fixture.NoiseGain,
		DecisionRule: rule, CoverageProbability: cov,
	}
	a.group(readings)
	if p.Fixture.Kind == plan.FixtureBoard {
		a.analyzeBoards()
	} else {
		a.analyzeOpAmp()
		a.analyzeNulling()
	}
	a.sortResults()
	a.decide()
	a.lotStatistics()
	a.temperatureCoefficients()
	a.repeatability()
	a.summarize()
	return a.res, nil
}

func planName(p *plan.Plan) string {
	if p.Source != "" {
		return p.Source
	}
	if p.Campaign.Name != "" {
		return fmt.Sprintf("%q", p.Campaign.Name)
	}
	return "(unnamed)"
}

// decisionRule maps the plan's rule to the fit's ILAC-G8 rule. An empty
// rule is the plan default (DefaultRule).
func decisionRule(r string) (fit.Rule, error) {
	if r == "" {
		r = plan.DefaultRule
	}
	switch r {
	case plan.RuleSimple:
		return fit.RuleSimple, nil
	case plan.RuleGuarded:
		return fit.RuleGuarded, nil
	}
	return "", fmt.Errorf("analysis: unknown decision.rule %q; use %q or %q", r, plan.RuleSimple, plan.RuleGuarded)
}

// analyzer carries the state of one Analyze call.
type analyzer struct {
	p    *plan.Plan
	acc  Inputs
	cov  float64
	rule fit.Rule
	res  *Results

	units  []string // plan order, then others by first appearance
	groups map[groupKey][]journal.Reading
	keys   []groupKey // in first-appearance order
}

// groupKey identifies one sweep: unit, test kind, part (board_cmrr) and
// condition index into Results.Conditions.
type groupKey struct {
	unit, test, part string
	cond             int
}

// group assigns conditions and sorts readings into sweeps.
func (a *analyzer) group(readings []journal.Reading) {
	condOf, conds := assignConditions(a.p, readings, a.acc.TemperatureGapC)
	a.res.Conditions = conds
	a.groups = map[groupKey][]journal.Reading{}
	seen := map[string]bool{}
	for _, u := range a.p.Units {
		if !seen[u.ID] {
			seen[u.ID] = true
			a.units = append(a.units, u.ID)
		}
	}
	known := map[string]bool{}
	for _, t := range a.p.Tests {
		known[t.Kind] = true
	}
	for i, r := range readings {
		if !seen[r.Unit] {
			seen[r.Unit] = true
			a.units = append(a.units, r.Unit)
		}
		c := conds[condOf[i]]
		if !known[r.Test] {
			a.problem(r.Unit, r.Test, r.Part, c, fmt.Sprintf("reading %d (step %d, repeat %d) is of test %q, which plan %s does not have; it was left out",
				i, r.Step, r.Repeat, r.Test, planName(a.p)))
			continue
		}
		part := ""
		if r.Test == plan.TestBoardCMRR {
			if r.Part != plan.PartCM && r.Part != plan.PartDiff {
				a.problem(r.Unit, r.Test, r.Part, c, fmt.Sprintf("reading %d of board_cmrr has part %q; want %q or %q; it was left out", i, r.Part, plan.PartCM, plan.PartDiff))
				continue
			}
			part = r.Part
		}
		k := groupKey{unit: r.Unit, test: r.Test, part: part, cond: condOf[i]}
		if _, ok := a.groups[k]; !ok {
			a.keys = append(a.keys, k)
		}
		a.groups[k] = append(a.groups[k], r)
	}
}

func (a *analyzer) problem(unit, test, part string, c Condition, msg string) {
	a.res.Problems = append(a.res.Problems, Problem{Unit: unit, Test: test, Part: part,
		TempIndex: c.TempIndex, TemperatureC: c.TemperatureC, Problem: msg})
}

// assignConditions returns, per reading, the index of its temperature
// condition. Readings of one TempIndex form one condition unless their
// measured temperatures have a gap larger than gapC (sorted, single
// linkage). Conditions are ordered by TempIndex, then temperature.
func assignConditions(p *plan.Plan, rs []journal.Reading, gapC float64) ([]int, []Condition) {
	if !(gapC > 0) {
		gapC = DefaultTemperatureGapC
	}
	points := p.TemperaturePoints()
	byIndex := map[int][]int{}
	var indexes []int
	for i, r := range rs {
		if _, ok := byIndex[r.TempIndex]; !ok {
			indexes = append(indexes, r.TempIndex)
		}
		byIndex[r.TempIndex] = append(byIndex[r.TempIndex], i)
	}
	sort.Ints(indexes)
	condOf := make([]int, len(rs))
	var conds []Condition
	for _, ti := range indexes {
		idx := byIndex[ti]
		sorted := slices.Clone(idx)
		sort.SliceStable(sorted, func(x, y int) bool { return rs[sorted[x]].TemperatureC < rs[sorted[y]].TemperatureC })
		start := 0
		for j := 1; j <= len(sorted); j++ {
			if j < len(sorted) && rs[sorted[j]].TemperatureC-rs[sorted[j-1]].TemperatureC <= gapC {
				continue
			}
			cl := sorted[start:j]
			sum := 0.0
			for _, i := range cl {
				sum += rs[i].TemperatureC
				condOf[i] = len(conds)
			}
			mean := sum / float64(len(cl))
			c := Condition{TempIndex: ti, SetPointC: mean, TemperatureC: math.Round(mean*10) / 10,
				MinC: rs[cl[0]].TemperatureC, MaxC: rs[cl[len(cl)-1]].TemperatureC, Readings: len(cl)}
			if ti >= 0 && ti < len(points) {
				c.SetPointC = points[ti]
			}
			conds = append(conds, c)
			start = j
		}
	}
	return condOf, conds
}

// convention says how a test's stimulus maps to the named coefficient.
type convention struct {
	quantity string
	stimulus string  // the words of RatioResult.Stimulus
	sign     float64 // coefficient = sign·b1/K
	roles    []string
}

// conventionFor returns the sign convention of a test kind (and part).
func conventionFor(p *plan.Plan, kind, part string) convention {
	switch kind {
	case plan.TestCMRR:
		if p.Fixture.CommonMode == plan.CMByInputDrive {
			c := convention{quantity: "CMRR", sign: 1, roles: []string{plan.RoleSourceCM}}
			if p.Fixture.Kind == plan.FixtureNullingLoop {
				c.stimulus = "ΔV_IO per volt of V_CM driven at the inputs (source_cm), rails nominal, output held: k_c"
			} else {
				c.stimulus = "ΔV_IO per volt of V_CM driven at the inputs (source_cm), rails nominal; the output follows V_CM: k_c + k_o"
			}
			return c
		}
		return convention{quantity: "CMRR", sign: 1, roles: []string{plan.RoleSupplyPos, plan.RoleSupplyNeg},
			stimulus: "ΔV_IO per volt of ΔV_CM = +L: rails at nominal − L with the inputs at ground (inputs +L from the rails' centre); the output moves with the inputs: k_c + k_o"}
	case plan.TestPSRRPos:
		return convention{quantity: "PSRR+", sign: 1, roles: []string{plan.RoleSupplyPos},
			stimulus: "ΔV_IO per volt of V+ (V+ = nominal + d, V− nominal): k_p"}
	case plan.TestPSRRNeg:
		return convention{quantity: "PSRR−", sign: -1, roles: []string{plan.RoleSupplyNeg},
			stimulus: "ΔV_IO per volt of the rail V− itself (V− = nominal − d, so k_n = −slope/K): k_n"}
	case plan.TestPSRRSym:
		return convention{quantity: "PSRR (symmetric)", sign: 1, roles: []string{plan.RoleSupplyPos, plan.RoleSupplyNeg},
			stimulus: "ΔV_IO per volt of supply span (V+ up d/2, V− down d/2): (k_p − k_n)/2"}
	case plan.TestAOL:
		return convention{quantity: "A_OL", sign: 1, roles: []string{plan.RoleSourceRef},
			stimulus: "ΔV_IO per volt of output (held at the auxiliary reference r, source_ref): k_o = 1/A_OL with sign"}
	case plan.TestBoardCMRR:
		if part == plan.PartDiff {
			return convention{quantity: "board A_d", sign: 1, roles: []string{plan.RoleSourceDiff},
				stimulus: "output volts per volt of differential drive (source_diff): A_d"}
		}
		if p.Fixture.CommonMode == plan.CMBySupplyShift {
			return convention{quantity: "board CMRR", sign: 1, roles: []string{plan.RoleSupplyPos, plan.RoleSupplyNeg},
				stimulus: "input-referred ΔV_out/A_d per volt of ΔV_CM = +L (rails at nominal − L, inputs at ground): A_cm/A_d"}
		}
		return convention{quantity: "board CMRR", sign: 1, roles: []string{plan.RoleSourceCM},
			stimulus: "input-referred ΔV_out/A_d per volt of V_CM (source_cm, inputs tied): A_cm/A_d"}
	case plan.TestBoardPSRRPos:
		return convention{quantity: "board PSRR+", sign: 1, roles: []string{plan.RoleSupplyPos},
			stimulus: "input-referred ΔV_out/A_d per volt of V+ (V+ = nominal + d)"}
	case plan.TestBoardPSRRNeg:
		return convention{quantity: "board PSRR−", sign: -1, roles: []string{plan.RoleSupplyNeg},
			stimulus: "input-referred ΔV_out/A_d per volt of the rail V− itself (V− = nominal − d, so −slope/A_d)"}
	}
	return convention{quantity: kind, sign: 1, stimulus: "per volt of the test's level"}
}

// stimulusAccuracy returns the accuracy for a set of roles: the larger gain
// and the larger offset among them (conservative for tests that move two
// rails together).
func (a *analyzer) stimulusAccuracy(roles []string) estimate.Accuracy {
	var out estimate.Accuracy
	for _, r := range roles {
		acc, ok := a.acc.StimulusByRole[r]
		if !ok {
			acc = a.acc.Stimulus
		}
		out.GainPPM = math.Max(out.GainPPM, acc.GainPPM)
		out.OffsetVolts = math.Max(out.OffsetVolts, acc.OffsetVolts)
	}
	return out
}

// testOf returns the plan's first test of a kind (its fit options).
func (a *analyzer) testOf(kind string) *plan.Test {
	for i := range a.p.Tests {
		if a.p.Tests[i].Kind == kind {
			return &a.p.Tests[i]
		}
	}
	return nil
}

// sweep is one group's data and fitted line.
type sweep struct {
	x, y, t   []float64 // stimulus volts, meter volts, bench seconds
	repeat    []int
	session   []int // journal session of each point (journal.Reading.Session)
	seg       []int // session, when the sweep spans more than one; else nil
	line      fit.LineFit
	coefLine  fit.LineFit // line with Slope at the centre of the sweep (atCentre)
	drift     bool        // drift term fitted
	quad      bool        // quadratic term fitted
	curvature bool        // quadratic term fitted because the curvature test fired
	meanTempC float64

	points, excluded, flagged, readBack int
	notes                               []string
}

func hasFlag(r journal.Reading, flag string) bool { return slices.Contains(r.Flags, flag) }

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// fitSweep collects a group's usable points and fits the line.
func fitSweep(rs []journal.Reading, t *plan.Test) (sweep, error) {
	var s sweep
	sumT := 0.0
	for _, r := range rs {
		x := r.SetVolts
		if r.ReadBack {
			x = r.ReadVolts
		}
		if hasFlag(r, journal.FlagOverload) || hasFlag(r, journal.FlagImplausible) || !finite(x) || !finite(r.MeterVolts) || !finite(r.BenchSeconds) {
			s.excluded++
			continue
		}
		if hasFlag(r, journal.FlagSettleTimeout) {
			s.flagged++
		}
		if r.ReadBack {
			s.readBack++
		}
		s.x = append(s.x, x)
		s.y = append(s.y, r.MeterVolts)
		s.t = append(s.t, r.BenchSeconds)
		s.repeat = append(s.repeat, r.Repeat)
		s.session = append(s.session, r.Session)
		sumT += r.TemperatureC
	}
	s.points = len(s.x)
	if s.points > 0 {
		s.meanTempC = sumT / float64(s.points)
	}
	if s.excluded > 0 {
		s.notes = append(s.notes, fmt.Sprintf("%d point(s) left out (overload, implausible meter answer or non-finite)", s.excluded))
	}
	if s.flagged > 0 {
		s.notes = append(s.notes, fmt.Sprintf("%d point(s) did not settle within the timeout (flag %q) and were kept", s.flagged, journal.FlagSettleTimeout))
	}
	if s.points < 3 {
		return s, fmt.Errorf("%d usable point(s); a line with an uncertainty needs at least 3", s.points)
	}
	if err := Plausible(s.x, s.y); err != nil {
		return s, err
	}
	s.seg = spanningSessions(s.session)
	line, drift, quad, seg, notes, err := lineWithFallback(s.x, s.y, s.t, s.seg, t.DriftTerm, t.QuadraticTerm)
	s.notes = append(s.notes, notes...)
	if err != nil {
		return s, err
	}
	s.seg = seg
	if seg != nil {
		steps := ""
		for i, st := range line.Steps {
			if i > 0 {
				steps += ", "
			}
			steps += fmt.Sprintf("%+.3g ± %.2g µV", 1e6*st.Value, 1e6*st.StdErr)
		}
		s.notes = append(s.notes, fmt.Sprintf("the sweep spans a resume (bench restarted between its points): a separate offset was fitted for each session; offset step(s) at the meter %s", steps))
	}
	if !quad {
		// The curvature test of fit.Nonlinear: when the quadratic term is
		// significant, a straight line leaves it in the residuals (the
		// Type A is inflated and the slope depends on the level mix), so
		// it is fitted.
		opt := fit.NonlinOptions{}
		if drift {
			opt.Time = s.t
		}
		if nl, err := fit.Nonlinear(s.x, s.y, opt); err == nil && nl.QuadSignificant {
			if ql, err := fitLine(s.x, s.y, s.t, s.seg, drift, true); err == nil {
				line, quad = ql, true
				s.curvature = true
				s.notes = append(s.notes, fmt.Sprintf("significant curvature (t = %.1f): quadratic term fitted; the coefficient is the slope at the centre of the sweep (%s V)",
					nl.QuadT, strconv.FormatFloat(centreOf(line), 'g', 4, 64)))
			}
		}
	} else {
		s.notes = append(s.notes, fmt.Sprintf("quadratic term fitted (plan): the coefficient is the slope at the centre of the sweep (%s V)",
			strconv.FormatFloat(centreOf(line), 'g', 4, 64)))
	}
	s.line, s.drift, s.quad = line, drift, quad
	s.coefLine = atCentre(line)
	if drift {
		if vif := fit.VarianceInflation(s.x, s.t); vif > maxDriftVIF {
			s.notes = append(s.notes, fmt.Sprintf("drift term nearly collinear with the level (variance inflation %.3g > %g): "+
				"the slope's uncertainty is inflated that many times; take the levels in zigzag order", vif, float64(maxDriftVIF)))
		}
	}
	return s, nil
}

// Plausible refuses a sweep that cannot carry a ratio, whatever the fit
// would say: a stimulus that did not move (every read-back the same: the
// source stayed off or is not wired) or a response that did not move at
// all (every meter value identical to the last digit: a stuck meter, or
// one returning a stale reading). A real 6½-digit reading always carries
// noise in its last digits, so identical values are not a very good part
// but a fault; fitting them would give a zero slope and an unbounded
// "ratio ≥ …" (common practice, no published source). A meter that went
// stale part-way through a sweep shows the same signature on most of it:
// when more than half the points (at least 3, at more than one stimulus
// level) share one meter value to the last digit, the sweep is refused
// too, since the few moving points would otherwise carry a flat line.
func Plausible(x, y []float64) error {
	same := func(v []float64) bool {
		for _, e := range v[1:] {
			if e != v[0] {
				return false
			}
		}
		return true
	}
	if same(x) {
		return fmt.Errorf("implausible: the stimulus shows no variation (every point at %s): the source or supply did not move; check that its output is on and wired", plan.FormatVolts(x[0]))
	}
	if same(y) {
		return fmt.Errorf("implausible: the meter returned %.7g V at every one of %d points: a stuck meter or a stale reading (check its trigger and the connection); no ratio is formed", y[0], len(y))
	}
	count := map[float64]int{}
	for _, v := range y {
		count[v]++
	}
	for v, k := range count {
		if k < 3 || 2*k <= len(y) {
			continue
		}
		levels := map[float64]bool{}
		for i := range y {
			if y[i] == v {
				levels[x[i]] = true
			}
		}
		if len(levels) > 1 {
			return fmt.Errorf("implausible: the meter returned %.7g V at %d of %d points, over %d stimulus levels: a stuck meter or a stale reading from part-way through the sweep (check its trigger and the connection); no ratio is formed", v, k, len(y), len(levels))
		}
	}
	return nil
}

// maxDriftVIF is the variance inflation of the drift term above which a
// result is noted (fit.VarianceInflation; 10 is common practice, no
// published source for the number).
const maxDriftVIF = 10

// fitLine fits y against x with or without the drift and quadratic terms.
func fitLine(x, y, t []float64, seg []int, drift, quad bool) (fit.LineFit, error) {
	opt := fit.LineOptions{Quadratic: quad, Segments: seg}
	if drift {
		opt.Time = t
	}
	return fit.Line(x, y, opt)
}

// centreOf is the centre of a fit's stimulus range, (x_min + x_max)/2.
func centreOf(l fit.LineFit) float64 { return (l.XMin + l.XMax) / 2 }

// atCentre returns the fit with its Slope replaced by the slope of the
// fitted curve at the centre of the sweep (fit.LineFit.SlopeAt); a fit
// without a quadratic term is returned as it is. The coefficient of a
// curved transfer is this slope: the mean slope over a sweep symmetric
// about its centre.
func atCentre(l fit.LineFit) fit.LineFit {
	if l.HasQuad {
		l.Slope = l.SlopeAt(centreOf(l))
	}
	return l
}

// lineWithFallback fits y against x with the requested drift and quadratic
// terms and the session offsets (seg, nil for none); when the design
// cannot carry them (too few points, or time collinear with the stimulus
// as in an ascending order) it drops the session offsets, then the drift
// term, then the quadratic term, and says so.
func lineWithFallback(x, y, t []float64, seg []int, drift, quad bool) (fit.LineFit, bool, bool, []int, []string, error) {
	var notes []string
	droppable := func(err error) bool {
		return errors.Is(err, fit.ErrSingular) || errors.Is(err, fit.ErrTooFewPoints)
	}
	line, err := fitLine(x, y, t, seg, drift, quad)
	if err != nil && seg != nil && droppable(err) {
		notes = append(notes, fmt.Sprintf("the sweep spans a resume, but a separate offset per session could not be fitted (%v): an offset step between sessions would bias the slope", err))
		seg = nil
		line, err = fitLine(x, y, t, seg, drift, quad)
	}
	if err != nil && drift && droppable(err) {
		notes = append(notes, fmt.Sprintf("drift term dropped (%v): the result is not corrected for drift", err))
		drift = false
		line, err = fitLine(x, y, t, seg, drift, quad)
	}
	if err != nil && quad && droppable(err) {
		notes = append(notes, fmt.Sprintf("quadratic term dropped (%v)", err))
		quad = false
		line, err = fitLine(x, y, t, seg, drift, quad)
	}
	return line, drift, quad, seg, notes, err
}

// spanningSessions returns the sessions of a sweep's points when they
// come from more than one session, else nil.
func spanningSessions(session []int) []int {
	for _, v := range session {
		if v != session[0] {
			return session
		}
	}
	return nil
}

// Budget row names of the inputs shared by every coefficient of one unit
// (same fixture network, same meter): merged, not added, when coefficients
// are combined.
const (
	rowNoiseGain = "noise gain K tolerance (fixture)"
	rowMeterGain = "meter gain accuracy"
)

// coefficientBudget builds the budget of sign·10⁶·b1/K (µV/V) by
// fit.CoefficientBudget: Type A from the fit (ν = n − p), Type B for the
// stimulus gain and offset, plus the shared rows (noise-gain tolerance,
// meter gain) under fixed names. A negative sign negates the value and
// every sensitivity, which leaves each contribution unchanged.
//
// more are rows of the signed coefficient (their sensitivities are given
// for the signed value and are not negated).
func (a *analyzer) coefficientBudget(line fit.LineFit, K, kTolRel float64, stim estimate.Accuracy, sign float64, more ...fit.BudgetRow) (fit.Budget, error) {
	k := 1e6 * line.Slope.Value / K
	var extra []fit.BudgetRow
	if kTolRel > 0 {
		extra = append(extra, fit.BudgetRow{Name: rowNoiseGain, Kind: "B", Distribution: fit.DistRectangular,
			Value: K, StdUncertainty: K * fit.RectangularStdUnc(kTolRel), Unit: "V/V", Sensitivity: -k / K, DOF: fit.InfDOF})
	}
	if a.acc.Meter.GainPPM > 0 {
		extra = append(extra, fit.BudgetRow{Name: rowMeterGain, Kind: "B", Distribution: fit.DistRectangular,
			Value: 1, StdUncertainty: fit.RectangularStdUnc(a.acc.Meter.GainPPM * 1e-6), Unit: "1", Sensitivity: -k, DOF: fit.InfDOF})
	}
	b, err := fit.CoefficientBudget(line, fit.BudgetInputs{
		// The stimulus offset error is constant during a sweep (a
		// calibration offset of the source or of its read-back), so, like
		// the meter's offset, it falls into the fit's intercept and does
		// not change the slope: it is not a row (GUM 4.3 applied to the
		// model y = b0 + b1·(x + e), e constant). What varies between
		// settings (read-back noise) is in the fit's scatter.
		NoiseGain: K, StimulusGainPPM: stim.GainPPM,
		Extra: extra, Coverage: a.cov,
	})
	if err != nil {
		return fit.Budget{}, err
	}
	if sign < 0 {
		b.Value = -b.Value
		for i := range b.Rows {
			b.Rows[i].Sensitivity = -b.Rows[i].Sensitivity
		}
	}
	if len(more) > 0 {
		return fit.Combine(b.Measurand, b.Unit, b.Value, append(b.Rows, more...), a.cov)
	}
	return b, nil
}

// budgetTerm is one coefficient entering a linear combination
// y = Σ c_j·x_j, with the budget of x_j.
type budgetTerm struct {
	label string
	b     fit.Budget
	c     float64
}

// combineBudgets forms the budget of y = Σ c_j·x_j (µV/V) from the
// budgets of the x_j (GUM 5.1.2, law of propagation): every row of x_j
// keeps its u and ν with sensitivity c_j·c_ij. Rows of the shared inputs
// (rowNoiseGain, rowMeterGain) are one input each: their sensitivities are
// summed (GUM 5.2, fully correlated), so for example the meter gain cancels
// in a quotient of two readings of the same meter. Other rows are taken as
// independent and prefixed with the term's label.
func (a *analyzer) combineBudgets(measurand string, value float64, terms []budgetTerm) (fit.Budget, error) {
	var rows []fit.BudgetRow
	shared := map[string]int{}
	for _, t := range terms {
		for _, r := range t.b.Rows {
			r.Sensitivity *= t.c
			if r.Name == rowNoiseGain || r.Name == rowMeterGain {
				if i, ok := shared[r.Name]; ok && rows[i].StdUncertainty == r.StdUncertainty && rows[i].Value == r.Value {
					rows[i].Sensitivity += r.Sensitivity
					continue
				}
				if _, ok := shared[r.Name]; !ok {
					shared[r.Name] = len(rows)
					rows = append(rows, r)
					continue
				}
			}
			r.Name = t.label + ": " + r.Name
			rows = append(rows, r)
		}
	}
	return fit.Combine(measurand, "µV/V", value, rows, a.cov)
}

// repeatValues fits each repeat of a sweep alone and returns
// coef(line) for each one with at least 3 points that fits.
func repeatValues(s sweep, coef func(fit.LineFit) float64) []RepeatValue {
	byRep := map[int][]int{}
	var reps []int
	for i, r := range s.repeat {
		if _, ok := byRep[r]; !ok {
			reps = append(reps, r)
		}
		byRep[r] = append(byRep[r], i)
	}
	if len(reps) < 2 {
		return nil
	}
	sort.Ints(reps)
	var out []RepeatValue
	for _, r := range reps {
		idx := byRep[r]
		if len(idx) < 3 {
			continue
		}
		x, y, t, ses := make([]float64, len(idx)), make([]float64, len(idx)), make([]float64, len(idx)), make([]int, len(idx))
		for j, i := range idx {
			x[j], y[j], t[j], ses[j] = s.x[i], s.y[i], s.t[i], s.session[i]
		}
		line, _, _, _, _, err := lineWithFallback(x, y, t, spanningSessions(ses), s.drift, s.quad)
		if err != nil {
			continue
		}
		out = append(out, newRepeatValue(r, len(idx), coef(atCentre(line))))
	}
	return out
}

func newRepeatValue(rep, n int, kUV float64) RepeatValue {
	v := RepeatValue{Repeat: rep, Points: n, CoefficientUVPerV: kUV}
	if kUV != 0 && finite(kUV) {
		v.RatioDB = fit.DBFromUVPerV(kUV)
		v.RatioDefined = true
	}
	return v
}

// nonlinearity evaluates fit.Nonlinear on a sweep, referred by the divisor.
func (a *analyzer) nonlinearity(r *RatioResult, s sweep, divisor float64) {
	opt := fit.NonlinOptions{NoiseGain: math.Abs(divisor), Coverage: a.cov}
	if s.drift {
		opt.Time = s.t
	}
	nl, err := fit.Nonlinear(s.x, s.y, opt)
	if err != nil {
		r.Notes = append(r.Notes, fmt.Sprintf("nonlinearity not evaluated: %v", err))
		return
	}
	r.Nonlinearity, r.NonlinearityChecked = nl, true
	r.Notes = append(r.Notes, nonlinearityNotes(nl)...)
}

// nonlinearityNotes words what fit.Nonlinear found. The stimulus is a
// read-back (0.0019999999999997797 V for a 2 mV level), so it is given
// to the µV with plan.FormatVolts, the deviation to 3 significant figures.
func nonlinearityNotes(nl fit.Nonlinearity) []string {
	var notes []string
	if nl.QuadSignificant {
		notes = append(notes, fmt.Sprintf("non-linearity: largest deviation from a straight line %.3g µV at the input, at %s",
			nl.MaxDeviationUV, plan.FormatVolts(nl.AtStimulusVolts)))
	}
	if nl.SpanDependent {
		notes = append(notes, fmt.Sprintf("slope differs between the lower and upper half of the span (z = %.1f)", nl.SlopeZ))
	}
	return notes
}

// newRatio fills the common fields of a result from its sweep.
func (a *analyzer) newRatio(k groupKey, name string, conv convention, s sweep) RatioResult {
	c := a.res.Conditions[k.cond]
	return RatioResult{
		Unit: k.unit, Name: name, Quantity: conv.quantity, Condition: k.cond,
		TempIndex: c.TempIndex, TemperatureC: c.TemperatureC, MeanTemperatureC: s.meanTempC,
		Fixture: a.p.Fixture.Kind, Stimulus: conv.stimulus, StimulusRole: joinRoles(conv.roles),
		Points: s.points, ExcludedPoints: s.excluded, FlaggedPoints: s.flagged, ReadBackPoints: s.readBack,
		DriftFitted: s.drift, QuadFitted: s.quad, Line: s.line,
		Notes: slices.Clone(s.notes),
	}
}

func joinRoles(roles []string) string {
	out := ""
	for i, r := range roles {
		if i > 0 {
			out += "+"
		}
		out += r
	}
	return out
}

// analyzeOpAmp fits every sweep of a nulling-loop or noise-gain fixture.
func (a *analyzer) analyzeOpAmp() {
	for _, k := range a.keys {
		c := a.res.Conditions[k.cond]
		switch k.test {
		case plan.TestCMRR, plan.TestPSRRPos, plan.TestPSRRNeg, plan.TestPSRRSym, plan.TestAOL:
		default:
			a.problem(k.unit, k.test, k.part, c, fmt.Sprintf("test %q is not analysed on a %s fixture", k.test, a.p.Fixture.Kind))
			continue
		}
		r, err := a.opAmpRatio(k, a.groups[k], nil)
		if err != nil {
			a.problem(k.unit, k.test, k.part, c, err.Error())
			continue
		}
		a.res.Ratios = append(a.res.Ratios, r)
	}
}

// noiseGainStageAOL returns the budget row and note of the part's finite
// open-loop gain in a noise-gain stage. The stage's output is K·V_IO, and
// the output term k_o·ΔV_out feeds back into V_IO, so every coefficient is
// measured as
//
//	k_measured = k/(1 − K·k_o)
//
// (derived from ΔV_IO = k·ΔS + k_o·K·ΔV_IO, no published source; 1 % at
// K = 1000 and A_OL = 100 dB). An aol test needs the nulling loop, so k_o
// is not measured on this fixture: with the rated minimum A_OL
// (part.aol_min_db) the row is k_o = 0 ± 1/A_OL,min (rectangular, GUM
// 4.3.7) with sensitivity ∂k/∂k_o = −K·k (µV/V per V/V); without it the
// note says the scale is unbounded. kUV is the signed coefficient.
func (a *analyzer) noiseGainStageAOL(kUV float64) (*fit.BudgetRow, string) {
	K := a.p.Fixture.NoiseGain
	aolDB := a.p.Part.AOLMinDB
	if !(aolDB > 0) {
		return nil, fmt.Sprintf("noise-gain stage: the coefficient is scaled by 1/(1 − K·k_o) with K = %g and k_o = ±1/A_OL not known; "+
			"give part.aol_min_db (the rated A_OL) to put it in the budget", K)
	}
	koMax := math.Pow(10, -aolDB/20)
	row := &fit.BudgetRow{
		Name: "open-loop gain in the noise-gain stage: scale 1/(1 − K·k_o), |k_o| ≤ 1/A_OL,min (rated)", Kind: "B",
		Distribution: fit.DistRectangular, Value: 0, StdUncertainty: fit.RectangularStdUnc(koMax), Unit: "V/V",
		Sensitivity: -K * kUV, DOF: fit.InfDOF,
	}
	return row, fmt.Sprintf("noise-gain stage: the coefficient is scaled by 1/(1 − K·k_o); with the rated A_OL ≥ %.1f dB that is within ±%.3g %% (budget row, not corrected)",
		aolDB, 100*K*koMax)
}

// opAmpRatio fits one op-amp sweep (readings rs of group k) and forms its
// coefficient, budget (with the extra rows), nonlinearity and repeats.
func (a *analyzer) opAmpRatio(k groupKey, rs []journal.Reading, extra []fit.BudgetRow) (RatioResult, error) {
	K, tol := a.p.Fixture.NoiseGain, a.p.Fixture.NoiseGainTolerance
	conv := conventionFor(a.p, k.test, k.part)
	s, err := fitSweep(rs, a.testOf(k.test))
	if err != nil {
		return RatioResult{}, fmt.Errorf("no fit: %w", err)
	}
	r := a.newRatio(k, k.test, conv, s)
	r.NoiseGain = K
	if a.p.Fixture.Kind == plan.FixtureNoiseGain {
		row, note := a.noiseGainStageAOL(conv.sign * 1e6 * s.coefLine.Slope.Value / K)
		if row != nil {
			extra = append(slices.Clone(extra), *row)
		}
		r.Notes = append(r.Notes, note)
	}
	b, err := a.coefficientBudget(s.coefLine, K, tol, a.stimulusAccuracy(conv.roles), conv.sign, extra...)
	if err == nil {
		r.Rejection, err = fit.RejectionFromBudget(b)
	}
	if err != nil {
		return RatioResult{}, fmt.Errorf("no coefficient: %w", err)
	}
	a.nonlinearity(&r, s, K)
	if k.test == plan.TestPSRRSym {
		r.Notes = append(r.Notes, psrrSymNote)
	}
	sign := conv.sign
	r.Repeats = repeatValues(s, func(l fit.LineFit) float64 { return sign * 1e6 * l.Slope.Value / K })
	return r, nil
}

// psrrSymNote states psrr_sym's convention: per volt of total span. Each
// rail moves by half the span, so per volt of one rail's move the
// coefficient is twice as large and the ratio 20·log10(2) = 6.02 dB lower.
const psrrSymNote = "per volt of total supply span V+ − V− (each rail moves half the span); a per-rail figure (per volt of each rail's move) is 6.02 dB lower"

// sortResults orders ratios by unit (plan order), condition, then name,
// and closures and boards by unit and condition.
func (a *analyzer) sortResults() {
	unitRank := map[string]int{}
	for i, u := range a.units {
		unitRank[u] = i
	}
	nameRank := map[string]int{}
	for i, n := range ResultNames() {
		nameRank[n] = i
	}
	before := func(ux string, cx int, uy string, cy int) (less, equal bool) {
		if unitRank[ux] != unitRank[uy] {
			return unitRank[ux] < unitRank[uy], false
		}
		if cx != cy {
			return cx < cy, false
		}
		return false, true
	}
	sort.SliceStable(a.res.Ratios, func(i, j int) bool {
		x, y := &a.res.Ratios[i], &a.res.Ratios[j]
		if less, eq := before(x.Unit, x.Condition, y.Unit, y.Condition); !eq {
			return less
		}
		return nameRank[x.Name] < nameRank[y.Name]
	})
	sort.SliceStable(a.res.Closures, func(i, j int) bool {
		x, y := &a.res.Closures[i], &a.res.Closures[j]
		less, _ := before(x.Unit, x.Condition, y.Unit, y.Condition)
		return less
	})
	sort.SliceStable(a.res.Boards, func(i, j int) bool {
		x, y := &a.res.Boards[i], &a.res.Boards[j]
		less, _ := before(x.Unit, x.Condition, y.Unit, y.Condition)
		return less
	})
}

// decide judges every result that has a limit (fit.DecideRejection: a
// resolved result by its interval, an unresolved one by its lower bound),
// except one fitted from fewer valid points than the plan's
// min_valid_points (fewValidPoints): that one is noted and listed as a
// problem, never judged.
func (a *analyzer) decide() {
	for i := range a.res.Ratios {
		r := &a.res.Ratios[i]
		// Too few valid points for the plan: never judged, whatever the
		// limit, and a problem of the campaign (min_valid_points).
		if why := a.fewValidPoints(r); why != "" {
			r.Notes = append(r.Notes, "not judged: "+why)
			a.problem(r.Unit, r.Name, "", a.res.Conditions[r.Condition], "not judged: "+why)
			continue
		}
		lim, scope, ok := a.p.LimitAt(limitName(r.Name), a.res.Conditions[r.Condition].SetPointC)
		if !ok {
			continue
		}
		r.LimitScope = scope
		d, err := fit.DecideRejection(r.Rejection, lim, a.rule)
		if err != nil {
			r.Notes = append(r.Notes, fmt.Sprintf("not judged: %v", err))
			continue
		}
		r.Judged, r.Decision = true, d
	}
}

// DecisionRule maps the plan's decision.rule ("" for the default) to the
// ILAC-G8 rule of package fit, for the frequency-response analysis
// (package freq) to judge as the DC analysis does.
func DecisionRule(r string) (fit.Rule, error) { return decisionRule(r) }
