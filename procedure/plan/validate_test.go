package plan

import (
	"errors"
	"fmt"
	"strings"
	"testing"
)

// TestValidateRefusals edits the minimal plan to break one rule at a time
// and checks the error's line (found in the document), key and wording.
func TestValidateRefusals(t *testing.T) {
	rep := func(old, new string) func(string) string {
		return func(s string) string {
			if !strings.Contains(s, old) {
				panic("test edit does not apply: " + old)
			}
			return strings.Replace(s, old, new, 1)
		}
	}
	cases := []struct {
		name     string
		edit     func(string) string
		lineOf   string // "" when the line is not checked
		key      string
		contains []string
	}{
		{"two distinct levels", rep("levels = [-10.0, 0.0, 10.0]", "levels = [-10.0, 10.0]"),
			"levels = [-10.0, 10.0]", "test[1].levels", []string{"n ≥ 3", "residual standard deviation"}},
		// Ascending in one pass with a drift term: time and level are
		// collinear (a design that cannot separate drift from slope:
		// Draper & Smith, Applied Regression Analysis, on collinearity).
		{"ascending with drift in one pass", rep("levels = [-10.0, 0.0, 10.0]", "levels = [-10.0, 0.0, 10.0]\norder = \"ascending\"\ndrift_term = true"),
			"", "test[1].order", []string{"zigzag", "cannot be told apart"}},
		{"duplicate level", rep("levels = [-10.0, 0.0, 10.0]", "levels = [-10.0, 0.0, 10.0, 0.0]"),
			"levels = [-10.0, 0.0, 10.0, 0.0]", "test[1].levels", []string{"listed twice"}},
		{"no levels", rep("levels = [-10.0, 0.0, 10.0]", "levels = []"),
			"levels = []", "test[1].levels", []string{"no levels"}},
		{"nan level on its own line", rep("  0.0,\n", "  nan,\n"),
			"  nan,", "test[2].levels", []string{"nan and inf"}},
		{"aol on a noise-gain stage", rep(`kind = "nulling_loop"`, `kind = "noise_gain"`),
			`kind = "aol"`, "test[2].kind", []string{"nulling_loop", "holds the output"}},
		{"board test on an op-amp fixture", rep(`kind = "cmrr"`, `kind = "board_cmrr"`),
			`kind = "board_cmrr"`, "test[1].kind", []string{"not available"}},
		{"psrr_worst as a test", rep(`kind = "cmrr"`, `kind = "psrr_worst"`),
			`kind = "psrr_worst"`, "test[1].kind", []string{"derived"}},
		{"duplicate test kind", rep(`kind = "aol"`, `kind = "cmrr"`),
			"", "test[2].kind", []string{"already measured by test[1]"}},
		{"unknown fixture", rep(`kind = "nulling_loop"`, `kind = "loop"`),
			`kind = "loop"`, "fixture.kind", []string{"unknown fixture kind"}},
		{"unknown common mode", rep(`common_mode = "supply_shift"`, `common_mode = "shift"`),
			`common_mode = "shift"`, "fixture.common_mode", []string{"supply_shift"}},
		{"noise gain below 1", rep("noise_gain = 1000.0", "noise_gain = 0.5"),
			"noise_gain = 0.5", "fixture.noise_gain", []string{"1 + Rf/Ri"}},
		{"aol without source_ref", rep(`source_ref = { instrument = "src", channel = "3" }`, ""),
			"[bench.roles]", "bench.roles.source_ref", []string{"not bound", "aol"}},
		{"input drive without source_cm", rep(`common_mode = "supply_shift"`, `common_mode = "input_drive"`),
			"[bench.roles]", "bench.roles.source_cm", []string{"not bound", "input_drive"}},
		{"role names a missing instrument", rep(`meter      = { instrument = "dmm" }`, `meter      = { instrument = "dvm" }`),
			`instrument = "dvm"`, "bench.roles.meter.instrument", []string{`"dvm"`, "not defined", "dmm, psu, src"}},
		{"supply without channel", rep(`supply_pos = { instrument = "psu", channel = "1" }`, `supply_pos = { instrument = "psu" }`),
			`supply_pos = { instrument = "psu" }`, "bench.roles.supply_pos.channel", []string{"needs a channel"}},
		{"two roles on one channel", rep(`source_ref = { instrument = "src", channel = "3" }`, `source_ref = { instrument = "psu", channel = "2" }`),
			`source_ref = { instrument = "psu"`, "bench.roles.source_ref.channel", []string{"already bound to supply_neg"}},
		{"negative on a source", rep(`channel = "3" }`, `channel = "3", negative = true }`),
			`channel = "3", negative = true`, "bench.roles.source_ref.negative", []string{"only supply_neg"}},
		{"bad address", rep(`address = "tcp://127.0.0.1:5025"`, `address = "127.0.0.1:5025"`),
			`address = "127.0.0.1:5025"`, "bench.instrument.dmm.address", []string{"tcp://"}},
		{"duplicate unit", func(s string) string { return s + "\n[[unit]]\nid = \"U01\"\n" },
			"", "unit[2].id", []string{"already used by unit[1]"}},
		{"channels mixed", func(s string) string { return s + "\n[[unit]]\nid = \"U02\"\nchannel = \"102\"\n" },
			"", "", []string{"no channel while others have"}},
		{"channels without switch", func(s string) string {
			return strings.Replace(s, "id = \"U01\"\n", "id = \"U01\"\nchannel = \"101\"\n", 1)
		}, "", "bench.roles.switch", []string{"switch channels"}},
		// min_valid_points: from 3 (a line with an uncertainty) to what
		// the test plans (3 levels, each visited twice by the zigzag
		// order, × 1 repeat here: 6 points).
		{"min_valid_points below the fit's minimum", rep("levels = [-10.0, 0.0, 10.0]", "levels = [-10.0, 0.0, 10.0]\nmin_valid_points = 2"),
			"min_valid_points = 2", "test[1].min_valid_points", []string{"below the fit's minimum", "at least 3"}},
		{"min_valid_points beyond the plan", rep("levels = [-10.0, 0.0, 10.0]", "levels = [-10.0, 0.0, 10.0]\nmin_valid_points = 7"),
			"min_valid_points = 7", "test[1].min_valid_points", []string{"more than the 6 points the test plans per sweep", "at most 6"}},
		// Bounds: a dwell beyond a week is a typo, not a plan.
		{"dwell beyond a week", rep("levels = [-10.0, 0.0, 10.0]", "levels = [-10.0, 0.0, 10.0]\ndwell_s = 1e12"),
			"dwell_s = 1e12", "test[1].dwell_s", []string{"longer than a week"}},
		{"settle time-out beyond a week", rep("levels = [-10.0, 0.0, 10.0]", "levels = [-10.0, 0.0, 10.0]\nsettle_timeout_s = 604801.0"),
			"settle_timeout_s = 604801.0", "test[1].settle_timeout_s", []string{"longer than a week"}},
		{"too many levels", rep("levels = [-10.0, 0.0, 10.0]", "levels = ["+manyLevels(1001)+"]"),
			"levels = [0.0,", "test[1].levels", []string{"1001 levels"}},
		{"one relay written twice", func(s string) string {
			s = strings.Replace(s, "id = \"U01\"\n", "id = \"U01\"\nchannel = \"101\"\n", 1)
			return s + "\n[[unit]]\nid = \"U02\"\nchannel = \"0101\"\n"
		}, "", "unit[2].channel", []string{"already used by unit[1]"}},
		{"unknown limit", rep("cmrr = 100.0", "cmrr = 100.0\ncmr = 90.0"),
			"cmr = 90.0", "limits.cmr", []string{`did you mean "cmrr"`}},
		{"psrr_worst without the psrr tests", rep("cmrr = 100.0", "cmrr = 100.0\npsrr_worst = 90.0"),
			"psrr_worst = 90.0", "limits.psrr_worst", []string{"psrr_pos and psrr_neg"}},
		{"limit without its test", rep("cmrr = 100.0", "cmrr = 100.0\npsrr_sym = 90.0"),
			"psrr_sym = 90.0", "limits.psrr_sym", []string{"no psrr_sym test"}},
		{"chamber mode without chamber", func(s string) string {
			return s + "\n[temperature]\nmode = \"chamber\"\npoints_c = [25.0, 85.0]\n"
		}, "", "bench.roles.chamber", []string{"not bound"}},
		{"points without a mode", func(s string) string { return s + "\n[temperature]\npoints_c = [25.0, 85.0]\n" },
			"points_c = [25.0, 85.0]", "temperature.points_c", []string{"mode is \"none\""}},
		{"unknown decision rule", func(s string) string { return s + "\n[decision]\nrule = \"strict\"\n" },
			"rule = \"strict\"", "decision.rule", []string{"guarded"}},
		{"readings 0", rep("nplc = 1.0", "nplc = 1.0\nreadings = 0"),
			"readings = 0", "test[2].readings", []string{"give 1 to 1000"}},
		{"ramp step 0", func(s string) string { return s + "\n[safety]\nramp_step_volts = 0.0\n" },
			"ramp_step_volts = 0.0", "safety.ramp_step_volts", []string{"out of range"}},
		{"no tests", func(s string) string { return s[:strings.Index(s, "[[test]]")] + "[[unit]]\nid = \"U01\"\n" },
			"", "test", []string{"no tests"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			doc := c.edit(minimalPlanTOML)
			_, err := Parse([]byte(doc), "v.toml")
			if err == nil {
				t.Fatal("plan accepted")
			}
			var es Errors
			if !errors.As(err, &es) {
				t.Fatalf("error %T: %v", err, err)
			}
			var hit *Error
			for _, e := range es {
				if c.key == "" || e.Key == c.key {
					ok := true
					for _, s := range c.contains {
						ok = ok && strings.Contains(e.Error(), s)
					}
					if ok {
						hit = e
						break
					}
				}
			}
			if hit == nil {
				t.Fatalf("no error on key %q containing %q; got:\n%v", c.key, c.contains, err)
			}
			if c.lineOf != "" {
				if want := lineContaining(t, doc, c.lineOf, 1); hit.Line != want {
					t.Errorf("line %d, want %d (%q): %v", hit.Line, want, c.lineOf, hit)
				}
			}
			if hit.Fix == "" {
				t.Errorf("no fix given: %v", hit)
			}
			if !strings.HasPrefix(hit.Error(), "v.toml:") {
				t.Errorf("error does not name the file: %v", hit)
			}
		})
	}
}

