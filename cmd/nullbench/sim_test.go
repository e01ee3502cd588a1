package main

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"nullbench/instrument/sim"
	"nullbench/internal/simtest"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// cliEndpoint is one line "sim" prints: name, role, address, profile, *IDN?.
type cliEndpoint struct {
	name, role, address, profile, idn string
}

// cliServeSim runs "nullbench sim ARGS" in a goroutine until the test ends
// and returns the endpoints it printed. The command must say it is running
// within ten seconds.
func cliServeSim(t *testing.T, args ...string) []cliEndpoint {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	var out, errb cliBuffer
	std := streams{In: strings.NewReader(""), Out: &out, Err: &errb}
	done := make(chan int, 1)
	go func() { done <- execute(ctx, std, append([]string{"sim"}, args...)) }()
	t.Cleanup(func() {
		cancel()
		select {
		case code := <-done:
			if code != exitOK {
				t.Errorf("sim ended with exit %d after its context was cancelled: %s", code, errb.String())
			}
		case <-time.After(10 * time.Second):
			t.Errorf("sim did not stop within 10 s of its context being cancelled")
		}
	})
	deadline := time.After(10 * time.Second)
	for !strings.Contains(errb.String(), "Ctrl-C to stop") {
		select {
		case code := <-done:
			t.Fatalf("sim ended early with exit %d:\n%s%s", code, out.String(), errb.String())
		case <-deadline:
			t.Fatalf("sim did not start within 10 s:\n%s%s", out.String(), errb.String())
		case <-time.After(10 * time.Millisecond):
		}
	}
	// "dmm      meter    tcp://127.0.0.1:40001   profile=dmm  NULLBENCH-SIM,DMM-65,SIM0001,1.0"
	re := regexp.MustCompile(`^(\S+)\s+(\S+)\s+(\S+)\s+profile=(\S+)\s+(\S+)$`)
	var eps []cliEndpoint
	for _, line := range strings.Split(strings.TrimSpace(out.String()), "\n") {
		m := re.FindStringSubmatch(line)
		if m == nil {
			t.Fatalf("sim printed a line that is not an endpoint: %q", line)
		}
		eps = append(eps, cliEndpoint{m[1], m[2], m[3], m[4], m[5]})
	}
	return eps
}

// The instruments of the simulated bench, their roles, built-in profiles
// and identities as the simulated bench (package instrument/sim) answers
// them.
var cliBenchInstruments = []cliEndpoint{
	{"dmm", "meter", "", "dmm", "NULLBENCH-SIM,DMM-65,SIM0001,1.0"},
	{"psu", "supply", "", "supply2", "NULLBENCH-SIM,PSU-2CH,SIM0002,1.0"},
	{"src", "source", "", "source3", "NULLBENCH-SIM,SRC-3CH,SIM0003,1.0"},
	{"mux", "switch", "", "switch", "NULLBENCH-SIM,MUX-40,SIM0004,1.0"},
	{"chamber", "chamber", "", "chamber", "NULLBENCH-SIM,CHAMBER-1,SIM0005,1.0"},
	{"gen", "generator", "", "generator", "NULLBENCH-SIM,GEN-3CH,SIM0006,1.0"},
	{"dig", "digitizer", "", "digitizer", "NULLBENCH-SIM,DIG-2CH,SIM0007,1.0"},
	{"acvm", "ac_meter", "", "acvm", "NULLBENCH-SIM,ACV-2,SIM0008,1.0"},
}

// cliCheckEndpoints compares what sim printed with cliBenchInstruments;
// serial names the instrument expected on a pseudo-terminal.
func cliCheckEndpoints(t *testing.T, eps []cliEndpoint, serial string) {
	t.Helper()
	if len(eps) != len(cliBenchInstruments) {
		t.Fatalf("sim printed %d endpoints, want %d: %+v", len(eps), len(cliBenchInstruments), eps)
	}
	for i, want := range cliBenchInstruments {
		got := eps[i]
		if got.name != want.name || got.role != want.role || got.profile != want.profile || got.idn != want.idn {
			t.Errorf("endpoint %d: %+v, want %+v", i, got, want)
		}
		scheme := "tcp://127.0.0.1:"
		if got.name == serial {
			scheme = "serial:///dev/"
		}
		if !strings.HasPrefix(got.address, scheme) {
			t.Errorf("%s address %q, want %s...", got.name, got.address, scheme)
		}
	}
}

// cliProbeRE matches probe's report; the groups are identity, profile
// name, and the median, min and max round trip.
var cliProbeRE = regexp.MustCompile(`(?s)address:\s+(\S+)\nidentity:\s+(\S+)\n.*profile:\s+(\S+) \(.*errors:\s+queue empty\n\*OPC\? RTT: median (\S+), min (\S+), max (\S+) over (\d+) round trips`)

