package plan

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// examplePlanDir holds the cross-package example plans.
const examplePlanDir = "../../testdata/plans"

// loadExamplePlan loads testdata/plans/<name>.toml and fails the test on
// any error.
func loadExamplePlan(t testing.TB, name string) *Plan {
	t.Helper()
	p, err := Load(filepath.Join(examplePlanDir, name+".toml"))
	if err != nil {
		t.Fatalf("load %s: %v", name, err)
	}
	return p
}

// minimalPlanTOML is a small valid plan; tests edit it to make one thing
// wrong at a time.
const minimalPlanTOML = `[bench]
time_scale = 10.0

[bench.instrument.dmm]
address = "tcp://127.0.0.1:5025"
profile = "dmm"

[bench.instrument.psu]
address = "tcp://127.0.0.1:5026"
profile = "supply2"

[bench.instrument.src]
address = "tcp://127.0.0.1:5027"
profile = "source3"

[bench.roles]
meter      = { instrument = "dmm" }
supply_pos = { instrument = "psu", channel = "1" }
supply_neg = { instrument = "psu", channel = "2", negative = true }
source_ref = { instrument = "src", channel = "3" }

[fixture]
kind = "nulling_loop"
noise_gain = 1000.0
common_mode = "supply_shift"
max_stimulus_volts = 12.0

[part]
number = "HX-4107"
nominal_pos_volts = 15.0
nominal_neg_volts = -15.0
max_supply_span_volts = 44.0
cm_headroom_pos_volts = 2.0
cm_headroom_neg_volts = 2.0
cm_margin_volts = 0.5
current_limit_amps = 0.05

[limits]
cmrr = 100.0

[[test]]
kind = "cmrr"
levels = [-10.0, 0.0, 10.0]

[[test]]
kind = "aol"
levels = [
  -10.0,
  0.0,
  10.0,
]
nplc = 1.0

[[unit]]
id = "U01"
`

// lineContaining returns the 1-based line of the first line of text that
// contains sub (the n-th such line for n > 1), so expected line numbers
// come from the document, not from counting by hand.
func lineContaining(t testing.TB, text, sub string, n int) int {
	t.Helper()
	seen := 0
	for i, l := range strings.Split(text, "\n") {
		if strings.Contains(l, sub) {
			seen++
			if seen == n {
				return i + 1
			}
		}
	}
	t.Fatalf("no line %d containing %q", n, sub)
	return 0
}

func TestParseExamplePlans(t *testing.T) {
	for _, name := range []string{"lot", "noise_gain", "board", "unsafe_overspan", "unsafe_cm_range", "unsafe_no_current_limit", "unsafe_hazardous"} {
		t.Run(name, func(t *testing.T) {
			path := filepath.Join(examplePlanDir, name+".toml")
			p := loadExamplePlan(t, name)
			data, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			sum := sha256.Sum256(data)
			if p.Hash != hex.EncodeToString(sum[:]) || len(p.Hash) != 64 {
				t.Errorf("Hash = %q, want the SHA-256 of the file", p.Hash)
			}
			if p.Source != path {
				t.Errorf("Source = %q, want %q", p.Source, path)
			}
		})
	}
}

func TestParseLotPlanContents(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	if got := len(p.Units); got != 10 {
		t.Fatalf("units = %d, want 10", got)
	}
	if p.Units[0].Channel != "101" || p.Units[9].Channel != "110" {
		t.Errorf("channels %q…%q, want 101…110", p.Units[0].Channel, p.Units[9].Channel)
	}
	kinds := []string{}
	for _, x := range p.Tests {
		kinds = append(kinds, x.Kind)
	}
	if strings.Join(kinds, ",") != "cmrr,psrr_pos,psrr_neg,psrr_sym,aol" {
		t.Errorf("tests %v", kinds)
	}
	if !p.Bench.Roles.SupplyNeg.Negative || p.Bench.Roles.SupplyNeg.Channel != "2" {
		t.Errorf("supply_neg = %+v", p.Bench.Roles.SupplyNeg)
	}
	if got := p.TemperaturePoints(); len(got) != 3 || got[1] != -40 {
		t.Errorf("temperature points %v", got)
	}
}