func TestValidateBoardRules(t *testing.T) {
	p := loadExamplePlan(t, "board")
	p.Tests[0].DiffLevels = nil
	err := Validate(p)
	if err == nil || !strings.Contains(err.Error(), `key "test[1].diff_levels"`) {
		t.Errorf("board_cmrr without diff_levels: %v", err)
	}
	p = loadExamplePlan(t, "board")
	p.Tests[1].DiffLevels = []float64{1, 2, 3}
	if err := Validate(p); err == nil || !strings.Contains(err.Error(), "only board_cmrr") {
		t.Errorf("diff_levels on board_psrr_pos: %v", err)
	}
	p = loadExamplePlan(t, "board")
	p.Fixture.CommonMode = CMBySupplyShift
	if err := Validate(p); err == nil || !strings.Contains(err.Error(), "fixture.common_mode") {
		t.Errorf("supply shift on a board: %v", err)
	}
	p = loadExamplePlan(t, "board")
	p.Bench.Roles.SourceDiff = RoleBinding{}
	if err := Validate(p); err == nil || !strings.Contains(err.Error(), "source_diff") {
		t.Errorf("board_cmrr without source_diff: %v", err)
	}
}

func TestTestKindsFor(t *testing.T) {
	cases := map[string]string{
		FixtureNullingLoop: "cmrr psrr_pos psrr_neg psrr_sym aol",
		FixtureNoiseGain:   "cmrr psrr_pos psrr_neg psrr_sym",
		FixtureBoard:       "board_cmrr board_psrr_pos board_psrr_neg",
		"other":            "",
	}
	for fx, want := range cases {
		if got := strings.Join(TestKindsFor(fx), " "); got != want {
			t.Errorf("%s: %q, want %q", fx, got, want)
		}
	}
}

