package main

import (
	"context"
	"encoding/csv"
	"fmt"
	"math"
	"net"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"

	"nullbench/instrument/sim"
	"nullbench/internal/simtest"
	"nullbench/report"
)

// cliNoiseGainBody measures the cliDUT op-amp in the noise-gain stage
// (K = 101, inputs driven in common mode) on switch channel 103.
const cliNoiseGainBody = `
[campaign]
name = "HX-4107 noise-gain cmd test"
lot  = "L-CMD-1"

[fixture]
kind = "noise_gain"
noise_gain = 101.0
noise_gain_tolerance = 0.002
common_mode = "input_drive"
max_stimulus_volts = 12.0

` + simtest.PartHX4107 + `cm_margin_volts = 0.5
current_limit_amps = 0.05

[limits]
cmrr = 90.0
psrr_pos = 90.0

[[test]]
kind = "cmrr"
levels = [-10.0, -5.0, 0.0, 5.0, 10.0]
nplc = 1.0
dwell_s = 1.0

[[test]]
kind = "psrr_pos"
levels = [-3.0, 0.0, 3.0]
nplc = 1.0
dwell_s = 1.0

[[unit]]
id = "N01"
channel = "103"
`

// cliBoardBody measures the cliDUT board (gain 10) on switch channel 201.
const cliBoardBody = `
[campaign]
name = "HB-220 cmd test"
lot  = "B-CMD"

[fixture]
kind = "board"
board_gain = 10.0
resistor_tolerance = 0.001
opamp_cmrr_db = 100.0
max_stimulus_volts = 12.0

[part]
number = "HB-220"
nominal_pos_volts = 15.0
nominal_neg_volts = -15.0
max_supply_span_volts = 36.0
cm_headroom_pos_volts = 2.0
cm_headroom_neg_volts = 2.0
cm_margin_volts = 0.5
current_limit_amps = 0.05

[limits]
board_cmrr = 60.0
board_psrr_pos = 80.0

[[test]]
kind = "board_cmrr"
levels = [-8.0, 0.0, 8.0]
diff_levels = [-0.5, 0.0, 0.5]
nplc = 1.0
dwell_s = 1.0

[[test]]
kind = "board_psrr_pos"
levels = [-2.0, 0.0, 2.0]
nplc = 1.0
dwell_s = 1.0

[[unit]]
id = "B01"
channel = "201"
`

// cliResultKeys are the keys every --json result line must carry.
var cliResultKeys = []string{"unit", "test", "temperature_c", "ratio_db", "expanded_u_db", "coverage_k", "resolved", "lower_bound_db", "verdict"}

