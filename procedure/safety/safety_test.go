package safety

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"nullbench/procedure/plan"
)

// TestStateAtMILM38510Table checks the level semantics against MIL-M-38510/114
// Table III (Group A; read from a public copy of the
// specification): with ±20 V nominal rails
// and the inputs at ground, tests 1 and 2 shift both rails to +35/-5 V and
// +5/-35 V (equivalent V_CM = -(V+ + V-)/2 = -15 and +15 V); test 14 is
// +10/-20 V and test 15 is +20/-10 V (one rail 10 V closer to ground).
func TestStateAtMILM38510Table(t *testing.T) {
	p := &plan.Plan{
		Fixture: plan.Fixture{Kind: plan.FixtureNullingLoop, CommonMode: plan.CMBySupplyShift},
		Part:    plan.Part{NominalPosVolts: 20, NominalNegVolts: -20},
	}
	cases := []struct {
		name           string
		kind           string
		level          float64
		wantPos, wantN float64
		wantEquivCM    float64 // -(V+ + V-)/2, MIL-M-38510/114 convention
	}{
		{"test 1", plan.TestCMRR, -15, 35, -5, -15},
		{"test 2", plan.TestCMRR, +15, 5, -35, +15},
		{"test 3 (nominal)", plan.TestCMRR, 0, 20, -20, 0},
		{"test 14", plan.TestPSRRPos, -10, 10, -20, 5},
		{"test 15", plan.TestPSRRNeg, -10, 20, -10, -5},
	}
	for _, c := range cases {
		s := plan.StateAt(p, &plan.Test{Kind: c.kind}, "", c.level)
		if s.PosVolts != c.wantPos || s.NegVolts != c.wantN {
			t.Errorf("%s: rails %+g/%+g V, want %+g/%+g V", c.name, s.PosVolts, s.NegVolts, c.wantPos, c.wantN)
		}
		if eq := -(s.PosVolts + s.NegVolts) / 2; eq != c.wantEquivCM {
			t.Errorf("%s: equivalent V_CM %+g V, want %+g V", c.name, eq, c.wantEquivCM)
		}
		if c.kind == plan.TestCMRR && s.PosVolts-s.NegVolts != 40 {
			t.Errorf("%s: the span must stay 40 V while shifting, got %g", c.name, s.PosVolts-s.NegVolts)
		}
	}
	// The remaining semantics (BenchState doc).
	sym := plan.StateAt(p, &plan.Test{Kind: plan.TestPSRRSym}, "", 4)
	if sym.PosVolts != 22 || sym.NegVolts != -22 {
		t.Errorf("psrr_sym +4 V: %+v", sym)
	}
	neg := plan.StateAt(p, &plan.Test{Kind: plan.TestPSRRNeg}, "", 4)
	if neg.NegVolts != -24 {
		t.Errorf("psrr_neg +4 V must grow the rail's magnitude: %+v", neg)
	}
	aol := plan.StateAt(p, &plan.Test{Kind: plan.TestAOL}, "", 7)
	if aol.RefVolts != 7 || plan.TerminalsOf(p, aol).OutVolts != 7 {
		t.Errorf("aol +7 V: %+v", aol)
	}
	p.Fixture.CommonMode = plan.CMByInputDrive
	in := plan.StateAt(p, &plan.Test{Kind: plan.TestCMRR}, "", 6)
	if in.CMVolts != 6 || in.PosVolts != 20 || in.NegVolts != -20 {
		t.Errorf("cmrr input drive +6 V: %+v", in)
	}
	b := &plan.Plan{Fixture: plan.Fixture{Kind: plan.FixtureBoard, BoardGain: 10}, Part: plan.Part{NominalPosVolts: 15, NominalNegVolts: -15}}
	d := plan.StateAt(b, &plan.Test{Kind: plan.TestBoardCMRR}, plan.PartDiff, 0.5)
	pins := plan.TerminalsOf(b, d)
	if d.DiffVolts != 0.5 || d.CMVolts != 0 || pins.OutVolts != 5 || pins.InHighVolts != 0.5 || pins.InLowVolts != -0.5 {
		t.Errorf("board diff +0.5 V: %+v %+v", d, pins)
	}
}

// TestShiftedRailsNotHazardous: shifted ±20 V rails reach 35 V to ground,
// under the 60 V DC SELV/ES1 limit (IEC 60950-1 §1.2.8, IEC 62368-1); that
// such a bench is not hazardous is common practice, no published source.
func TestShiftedRailsNotHazardous(t *testing.T) {
	p := &plan.Plan{
		Fixture: plan.Fixture{Kind: plan.FixtureNullingLoop, CommonMode: plan.CMBySupplyShift},
		Part:    plan.Part{NominalPosVolts: 20, NominalNegVolts: -20},
		Tests:   []plan.Test{{Kind: plan.TestCMRR, Levels: []float64{-15, 0, 15}, Order: plan.OrderZigzag}},
	}
	h := AssessHazard(p)
	if h.MaxToGroundVolts != 35 || h.MaxAcrossVolts != 40 || h.Hazardous {
		t.Errorf("hazard %+v, want 35 V to ground, 40 V across, not hazardous", h)
	}
	if HazardousVolts != 60 {
		t.Errorf("HazardousVolts = %g, want 60 (SELV, IEC 60950-1 §1.2.8)", HazardousVolts)
	}
}

