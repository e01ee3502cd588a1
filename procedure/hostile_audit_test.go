package procedure

import (
	"context"
	"errors"
	"math"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"

	"nullbench/procedure/analysis"
	"nullbench/procedure/fault"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// The hostile-instrument audit: each scenario puts a scpiProxy
// (scpiproxy_test.go) between the tool and one instrument of the
// simulated bench and has it answer what no working instrument answers.
// Every scenario asserts that the run refuses the value or degrades
// safely (a point error, a problem instead of a ratio), that the part is
// never damaged (the sim's own record, which no SCPI command can reach),
// that the bench ends in its safe state or the error names what is still
// on, and that the journal gets its end record. No scenario may panic: a
// panic fails the test binary.
//
// The SCPI codes used: 9.9E37 is the overload (+INF) code and 9.91E37 the
// not-a-number code (SCPI-99 vol. 1 §7.2.1.5, clause from memory); -222 is
// "Data out of range" (SCPI-99 vol. 2 §21.8).

// armAt returns a progress hook that calls arm once, at the first point
// of U01's cmrr test at level want.
func armAt(want float64, arm func()) progressHook {
	var once sync.Once
	return progressHook{fn: func(i PointInfo) {
		if i.Unit == "U01" && i.Test == plan.TestCMRR && i.LevelVolts == want {
			once.Do(arm)
		}
	}}
}

// readBackOnCh1 rewrites the supply's MEAS:VOLT? replies for channel 1
// (V+) with f(instrument's reply, how many rewritten before).
func readBackOnCh1(f func(reply string, n int) string) func(ch, q, reply string) string {
	n := 0
	return func(ch, q, reply string) string {
		if ch != "1" || !strings.HasPrefix(strings.ToUpper(q), "MEAS:VOLT?") {
			return reply
		}
		out := f(reply, n)
		n++
		return out
	}
}

func constant(s string) func(string, int) string { return func(string, int) string { return s } }

// auditRun runs the plan journalled and checks what every scenario needs:
// no damaged unit, the journal's end record with status wantEnd.
func auditRun(t *testing.T, su *simSetup, opt RunOptions, wantEnd string) (error, *journal.Contents, string) {
	t.Helper()
	_, err, c, log := runJournalled(t, su, context.Background(), opt)
	s := su.bench.Inspect()
	for _, u := range s.Units {
		if u.Damaged {
			t.Errorf("unit %s damaged at bench %.1f s: %s", u.ID, u.DamagedAtSeconds, u.DamageReason)
		}
	}
	if c.End == nil {
		t.Errorf("no end record in the journal (run error: %v)", err)
	} else if c.End.Status != wantEnd {
		t.Errorf("journal end %q (%s), want %q", c.End.Status, c.End.Reason, wantEnd)
	}
	return err, c, log
}

// wantStopped checks a run refused a value: a RunError whose message
// holds every want, with the safe state reached and the bench off.
func wantStopped(t *testing.T, su *simSetup, err error, want ...string) {
	t.Helper()
	var re *fault.RunError
	if !errors.As(err, &re) {
		t.Fatalf("want a RunError, got %v", err)
	}
	if re.SafeState != nil {
		t.Errorf("safe state not reached: %v", re.SafeState)
	}
	checkSimBench(t, su.bench, true)
	for _, w := range want {
		if !strings.Contains(err.Error(), w) {
			t.Errorf("the error does not say %q:\n%v", w, err)
		}
	}
}

// A supply read-back the tool cannot use stops the run before the value
// reaches a fit or a ramp: the message names the instrument, channel and
// command, and why the value was refused.
func TestAuditSupplyReadBack(t *testing.T) {
	where := `psu channel 1, "INST:NSEL 1; MEAS:VOLT?"`
	for _, tc := range []struct {
		name  string
		reply func(string, int) string
		want  []string
	}{
		{"1E300", constant("+1.00000000E+300"), []string{where, "beyond the channel's +40 V rating"}},
		{"beyond the channel's rating", constant("+4.50000000E+01"), []string{where, "read-back +45 V is beyond the channel's +40 V rating"}},
		{"beyond the plan's limit", constant("+3.00000000E+01"), []string{where, "exceeds the largest voltage the plan programs on it (+25 V)"}},
		{"negative on a positive output", constant("-1.50000000E+01"), []string{where, "from the programmed"}},
		// 9.9E37 and 9.91E37 are refused by the driver itself, which
		// names the instrument and command.
		{"overload code", constant("+9.90000000E+37"), []string{"psu supply channel 1", "MEAS:VOLT?", "overload"}},
		{"not-a-number code", constant("+9.91000000E+37"), []string{"psu supply channel 1", "MEAS:VOLT?", "9.91E37 (SCPI NaN)"}},
		// A stale read-back: the value of the armed point, every time
		// after; the next level moves V+ and the stale value no longer
		// matches what was programmed.
		{"stale", func() func(string, int) string {
			var first string
			return func(r string, n int) string {
				if n == 0 {
					first = r
				}
				return first
			}
		}(), []string{where, "from the programmed"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			su, px := startHostileSim(t, plan.CMBySupplyShift, "psu")
			psu := px["psu"]
			psu.answer = readBackOnCh1(tc.reply)
			err, c, _ := auditRun(t, su, RunOptions{Progress: armAt(5, func() { psu.arm(true) })}, journal.EndAborted)
			if psu.firedCount() == 0 {
				t.Fatal("the proxy never rewrote an answer")
			}
			wantStopped(t, su, err, tc.want...)
			for _, r := range c.Readings {
				if r.ReadBack && math.Abs(r.ReadVolts-r.SetVolts) > 0.5 {
					t.Errorf("a refused read-back reached the journal as the stimulus: %+v", r)
				}
			}
		})
	}
}

// A set command the supply refuses (its error queue says -222) stops the
// run; the safe state reads V+ back (the instrument's own, plausible
// answer) and ramps down from there. When every later voltage command
// fails too, the error names the rail that could not be ramped.
func TestAuditFailedSet(t *testing.T) {
	for _, tc := range []struct {
		name     string
		apply    bool   // the instrument applied the command before failing it
		always   bool   // every later VOLT on V+ fails too
		readBack string // V+ answers this to MEAS:VOLT? once armed ("": its own)
		from     string // where the safe state's ramp of V+ starts, in the log
	}{
		{"refused, not applied", false, false, "", "from its read-back"},
		{"applied, then reported failed", true, false, "", "from its read-back"},
		{"applied, failed, read-back 1E300", true, false, "+1.00000000E+300", "from the programmed"},
		{"applied, failed, read-back NaN code", true, false, "+9.91000000E+37", "from the programmed"},
		{"every voltage command refused", false, true, "", ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			su, px := startHostileSim(t, plan.CMBySupplyShift, "psu")
			psu := px["psu"]
			n := 0
			psu.failSet = func(ch, cmd string) (bool, bool) {
				if ch != "1" || !strings.HasPrefix(strings.ToUpper(cmd), "VOLT ") {
					return false, false
				}
				n++
				return n == 1 || tc.always, tc.apply
			}
			if tc.readBack != "" {
				psu.answer = readBackOnCh1(constant(tc.readBack))
			}
			err, _, log := auditRun(t, su, RunOptions{Progress: armAt(5, func() { psu.arm(true) })}, journal.EndAborted)
			if psu.firedCount() == 0 {
				t.Fatal("the proxy never failed a set command")
			}
			var re *fault.RunError
			if !errors.As(err, &re) {
				t.Fatalf("want a RunError, got %v", err)
			}
			if !strings.Contains(err.Error(), "-222") || !strings.Contains(err.Error(), "psu") {
				t.Errorf("the error does not name the instrument and its error: %v", err)
			}
			if !tc.always {
				wantStopped(t, su, err)
				if !strings.Contains(log, "safe state: supply_pos ramps down "+tc.from) {
					t.Errorf("the log does not say where V+'s ramp started:\n%s", log)
				}
				return
			}
			// V+ cannot be ramped: the safe state must say so, naming it.
			// The relay stays closed on purpose (the part stays on its
			// rails rather than being unplugged live) and the sources are
			// off.
			if re.SafeState == nil || !strings.Contains(re.SafeState.Error(), "supply_pos") {
				t.Errorf("the safe-state problem does not name supply_pos: %v", re.SafeState)
			}
			if !strings.Contains(err.Error(), "SAFE STATE NOT REACHED") {
				t.Errorf("the error does not say the safe state was not reached: %v", err)
			}
			s := su.bench.Inspect()
			for _, c := range s.Source {
				if c.On && c.OutputVolts != 0 {
					t.Errorf("source channel %d left on at %g V", c.Channel, c.OutputVolts)
				}
			}
			t.Logf("reported: %v", re.SafeState)
		})
	}
}

