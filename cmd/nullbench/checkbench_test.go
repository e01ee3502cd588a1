package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// check refuses the four bench mistakes that used to surface only in run,
// as instrument faults: each with file, line and key.
func TestCheckKnowsTheBench(t *testing.T) {
	b := cliStartSim(t, "")
	good := b.BenchSection() + strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0")
	if !strings.Contains(good, `profile = "supply2"`) || !strings.Contains(good, `supply_pos  = { instrument = "psu", channel = "1" }`) || !strings.Contains(good, "current_limit_amps = 0.05") {
		t.Fatalf("the bench section changed; update this test:\n%s", good)
	}
	tests := []struct {
		name, from, to string
		want           string // regexp on stderr
	}{
		{"unknown profile name", `profile = "supply2"`, `profile = "supply9"`,
			`plan\.toml:\d+: key "bench\.instrument\.psu\.profile": profile "supply9": no built-in profile`},
		{"channel the instrument lacks", `supply_pos  = { instrument = "psu", channel = "1" }`, `supply_pos  = { instrument = "psu", channel = "7" }`,
			`plan\.toml:\d+: key "bench\.roles\.supply_pos\.channel": instrument psu has no channel "7" \(its profile lists 1, 2\)`},
		// supply2 states max_amps = 3.0.
		{"current limit beyond the channel rating", "current_limit_amps = 0.05", "current_limit_amps = 4.5",
			`plan\.toml:\d+: key "part\.current_limit_amps": current limit 4\.5 A is beyond the 3 A rating of psu`},
		{"supply profile bound to the meter role", `meter       = { instrument = "dmm" }`, `meter       = { instrument = "psu" }`,
			`plan\.toml:\d+: key "bench\.roles\.meter\.instrument": built-in profile "supply2": no \[meter\] table \(it is written for supply\); the plan binds instrument psu to the meter role`},
		// A relative path is looked up beside the plan, not in the folder
		// the tool runs in.
		{"relative profile path missing beside the plan", `profile = "supply2"`, `profile = "profiles/nosuch.toml"`,
			`plan\.toml:\d+: key "bench\.instrument\.psu\.profile": profile "profiles/nosuch\.toml": .*` + regexp.QuoteMeta(string(filepath.Separator)) + `profiles` + regexp.QuoteMeta(string(filepath.Separator)) + `nosuch\.toml`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			plan := cliWriteFile(t, t.TempDir(), "plan.toml", strings.Replace(good, tt.from, tt.to, 1))
			r := cliExec(t, "check", plan)
			cliWantCode(t, r, exitUsage, "check", plan)
			if !regexp.MustCompile(tt.want).MatchString(r.err) {
				t.Errorf("stderr does not match %s:\n%s", tt.want, r.err)
			}
			// run refuses it too, before connecting.
			r = cliExec(t, "run", plan, "--out", t.TempDir()+"/out")
			cliWantCode(t, r, exitUsage, "run", plan)
		})
	}
	plan := cliWriteFile(t, t.TempDir(), "plan.toml", good)
	cliWantCode(t, cliExec(t, "check", plan), exitOK, "check", plan)
}

// A plan's relative profile path is read from the plan file's folder,
// whatever folder check, run and off are started from.
func TestCheckRelativeProfileFromAnotherFolder(t *testing.T) {
	b := cliStartSim(t, "")
	good := b.BenchSection() + strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0")
	dir := t.TempDir()
	src, err := os.ReadFile(cliRepoFile("instrument", "profiles", "supply2.toml"))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.MkdirAll(filepath.Join(dir, "lab", "profiles"), 0o755); err != nil {
		t.Fatal(err)
	}
	cliWriteFile(t, filepath.Join(dir, "lab", "profiles"), "psu.toml", string(src))
	text := strings.Replace(good, `profile = "supply2"`, `profile = "profiles/psu.toml"`, 1)
	if text == good {
		t.Fatal("the bench section changed; update this test")
	}
	planPath := cliWriteFile(t, filepath.Join(dir, "lab"), "plan.toml", text)
	abs, err := filepath.Abs(planPath)
	if err != nil {
		t.Fatal(err)
	}
	other := filepath.Join(dir, "elsewhere")
	if err := os.MkdirAll(other, 0o755); err != nil {
		t.Fatal(err)
	}
	t.Chdir(other)
	for _, arg := range []string{abs, filepath.Join("..", "lab", "plan.toml")} {
		r := cliExec(t, "check", arg)
		cliWantCode(t, r, exitOK, "check", arg)
	}
	// run reads the same profile from the plan's folder (and copies it
	// into the run folder).
	out := filepath.Join(other, "out")
	r := cliExec(t, "run", filepath.Join("..", "lab", "plan.toml"), "--out", out)
	cliWantCode(t, r, exitOK, "run", "../lab/plan.toml")
	copied, err := os.ReadFile(filepath.Join(out, "profiles", "psu.toml"))
	if err != nil || string(copied) != string(src) {
		t.Errorf("run folder's copy of the psu profile: %v", err)
	}
	// report reads the run folder's copies, not files beside the
	// folder's copy of the plan.
	r = cliExec(t, "report", out, "--out", filepath.Join(other, "again"))
	cliWantCode(t, r, exitOK, "report", out)

	// A file in the working folder but not beside the plan is not found.
	cliWriteFile(t, filepath.Join(dir, "lab"), "plan2.toml", strings.Replace(text, "profiles/psu.toml", "psu.toml", 1))
	cliWriteFile(t, other, "psu.toml", string(src))
	r = cliExec(t, "check", filepath.Join("..", "lab", "plan2.toml"))
	cliWantCode(t, r, exitUsage, "check", "../lab/plan2.toml")
}