func TestCheckSafetyExamplePlansPass(t *testing.T) {
	for _, name := range []string{"lot", "noise_gain", "board"} {
		if err := CheckSafety(loadExamplePlan(t, name)); err != nil {
			t.Errorf("%s: %v", name, err)
		}
	}
}

// TestCheckSafetyUnsafePlans: each unsafe example is refused on the right
// key and line, with the numbers worked out in its comment.
func TestCheckSafetyUnsafePlans(t *testing.T) {
	cases := []struct {
		file     string
		key      string
		lineOf   string
		contains []string
	}{
		{"unsafe_overspan", "test[1].levels", "levels = [0.0, 7.0, 14.0, 20.0]",
			// V+ = 15 + 20 = 35 V, span 35 + 15 = 50 V > 36 V; the safe
			// maximum is 36 - 30 = 6 V, the minimum 2.5 - 15 = -12.5 V.
			[]string{"psrr_pos level +20 V", "span 50 V exceeds", "36 V", "within -12.5 V … +6 V"}},
		{"unsafe_cm_range", "test[1].levels", "levels = [-14.0, -7.0, 0.0, 7.0, 14.0]",
			// Level +14: V+ = 15 - 14 = +1 V, 1 V above the grounded inputs;
			// needs 2 + 0.5 V, so |level| ≤ 15 - 2.5 = 12.5 V.
			[]string{"cmrr level +14 V", "1 V below V+ = +1 V", "needs 2.5 V", "within -12.5 V … +12.5 V"}},
		{"unsafe_no_current_limit", "part.current_limit_amps", "[part]",
			[]string{"no supply current limit"}},
		{"unsafe_hazardous", "part", "[part]",
			// V+ = 40 + 40 = 80 V to ground; 80 - (-40) = 120 V across.
			[]string{"120 V across", "80 V to ground", "exceeds 60 V DC", "allow-hazardous"}},
	}
	for _, c := range cases {
		t.Run(c.file, func(t *testing.T) {
			p := loadExamplePlan(t, c.file)
			err := CheckSafety(p)
			var se *SafetyError
			if !errors.As(err, &se) {
				t.Fatalf("want a SafetyError, got %v", err)
			}
			data, _ := os.ReadFile(filepath.Join(examplePlanDir, c.file+".toml"))
			line := lineContaining(t, string(data), c.lineOf, 1)
			var hit *plan.Error
			for _, r := range se.Refusals {
				ok := r.Key == c.key
				for _, s := range c.contains {
					ok = ok && strings.Contains(r.Error(), s)
				}
				if ok {
					hit = r
				}
			}
			if hit == nil {
				t.Fatalf("no refusal on %q containing %q:\n%v", c.key, c.contains, err)
			}
			if hit.Line != line {
				t.Errorf("line %d, want %d: %v", hit.Line, line, hit)
			}
		})
	}
}

// TestHazardConsent: a hazardous plan runs only with the option, a terminal
// and a typed confirmation; each missing part has its own message.
func TestHazardConsent(t *testing.T) {
	p := loadExamplePlan(t, "unsafe_hazardous")
	h := AssessHazard(p)
	if !h.Hazardous || h.MaxToGroundVolts != 80 || h.MaxAcrossVolts != 120 {
		t.Fatalf("hazard %+v", h)
	}
	if !strings.Contains(h.Where, "level +40 V") {
		t.Errorf("Where = %q", h.Where)
	}
	cases := []struct {
		consent HazardConsent
		want    string // "" = allowed
	}{
		{HazardConsent{}, "allow-hazardous option"},
		{HazardConsent{AllowOption: true}, "no"},
		{HazardConsent{AllowOption: true, Interactive: true}, "did not confirm"},
		{HazardConsent{Interactive: true, Confirmed: true}, "allow-hazardous option"},
		{HazardConsent{AllowOption: true, Interactive: true, Confirmed: true}, ""},
	}
	for _, c := range cases {
		err := CheckSafetyWith(p, c.consent)
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%+v: refused: %v", c.consent, err)
		case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
			t.Errorf("%+v: got %v, want a refusal mentioning %q", c.consent, err, c.want)
		}
	}
	if err := CheckSafetyWith(p, HazardConsent{AllowOption: true}); err == nil || !strings.Contains(err.Error(), "terminal") {
		t.Errorf("without a terminal: %v", err)
	}
	// A plan that is also unsafe otherwise stays refused with consent.
	p.Tests[0].Levels = []float64{0, 20, 45}
	if err := CheckSafetyWith(p, HazardConsent{AllowOption: true, Interactive: true, Confirmed: true}); err == nil {
		t.Error("an overspan hazardous plan was allowed")
	}
	prompt := HazardPrompt(h)
	for _, s := range []string{"120 V", "80 V", "60 V DC", "yes"} {
		if !strings.Contains(prompt, s) {
			t.Errorf("prompt lacks %q: %s", s, prompt)
		}
	}
	for ans, ok := range map[string]bool{"yes\n": true, " YES ": true, "y": false, "": false, "yes please": false} {
		if HazardAnswerOK(ans) != ok {
			t.Errorf("HazardAnswerOK(%q) = %v", ans, !ok)
		}
	}
}