// The meter answers absurd values for one point: 1E300 (beyond 1.2 × its
// range), the not-a-number code. That point is an error with the meter
// and command named, the run goes on, and the fit leaves the point out.
func TestAuditMeterAbsurd(t *testing.T) {
	for _, tc := range []struct {
		name, reply string
		want        []string // in the point's problem
	}{
		{"1E300", "+1.00000000E+300", []string{"dmm meter", `"READ?"`, "beyond 1.2 × the 10 V range"}},
		{"not-a-number code", "+9.91000000E+37", []string{"dmm meter", `"READ?"`, "9.91E37"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			su, px := startHostileSim(t, plan.CMBySupplyShift, "dmm")
			dmm := px["dmm"]
			dmm.answer = func(_, q, reply string) string {
				if !strings.HasPrefix(strings.ToUpper(q), "READ?") {
					return reply
				}
				k := strings.Count(reply, ",") + 1
				return strings.TrimSuffix(strings.Repeat(tc.reply+",", k), ",")
			}
			// Every READ? of the point after U01's cmrr level +5 V (its
			// settling readings and its measurement) answers absurdly.
			armed := false
			hook := progressHook{fn: func(i PointInfo) {
				if armed {
					dmm.arm(false)
					return
				}
				if i.Unit == "U01" && i.Test == plan.TestCMRR && i.LevelVolts == 5 {
					armed = true
					dmm.arm(true)
				}
			}}
			err, c, _ := auditRun(t, su, RunOptions{Progress: hook}, journal.EndComplete)
			if err != nil {
				t.Fatalf("the run stopped on a point error: %v", err)
			}
			if dmm.firedCount() == 0 {
				t.Fatal("the proxy rewrote no answer")
			}
			checkSimBench(t, su.bench, true)
			var bad []journal.Reading
			for _, r := range c.Readings {
				if r.Problem != "" {
					bad = append(bad, r)
				}
				// The journal keeps what the meter said (finite: NaN
				// becomes 9.91E37) only on a point flagged implausible.
				if math.IsNaN(r.MeterVolts) || math.IsInf(r.MeterVolts, 0) ||
					(math.Abs(r.MeterVolts) > 1e30 && !slices.Contains(r.Flags, journal.FlagImplausible)) {
					t.Errorf("journalled an absurd meter value %g without the flag: %+v", r.MeterVolts, r)
				}
			}
			if len(bad) != 1 || !slices.Contains(bad[0].Flags, journal.FlagImplausible) {
				t.Fatalf("want one point flagged %s: %+v", journal.FlagImplausible, bad)
			}
			for _, w := range tc.want {
				if !strings.Contains(bad[0].Problem, w) {
					t.Errorf("the point's problem %q lacks %q", bad[0].Problem, w)
				}
			}
			res, err := analysis.Analyze(su.plan, c.Readings, analysis.Inputs{})
			if err != nil {
				t.Fatal(err)
			}
			if bad[0].Unit != "U01" || bad[0].Test != plan.TestCMRR {
				t.Errorf("the flagged point is %s %s, want U01 cmrr", bad[0].Unit, bad[0].Test)
			}
			// No aol test in this plan, so U01's CMRR is reported as
			// measured, under analysis.ResultCMRRUncorrected.
			found := false
			for _, r := range res.Ratios {
				if r.Unit == "U01" && r.Name == analysis.ResultCMRRUncorrected {
					found = true
					if r.ExcludedPoints != 1 {
						t.Errorf("U01 %s excluded %d points, want 1", r.Name, r.ExcludedPoints)
					}
				}
			}
			if !found {
				t.Errorf("no U01 %s among %d ratios: the fit must still run on the other points", analysis.ResultCMRRUncorrected, len(res.Ratios))
			}
		})
	}
}