// cliProbe probes addr and checks the identity, the matched profile and
// that the round-trip figures are ordered durations.
func cliProbe(t *testing.T, addr, idn, profile string, extra ...string) {
	t.Helper()
	args := append([]string{"probe", addr, "--rounds", "5", "--timeout", "20s"}, extra...)
	r := cliExec(t, args...)
	cliWantCode(t, r, exitOK, args...)
	m := cliProbeRE.FindStringSubmatch(r.out)
	if m == nil {
		t.Fatalf("probe %s: report not understood:\n%s", addr, r.out)
	}
	// A serial address comes back with its line settings spelled out.
	if !strings.HasPrefix(m[1], addr) || m[2] != idn || m[3] != profile {
		t.Errorf("probe %s: address %s identity %s profile %s; want %s %s %s", addr, m[1], m[2], m[3], addr, idn, profile)
	}
	var d [3]time.Duration
	for i := range d {
		v, err := time.ParseDuration(m[4+i])
		if err != nil {
			t.Fatalf("probe %s: round trip %q: %v", addr, m[4+i], err)
		}
		d[i] = v
	}
	median, lo, hi := d[0], d[1], d[2]
	if !(lo > 0 && lo <= median && median <= hi && hi < 20*time.Second) || m[7] != "5" {
		t.Errorf("probe %s: round trips median %v min %v max %v over %s, want 0 < min ≤ median ≤ max over 5", addr, median, lo, hi, m[7])
	}
}

// cliPlanBody is the rest of an op-amp plan (all but [bench]) for the parts
// of cliDUT; %UNITS% is replaced by [[unit]] tables.
const cliPlanBody = `
[campaign]
name = "HX-4107 cmd test"
lot  = "L-CMD-1"

[fixture]
kind = "nulling_loop"
noise_gain = 1000.0
noise_gain_tolerance = 0.001
common_mode = "supply_shift"
max_stimulus_volts = 12.0

` + simtest.PartHX4107 + `cm_margin_volts = 0.5
current_limit_amps = 0.05

[limits]
cmrr = %CMRR_LIMIT%
psrr_pos = 90.0

[[test]]
kind = "cmrr"
levels = [-10.0, -5.0, 0.0, 5.0, 10.0]
nplc = 1.0
dwell_s = 2.0
settle_volts = 0.0002

[[test]]
kind = "psrr_pos"
levels = [-3.0, 0.0, 3.0]
nplc = 1.0
dwell_s = 2.0
settle_volts = 0.0002

[[unit]]
id = "U01"
channel = "101"

[[unit]]
id = "U02"
channel = "102"
`

func TestSimAndProbeOverTCP(t *testing.T) {
	dir := t.TempDir()
	benchOut := filepath.Join(dir, "bench.toml")
	eps := cliServeSim(t, "--time-scale", "1000", "--bench-out", benchOut)
	cliCheckEndpoints(t, eps, "")
	for _, e := range eps {
		t.Run(e.name, func(t *testing.T) { cliProbe(t, e.address, e.idn, e.profile) })
	}

	// A profile of the user's is tried before the built-in ones: a copy
	// of the built-in DMM profile under another name wins.
	data, err := os.ReadFile(cliRepoFile("instrument", "profiles", "dmm.toml"))
	if err != nil {
		t.Fatal(err)
	}
	mine := strings.Replace(string(data), `name        = "dmm"`, `name        = "bench7-dmm"`, 1)
	if mine == string(data) {
		t.Fatal("the built-in dmm profile has no name line to replace")
	}
	prof := cliWriteFile(t, dir, "bench7-dmm.toml", mine)
	cliProbe(t, eps[0].address, eps[0].idn, "bench7-dmm", "--profile", prof)

	// --bench-out wrote a [bench] section that, in front of a plan body,
	// makes a valid plan naming these addresses and the time scale.
	section, err := os.ReadFile(benchOut)
	if err != nil {
		t.Fatal(err)
	}
	body := strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "100.0")
	p, err := plan.Parse(append(section, body...), "bench-out.toml")
	if err != nil {
		t.Fatalf("bench section + plan body: %v\n%s", err, section)
	}
	if p.Bench.TimeScale != 1000 {
		t.Errorf("time_scale %g, want 1000", p.Bench.TimeScale)
	}
	for _, e := range eps {
		in, ok := p.Bench.Instruments[e.name]
		if !ok || in.Address != e.address || in.Profile != e.profile {
			t.Errorf("[bench.instrument.%s] = %+v, want address %s profile %s", e.name, in, e.address, e.profile)
		}
	}
	if err := safety.CheckSafety(p); err != nil {
		t.Errorf("the plan on the simulated bench is refused: %v", err)
	}
}

