package main

import (
	"bytes"
	"encoding/json"
	"flag"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"nullbench/procedure/estimate"
	"nullbench/procedure/plan"
)

var cliUpdate = flag.Bool("update", false, "rewrite the golden files under testdata/ from the present output")

// cliGolden compares got with testdata/name, or rewrites it with -update.
func cliGolden(t *testing.T, name, got string) {
	t.Helper()
	path := filepath.Join("testdata", name)
	if *cliUpdate {
		if err := os.MkdirAll("testdata", 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	if got != string(want) {
		gl, wl := strings.Split(got, "\n"), strings.Split(string(want), "\n")
		for i := 0; i < len(gl) || i < len(wl); i++ {
			var g, w string
			if i < len(gl) {
				g = gl[i]
			}
			if i < len(wl) {
				w = wl[i]
			}
			if g != w {
				t.Fatalf("%s differs from the output at line %d:\n got  %q\n want %q\n(go test -update rewrites it after review)", path, i+1, g, w)
			}
		}
	}
}

// cliLineOf is the number (1-based) of the first line of file starting
// with prefix.
func cliLineOf(t *testing.T, file, prefix string) int {
	t.Helper()
	data, err := os.ReadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	for i, l := range strings.Split(string(data), "\n") {
		if strings.HasPrefix(l, prefix) {
			return i + 1
		}
	}
	t.Fatalf("%s has no line starting with %q", file, prefix)
	return 0
}

// The step tables users read before a run: golden files, exit 0.
func TestCheckGolden(t *testing.T) {
	for _, name := range []string{"lot", "board", "noise_gain"} {
		t.Run(name, func(t *testing.T) {
			plan := cliRepoFile("testdata", "plans", name+".toml")
			r := cliExec(t, "check", plan)
			cliWantCode(t, r, exitOK, "check", plan)
			for _, want := range []string{"plan      " + plan, "safety    OK", "power-up", "power-down"} {
				if !strings.Contains(r.out, want) {
					t.Errorf("output lacks %q", want)
				}
			}
			if r.err != "" {
				t.Errorf("stderr not empty: %s", r.err)
			}
			cliGolden(t, "check_"+name+".golden", r.out)
		})
	}
}

// The unsafe examples are refused with exit 4, each naming its file, line
// and key. --allow-hazardous lifts only the hazard: check judges as if the
// operator had confirmed at a terminal (run still asks), so the hazardous
// example passes with it and the others stay refused.
func TestCheckUnsafePlans(t *testing.T) {
	tests := []struct {
		file      string
		key       string // in the refusal, with the file's line ...
		anchor    string // ... the first line starting with this
		withAllow int    // exit status with --allow-hazardous
	}{
		{"unsafe_cm_range.toml", `key "test[1].levels"`, "levels", exitSafety},
		{"unsafe_overspan.toml", `key "test[1].levels"`, "levels", exitSafety},
		{"unsafe_no_current_limit.toml", `key "part.current_limit_amps"`, "[part]", exitSafety},
		{"unsafe_hazardous.toml", `key "part"`, "[part]", exitOK},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			plan := cliRepoFile("testdata", "plans", tt.file)
			r := cliExec(t, "check", plan)
			cliWantCode(t, r, exitSafety, "check", plan)
			if !strings.Contains(r.out, "safety    REFUSED") {
				t.Errorf("step table does not say REFUSED:\n%s", r.out)
			}
			prefix := plan + ":" + strconv.Itoa(cliLineOf(t, plan, tt.anchor)) + ":"
			if !strings.Contains(r.err, "plan refused as unsafe") || !strings.Contains(r.err, prefix) || !strings.Contains(r.err, tt.key) {
				t.Errorf("stderr does not name %s... %s:\n%s", prefix, tt.key, r.err)
			}

			r = cliExec(t, "check", "--allow-hazardous", plan)
			cliWantCode(t, r, tt.withAllow, "check --allow-hazardous", plan)
			hazard := tt.file == "unsafe_hazardous.toml"
			if got := strings.Contains(r.out, "consent   --allow-hazardous"); got != hazard {
				t.Errorf("consent line shown %v, want %v:\n%s", got, hazard, r.out)
			}
			if hazard && !strings.Contains(r.out, "run still refuses it without an interactive terminal") {
				t.Errorf("the consent line does not say run asks again:\n%s", r.out)
			}
		})
	}
}

