package main

import (
	"context"
	"io"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
	"nullbench/instrument/sim"
)

// "sim --socket": the person at the simulated bench types lines on the
// command's standard input to work its hand socket.

func TestSimSocketFlag(t *testing.T) {
	got, code, errs := cliParse(t, "sim", "--socket", "--time-scale", "50")
	want := simOptions{Listen: "127.0.0.1", TimeScale: 50, Socket: true}
	if code != exitOK || !reflect.DeepEqual(got, want) {
		t.Errorf("sim --socket: %+v (exit %d, %s), want %+v", got, code, errs, want)
	}
	r := cliExec(t, "sim", "--help")
	for _, w := range []string{"--socket", "insert ID", "remove", "status", "live"} {
		if !strings.Contains(r.out, w) {
			t.Errorf("sim --help does not mention %q:\n%s", w, r.out)
		}
	}
}

// Each line typed at the socket and its answer, in order, on the demo
// lot's bench: refusals change nothing; a swap with the bench powered down
// is answered plainly; with the supplies on (set over SCPI, as the tool
// would) the socket is live, and a part inserted then is reported DAMAGED,
// as the simulated part is (socket.go: any contact farther from 0 V than
// 0.3 V, the typical absolute maximum of an input beyond a rail; common
// practice, no published source).
func TestSimSocketLines(t *testing.T) {
	clk := sim.NewManualClock()
	b, err := sim.New(sim.Config{Clock: clk})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.Close() })
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	if err := b.Start(ctx, sim.ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	var psuAddr string
	for _, e := range b.Endpoints() {
		if e.Name == sim.NameSupply {
			psuAddr = e.Address
		}
	}
	psu, err := instrument.Open(ctx, "psu", psuAddr, "supply2", instrument.OpenOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer psu.Close()
	supplies := func(on string) func(t *testing.T) {
		return func(t *testing.T) {
			t.Helper()
			if _, err := psu.Session.Query(ctx, "INST:NSEL 1;:VOLT 15;:OUTP "+on+";:INST:NSEL 2;:VOLT 15;:OUTP "+on+";*OPC?"); err != nil {
				t.Fatal(err)
			}
			clk.Advance(time.Second) // the rails settle (or discharge)
		}
	}
	steps := []struct {
		before func(t *testing.T)
		line   string
		want   []string // substrings of the answer; nil: no answer
	}{
		{nil, "status", []string{"socket: empty", "V+ 0.000 V", "dead: safe to swap"}},
		{nil, "   ", nil},
		{nil, "remove", []string{"socket: refused: the socket is empty"}},
		{nil, "insert U99", []string{"socket: refused: no unit \"U99\"", "U01, U02"}},
		{nil, "insert", []string{"insert takes one unit id"}},
		{nil, "insert U01 U02", []string{"insert takes one unit id"}},
		{nil, "insert U01", []string{"socket: U01 inserted"}},
		{nil, "INSERT U02", []string{"socket: refused: the socket holds unit U01; remove it first"}},
		{nil, "status", []string{"socket: holds U01;", "dead: safe to swap"}},
		{nil, "remove", []string{"socket: U01 removed; the socket is empty"}},
		{nil, "help", []string{`"insert ID"`, `"remove"`, `"status"`}},
		{nil, "dance", []string{`socket: "dance" not understood`}},
		{supplies("ON"), "status", []string{"socket: empty", "V+ 1", "V− -1", "LIVE: do not swap"}},
		{nil, "insert U03", []string{"socket: U03 inserted into a LIVE socket and DAMAGED", "power the bench down"}},
		{nil, "status", []string{"socket: holds U03 (DAMAGED: inserted with the socket live", "LIVE"}},
		{supplies("OFF"), "remove", []string{"socket: U03 removed"}},
	}
	for _, s := range steps {
		if s.before != nil {
			s.before(t)
		}
		got := socketLine(b, s.line)
		if s.want == nil && got != "" {
			t.Errorf("%q: answered %q, want nothing", s.line, got)
		}
		for _, w := range s.want {
			if !strings.Contains(got, w) {
				t.Errorf("%q: answered %q, want it to say %q", s.line, got, w)
			}
		}
	}
	for _, u := range b.Inspect().Units {
		if u.Damaged != (u.ID == "U03") {
			t.Errorf("%s damaged %v (%s); only U03 was swapped live", u.ID, u.Damaged, u.DamageReason)
		}
	}
}

// simSocketCmd is "nullbench sim --socket ARGS" running in a goroutine
// until the test ends, with its standard input a pipe the test types on.
type simSocketCmd struct {
	in       *io.PipeWriter
	out, err *cliBuffer
	done     chan int
}

func startSimSocket(t *testing.T, args ...string) *simSocketCmd {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	pr, pw := io.Pipe()
	c := &simSocketCmd{in: pw, out: &cliBuffer{}, err: &cliBuffer{}, done: make(chan int, 1)}
	std := streams{In: pr, Out: c.out, Err: c.err}
	go func() { c.done <- execute(ctx, std, append([]string{"sim", "--socket"}, args...)) }()
	t.Cleanup(func() {
		cancel()
		pw.Close()
		select {
		case code := <-c.done:
			if code != exitOK {
				t.Errorf("sim --socket ended with exit %d after its context was cancelled: %s", code, c.err.String())
			}
		case <-time.After(10 * time.Second):
			t.Errorf("sim --socket did not stop within 10 s of its context being cancelled")
		}
	})
	c.waitFor(t, c.err, "hand socket: type insert ID", 1)
	return c
}

// waitFor waits (10 s at most, a guard against a hang, not a timing
// check) until buf holds want at least n times.
func (c *simSocketCmd) waitFor(t *testing.T, buf *cliBuffer, want string, n int) {
	t.Helper()
	deadline := time.After(10 * time.Second)
	for strings.Count(buf.String(), want) < n {
		select {
		case code := <-c.done:
			c.done <- code
			t.Fatalf("sim --socket ended (exit %d) before saying %q:\n%s%s", code, want, c.out.String(), c.err.String())
		case <-deadline:
			t.Fatalf("no %q (×%d) within 10 s:\nstdout:\n%s\nstderr:\n%s", want, n, c.out.String(), buf.String())
		case <-time.After(5 * time.Millisecond):
		}
	}
}

// typeLine types one line at the socket and waits for its answer.
func (c *simSocketCmd) typeLine(t *testing.T, line, answer string) {
	t.Helper()
	n := strings.Count(c.out.String(), answer) + 1
	if _, err := io.WriteString(c.in, line+"\n"); err != nil {
		t.Fatal(err)
	}
	c.waitFor(t, c.out, answer, n)
}

// The two terminals of a hand-swap campaign, both in this process: "sim
// --socket" serves the bench and "run" measures a plan whose units have no
// switch channels, at a terminal. At each of run's prompts the test, as the
// person, types "remove" and "insert ID" at the socket, then presses Enter
// at the run. The run completes with every result near its unit's truth
// (within 6 dB, as TestRunOnSimulatedBench asks: a sanity check; the
// accuracy is TestHandSwapCampaign's), and no part was damaged.
func TestSimSocketWithRunAtATerminal(t *testing.T) {
	dir := t.TempDir()
	dut := cliWriteFile(t, dir, "dut.toml", cliDUT)
	benchOut := filepath.Join(dir, "bench.toml")
	s := startSimSocket(t, "--dut", dut, "--time-scale", "2000", "--bench-out", benchOut)
	section, err := os.ReadFile(benchOut)
	if err != nil {
		t.Fatal(err)
	}
	body := regexp.MustCompile(`(?m)^channel = "10\d"\n`).ReplaceAllString(strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"), "")
	body = strings.Replace(body, "current_limit_amps = 0.05\n", "current_limit_amps = 0.05\nsupply_amps_min = 0.001\nsupply_amps_max = 0.004\n", 1)
	if strings.Contains(body, "channel =") || !strings.Contains(body, "supply_amps_min") {
		t.Fatalf("the plan body did not become a hand-swap plan:\n%s", body)
	}
	plan := cliWriteFile(t, dir, "handswap.toml", string(section)+body)

	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	runIn, runKeys := io.Pipe()
	defer runKeys.Close()
	var runOut, runErr cliBuffer
	out := filepath.Join(dir, "out")
	runDone := make(chan int, 1)
	go func() {
		runDone <- execute(ctx, streams{In: runIn, Out: &runOut, Err: &runErr, IsTerm: true}, []string{"run", plan, "--out", out, "--json", "--no-charts"})
	}()
	run := &simSocketCmd{out: &runErr, done: runDone} // to wait on the run's prompts
	for i, id := range []string{"U01", "U02"} {
		run.waitFor(t, &runErr, "Insert unit "+id, 1)
		s.typeLine(t, "status", "dead: safe to swap")
		if i > 0 {
			s.typeLine(t, "remove", "socket: U01 removed")
		}
		s.typeLine(t, "insert "+id, "socket: "+id+" inserted")
		if _, err := io.WriteString(runKeys, "\n"); err != nil {
			t.Fatal(err)
		}
	}
	var code int
	select {
	case code = <-runDone:
	case <-ctx.Done():
		t.Fatalf("the run did not finish:\n%s", runErr.String())
	}
	if code != exitOK {
		t.Fatalf("run: exit %d\n%s", code, runErr.String())
	}
	s.typeLine(t, "status", "socket: holds U02;")
	if strings.Contains(s.out.String(), "DAMAGED") {
		t.Errorf("a part was damaged:\n%s", s.out.String())
	}

	d, err := sim.ParseDUT([]byte(cliDUT), "dut.toml")
	if err != nil {
		t.Fatal(err)
	}
	tb, err := sim.New(sim.Config{DUT: d, Clock: sim.NewManualClock()})
	if err != nil {
		t.Fatal(err)
	}
	defer tb.Close()
	truth := map[string]sim.UnitTruth{}
	for _, u := range tb.Truth() {
		truth[u.ID] = u
	}
	results := cliJSONLines(t, runOut.String())
	if len(results) != 4 {
		t.Fatalf("%d results, want 4 (cmrr and psrr_pos of U01 and U02):\n%s", len(results), runOut.String())
	}
	for _, m := range results {
		unit, test := m["unit"].(string), m["test"].(string)
		// No aol test: the supply-shift figure is k_c + k_o, cmrr_uncorrected.
		want := map[string]float64{"cmrr_uncorrected": 20 * math.Log10(1e6/math.Abs(truth[unit].KcUVPerV+truth[unit].KoUVPerV)),
			"psrr_pos": truth[unit].PSRRPosdB}[test]
		ratio, _ := m["ratio_db"].(float64)
		t.Logf("%s %s: %.2f dB (truth %.2f dB), verdict %v", unit, test, ratio, want, m["verdict"])
		if m["resolved"] != true || math.Abs(ratio-want) > 6 {
			t.Errorf("%s %s: %.2f dB resolved %v; the simulated part has %.2f dB", unit, test, ratio, m["resolved"], want)
		}
	}
}

// With its standard input closed, "sim --socket" says so and serves on
// until it is stopped.
func TestSimSocketInputClosed(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var out, errb cliBuffer
	c := &simSocketCmd{out: &out, err: &errb, done: make(chan int, 1)}
	std := streams{In: strings.NewReader("status\n"), Out: &out, Err: &errb}
	go func() { c.done <- execute(ctx, std, []string{"sim", "--socket", "--time-scale", "100"}) }()
	c.waitFor(t, &errb, "standard input closed", 1)
	c.waitFor(t, &out, "socket: empty", 1)
	var dmm string
	for _, line := range strings.Split(out.String(), "\n") {
		if f := strings.Fields(line); len(f) > 2 && f[0] == sim.NameDMM {
			dmm = f[2]
		}
	}
	in, err := instrument.Open(ctx, "dmm", dmm, "dmm", instrument.OpenOptions{})
	if err != nil {
		t.Fatalf("the bench stopped serving when standard input closed: %v", err)
	}
	in.Close()
	cancel()
	select {
	case code := <-c.done:
		if code != exitOK {
			t.Errorf("exit %d after Ctrl-C: %s", code, errb.String())
		}
	case <-time.After(10 * time.Second):
		t.Fatal("sim --socket did not stop within 10 s of its context being cancelled")
	}
}
