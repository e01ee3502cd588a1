package main

import (
	"context"
	"errors"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
)

// cliParse runs argv through the real cobra tree with verbs that only
// record the options they are called with. It returns those options (nil
// when no verb ran), the exit status and standard error.
func cliParse(t *testing.T, args ...string) (any, int, string) {
	t.Helper()
	var got any
	rec := verbs{
		demo:   func(_ context.Context, _ streams, o demoOptions) error { got = o; return nil },
		sim:    func(_ context.Context, _ streams, o simOptions) error { got = o; return nil },
		probe:  func(_ context.Context, _ streams, o probeOptions) error { got = o; return nil },
		check:  func(_ context.Context, _ streams, o checkOptions) error { got = o; return nil },
		run:    func(_ context.Context, _ streams, o runOptions) error { got = o; return nil },
		resume: func(_ context.Context, _ streams, o resumeOptions) error { got = o; return nil },
		report: func(_ context.Context, _ streams, o reportOptions) error { got = o; return nil },
		fit:    func(_ context.Context, _ streams, o fitOptions) error { got = o; return nil },
	}
	var out, errb cliBuffer
	std := streams{In: strings.NewReader(""), Out: &out, Err: &errb}
	root := newRootCmdWith(std, rec)
	root.SetArgs(args)
	code := exitStatus(&errb, root.ExecuteContext(context.Background()))
	return got, code, errb.String()
}

// demoDefaultTimeScale is the demo's --time-scale default, read from the
// flag so that a change of the default does not break the table.
func demoDefaultTimeScale(t *testing.T) float64 {
	t.Helper()
	def := newDemoCmd(streams{}, nil).Flags().Lookup("time-scale").DefValue
	v, err := strconv.ParseFloat(def, 64)
	if err != nil || v <= 0 {
		t.Fatalf("demo --time-scale default %q is not a positive number", def)
	}
	return v
}

func TestArgvToOptions(t *testing.T) {
	demoScale := demoDefaultTimeScale(t)
	tests := []struct {
		name string
		args []string
		want any
	}{
		{"demo defaults", []string{"demo"}, demoOptions{TimeScale: demoScale}},
		{"demo every flag", []string{"demo", "--dut", "d.toml", "--time-scale", "500", "--seed", "7", "--out", "o", "--plots", "p", "--json", "--no-charts"},
			demoOptions{DUT: "d.toml", TimeScale: 500, Seed: 7, outputOptions: outputOptions{Out: "o", Plots: "p", JSON: true, NoCharts: true}}},
		{"sim defaults", []string{"sim"}, simOptions{Listen: "127.0.0.1", TimeScale: 1}},
		{"sim every flag", []string{"sim", "--port", "5025", "--listen", "0.0.0.0", "--serial", "mux", "--bench-out", "b.toml", "--dut", "d.toml", "--truth", "--time-scale", "100", "--seed", "3"},
			simOptions{Port: 5025, Listen: "0.0.0.0", Serial: "mux", BenchOut: "b.toml", DUTFile: "d.toml", Truth: true, TimeScale: 100, Seed: 3}},
		{"sim flag=value", []string{"sim", "--time-scale=250", "--serial=dmm"}, simOptions{Listen: "127.0.0.1", Serial: "dmm", TimeScale: 250}},
		{"probe defaults", []string{"probe", "tcp://192.0.2.5:5025"},
			probeOptions{Address: "tcp://192.0.2.5:5025", Rounds: instrument.DefaultProbeRounds, Timeout: 30 * time.Second}},
		{"probe profiles as a list and repeated", []string{"probe", "serial:///dev/ttyUSB0?baud=9600", "--profile", "a.toml,b.toml", "--profile", "c.toml", "--rounds", "3", "--timeout", "2s"},
			probeOptions{Address: "serial:///dev/ttyUSB0?baud=9600", Profiles: []string{"a.toml", "b.toml", "c.toml"}, Rounds: 3, Timeout: 2 * time.Second}},
		{"check", []string{"check", "plan.toml"}, checkOptions{Plan: "plan.toml"}},
		{"check allow before the plan", []string{"check", "--allow-hazardous", "plan.toml"}, checkOptions{Plan: "plan.toml", AllowHazardous: true}},
		{"run", []string{"run", "plan.toml"}, runOptions{Plan: "plan.toml"}},
		{"run every flag", []string{"run", "plan.toml", "--out", "o", "--json", "--plots", "p", "--no-charts", "--allow-hazardous"},
			runOptions{Plan: "plan.toml", AllowHazardous: true, outputOptions: outputOptions{Out: "o", Plots: "p", JSON: true, NoCharts: true}}},
		{"resume", []string{"resume", "j.jsonl"}, resumeOptions{Journal: "j.jsonl"}},
		{"resume every flag", []string{"resume", "j.jsonl", "--plan", "p.toml", "--out", "o", "--json", "--allow-hazardous"},
			resumeOptions{Journal: "j.jsonl", Plan: "p.toml", AllowHazardous: true, outputOptions: outputOptions{Out: "o", JSON: true}}},
		{"report two journals", []string{"report", "a.jsonl", "b.jsonl", "--out", "o"},
			reportOptions{Journals: []string{"a.jsonl", "b.jsonl"}, outputOptions: outputOptions{Out: "o"}}},
		{"report with plan", []string{"report", "a.jsonl", "--plan", "p.toml", "--json", "--no-charts"},
			reportOptions{Journals: []string{"a.jsonl"}, Plan: "p.toml", outputOptions: outputOptions{JSON: true, NoCharts: true}}},
		{"fit required flags", []string{"fit", "f.csv", "--stimulus", "cm", "--gain", "1000"},
			fitOptions{File: "f.csv", Stimulus: "cm", Gain: 1000}},
		{"fit every flag", []string{"fit", "f.csv", "--stimulus", "supply", "--gain", "101", "--gain-tol", "0.001", "--meter-ppm", "35", "--stimulus-ppm", "20", "--stimulus-offset", "1e-4", "--json"},
			fitOptions{File: "f.csv", Stimulus: "supply", Gain: 101, GainTol: 0.001, MeterPPM: 35, StimPPM: 20, StimOffV: 1e-4, JSON: true}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, code, stderr := cliParse(t, tt.args...)
			if code != exitOK {
				t.Fatalf("exit %d: %s", code, stderr)
			}
			if !reflect.DeepEqual(got, tt.want) {
				t.Errorf("nullbench %s\n got  %#v\n want %#v", strings.Join(tt.args, " "), got, tt.want)
			}
		})
	}
}

