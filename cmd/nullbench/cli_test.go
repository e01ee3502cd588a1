package main

import (
	"bytes"
	"context"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"testing"
	"time"

	"nullbench/instrument/sim"
)

// Helpers of the command-line tests. They run the real cobra tree through
// execute (argv -> exit status) with captured streams, so every test sees
// what a user sees: standard output, standard error and the exit code.
// Names start with "cli" to keep clear of other test files in the package.

// cliBuffer is a bytes.Buffer safe for a command writing in one goroutine
// while the test reads in another (sim prints its endpoints and keeps
// serving).
type cliBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (c *cliBuffer) Write(p []byte) (int, error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.b.Write(p)
}

func (c *cliBuffer) String() string {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.b.String()
}

// cliResult is what one command line left behind.
type cliResult struct {
	code     int
	out, err string
}

// cliOpts are the streams' other settings: what standard input holds and
// whether it counts as a terminal.
type cliOpts struct {
	in     string
	isTerm bool
}

// cliRun runs argv (without the program name) through execute, as main does.
func cliRun(t *testing.T, ctx context.Context, o cliOpts, args ...string) cliResult {
	t.Helper()
	var out, errb cliBuffer
	std := streams{In: strings.NewReader(o.in), Out: &out, Err: &errb, IsTerm: o.isTerm}
	code := execute(ctx, std, args)
	return cliResult{code: code, out: out.String(), err: errb.String()}
}

// cliExec is cliRun with a background context and no terminal.
func cliExec(t *testing.T, args ...string) cliResult {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 45*time.Second)
	defer cancel()
	return cliRun(t, ctx, cliOpts{}, args...)
}

// cliWantCode fails the test with the command's streams when the exit
// status is not want.
func cliWantCode(t *testing.T, r cliResult, want int, args ...string) {
	t.Helper()
	if r.code != want {
		t.Fatalf("nullbench %s: exit %d, want %d\nstdout:\n%s\nstderr:\n%s", strings.Join(args, " "), r.code, want, r.out, r.err)
	}
}