// TestCheckSafetyRefusals edits a safe plan to break one limit at a time.
func TestCheckSafetyRefusals(t *testing.T) {
	cases := []struct {
		name     string
		edit     func(p *plan.Plan)
		key      string
		contains []string
	}{
		{"negative rail channel not marked", func(p *plan.Plan) { p.Bench.Roles.SupplyNeg.Negative = false },
			"bench.roles.supply_neg", []string{"not marked negative", "set negative = true"}},
		{"V+ below ground", func(p *plan.Plan) { p.Tests[1].Levels = []float64{-16, -5, 0, 5} }, // V+ = 15 - 16 = -1 V
			"test[2].levels", []string{"V+ = -1 V", "programs only 0 V or more"}},
		{"V- above ground on a negative channel", func(p *plan.Plan) { p.Tests[2].Levels = []float64{-16, -5, 0, 5} }, // V- = -15 + 16 = +1 V
			"test[3].levels", []string{"V- = +1 V", "negative-rail channel"}},
		{"stimulus above the fixture's maximum", func(p *plan.Plan) { p.Tests[4].Levels = []float64{-10, 0, 10, 13} },
			"test[5].levels", []string{"source_ref at +13 V", "max_stimulus_volts 12 V"}},
		{"output beyond a rail", func(p *plan.Plan) {
			p.Fixture.MaxStimulusVolts = 20
			p.Tests[4].Levels = []float64{-10, 0, 16}
		}, "test[5].levels", []string{"output would have to sit at +16 V, above V+ = +15 V"}},
		{"missing span rating", func(p *plan.Plan) { p.Part.MaxSupplySpanVolts = 0 },
			"part.max_supply_span_volts", []string{"absolute maximum supply span is not given"}},
		{"missing stimulus rating", func(p *plan.Plan) { p.Fixture.MaxStimulusVolts = 0 },
			"fixture.max_stimulus_volts", []string{"maximum stimulus is not given"}},
		{"negative current limit", func(p *plan.Plan) { p.Part.CurrentLimitAmps = -0.1 },
			"part.current_limit_amps", []string{"no supply current limit"}},
		{"nominal span above rating", func(p *plan.Plan) { p.Part.MaxSupplySpanVolts = 28 },
			"part.max_supply_span_volts", []string{"at the nominal rails", "span 30 V exceeds"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := loadExamplePlan(t, "lot")
			c.edit(p)
			err := CheckSafety(p)
			var se *SafetyError
			if !errors.As(err, &se) {
				t.Fatalf("want a SafetyError, got %v", err)
			}
			found := false
			for _, r := range se.Refusals {
				ok := r.Key == c.key
				for _, s := range c.contains {
					ok = ok && strings.Contains(r.Error(), s)
				}
				if ok {
					found = true
					if r.Line == 0 {
						t.Errorf("refusal without a line: %v", r)
					}
				}
			}
			if !found {
				t.Errorf("no refusal on %q containing %q:\n%v", c.key, c.contains, err)
			}
		})
	}
}

// TestInputBeyondRail: a part whose common-mode range reaches 0.5 V beyond
// its rails (negative headroom) is still limited by its inputs' absolute
// maximum of 0.3 V beyond a rail. (A nulling loop holds the output at 0 V,
// so only the inputs move.)
func TestInputBeyondRail(t *testing.T) {
	p := loadExamplePlan(t, "lot") // rails ±15 V
	p.Fixture.CommonMode = plan.CMByInputDrive
	p.Part.CMHeadroomPosVolts, p.Part.CMHeadroomNegVolts, p.Part.CMMarginVolts = -0.5, -0.5, 0
	p.Fixture.MaxStimulusVolts = 20
	p.Tests[0].Levels = []float64{-15.3, 0, 15.3} // at the limit: allowed
	if err := CheckSafety(p); err != nil {
		t.Fatalf("levels ±15.3 V: %v", err)
	}
	p.Tests[0].Levels = []float64{-15, 0, 15.4}
	err := CheckSafety(p)
	if err == nil || !strings.Contains(err.Error(), "beyond V+ = +15 V by more than 0.3 V") {
		t.Fatalf("level +15.4 V: %v", err)
	}
	if strings.Contains(err.Error(), "common-mode range needs") {
		t.Errorf("the common-mode range (to +15.5 V) should not refuse +15.4 V: %v", err)
	}
}