func TestNeededRoles(t *testing.T) {
	roles := func(p *Plan) string {
		var r []string
		for _, n := range NeededRoles(p) {
			r = append(r, n.Role)
		}
		return strings.Join(r, " ")
	}
	cases := map[string]string{
		"lot":        "meter supply_pos supply_neg source_ref switch chamber",
		"noise_gain": "meter supply_pos supply_neg source_cm",
		"board":      "meter supply_pos supply_neg source_cm source_diff switch",
	}
	for name, want := range cases {
		if got := roles(loadExamplePlan(t, name)); got != want {
			t.Errorf("%s: %q, want %q", name, got, want)
		}
	}
}

func TestValidateReportsEveryProblem(t *testing.T) {
	doc := strings.Replace(minimalPlanTOML, "levels = [-10.0, 0.0, 10.0]", "levels = [1.0]", 1)
	doc = strings.Replace(doc, `number = "HX-4107"`, `number = ""`, 1)
	_, err := Parse([]byte(doc), "v.toml")
	var es Errors
	if !errors.As(err, &es) || len(es) < 2 {
		t.Fatalf("want at least 2 errors, got %v", err)
	}
	for i := 1; i < len(es); i++ {
		if es[i].Line != 0 && es[i-1].Line > es[i].Line {
			t.Errorf("errors not in file order: line %d before %d", es[i-1].Line, es[i].Line)
		}
	}
}

func TestValidateCalibrationDue(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	in := p.Bench.Instruments["dmm"]
	in.CalibrationDue = "30/06/2027"
	p.Bench.Instruments["dmm"] = in
	err := Validate(p)
	if err == nil || !strings.Contains(err.Error(), `bench.instrument.dmm.calibration_due`) {
		t.Fatalf("err %v", err)
	}
}

// manyLevels writes n distinct levels for a TOML array.
func manyLevels(n int) string {
	var b strings.Builder
	for i := range n {
		if i > 0 {
			b.WriteString(", ")
		}
		fmt.Fprintf(&b, "%d.0", i)
	}
	return b.String()
}

func TestSameChannel(t *testing.T) {
	// SCPI channel lists are numbers (IEEE 488.2 7.7.2 decimal numeric
	// program data): leading zeros do not name another relay.
	for _, c := range []struct {
		a, b string
		same bool
	}{{"0101", "101", true}, {"101", "101", true}, {"102", "101", false}, {"000", "0", true}, {"a1", "A1", true}, {"01a", "1a", false}} {
		if got := SameChannel(c.a, c.b); got != c.same {
			t.Errorf("SameChannel(%q, %q) = %v", c.a, c.b, got)
		}
	}
}