func cliWriteFile(t *testing.T, dir, name, text string) string {
	t.Helper()
	path := filepath.Join(dir, name)
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// cliRepoFile is a path of the module's top-level testdata.
func cliRepoFile(parts ...string) string {
	return filepath.Join(append([]string{"..", ".."}, parts...)...)
}

// cliDUT describes the parts the tests put on the simulated bench (invented
// parts of "Harrowgate Analog Test"): two HX-4107 in nulling loops (K = 1000)
// on channels 101 and 102, one in a noise-gain stage (K = 101) on 103, and
// one HB-220 difference-amplifier board on 201 with its resistors' errors
// as built, so its CMRR is fixed near 75 dB.
const cliDUT = `# cmd tests: invented parts (Harrowgate Analog Test demo data)
seed = 5150

[part]
number = "HX-4107"

[lot]
id = "L-CMD-1"
fixture = "nulling_loop"
noise_gain = 1000.0

[[unit]]
id = "U01"
cmrr_db = 112.0
psrr_pos_db = 118.0
psrr_neg_db = 108.0

[[unit]]
id = "U02"
cmrr_db = 104.0
psrr_pos_db = 110.0
psrr_neg_db = 115.0

[[unit]]
id = "N01"
fixture = "noise_gain"
noise_gain = 101.0
channel = "103"
cmrr_db = 106.0
psrr_pos_db = 112.0
psrr_neg_db = 109.0

[[board]]
id = "B01"
number = "HB-220"
gain = 10.0
resistor_tolerance = 0.001
resistor_errors = [0.0006, -0.0004, -0.0007, 0.0003]

[board.opamp]
cmrr_db = 110.0
psrr_pos_db = 112.0
psrr_neg_db = 108.0
`

// cliTimeScale runs the simulated bench and the plans' waits this many
// times faster than real time: a point of 1 s dwell takes half a
// millisecond, and a two-unit plan about a second.
const cliTimeScale = 2000

// cliStartSim serves a simulated bench of cliDUT (or dut) on loopback until
// the test ends and returns it; its BenchSection goes in front of a plan.
func cliStartSim(t *testing.T, dut string) *sim.Bench {
	t.Helper()
	if dut == "" {
		dut = cliDUT
	}
	d, err := sim.ParseDUT([]byte(dut), "cli-dut.toml")
	if err != nil {
		t.Fatal(err)
	}
	b, err := sim.New(sim.Config{DUT: d, TimeScale: cliTimeScale})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	if err := b.Start(ctx, sim.ServeOptions{}); err != nil {
		cancel()
		t.Fatal(err)
	}
	t.Cleanup(func() {
		cancel()
		b.Close()
	})
	return b
}

// cliJSONLines decodes one JSON object per non-empty line.
func cliJSONLines(t *testing.T, text string) []map[string]any {
	t.Helper()
	var out []map[string]any
	for i, line := range strings.Split(strings.TrimSpace(text), "\n") {
		if strings.TrimSpace(line) == "" {
			continue
		}
		var m map[string]any
		if err := json.Unmarshal([]byte(line), &m); err != nil {
			t.Fatalf("line %d is not one JSON object: %v\n%s", i+1, err, line)
		}
		out = append(out, m)
	}
	return out
}

func TestHelpListsEveryCommand(t *testing.T) {
	r := cliExec(t, "--help")
	cliWantCode(t, r, exitOK, "--help")
	// Commands of the tool and cobra's own two, each on one line
	// "  name   short description".
	commands := []string{"demo", "sim", "probe", "check", "run", "resume", "report", "fit", "off", "size", "archive", "completion", "help"}
	listed := map[string]string{}
	inList := false
	for _, line := range strings.Split(r.out, "\n") {
		switch {
		case strings.HasPrefix(line, "Available Commands:"):
			inList = true
			continue
		case inList && strings.TrimSpace(line) == "":
			inList = false
		}
		if inList {
			f := strings.Fields(line)
			if len(f) < 2 {
				t.Errorf("command line without a description: %q", line)
				continue
			}
			listed[f[0]] = strings.Join(f[1:], " ")
		}
	}
	for _, c := range commands {
		if desc, ok := listed[c]; !ok {
			t.Errorf("--help does not list %q:\n%s", c, r.out)
		} else if len(desc) < 10 {
			t.Errorf("%s: description %q too short to say what it does", c, desc)
		}
	}
	if len(listed) != len(commands) {
		t.Errorf("--help lists %d commands, want %d: %v", len(listed), len(commands), listed)
	}
	// Every verb's own help works and names its usage.
	for _, c := range commands[:9] {
		r := cliExec(t, c, "--help")
		cliWantCode(t, r, exitOK, c, "--help")
		if !strings.Contains(r.out, "nullbench "+c) {
			t.Errorf("%s --help: no usage line:\n%s", c, r.out)
		}
	}
}

func TestVersionAndCompletion(t *testing.T) {
	tests := []struct {
		args []string
		want *regexp.Regexp
	}{
		{[]string{"--version"}, regexp.MustCompile(`^nullbench version ` + regexp.QuoteMeta(version) + `\n$`)},
		{[]string{"-v"}, regexp.MustCompile(`^nullbench version \S+\n$`)},
		{[]string{"completion", "bash"}, regexp.MustCompile(`(?s)^# bash completion V2 for nullbench.*__start_nullbench`)},
		{[]string{"completion", "zsh"}, regexp.MustCompile(`(?s)#compdef nullbench`)},
		{[]string{"completion", "fish"}, regexp.MustCompile(`complete -c nullbench`)},
	}
	for _, tt := range tests {
		t.Run(strings.Join(tt.args, "_"), func(t *testing.T) {
			r := cliExec(t, tt.args...)
			cliWantCode(t, r, exitOK, tt.args...)
			if !tt.want.MatchString(r.out) {
				t.Errorf("output does not match %s:\n%.400s", tt.want, r.out)
			}
		})
	}
	// The completion of --serial offers the instruments sim can serve on a
	// pseudo-terminal (cobra's hidden __complete command).
	r := cliExec(t, "__complete", "sim", "--serial", "")
	cliWantCode(t, r, exitOK, "__complete")
	for _, name := range []string{"dmm", "psu", "src", "mux", "chamber"} {
		if !strings.Contains(r.out, name+"\n") {
			t.Errorf("completion of sim --serial lacks %q:\n%s", name, r.out)
		}
	}
}