// A stale meter (the same answer, whatever the stimulus) gives no ratio
// for that unit and test: the analysis reports it as a problem with its
// cause, never a "CMRR ≥ …" from a flat line.
func TestAuditMeterStale(t *testing.T) {
	su, px := startHostileSim(t, plan.CMBySupplyShift, "dmm")
	dmm := px["dmm"]
	var first string
	dmm.answer = func(_, q, reply string) string {
		if !strings.HasPrefix(strings.ToUpper(q), "READ?") {
			return reply
		}
		if first == "" {
			first = reply
		}
		return first
	}
	// Stale once U01's first cmrr point is taken (Progress reports a
	// point after it): one real point, then the same answer to the end.
	var once sync.Once
	hook := progressHook{fn: func(i PointInfo) {
		if i.Unit == "U01" && i.Test == plan.TestCMRR {
			once.Do(func() { dmm.arm(true) })
		}
	}}
	err, c, _ := auditRun(t, su, RunOptions{Progress: hook}, journal.EndComplete)
	if err != nil {
		t.Fatalf("run: %v", err)
	}
	checkSimBench(t, su.bench, true)
	res, err := analysis.Analyze(su.plan, c.Readings, analysis.Inputs{})
	if err != nil {
		t.Fatal(err)
	}
	// With no aol test U01's CMRR would be reported as measured, under
	// analysis.ResultCMRRUncorrected; either name is a failure here.
	for _, r := range res.Ratios {
		if r.Unit == "U01" && (r.Name == plan.TestCMRR || r.Name == analysis.ResultCMRRUncorrected) {
			t.Errorf("a ratio was formed from a stale meter: %s %+v", r.Name, r.Rejection)
		}
	}
	found := false
	for _, pr := range res.Problems {
		found = found || (pr.Unit == "U01" && strings.Contains(pr.Problem, "stuck meter"))
	}
	if !found {
		t.Errorf("no stuck-meter problem for U01: %+v", res.Problems)
	}
}