// TestSafeLevelsAgreeWithChecks: levels at the ends of SafeLevels pass,
// levels just outside are refused, for every test of the examples.
func TestSafeLevelsAgreeWithChecks(t *testing.T) {
	for _, name := range []string{"lot", "noise_gain", "board"} {
		base := loadExamplePlan(t, name)
		for i := range base.Tests {
			for _, part := range sweepParts(&base.Tests[i]) {
				lo, hi, ok := SafeLevels(base, &base.Tests[i], part)
				if !ok || math.IsInf(lo, 0) || math.IsInf(hi, 0) {
					t.Fatalf("%s test %d %s: range %g…%g ok=%v", name, i, part, lo, hi, ok)
				}
				try := func(levels []float64) error {
					p := loadExamplePlan(t, name)
					if part == plan.PartDiff {
						p.Tests[i].DiffLevels = levels
					} else {
						p.Tests[i].Levels = levels
					}
					return CheckSafety(p)
				}
				mid := (lo + hi) / 2
				if err := try([]float64{lo, mid, hi}); err != nil {
					t.Errorf("%s test %d %s: ends %g, %g refused: %v", name, i, part, lo, hi, err)
				}
				if err := try([]float64{lo - 0.01, mid, hi}); err == nil {
					t.Errorf("%s test %d %s: %g accepted", name, i, part, lo-0.01)
				}
				if err := try([]float64{lo, mid, hi + 0.01}); err == nil {
					t.Errorf("%s test %d %s: %g accepted", name, i, part, hi+0.01)
				}
			}
		}
	}
	// Worked by hand for the lot plan (±15 V, span ≤ 36 V, 2 V + 0.5 V
	// headroom, max stimulus 12 V): psrr_pos d ≤ 36 - 30 = 6 and
	// d ≥ 2.5 - 15 = -12.5; psrr_sym: span 30 + d ≤ 36 and 15 + d/2 ≥ 2.5
	// give -25 … 6; aol |r| ≤ 12 (stimulus).
	p := loadExamplePlan(t, "lot")
	want := map[int][2]float64{0: {-12.5, 12.5}, 1: {-12.5, 6}, 2: {-12.5, 6}, 3: {-25, 6}, 4: {-12, 12}}
	for i, w := range want {
		lo, hi, _ := SafeLevels(p, &p.Tests[i], "")
		if math.Abs(lo-w[0]) > 1e-9 || math.Abs(hi-w[1]) > 1e-9 {
			t.Errorf("%s: %g … %g, want %g … %g", p.Tests[i].Kind, lo, hi, w[0], w[1])
		}
	}
}

func TestFmtVolts(t *testing.T) {
	cases := map[float64]string{15: "+15 V", -2.5: "-2.5 V", 0: "0 V", math.Copysign(0, -1): "0 V", 1e-9: "0 V", 0.0002: "+0.0002 V", math.Inf(1): "+inf V"}
	for v, want := range cases {
		if got := plan.FormatVolts(v); got != want {
			t.Errorf("FormatVolts(%g) = %q, want %q", v, got, want)
		}
	}
	if got := plan.FormatMag(2.5); got != "2.5 V" {
		t.Errorf("FormatMag = %q", got)
	}
}

// TestCheckSafetySupplyCurrentWindow: the presence window must be a window
// and lie below the current limit, or the plan is refused on its key.
func TestCheckSafetySupplyCurrentWindow(t *testing.T) {
	for _, tc := range []struct {
		name     string
		min, max float64
		refused  bool
	}{
		{"unchecked", 0, 0, false},
		{"window", 0.0005, 0.01, false},
		{"only a minimum", 0.0005, 0, false},
		{"inverted", 0.01, 0.0005, true},
		{"negative", -0.001, 0.01, true},
		{"minimum at the current limit", 0.05, 0, true}, // lot.toml limits at 0.05 A
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := loadExamplePlan(t, "lot")
			p.Part.SupplyAmpsMin, p.Part.SupplyAmpsMax = tc.min, tc.max
			err := CheckSafety(p)
			if got := err != nil; got != tc.refused {
				t.Fatalf("refused = %v (%v), want %v", got, err, tc.refused)
			}
			if tc.refused && !strings.Contains(err.Error(), "part.supply_amps_min") {
				t.Errorf("refusal does not name the key: %v", err)
			}
		})
	}
}