func TestParseDefaults(t *testing.T) {
	p, err := Parse([]byte(minimalPlanTOML), "min.toml")
	if err != nil {
		t.Fatal(err)
	}
	x := p.Tests[0]
	checks := []struct {
		name      string
		got, want any
	}{
		{"order", x.Order, OrderZigzag},
		{"repeats", x.Repeats, 1},
		{"readings", x.Readings, 5},
		{"nplc", x.NPLC, 10.0},
		{"range", x.RangeVolts, 10.0},
		{"dwell", x.DwellSeconds, DefaultDwellSeconds},
		{"settle", x.SettleVolts, DefaultSettleVolts},
		{"settle timeout", x.SettleTimeoutSeconds, DefaultSettleTimeoutSeconds},
		{"explicit nplc kept", p.Tests[1].NPLC, 1.0},
		{"rule", p.Decision.Rule, RuleGuarded},
		{"ramp step", p.Safety.RampStepVolts, 1.0},
		{"temperature mode", p.Temperature.Mode, TempNone},
		{"ambient", p.Temperature.AmbientCelsius, 25.0},
		{"input beyond rail", p.Part.InputBeyondRailVolts, 0.3},
		{"explicit time scale kept", p.Bench.TimeScale, 10.0},
	}
	for _, c := range checks {
		if c.got != c.want {
			t.Errorf("%s = %v, want %v", c.name, c.got, c.want)
		}
	}
	// An explicit zero is not replaced by the default: it is refused.
	_, err = Parse([]byte(strings.Replace(minimalPlanTOML, "nplc = 1.0", "nplc = 1.0\nrepeats = 0", 1)), "min.toml")
	if err == nil || !strings.Contains(err.Error(), `key "test[2].repeats"`) {
		t.Errorf("repeats = 0: got %v, want a refusal of test[2].repeats", err)
	}
	// A time scale of 0 written out is refused, not defaulted.
	_, err = Parse([]byte(strings.Replace(minimalPlanTOML, "time_scale = 10.0", "time_scale = 0.0", 1)), "min.toml")
	if err == nil || !strings.Contains(err.Error(), "min.toml:2: key \"bench.time_scale\"") {
		t.Errorf("time_scale = 0: got %v", err)
	}
}

func TestApplyDefaultsInCode(t *testing.T) {
	p := &Plan{Tests: []Test{{Kind: TestCMRR}}}
	p.ApplyDefaults()
	if p.Tests[0].Readings != DefaultReadings || p.Bench.TimeScale != 1 || p.Temperature.Mode != TempNone {
		t.Errorf("defaults not applied: %+v", p)
	}
}