// Runs on the simulated bench through "nullbench run": every output file,
// the JSON lines on standard output with the summary on standard error,
// and the exit status 0 (all pass) or 5 (a result failed its limit).
func TestRunOnSimulatedBench(t *testing.T) {
	b := cliStartSim(t, "")
	section := b.BenchSection()
	truth := map[string]map[string]float64{}
	for _, u := range b.Truth() {
		// Without an aol test the supply-shift figure is k_c + k_o and is
		// reported as cmrr_uncorrected.
		truth[u.ID] = map[string]float64{"cmrr": u.CMRRdB, "psrr_pos": u.PSRRPosdB,
			"cmrr_uncorrected": 20 * math.Log10(1e6/math.Abs(u.KcUVPerV+u.KoUVPerV))}
		if u.Board != nil {
			truth[u.ID] = map[string]float64{"board_cmrr": u.Board.CMRRdB, "board_psrr_pos": u.Board.PSRRPosdB}
		}
	}
	tests := []struct {
		name    string
		body    string
		json    bool
		code    int
		results []string // unit/test of each result, in order
		verdict map[string]string
	}{
		{"nulling loop pass", strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"), true, exitOK,
			[]string{"U01/cmrr_uncorrected", "U01/psrr_pos", "U02/cmrr_uncorrected", "U02/psrr_pos"}, map[string]string{"cmrr_uncorrected": "pass", "psrr_pos": "pass"}},
		// A 130 dB CMRR limit that neither unit (112, 104 dB) meets.
		{"nulling loop fails a limit", strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "130.0"), true, exitOutOfLimits,
			[]string{"U01/cmrr_uncorrected", "U01/psrr_pos", "U02/cmrr_uncorrected", "U02/psrr_pos"}, map[string]string{"cmrr_uncorrected": "fail", "psrr_pos": "pass"}},
		{"noise gain", cliNoiseGainBody, true, exitOK,
			[]string{"N01/cmrr_uncorrected", "N01/psrr_pos"}, map[string]string{"cmrr_uncorrected": "pass", "psrr_pos": "pass"}},
		{"board, summary on stdout", cliBoardBody, false, exitOK,
			[]string{"B01/board_cmrr", "B01/board_psrr_pos"}, map[string]string{"board_cmrr": "pass", "board_psrr_pos": "pass"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir := t.TempDir()
			plan := cliWriteFile(t, dir, "plan.toml", section+tt.body)
			out := filepath.Join(dir, "out")
			args := []string{"run", plan, "--out", out}
			if tt.json {
				args = append(args, "--json")
			}
			r := cliExec(t, args...)
			cliWantCode(t, r, tt.code, args...)

			for _, f := range []string{"journal.jsonl", "campaign.xlsx", "results.csv", "results.jsonl", "readings.csv", "readings.jsonl"} {
				if st, err := os.Stat(filepath.Join(out, f)); err != nil || st.Size() == 0 {
					t.Errorf("%s missing or empty: %v", f, err)
				}
			}
			summary := r.out
			if tt.json {
				summary = r.err
			}
			if !regexp.MustCompile(`results: \d+ pass, `).MatchString(summary) || !strings.Contains(summary, "workbook: "+filepath.Join(out, "campaign.xlsx")) {
				t.Errorf("no summary where expected (json %v):\nstdout:\n%s\nstderr:\n%s", tt.json, r.out, r.err)
			}
			if strings.Contains(tt.results[0], "cmrr_uncorrected") && !regexp.MustCompile(`notes: +\d+ of \d+ results carry notes`).MatchString(summary) {
				t.Errorf("summary does not count the noted results:\n%s", summary)
			}
			if tt.code == exitOutOfLimits && !strings.Contains(r.err, "did not pass their limits") {
				t.Errorf("exit 5 without saying why:\n%s", r.err)
			}

			// The results, from --json or else from results.jsonl, which
			// must say the same.
			fileData, err := os.ReadFile(filepath.Join(out, "results.jsonl"))
			if err != nil {
				t.Fatal(err)
			}
			fromFile := cliJSONLines(t, string(fileData))
			results := fromFile
			if tt.json {
				results = cliJSONLines(t, r.out)
				if strings.TrimSpace(r.out) != strings.TrimSpace(string(fileData)) {
					t.Errorf("--json output differs from results.jsonl")
				}
			}
			if len(results) != len(tt.results) {
				t.Fatalf("%d results, want %d:\n%s", len(results), len(tt.results), fileData)
			}
			for i, m := range results {
				for _, k := range cliResultKeys {
					if _, ok := m[k]; !ok {
						t.Errorf("result %d lacks %q: %v", i, k, m)
					}
				}
				unit, test := m["unit"].(string), m["test"].(string)
				if unit+"/"+test != tt.results[i] {
					t.Errorf("result %d is %s/%s, want %s", i, unit, test, tt.results[i])
				}
				// A figure without aol says what it contains, in its notes.
				if test == "cmrr_uncorrected" && !strings.Contains(fmt.Sprint(m["notes"]), "k_c + k_o, not CMRR") {
					t.Errorf("%s/%s notes %v do not say the figure is k_c + k_o", unit, test, m["notes"])
				}
				if m["verdict"] != tt.verdict[test] {
					t.Errorf("%s/%s verdict %v, want %s", unit, test, m["verdict"], tt.verdict[test])
				}
				ratio, u, k := m["ratio_db"].(float64), m["expanded_u_db"].(float64), m["coverage_k"].(float64)
				if m["resolved"] != true || u <= 0 || k < 1.9 || k > 15 || m["temperature_c"] != 25.0 {
					t.Errorf("%s/%s: resolved %v, U %g dB, k %g, T %v", unit, test, m["resolved"], u, k, m["temperature_c"])
				}
				// Sanity, not accuracy (the end-to-end test judges that):
				// the figure is the part's, within a few dB of what the
				// simulation holds, so no gain or unit slipped.
				if want := truth[unit][test]; math.Abs(ratio-want) > 6 {
					t.Errorf("%s/%s: %.2f dB, the simulated part has %.2f dB", unit, test, ratio, want)
				}
			}

			// The workbook's Results sheet: a header and one row per result.
			f, err := excelize.OpenFile(filepath.Join(out, "campaign.xlsx"))
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			rows, err := f.GetRows(report.SheetResults)
			if err != nil {
				t.Fatal(err)
			}
			// The table ends at the first blank row (the key follows it).
			end := len(rows)
			for i, row := range rows {
				if len(row) == 0 {
					end = i
					break
				}
			}
			rows = rows[:end]
			if len(rows) != 1+len(results) || len(rows[0]) < 2 || rows[0][0] != "Unit" || rows[0][1] != "Test" {
				t.Fatalf("sheet %s has %d rows (header %v), want a header and %d rows", report.SheetResults, len(rows), rows[0], len(results))
			}
			for i, row := range rows[1:] {
				if row[0]+"/"+row[1] != tt.results[i] {
					t.Errorf("sheet row %d: %v, want %s", i+2, row[:2], tt.results[i])
				}
			}

			// results.csv: a header and one record per result.
			cf, err := os.Open(filepath.Join(out, "results.csv"))
			if err != nil {
				t.Fatal(err)
			}
			defer cf.Close()
			recs, err := csv.NewReader(cf).ReadAll()
			if err != nil {
				t.Fatal(err)
			}
			if len(recs) != 1+len(results) {
				t.Errorf("results.csv has %d records, want %d", len(recs), 1+len(results))
			}
		})
	}
}