// sim --truth prints one JSON object per unit with the true values; the
// ratios given in the DUT file come back as written, and the open-loop
// gain derived from three ratios satisfies kc + kp + kn + ko = 0 with
// aol_db = -20·log10|ko| (derived, no published source: the identity of
// the four
// input-referred coefficients of an op-amp, which has no ground pin).
func TestSimTruth(t *testing.T) {
	dut := cliWriteFile(t, t.TempDir(), "dut.toml", cliDUT)
	r := cliExec(t, "sim", "--dut", dut, "--truth")
	cliWantCode(t, r, exitOK, "sim --truth")
	lines := cliJSONLines(t, r.out)
	want := []struct {
		id                 string
		cmrr, psrrP, psrrN float64
	}{
		{"U01", 112, 118, 108},
		{"U02", 104, 110, 115},
		{"N01", 106, 112, 109},
		{"B01", 110, 112, 108}, // the board's op-amp
	}
	if len(lines) != len(want) {
		t.Fatalf("%d lines, want %d:\n%s", len(lines), len(want), r.out)
	}
	for i, w := range want {
		m := lines[i]
		for _, k := range []string{"cmrr_db", "psrr_pos_db", "psrr_neg_db", "aol_db", "kc_uv_per_v", "kp_uv_per_v", "kn_uv_per_v", "ko_uv_per_v"} {
			if _, ok := m[k].(float64); !ok {
				t.Errorf("%s: key %q missing or not a number: %v", w.id, k, m[k])
			}
		}
		if m["id"] != w.id || m["cmrr_db"] != w.cmrr || m["psrr_pos_db"] != w.psrrP || m["psrr_neg_db"] != w.psrrN {
			t.Errorf("line %d: %v; want id %s cmrr %g psrr+ %g psrr- %g", i+1, m, w.id, w.cmrr, w.psrrP, w.psrrN)
		}
		kc, kp, kn, ko := m["kc_uv_per_v"].(float64), m["kp_uv_per_v"].(float64), m["kn_uv_per_v"].(float64), m["ko_uv_per_v"].(float64)
		if sum := kc + kp + kn + ko; math.Abs(sum) > 1e-9*(math.Abs(kc)+math.Abs(kp)+math.Abs(kn)+math.Abs(ko)) {
			t.Errorf("%s: kc+kp+kn+ko = %g µV/V, want 0", w.id, sum)
		}
		if aol := -20 * math.Log10(math.Abs(ko)*1e-6); math.Abs(aol-m["aol_db"].(float64)) > 1e-9 {
			t.Errorf("%s: aol_db %v, want -20·log10|ko| = %g", w.id, m["aol_db"], aol)
		}
		if got := -20 * math.Log10(math.Abs(kc)*1e-6); math.Abs(got-w.cmrr) > 1e-9 {
			t.Errorf("%s: -20·log10|kc| = %g dB, want cmrr_db %g", w.id, got, w.cmrr)
		}
	}
	if b, ok := lines[3]["board"].(map[string]any); !ok || b["cmrr_db"] == nil {
		t.Errorf("the board's line has no board object with its own cmrr_db: %v", lines[3])
	}
}

// "sim --digitizer-mismatch DB,DEG" reaches the bench's digitizer; a
// malformed value is a usage error.
func TestSimDigitizerMismatchFlag(t *testing.T) {
	for _, c := range []struct {
		in   string
		want sim.DigitizerMismatch
		ok   bool
	}{{"", sim.DigitizerMismatch{}, true}, {"1,5", sim.DigitizerMismatch{GainDB: 1, PhaseDeg: 5}, true},
		{"-0.5, 12", sim.DigitizerMismatch{GainDB: -0.5, PhaseDeg: 12}, true},
		{"1", sim.DigitizerMismatch{}, false}, {"1,x", sim.DigitizerMismatch{}, false}, {"30,0", sim.DigitizerMismatch{}, false}, {"NaN,1", sim.DigitizerMismatch{}, false}} {
		got, err := parseMismatch(c.in)
		if (err == nil) != c.ok || got != c.want {
			t.Errorf("%q: %+v, %v", c.in, got, err)
		}
	}
	r := cliExec(t, "sim", "--digitizer-mismatch", "1", "--truth")
	cliWantCode(t, r, exitUsage, "sim --digitizer-mismatch 1")
}

// sim --truth carries the DUT file's frequency keys as written (and leaves
// them out for a part without them).
func TestSimTruthFrequencyKeys(t *testing.T) {
	dut := cliWriteFile(t, t.TempDir(), "dut.toml", `
[part]
gbw_hz = 2e6
[[unit]]
id = "F1"
cmrr_db = 100.0
psrr_pos_db = 104.0
psrr_neg_db = 98.0
cmrr_pole_hz = 800.0
psrr_pos_pole_hz = 50.0
psrr_neg_pole_hz = 3000.0
[[unit]]
id = "F2"
cmrr_db = 100.0
psrr_pos_db = 104.0
psrr_neg_db = 98.0
`)
	r := cliExec(t, "sim", "--dut", dut, "--truth")
	cliWantCode(t, r, exitOK, "sim --truth")
	lines := cliJSONLines(t, r.out)
	if len(lines) != 2 {
		t.Fatalf("%d lines:\n%s", len(lines), r.out)
	}
	for k, v := range map[string]float64{"cmrr_pole_hz": 800, "psrr_pos_pole_hz": 50, "psrr_neg_pole_hz": 3000, "gbw_hz": 2e6} {
		if lines[0][k] != v {
			t.Errorf("F1 %s = %v, want %v", k, lines[0][k], v)
		}
	}
	if _, ok := lines[1]["cmrr_pole_hz"]; ok || lines[1]["gbw_hz"] != 2e6 {
		t.Errorf("F2: %v (no pole given; the part's gain-bandwidth)", lines[1])
	}
}