// TestParseErrors checks that each error names file, line and key and says
// what to do. Lines are found in the document by content.
func TestParseErrors(t *testing.T) {
	cases := []struct {
		name     string
		edit     func(string) string
		lineOf   string // the line the error must name: first line containing this
		lineN    int
		key      string
		contains []string
	}{
		{
			name:     "unknown key with suggestion",
			edit:     func(s string) string { return strings.Replace(s, "nplc = 1.0", "nplc = 1.0\nlevls = [1.0]", 1) },
			lineOf:   "levls",
			lineN:    1,
			key:      "test[2].levls",
			contains: []string{"unknown key", `did you mean "levels"`},
		},
		{
			name:     "unknown table key",
			edit:     func(s string) string { return strings.Replace(s, "[part]\n", "[part]\nnominal_pos_v = 1.0\n", 1) },
			lineOf:   "nominal_pos_v =",
			lineN:    1,
			key:      "part.nominal_pos_v",
			contains: []string{"unknown key", "nominal_pos_volts"},
		},
		{
			name: "unknown key in an inline table",
			edit: func(s string) string {
				return strings.Replace(s, `channel = "3" }`, `channel = "3", chanel = "4" }`, 1)
			},
			lineOf:   "chanel",
			lineN:    1,
			key:      "bench.roles.source_ref.chanel",
			contains: []string{"unknown key", `did you mean "channel"`},
		},
		{
			name: "unknown key of a named instrument",
			edit: func(s string) string {
				return strings.Replace(s, `profile = "supply2"`, "profile = \"supply2\"\nadress = \"x\"", 1)
			},
			lineOf:   "adress",
			lineN:    1,
			key:      "bench.instrument.psu.adress",
			contains: []string{`did you mean "address"`},
		},
		{
			name:     "unknown top-level table",
			edit:     func(s string) string { return s + "\n[safty]\nramp_step_volts = 1.0\n" },
			lineOf:   "[safty]",
			lineN:    1,
			contains: []string{`did you mean "safety"`},
		},
		{
			name:     "wrong type",
			edit:     func(s string) string { return strings.Replace(s, "levels = [-10.0, 0.0, 10.0]", `levels = "ten"`, 1) },
			lineOf:   `levels = "ten"`,
			lineN:    1,
			key:      "test[1].levels",
			contains: []string{"TOML string", "a list of numbers"},
		},
		{
			name:     "float for an integer",
			edit:     func(s string) string { return strings.Replace(s, "nplc = 1.0", "nplc = 1.0\nreadings = 2.5", 1) },
			lineOf:   "readings = 2.5",
			lineN:    1,
			key:      "test[2].readings",
			contains: []string{"a whole number"},
		},
		{
			name:     "syntax",
			edit:     func(s string) string { return strings.Replace(s, `number = "HX-4107"`, `number = "HX-4107`, 1) },
			lineOf:   `number = "HX-4107`,
			lineN:    1,
			contains: []string{"TOML syntax"},
		},
		{
			name:     "duplicate key",
			edit:     func(s string) string { return strings.Replace(s, "cmrr = 100.0", "cmrr = 100.0\ncmrr = 90.0", 1) },
			lineOf:   "cmrr = 90.0",
			lineN:    1,
			contains: []string{"already defined", "give each key once"},
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			doc := c.edit(minimalPlanTOML)
			_, err := Parse([]byte(doc), "plans/min.toml")
			if err == nil {
				t.Fatal("no error")
			}
			var pe *Error
			if !errors.As(err, &pe) {
				t.Fatalf("error %T is not a Error: %v", err, err)
			}
			msg := err.Error()
			want := "plans/min.toml:" + strconv.Itoa(lineContaining(t, doc, c.lineOf, c.lineN)) + ":"
			if !strings.HasPrefix(msg, want) {
				t.Errorf("error %q does not start with %q", msg, want)
			}
			if c.key != "" && !strings.Contains(msg, `key "`+c.key+`"`) {
				t.Errorf("error %q does not name key %q", msg, c.key)
			}
			for _, s := range c.contains {
				if !strings.Contains(msg, s) {
					t.Errorf("error %q lacks %q", msg, s)
				}
			}
		})
	}
}

func TestLoadPlanMissingFile(t *testing.T) {
	_, err := Load(filepath.Join(t.TempDir(), "nope.toml"))
	if err == nil || !strings.Contains(err.Error(), "nope.toml") {
		t.Errorf("got %v, want an error naming the file", err)
	}
}