// cliListener is a TCP listener that counts the connections it accepts
// and closes each at once (an instrument that hangs up).
type cliListener struct {
	ln    net.Listener
	count atomic.Int64
}

func cliListen(t *testing.T) *cliListener {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	l := &cliListener{ln: ln}
	go func() {
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			l.count.Add(1)
			c.Close()
		}
	}()
	t.Cleanup(func() { ln.Close() })
	return l
}

// connections returns how many connections reached the listener before
// now: the test dials once itself and waits for that connection to be
// counted (accepts are in order), then leaves its own out.
func (l *cliListener) connections(t *testing.T) int64 {
	t.Helper()
	before := l.count.Load()
	c, err := net.Dial("tcp", l.ln.Addr().String())
	if err != nil {
		t.Fatal(err)
	}
	c.Close()
	deadline := time.Now().Add(5 * time.Second)
	for l.count.Load() == before {
		if time.Now().After(deadline) {
			t.Fatal("the listener stopped accepting")
		}
		time.Sleep(time.Millisecond)
	}
	return l.count.Add(-1)
}

// Unsafe plans are refused from the plan alone: not one connection to the
// bench, no journal, exit 4 (2 for a plan that needs an operator and has
// no terminal). A hazardous plan needs --allow-hazardous, an
// interactive terminal and "yes" typed there; the last case gives all
// three and shows the listener would have seen a connection.
func TestRunRefusesUnsafePlanBeforeAnyConnection(t *testing.T) {
	l := cliListen(t)
	addr := "tcp://" + l.ln.Addr().String()
	tcpAddr := regexp.MustCompile(`tcp://127\.0\.0\.1:\d+`)
	tests := []struct {
		name  string
		plan  string
		flags []string
		opts  cliOpts
		code  int
		msg   string
		conns int64
	}{
		{"cm range", "unsafe_cm_range.toml", nil, cliOpts{}, exitSafety, "plan refused as unsafe", 0},
		{"overspan, allowed and confirmed", "unsafe_overspan.toml", []string{"--allow-hazardous"}, cliOpts{isTerm: true, in: "yes\n"}, exitSafety, "plan refused as unsafe", 0},
		{"no current limit", "unsafe_no_current_limit.toml", nil, cliOpts{}, exitSafety, "part.current_limit_amps", 0},
		{"hazardous", "unsafe_hazardous.toml", nil, cliOpts{}, exitSafety, "--allow-hazardous from an interactive terminal", 0},
		{"hazardous, confirmed without the option", "unsafe_hazardous.toml", nil, cliOpts{isTerm: true, in: "yes\n"}, exitSafety, "--allow-hazardous from an interactive terminal", 0},
		{"hazardous, allowed without a terminal", "unsafe_hazardous.toml", []string{"--allow-hazardous"}, cliOpts{in: "yes\n"}, exitSafety, "there is no terminal", 0},
		{"hazardous, allowed, answered no", "unsafe_hazardous.toml", []string{"--allow-hazardous"}, cliOpts{isTerm: true, in: "no\n"}, exitSafety, "not confirmed", 0},
		{"hazardous, allowed, no answer", "unsafe_hazardous.toml", []string{"--allow-hazardous"}, cliOpts{isTerm: true, in: "\n"}, exitSafety, "not confirmed", 0},
		// Not unsafe, but the units are swapped by hand and there is no
		// terminal to ask on: refused before any connection too.
		{"needs an operator", "noise_gain.toml", nil, cliOpts{}, exitUsage, "needs an operator at a terminal", 0},
		// Allowed and confirmed: the run goes on to the bench, which hangs
		// up (an instrument fault).
		{"hazardous, allowed and confirmed", "unsafe_hazardous.toml", []string{"--allow-hazardous"}, cliOpts{isTerm: true, in: "yes\n"}, exitInstrument, "", 1},
	}
	dir := t.TempDir()
	// The hazardous plan binds its supply to a profile beside it.
	cliWriteFile(t, dir, "supply_hv.toml", string(cliMust(os.ReadFile(cliRepoFile("testdata", "plans", "supply_hv.toml")))))
	for i, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			data, err := os.ReadFile(cliRepoFile("testdata", "plans", tt.plan))
			if err != nil {
				t.Fatal(err)
			}
			text := tcpAddr.ReplaceAllString(string(data), addr)
			if !strings.Contains(text, addr) {
				t.Fatalf("%s names no TCP instrument to point at the listener", tt.plan)
			}
			plan := cliWriteFile(t, dir, tt.plan, text)
			out := filepath.Join(dir, "out", string(rune('a'+i)))
			ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
			defer cancel()
			before := l.connections(t)
			r := cliRun(t, ctx, tt.opts, append([]string{"run", plan, "--out", out}, tt.flags...)...)
			cliWantCode(t, r, tt.code, "run", plan)
			if !strings.Contains(r.err, tt.msg) {
				t.Errorf("stderr does not say %q:\n%s", tt.msg, r.err)
			}
			if got := l.connections(t) - before; got != tt.conns {
				t.Errorf("the bench got %d connection(s), want %d", got, tt.conns)
			}
			if _, err := os.Stat(filepath.Join(out, "journal.jsonl")); tt.conns == 0 && err == nil {
				t.Errorf("a refused plan left a journal")
			}
		})
	}
}