// The bench is left powered (±15 V, a relay closed, as a kill -9 leaves
// it) and V+ answers absurdly to the start-up switch-off's read-backs:
// the switch-off never commands more than the 15 V programmed, moves
// only towards 0 V in ramp steps, and the run then completes.
func TestAuditStartupAbsurdReadBack(t *testing.T) {
	for _, tc := range []struct{ name, reply string }{
		{"1E300", "+1.00000000E+300"},
		{"30 V", "+3.00000000E+01"},
		{"negative", "-1.50000000E+01"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			su, px := startHostileSim(t, plan.CMBySupplyShift, "psu")
			leaveBenchOn(t, su)
			psu := px["psu"]
			psu.answer = readBackOnCh1(func(r string, n int) string {
				if n < 2 { // both read-backs of the switch-off
					return tc.reply
				}
				return r
			})
			psu.arm(true)
			err, _, _ := auditRun(t, su, RunOptions{}, journal.EndComplete)
			if err != nil {
				t.Fatalf("run: %v", err)
			}
			checkSimBench(t, su.bench, true)
			// The voltage commands on V+ up to its first 0 V: the
			// switch-off.
			var off []float64
			psu.mu.Lock()
			for _, l := range psu.seen {
				ch, cmd, _ := strings.Cut(l, "|")
				if ch != "1" || !strings.HasPrefix(strings.ToUpper(cmd), "VOLT ") {
					continue
				}
				v, err := strconv.ParseFloat(strings.TrimSpace(cmd[5:]), 64)
				if err != nil {
					t.Errorf("bad command %q", cmd)
					continue
				}
				off = append(off, v)
				if v == 0 {
					break
				}
			}
			psu.mu.Unlock()
			step := safety.RampStep(su.plan)
			if len(off) == 0 || off[len(off)-1] != 0 {
				t.Fatalf("no switch-off ramp to 0 V: %v", off)
			}
			for i, v := range off {
				if v > 15 {
					t.Errorf("switch-off commanded %g V, above the 15 V programmed: %v", v, off)
				}
				if i > 0 && (v > off[i-1] || off[i-1]-v > step+1e-9) {
					t.Errorf("switch-off step %g V -> %g V goes up or exceeds the ramp step: %v", off[i-1], v, off)
				}
			}
		})
	}
}

// A source left on (2 V on source_cm, with the rails at ±15 V, as a kill
// -9 leaves it) that answers 1E300 to both read-backs of the start-up
// switch-off is switched off without a ramp, never programmed from the
// answer, and the log says so; the run then completes.
func TestAuditStartupSourceAbsurdReadBack(t *testing.T) {
	su, px := startHostileSim(t, plan.CMBySupplyShift, "src")
	leaveBenchOn(t, su)
	ctx := context.Background()
	if err := su.rig.SourceCM.SetVolts(ctx, 2); err != nil {
		t.Fatal(err)
	}
	if err := su.rig.SourceCM.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	src := px["src"]
	n := 0
	src.answer = func(ch, q, reply string) string {
		if ch != "1" || !strings.HasPrefix(strings.ToUpper(q), "MEAS:VOLT?") || n >= 2 {
			return reply
		}
		n++
		return "+1.00000000E+300"
	}
	src.mu.Lock()
	before := len(src.seen)
	src.mu.Unlock()
	src.arm(true)
	err, _, log := auditRun(t, su, RunOptions{}, journal.EndComplete)
	if err != nil {
		t.Fatalf("run: %v", err)
	}
	checkSimBench(t, su.bench, true)
	if !strings.Contains(log, "source_cm: switched off without a ramp") || !strings.Contains(log, `src channel 1, "INST:NSEL 1; MEAS:VOLT?"`) {
		t.Errorf("the log does not say the source was switched off without a ramp, naming it:\n%s", log)
	}
	// Between the run's start and channel 1's OUTP OFF, no voltage
	// command reached channel 1.
	src.mu.Lock()
	defer src.mu.Unlock()
	for _, l := range src.seen[before:] {
		ch, cmd, _ := strings.Cut(l, "|")
		if ch != "1" {
			continue
		}
		u := strings.ToUpper(cmd)
		if strings.HasPrefix(u, "OUTP OFF") {
			break
		}
		if strings.HasPrefix(u, "VOLT ") {
			t.Errorf("%q sent to source channel 1 before it was switched off", cmd)
		}
	}
}