// An invalid plan is a usage error (2) naming file, line and key; nothing
// is laid out.
func TestCheckInvalidPlan(t *testing.T) {
	base, err := os.ReadFile(cliRepoFile("testdata", "plans", "lot.toml"))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(string(base), "\n")
	// lineAfter inserts text after the first line starting with anchor and
	// returns the plan and the inserted line's number (1-based).
	lineAfter := func(anchor, text string) (string, int) {
		for i, l := range lines {
			if strings.HasPrefix(l, anchor) {
				out := append(append(append([]string{}, lines[:i+1]...), text), lines[i+1:]...)
				return strings.Join(out, "\n"), i + 2
			}
		}
		t.Fatalf("anchor %q not in lot.toml", anchor)
		return "", 0
	}
	// replaceLine replaces the first line starting with anchor.
	replaceLine := func(anchor, text string) (string, int) {
		for i, l := range lines {
			if strings.HasPrefix(l, anchor) {
				out := append([]string{}, lines...)
				out[i] = text
				return strings.Join(out, "\n"), i + 1
			}
		}
		t.Fatalf("anchor %q not in lot.toml", anchor)
		return "", 0
	}
	type edit func() (string, int)
	tests := []struct {
		name string
		edit edit
		key  string
		msg  string
	}{
		{"unknown key in a test", func() (string, int) { return lineAfter("kind = \"cmrr\"", "nplcc = 1.0") }, `key "test[1].nplcc"`, `did you mean "nplc"`},
		{"unknown key in campaign", func() (string, int) { return lineAfter("[campaign]", "nmae = \"x\"") }, `key "campaign.nmae"`, "unknown key"},
		{"wrong type", func() (string, int) { return replaceLine("levels = [-10.0, -5.0, 0.0, 5.0, 10.0]", `levels = "wide"`) }, `key "test[1].levels"`, "list of numbers"},
	}
	dir := t.TempDir()
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			text, line := tt.edit()
			path := cliWriteFile(t, dir, strings.ReplaceAll(tt.name, " ", "_")+".toml", text)
			r := cliExec(t, "check", path)
			cliWantCode(t, r, exitUsage, "check", path)
			where := path + ":" + strconv.Itoa(line) + ":"
			if !strings.Contains(r.err, where) || !strings.Contains(r.err, tt.key) || !strings.Contains(r.err, tt.msg) {
				t.Errorf("stderr does not say %s %s ... %s:\n%s", where, tt.key, tt.msg, r.err)
			}
			if r.out != "" {
				t.Errorf("an invalid plan was laid out:\n%s", r.out)
			}
		})
	}
}

// TestCheckJSONFields: `check --json` keeps its fixed field names (the
// contract scripts rely on) and warns when a limit is above what the plan
// resolves: the lot plan resolves about 177 dB on cmrr with the built-in
// meter figures, so a 200 dB limit must warn and its 100 dB must not.
func TestCheckJSONFields(t *testing.T) {
	p, err := plan.Load("../../testdata/plans/lot.toml")
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := writeCheckJSON(&buf, p, estimate.DefaultFigures()); err != nil {
		t.Fatal(err)
	}
	var got map[string]any
	if err := json.Unmarshal(buf.Bytes(), &got); err != nil {
		t.Fatal(err)
	}
	if d, ok := got["duration_s"].(float64); !ok || d <= 0 {
		t.Errorf("duration_s = %v", got["duration_s"])
	}
	tests, _ := got["tests"].([]any)
	if len(tests) != len(p.Tests) {
		t.Fatalf("%d tests, want %d", len(tests), len(p.Tests))
	}
	for _, x := range tests {
		m := x.(map[string]any)
		for _, k := range []string{"test", "duration_s", "predicted_u_uv_per_v", "resolvable_db"} {
			if _, ok := m[k]; !ok {
				t.Errorf("test entry %v lacks %q", m, k)
			}
		}
	}
	if w, _ := got["warnings"].([]any); len(w) != 0 {
		t.Errorf("the lot plan resolves its limits, warnings %v", w)
	}

	p.Limits[plan.TestCMRR] = 200
	buf.Reset()
	if err := writeCheckJSON(&buf, p, estimate.DefaultFigures()); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), "the limit 200 dB is above") {
		t.Errorf("no warning for a 200 dB limit:\n%s", buf.String())
	}
}