func TestLocateKeys(t *testing.T) {
	doc := `top = 1
[a]
x = 1
[a."b.c"]
y = [
  1,
  2,
]
[[t]]
k = 1
[[t]]
k = 2
[t.sub]
z = { p = 1, q = { r = 2 } }
`
	idx := locateKeys([]byte(doc))
	cases := []struct {
		key  string
		line int
	}{
		{"top", 1}, {"a", 2}, {"a.x", 3}, {`a."b.c"`, 4}, {`a."b.c".y`, 5},
		{"t[1]", 9}, {"t[1].k", 10}, {"t[2]", 11}, {"t[2].k", 12},
		{"t[2].sub", 13}, {"t[2].sub.z", 14}, {"t[2].sub.z.p", 14}, {"t[2].sub.z.q.r", 14},
		// Unknown keys fall back to their nearest known parent.
		{"t[2].missing", 11},
	}
	for _, c := range cases {
		if got := idx.line(c.key); got != c.line {
			t.Errorf("line(%q) = %d, want %d", c.key, got, c.line)
		}
	}
	if got := idx.elemLine(`a."b.c".y`, 1); got != 7 {
		t.Errorf("element 2 of y on line %d, want 7", got)
	}
	if !idx.has("t[2].k") || idx.has("t[3].k") {
		t.Error("has() wrong for array tables")
	}
	if got := idx.keyAt(12, []string{"t", "k"}); got != "t[2].k" {
		t.Errorf("keyAt = %q", got)
	}
	if got := stripIndexes(`t[2].sub."x[1]"`); got != `t.sub."x[1]"` {
		t.Errorf("stripIndexes = %q", got)
	}
	if got := splitKey(`a."b.c".d[2]`); strings.Join(got, "|") != "a|b.c|d[2]" {
		t.Errorf("splitKey = %q", got)
	}
	if got := parentKey(`a."b.c"`); got != "a" {
		t.Errorf("parentKey = %q", got)
	}
}

func TestCloseKeySuggestion(t *testing.T) {
	known := knownKeys([]string{"test"})
	if !planHas(known, "levels") || !planHas(known, "settle_timeout_s") {
		t.Fatalf("known keys of [[test]]: %v", known)
	}
	if got := closestKey("levles", known); got != "levels" {
		t.Errorf("closestKey(levles) = %q", got)
	}
	if got := closestKey("zzzzzz", known); got != "" {
		t.Errorf("closestKey(zzzzzz) = %q, want none", got)
	}
	// Levenshtein distances (textbook examples: kitten/sitting = 3).
	if d := editDistance("kitten", "sitting"); d != 3 {
		t.Errorf("editDistance = %d, want 3", d)
	}
	if got := knownKeys([]string{"limits"}); !planHas(got, PsrrWorst) {
		t.Errorf("limits keys %v lack psrr_worst", got)
	}
}

// FuzzParsePlan: the parser never panics, every error names the file, and
// every plan it accepts is valid and hashed.
func FuzzParsePlan(f *testing.F) {
	for _, name := range []string{"lot", "noise_gain", "board", "unsafe_hazardous", "freq_noise_gain"} {
		data, err := os.ReadFile(filepath.Join(examplePlanDir, name+".toml"))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Add([]byte(minimalPlanTOML))
	f.Add([]byte("[[test]]\nkind = 'cmrr'\nlevels = [1, 2, nan]\n"))
	f.Add([]byte("[bench.roles]\nmeter = { instrument = \"x\" }\n"))
	f.Add([]byte(""))
	f.Add([]byte("[[ac_test]]\nkind = 'cmrr'\nstart_hz = 10.0\nstop_hz = 1e9\npoints = 1000000\nlimits_db = [nan]\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		p, err := Parse(data, "fuzz.toml")
		if err != nil {
			if !strings.HasPrefix(err.Error(), "fuzz.toml:") {
				t.Fatalf("error does not name the file: %v", err)
			}
			return
		}
		if len(p.Hash) != 64 {
			t.Fatalf("hash %q", p.Hash)
		}
		if err := Validate(p); err != nil {
			t.Fatalf("accepted plan fails validation: %v", err)
		}
		// The pure functions must not panic on any accepted plan.
		_ = StepTable(p)
		for i := range p.ACTests {
			_ = p.ACTests[i].Frequencies()
			_ = ACPeakStates(p, &p.ACTests[i])
		}
		// The safety rules on the same accepted plans: FuzzSafetyRules
		// (procedure/safety).
	})
}