// Command lines cobra refuses: exit status 2 (exitUsage), the verb is never
// called, and the message names what was wrong.
func TestBadArgvIsUsageError(t *testing.T) {
	tests := []struct {
		args []string
		msg  string
	}{
		{[]string{"frobnicate"}, `unknown command "frobnicate"`},
		{[]string{"--no-such-flag"}, "unknown flag: --no-such-flag"},
		{[]string{"run"}, "accepts 1 arg(s), received 0"},
		{[]string{"run", "a.toml", "b.toml"}, "accepts 1 arg(s), received 2"},
		{[]string{"run", "a.toml", "--bogus"}, "unknown flag: --bogus"},
		{[]string{"check"}, "accepts 1 arg(s), received 0"},
		{[]string{"resume"}, "accepts 1 arg(s), received 0"},
		{[]string{"report"}, "requires at least 1 arg(s)"},
		{[]string{"probe"}, "accepts 1 arg(s), received 0"},
		{[]string{"demo", "extra"}, `unknown command "extra"`},
		{[]string{"sim", "--port", "x"}, `invalid argument "x" for "--port"`},
		{[]string{"sim", "--time-scale", "fast"}, `invalid argument "fast" for "--time-scale"`},
		{[]string{"probe", "tcp://h", "--timeout", "5"}, `invalid argument "5" for "--timeout"`},
		{[]string{"demo", "--seed", "1.5"}, `invalid argument "1.5" for "--seed"`},
		{[]string{"fit", "f.csv", "--gain", "1"}, `required flag(s) "stimulus" not set`},
		{[]string{"fit", "f.csv", "--stimulus", "cm"}, `required flag(s) "gain" not set`},
		{[]string{"fit", "f.csv", "--stimulus", "cm", "--gain", "abc"}, `invalid argument "abc" for "--gain"`},
		{[]string{"run", "a.toml", "--json=maybe"}, `invalid argument "maybe" for "--json"`},
	}
	for _, tt := range tests {
		t.Run(strings.Join(tt.args, "_"), func(t *testing.T) {
			got, code, stderr := cliParse(t, tt.args...)
			if code != exitUsage {
				t.Errorf("exit %d, want %d (usage)", code, exitUsage)
			}
			if got != nil {
				t.Errorf("the verb ran with %#v", got)
			}
			if !strings.Contains(stderr, tt.msg) || !strings.HasPrefix(stderr, "nullbench: ") {
				t.Errorf("stderr %q, want \"nullbench: ...%s...\"", stderr, tt.msg)
			}
		})
	}
}