// TestCheckAndSizeCountACTests: check's totals include the [[ac_test]]
// tables (text and --json, with the noise-floor, through and stimulus
// records timed) and size says plainly that it leaves them as written.
func TestCheckAndSizeCountACTests(t *testing.T) {
	path := cliRepoFile("testdata", "plans", "freq_noise_gain.toml")
	p, err := plan.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := writeCheckJSON(&buf, p, estimate.DefaultFigures()); err != nil {
		t.Fatal(err)
	}
	var got struct {
		DurationS float64 `json:"duration_s"`
		Tests     []any   `json:"tests"`
		ACTests   []struct {
			Test        string  `json:"test"`
			Frequencies int     `json:"frequencies"`
			DurationS   float64 `json:"duration_s"`
		} `json:"ac_tests"`
	}
	if err := json.Unmarshal(buf.Bytes(), &got); err != nil {
		t.Fatal(err)
	}
	if got.Tests == nil || len(got.ACTests) != 3 || got.ACTests[0].Test != "cmrr" || got.ACTests[0].Frequencies != 8 {
		t.Fatalf("check --json: %s", buf.String())
	}
	sum := 0.0
	for _, a := range got.ACTests {
		if !(a.DurationS > 0) {
			t.Errorf("ac test %s has no duration", a.Test)
		}
		sum += a.DurationS
	}
	if !(got.DurationS > sum) {
		t.Errorf("total %.1f s does not hold the ac tests' %.1f s", got.DurationS, sum)
	}
	r := cliExec(t, "check", path)
	cliWantCode(t, r, exitOK, "check", path)
	for _, want := range []string{"ac_test[1] cmrr", "8 frequencies × 3 records", "noise-floor, through and stimulus records"} {
		if !strings.Contains(r.out, want) {
			t.Errorf("check lacks %q:\n%s", want, r.out)
		}
	}
	sized := filepath.Join(t.TempDir(), "sized.toml")
	args := []string{"size", path, "--target-u-db", "0.5", "--at", "90", "-o", sized}
	rs := cliExec(t, args...)
	cliWantCode(t, rs, exitOK, args...)
	if !strings.Contains(rs.out, "not sized") || !strings.Contains(rs.out, "3 [[ac_test]] table(s) are kept as written") {
		t.Errorf("size does not say it leaves the ac tests alone:\n%s", rs.out)
	}
}

// check refuses a plan that programs a supply beyond its profile's
// max_volts, naming the role's line, the rating and the profile: the
// hazardous example bound to the 40 V built-in "supply2" instead of its
// 150 V test profile (80 V on V+).
func TestCheckRefusesLevelsBeyondTheOutputRating(t *testing.T) {
	data, err := os.ReadFile(cliRepoFile("testdata", "plans", "unsafe_hazardous.toml"))
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(data), `profile = "supply_hv.toml"`, `profile = "supply2"`, 1)
	if text == string(data) {
		t.Fatal("the hazardous example no longer binds supply_hv.toml")
	}
	plan := cliWriteFile(t, t.TempDir(), "over_rating.toml", text)
	r := cliExec(t, "check", "--allow-hazardous", plan)
	cliWantCode(t, r, exitSafety, "check --allow-hazardous", plan)
	prefix := plan + ":" + strconv.Itoa(cliLineOf(t, plan, "supply_pos")) + ":"
	for _, want := range []string{prefix, "80 V on supply_pos", "40 V rating", `profile "supply2"`, "max_volts"} {
		if !strings.Contains(r.err, want) {
			t.Errorf("refusal does not say %q:\n%s", want, r.err)
		}
	}
}