// A run stopped part-way: by Ctrl-C (the context) the bench is brought to
// its safe state and the exit status is 1; by an instrument that stops
// answering, the status is 3 and the message must not claim a safe state
// the tool could not reach. Either way the journal keeps the readings and
// the message says how to continue.
func TestRunStoppedMidway(t *testing.T) {
	tests := []struct {
		name    string
		stop    func(t *testing.T, b *sim.Bench, cancel context.CancelFunc)
		code    int
		want    []string
		notWant []string
		safe    bool // the simulated bench ends with every output off and the switch open
	}{
		{"interrupted", func(t *testing.T, b *sim.Bench, cancel context.CancelFunc) { cancel() },
			exitFailure, []string{"run interrupted", "the bench is in its safe state", "nullbench resume "}, []string{"NOT REACHED"}, true},
		{"supply hangs up for good", func(t *testing.T, b *sim.Bench, cancel context.CancelFunc) {
			if err := b.InjectFault(sim.NameSupply, sim.Fault{Kind: sim.FaultDrop, Persistent: true}); err != nil {
				t.Error(err)
			}
		}, exitInstrument, []string{"run stopped", "SAFE STATE NOT REACHED", "nullbench resume "}, []string{"is in its safe state", "was brought to its safe state"}, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b := cliStartSim(t, "")
			dir := t.TempDir()
			plan := cliWriteFile(t, dir, "plan.toml", b.BenchSection()+strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"))
			journal := filepath.Join(dir, "out", "journal.jsonl")
			ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
			defer cancel()
			done := make(chan cliResult, 1)
			go func() { done <- cliRun(t, ctx, cliOpts{}, "run", plan, "--out", filepath.Join(dir, "out")) }()
			const stopAt = 5
			var r cliResult
		wait:
			for {
				select {
				case r = <-done:
					t.Fatalf("the run ended (exit %d) before %d readings:\n%s", r.code, stopAt, r.err)
				case <-time.After(time.Millisecond):
					if cliCount(t, journal, "reading") >= stopAt {
						tt.stop(t, b, cancel)
						break wait
					}
				}
			}
			r = <-done
			cliWantCode(t, r, tt.code, "run", plan)
			t.Logf("stderr ends: %s", r.err[max(0, len(r.err)-600):])
			for _, w := range tt.want {
				if !strings.Contains(r.err, w) {
					t.Errorf("stderr does not say %q:\n%s", w, r.err)
				}
			}
			for _, w := range tt.notWant {
				if strings.Contains(r.err, w) {
					t.Errorf("stderr says %q:\n%s", w, r.err)
				}
			}
			if n := cliCount(t, journal, "reading"); n < stopAt {
				t.Errorf("the journal keeps %d readings, want ≥ %d", n, stopAt)
			}
			if !tt.safe {
				return
			}
			s := b.Inspect()
			for _, c := range append(append([]sim.ChannelSnapshot(nil), s.Supply...), s.Source...) {
				if c.On && c.OutputVolts != 0 {
					t.Errorf("channel %d left on at %g V", c.Channel, c.OutputVolts)
				}
			}
			if len(s.Closed) != 0 {
				t.Errorf("switch channels left closed: %v", s.Closed)
			}
			for _, u := range s.Units {
				if u.Damaged {
					t.Errorf("unit %s damaged: %s", u.ID, u.DamageReason)
				}
			}
		})
	}
}