// Flag values each verb refuses before doing anything: exit 2 through the
// real verbs, with a message naming the flag or file.
func TestBadValuesAreUsageErrors(t *testing.T) {
	dir := t.TempDir()
	csv := cliWriteFile(t, dir, "f.csv", "0,0\n1,1\n2,2.1\n")
	missing := filepath.Join(dir, "missing")
	tests := []struct {
		args []string
		msg  string
	}{
		{[]string{"demo", "--time-scale", "0", "--out", dir}, "--time-scale must be positive"},
		{[]string{"demo", "--dut", missing + ".toml"}, "missing.toml"},
		{[]string{"sim", "--time-scale", "-1"}, "--time-scale must be positive"},
		{[]string{"sim", "--dut", missing + ".toml", "--truth"}, "missing.toml"},
		{[]string{"sim", "--serial", "bogus"}, `--serial "bogus"`},
		{[]string{"sim", "--port", "70000"}, "--port 70000"},
		{[]string{"sim", "--port", "-2"}, "--port -2"},
		{[]string{"probe", "ftp://192.0.2.5"}, "ftp"},
		{[]string{"probe", "tcp://127.0.0.1:9", "--profile", missing + ".toml"}, "missing.toml"},
		{[]string{"probe", "tcp://127.0.0.1:9", "--rounds", "0"}, "--rounds"},
		{[]string{"probe", "tcp://127.0.0.1:9", "--exercise"}, "--exercise needs exactly one --profile"},
		{[]string{"probe", "tcp://127.0.0.1:9", "--channel", "101"}, "--channel is for --exercise"},
		{[]string{"probe", "tcp://127.0.0.1:9", "--timeout", "0s"}, "--timeout"},
		{[]string{"fit", csv, "--stimulus", "diff", "--gain", "1"}, `--stimulus must be "cm" or "supply"`},
		{[]string{"fit", csv, "--stimulus", "cm", "--gain", "-1"}, "--gain must be positive"},
		{[]string{"fit", missing + ".csv", "--stimulus", "cm", "--gain", "1"}, "missing.csv"},
		{[]string{"check", missing + ".toml"}, "missing.toml"},
		{[]string{"run", missing + ".toml", "--out", dir}, "missing.toml"},
		{[]string{"resume", missing + ".jsonl"}, "missing.jsonl"},
		{[]string{"report", missing + ".jsonl"}, "missing.jsonl"},
		{[]string{"report", "a.jsonl", "b.jsonl", "--plan", "p.toml"}, "--plan applies to one journal"},
	}
	for _, tt := range tests {
		t.Run(strings.Join(tt.args, "_"), func(t *testing.T) {
			r := cliExec(t, tt.args...)
			cliWantCode(t, r, exitUsage, tt.args...)
			if !strings.Contains(r.err, tt.msg) {
				t.Errorf("stderr %q does not mention %q", r.err, tt.msg)
			}
		})
	}
}

// failingWriter fails every write, like a closed pipe.
type failingWriter struct{}

func (failingWriter) Write([]byte) (int, error) { return 0, errors.New("broken pipe") }

// An error a verb returns without an exit code (here: standard output
// cannot be written) is a failure (1), not a usage error (2): scripts
// must not be told their command line was wrong.
func TestVerbErrorWithoutCodeIsFailure(t *testing.T) {
	dir := t.TempDir()
	csv := cliWriteFile(t, dir, "f.csv", "0,0\n1,1\n2,2.1\n3,2.9\n")
	tests := [][]string{
		{"check", cliRepoFile("testdata", "plans", "lot.toml")},
		{"fit", csv, "--stimulus", "cm", "--gain", "1", "--json"},
		{"fit", csv, "--stimulus", "cm", "--gain", "1"},
	}
	for _, args := range tests {
		t.Run(strings.Join(args[:1], "_"), func(t *testing.T) {
			var errb cliBuffer
			std := streams{In: strings.NewReader(""), Out: failingWriter{}, Err: &errb}
			code := execute(context.Background(), std, args)
			if code != exitFailure {
				t.Errorf("exit %d, want %d; stderr %s", code, exitFailure, errb.String())
			}
			if !strings.Contains(errb.String(), "broken pipe") {
				t.Errorf("stderr %q does not carry the cause", errb.String())
			}
		})
	}
}
