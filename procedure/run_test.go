package procedure

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
	"nullbench/procedure/fault"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// testPlan is a small nulling-loop plan for HX-4107 op-amps (invented part)
// on a switch matrix, built in code with the defaults applied, then
// shortened: 1 s dwell, 4 readings, 10 s settle time-out.
func testPlan() *plan.Plan {
	p := &plan.Plan{
		Campaign: plan.Campaign{Name: "HX-4107 runner test", Lot: "L-TEST"},
		Bench: plan.Bench{TimeScale: 1, Instruments: map[string]plan.Instrument{
			"dmm":     {Address: "tcp://127.0.0.1:1", Profile: "dmm"},
			"psu":     {Address: "tcp://127.0.0.1:2", Profile: "supply2"},
			"src":     {Address: "tcp://127.0.0.1:3", Profile: "source3"},
			"mux":     {Address: "tcp://127.0.0.1:4", Profile: "switch"},
			"chamber": {Address: "tcp://127.0.0.1:5", Profile: "chamber"},
		}, Roles: plan.Roles{
			Meter:     plan.RoleBinding{Instrument: "dmm"},
			SupplyPos: plan.RoleBinding{Instrument: "psu", Channel: "1"},
			SupplyNeg: plan.RoleBinding{Instrument: "psu", Channel: "2", Negative: true},
			SourceCM:  plan.RoleBinding{Instrument: "src", Channel: "1"},
			SourceRef: plan.RoleBinding{Instrument: "src", Channel: "3"},
			Switch:    plan.RoleBinding{Instrument: "mux"},
		}},
		Fixture: plan.Fixture{Kind: plan.FixtureNullingLoop, NoiseGain: 1000, NoiseGainTolerance: 0.001,
			CommonMode: plan.CMBySupplyShift, MaxStimulusVolts: 12},
		Part: plan.Part{Number: "HX-4107", NominalPosVolts: 15, NominalNegVolts: -15, MaxSupplySpanVolts: 44,
			CMHeadroomPosVolts: 2, CMHeadroomNegVolts: 2, CMMarginVolts: 0.5, CurrentLimitAmps: 0.05},
		Tests: []plan.Test{
			{Kind: plan.TestCMRR, Levels: []float64{-10, -5, 0, 5, 10}},
			{Kind: plan.TestPSRRPos, Levels: []float64{-5, 0, 5}},
			{Kind: plan.TestPSRRNeg, Levels: []float64{-5, 0, 5}},
			{Kind: plan.TestPSRRSym, Levels: []float64{-4, 0, 4}},
			{Kind: plan.TestAOL, Levels: []float64{-5, 0, 5}},
		},
		Units: []plan.Unit{{ID: "U01", Channel: "101"}, {ID: "U02", Channel: "102"}},
		Hash:  "0123456789abcdef-test-plan",
	}
	p.ApplyDefaults()
	for i := range p.Tests {
		p.Tests[i].DwellSeconds = 1
		p.Tests[i].Readings = 4
		p.Tests[i].NPLC = 1
		p.Tests[i].SettleTimeoutSeconds = 10
	}
	return p
}

// withChamber adds a chamber with the given points.
func withChamber(p *plan.Plan, points ...float64) *plan.Plan {
	p.Bench.Roles.Chamber = plan.RoleBinding{Instrument: "chamber"}
	p.Bench.Roles.Thermometer = plan.RoleBinding{Instrument: "chamber"}
	p.Temperature = plan.Temperature{Mode: plan.TempChamber, PointsCelsius: points, SoakToleranceC: 0.5, SoakSeconds: 120,
		SoakTimeoutSeconds: 3600, RampMaxCPerMinute: 10, AmbientCelsius: 25}
	return p
}

// boardPlan is an HB-220 board plan (invented part) with a board_cmrr
// test.
func boardPlan() *plan.Plan {
	p := testPlan()
	p.Bench.Roles.SourceRef = plan.RoleBinding{}
	p.Bench.Roles.SourceDiff = plan.RoleBinding{Instrument: "src", Channel: "2"}
	p.Fixture = plan.Fixture{Kind: plan.FixtureBoard, CommonMode: plan.CMByInputDrive, BoardGain: 10, ResistorTolerance: 0.001, MaxStimulusVolts: 12}
	p.Part.Number = "HB-220"
	p.Part.MaxSupplySpanVolts = 36
	p.Tests = []plan.Test{
		{Kind: plan.TestBoardCMRR, Levels: []float64{-8, 0, 8}, DiffLevels: []float64{-0.5, 0, 0.5}},
		{Kind: plan.TestBoardPSRRPos, Levels: []float64{-2, 0, 2}},
	}
	p.Units = []plan.Unit{{ID: "B01", Channel: "201"}}
	p.ApplyDefaults()
	for i := range p.Tests {
		p.Tests[i].DwellSeconds = 1
		p.Tests[i].Readings = 4
		p.Tests[i].SettleTimeoutSeconds = 10
	}
	return p
}

func runFake(ctx context.Context, t *testing.T, p *plan.Plan, fb *fakeBench, opt RunOptions) (*Outcome, error) {
	t.Helper()
	opt.Clock = fb.clk
	if opt.Log == nil {
		opt.Log = &bytes.Buffer{}
	}
	return Run(ctx, p, fb.rig(), opt)
}

func noViolations(t *testing.T, fb *fakeBench) {
	t.Helper()
	if len(fb.violations) > 0 {
		t.Fatalf("%d violation(s) of the part's limits, first: %s", len(fb.violations), strings.Join(fb.violations[:min(5, len(fb.violations))], "\n"))
	}
}

// keySet returns the work keys of readings, failing on a duplicate.
func keySet(t *testing.T, rs []journal.Reading) map[plan.WorkKey]bool {
	t.Helper()
	m := map[plan.WorkKey]bool{}
	for _, r := range rs {
		k := journal.KeyOf(r)
		if m[k] {
			t.Fatalf("point %+v measured twice", k)
		}
		m[k] = true
	}
	return m
}

func TestRunCompleteLot(t *testing.T) {
	p := withChamber(testPlan(), 25, 60)
	fb := newFakeBench(p)
	prog := &recProgress{}
	out, err := runFake(context.Background(), t, p, fb, RunOptions{Progress: prog})
	if err != nil {
		t.Fatal(err)
	}
	noViolations(t, fb)
	// 2 temperatures × 2 units × (cmrr 10 + psrr_pos 6 + psrr_neg 6 +
	// psrr_sym 6 + aol 6) points: zigzag visits each level twice.
	const want = 2 * 2 * (10 + 6 + 6 + 6 + 6)
	if out.Total != want || out.Measured != want || len(out.Readings) != want || !out.Complete {
		t.Fatalf("total %d measured %d readings %d complete %v, want %d", out.Total, out.Measured, len(out.Readings), out.Complete, want)
	}
	keySet(t, out.Readings)

	calls := fb.callsSnapshot()
	// The meter is configured once per test, unit and temperature.
	conf := 0
	for _, c := range calls {
		if c.Role == plan.RoleMeter && c.Op == "configure" {
			conf++
		}
	}
	if conf != 2*2*5 {
		t.Errorf("meter configured %d times, want %d (once per test, unit and temperature)", conf, 2*2*5)
	}
	// Bench left off, chamber back at ambient, switch open.
	for role, o := range fb.out {
		if o.on || o.volts != 0 {
			t.Errorf("%s left at %g V, on=%v", role, o.volts, o.on)
		}
	}
	if last := fb.setPoints[len(fb.setPoints)-1].c; last != 25 {
		t.Errorf("chamber left at %g °C, want ambient 25", last)
	}
	if len(fb.closed) != 0 {
		t.Errorf("switch channels left closed: %v", fb.closed)
	}
	// The set point never moves faster than ramp_max_c_per_min.
	rate := p.Temperature.RampMaxCPerMinute
	for i := 1; i < len(fb.setPoints); i++ {
		a, b := fb.setPoints[i-1], fb.setPoints[i]
		if dc, dt := math.Abs(b.c-a.c), (b.at - a.at).Minutes(); dc > rate*dt+1e-9 {
			t.Errorf("set point %g -> %g °C in %.3f min: faster than %g °C/min", a.c, b.c, dt, rate)
		}
	}
	// Every reading carries the chamber's temperature, within the soak
	// tolerance of its point once soaked (the fake's air follows the set
	// point exponentially, so it stays there).
	for _, r := range out.Readings {
		pt := p.TemperaturePoints()[r.TempIndex]
		if math.Abs(r.TemperatureC-pt) > p.Temperature.SoakToleranceC {
			t.Errorf("%+v: temperature %.3f °C, point %g °C", journal.KeyOf(r), r.TemperatureC, pt)
		}
	}
	// Progress: Begin once with the total, one Point per point, End once;
	// the estimate of the time left ends at zero.
	if prog.began != 1 || prog.ended != 1 || prog.total != want || prog.done != 0 || len(prog.points) != want {
		t.Fatalf("progress: began %d ended %d total %d done %d points %d", prog.began, prog.ended, prog.total, prog.done, len(prog.points))
	}
	mid, last := prog.points[want/2], prog.points[want-1]
	if mid.Left <= 0 || last.Left != 0 || last.Done != want || mid.LeftWall != mid.Left {
		t.Errorf("progress estimates: middle %+v, last %+v", mid, last)
	}
	if mid.Unit == "" || mid.Test == "" || mid.Steps == 0 {
		t.Errorf("progress point lacks its place: %+v", mid)
	}
}

// TestRunLevelsReachThePart checks, at each averaged reading, the voltages
// the fake part actually had against StateAt (the safety check's level
// semantics), and the executed order against the orders documented for
// OrderLevels (written out by hand here).
func TestRunLevelsReachThePart(t *testing.T) {
	levels := []float64{-10, -5, 0, 5, 10}
	cases := []struct {
		order string
		want  []float64
	}{
		{plan.OrderZigzag, []float64{0, 5, -5, 10, -10, -10, 10, -5, 5, 0}},
		{plan.OrderAscending, []float64{-10, -5, 0, 5, 10}},
		{plan.OrderSymmetric, []float64{-10, -5, 0, 5, 10, 10, 5, 0, -5, -10}},
	}
	for _, commonMode := range []string{plan.CMBySupplyShift, plan.CMByInputDrive} {
		for _, tc := range cases {
			t.Run(commonMode+"/"+tc.order, func(t *testing.T) {
				p := testPlan()
				p.Fixture.CommonMode = commonMode
				p.Tests = []plan.Test{p.Tests[0]}
				p.Tests[0].Levels = levels
				p.Tests[0].Order = tc.order
				p.Tests[0].Repeats = 2
				p.Units = p.Units[:1]
				fb := newFakeBench(p)
				var seen [][5]float64
				var spot measurementSpotter
				fb.onCall = func(c fakeCall) {
					if spot.measurement(c) {
						pos, neg, cm, diff, ref := fb.terminals()
						seen = append(seen, [5]float64{pos, neg, cm, diff, ref})
					}
				}
				out, err := runFake(context.Background(), t, p, fb, RunOptions{})
				if err != nil {
					t.Fatal(err)
				}
				noViolations(t, fb)
				// Shifting both rails, the rail that shrinks the span moves
				// first (derived from the span rating, no published source):
				// the span never exceeds the nominal
				// 30 V, where moving the other rail first would reach
				// 30 V + one ramp step.
				if fb.maxSpan > 30+1e-9 {
					t.Errorf("the span reached %g V", fb.maxSpan)
				}
				want := append(append([]float64(nil), tc.want...), tc.want...) // two repeats
				var got []float64
				for _, r := range out.Readings {
					got = append(got, r.SetVolts)
				}
				if !slices.Equal(got, want) {
					t.Fatalf("levels measured in order %v, want %v", got, want)
				}
				for i, r := range out.Readings {
					s := plan.StateAt(p, &p.Tests[0], "", r.SetVolts)
					w := [5]float64{s.PosVolts, s.NegVolts, s.CMVolts, s.DiffVolts, s.RefVolts}
					if seen[i] != w {
						t.Errorf("reading %d (level %g): the part had %v, StateAt says %v", i, r.SetVolts, seen[i], w)
					}
					if r.Repeat != i/len(tc.want) || r.Step != i%len(tc.want) {
						t.Errorf("reading %d: repeat %d step %d", i, r.Repeat, r.Step)
					}
				}
				// The readings follow the fake part: driving the inputs
				// gives K·kc per volt; shifting both rails by -L with the
				// inputs and the output held at ground gives
				// ΔVio = -(kc + ko)·(-L) (derived from kc + kp + kn + ko = 0,
				// no published source): the supply-shift
				// method carries the open-loop-gain term.
				slope := fitSlope(out.Readings)
				w := fb.k * fb.kc
				if commonMode == plan.CMBySupplyShift {
					w = fb.k * (fb.kc + fb.ko)
				}
				if math.Abs(slope-w) > 1e-12 {
					t.Errorf("slope of the meter against the level %g V/V, the fake part gives %g", slope, w)
				}
			})
		}
	}
}

// fitSlope is the least-squares slope of MeterVolts on SetVolts (GUM H.3).
func fitSlope(rs []journal.Reading) float64 {
	var mx, my float64
	for _, r := range rs {
		mx += r.SetVolts
		my += r.MeterVolts
	}
	mx /= float64(len(rs))
	my /= float64(len(rs))
	var sxy, sxx float64
	for _, r := range rs {
		sxy += (r.SetVolts - mx) * (r.MeterVolts - my)
		sxx += (r.SetVolts - mx) * (r.SetVolts - mx)
	}
	return sxy / sxx
}

func TestRunBoardSweeps(t *testing.T) {
	p := boardPlan()
	fb := newFakeBench(p)
	var seen [][5]float64
	var spot measurementSpotter
	fb.onCall = func(c fakeCall) {
		if spot.measurement(c) {
			pos, neg, cm, diff, ref := fb.terminals()
			seen = append(seen, [5]float64{pos, neg, cm, diff, ref})
		}
	}
	out, err := runFake(context.Background(), t, p, fb, RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	noViolations(t, fb)
	var cm, diff []journal.Reading
	for i, r := range out.Readings {
		if r.Test != plan.TestBoardCMRR {
			continue
		}
		switch r.Part {
		case plan.PartCM:
			cm = append(cm, r)
			if seen[i][3] != 0 || seen[i][2] != r.SetVolts {
				t.Errorf("cm sweep level %g: Vcm %g, Vd %g (want Vd = 0)", r.SetVolts, seen[i][2], seen[i][3])
			}
		case plan.PartDiff:
			diff = append(diff, r)
			if seen[i][2] != 0 || seen[i][3] != r.SetVolts {
				t.Errorf("diff sweep level %g: Vcm %g, Vd %g (want Vcm = 0)", r.SetVolts, seen[i][2], seen[i][3])
			}
		default:
			t.Errorf("board_cmrr reading without part: %+v", r)
		}
	}
	if len(cm) != 6 || len(diff) != 6 {
		t.Fatalf("%d cm and %d diff points, want 6 each", len(cm), len(diff))
	}
	// The diff sweep's slope is the board gain G = 10 (fake model), the cm
	// sweep's G·kc.
	if s := fitSlope(diff); math.Abs(s-10) > 1e-9 {
		t.Errorf("differential gain %g, want 10", s)
	}
	if s := fitSlope(cm); math.Abs(s-10*fb.kc) > 1e-12 {
		t.Errorf("common-mode gain %g, want %g", s, 10*fb.kc)
	}
}

// TestRunReadBack: supplies and sources that read back 0.1 % high give the
// applied stimulus, worked out by hand for each test's level semantics.
func TestRunReadBack(t *testing.T) {
	p := testPlan()
	p.Units = p.Units[:1]
	fb := newFakeBench(p)
	fb.readGain = 0.001
	out, err := runFake(context.Background(), t, p, fb, RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range out.Readings {
		L := r.SetVolts
		var want float64
		switch r.Test {
		case plan.TestCMRR: // rails 15-L and -15-L read 1.001×: equivalent Vcm = -(V+ + V-)/2 = 1.001·L
			want = 1.001 * L
		case plan.TestPSRRPos: // V+ = 15 + L read 1.001×: change 1.001·(15+L) - 15
			want = 1.001*(15+L) - 15
		case plan.TestPSRRNeg: // V- = -15 - L read 1.001×: growth of |V-| = 1.001·(15+L) - 15
			want = 1.001*(15+L) - 15
		case plan.TestPSRRSym: // span 30 + L read 1.001×: change 1.001·(30+L) - 30
			want = 1.001*(30+L) - 30
		case plan.TestAOL: // the reference source read 1.001×
			want = 1.001 * L
		}
		if !r.ReadBack || math.Abs(r.ReadVolts-want) > 1e-9 {
			t.Errorf("%s level %g: read back %v (%.9f V), want %.9f V", r.Test, L, r.ReadBack, r.ReadVolts, want)
		}
	}
}

func TestRunSettling(t *testing.T) {
	cases := []struct {
		name          string
		tail          float64
		tau           time.Duration
		flagged       bool
		minS, maxS    float64
		settleTimeout float64
	}{
		// No tail: two successive readings agree at once, 1 s after the
		// 1 s dwell (SettleInterval).
		{"settled", 0, 0, false, 1.9, 2.3, 10},
		// A 1 mV tail decaying with τ = 2 s: readings 1 s apart differ by
		// 1e-3·e^(-t/2)·(1 - e^(-1/2)) < 50 µV once t > 4.13 s after the
		// step, i.e. the 5th one-second reading after the dwell.
		{"tail", 1e-3, 2 * time.Second, false, 4.1, 6.5, 10},
		// A 100 mV tail with τ = 100 s: successive readings differ by
		// about 0.1·(1 - e^(-1/100)) ≈ 1 mV for the whole 10 s time-out:
		// flagged, settle time = dwell + time-out (+ the last reading).
		{"timeout", 0.1, 100 * time.Second, true, 11, 12.5, 10},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			p := testPlan()
			p.Tests = []plan.Test{p.Tests[4]} // aol
			p.Tests[0].SettleTimeoutSeconds = tc.settleTimeout
			p.Units = p.Units[:1]
			fb := newFakeBench(p)
			fb.tail, fb.tau = tc.tail, tc.tau
			out, err := runFake(context.Background(), t, p, fb, RunOptions{})
			if err != nil {
				t.Fatal(err)
			}
			for i, r := range out.Readings {
				has := slices.Contains(r.Flags, journal.FlagSettleTimeout)
				if tc.name == "tail" && i > 0 && out.Readings[i-1].SetVolts == r.SetVolts {
					continue // no change of level, nothing to settle (zigzag turns back on itself)
				}
				if has != tc.flagged {
					t.Errorf("step %d: flagged %v, want %v (settle %.2f s)", r.Step, has, tc.flagged, r.SettleSeconds)
				}
				if r.SettleSeconds < tc.minS || r.SettleSeconds > tc.maxS {
					t.Errorf("step %d: settle %.2f s, want %.1f…%.1f s", r.Step, r.SettleSeconds, tc.minS, tc.maxS)
				}
			}
			if tc.flagged && out.Flagged != len(out.Readings) {
				t.Errorf("outcome counts %d flagged of %d", out.Flagged, len(out.Readings))
			}
		})
	}
}

func TestRunRefusesUnsafePlanBeforeContact(t *testing.T) {
	cases := []struct {
		name   string
		mutate func(p *plan.Plan)
	}{
		{"span above the maximum", func(p *plan.Plan) { p.Tests[1].Levels = []float64{-5, 0, 20} }},
		{"common mode out of range", func(p *plan.Plan) { p.Tests[0].Levels = []float64{-14, 0, 14} }},
		{"no current limit", func(p *plan.Plan) { p.Part.CurrentLimitAmps = 0 }},
		{"hazardous without consent", func(p *plan.Plan) {
			p.Part.MaxSupplySpanVolts = 200
			p.Part.NominalPosVolts, p.Part.NominalNegVolts = 40, -40
		}},
		{"invalid plan", func(p *plan.Plan) { p.Tests[0].Readings = 0 }},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			p := testPlan()
			tc.mutate(p)
			fb := newFakeBench(p)
			out, err := runFake(context.Background(), t, p, fb, RunOptions{})
			if err == nil {
				t.Fatal("unsafe plan accepted")
			}
			var se *safety.SafetyError
			var pe plan.Errors
			if !errors.As(err, &se) && !errors.As(err, &pe) {
				t.Errorf("error %T is neither a SafetyError nor plan.Errors: %v", err, err)
			}
			if out != nil || len(fb.callsSnapshot()) != 0 {
				t.Fatalf("%d instrument calls made before the refusal: %v", len(fb.calls), err)
			}
		})
	}
	t.Run("hazardous with full consent runs", func(t *testing.T) {
		p := testPlan()
		p.Part.MaxSupplySpanVolts = 80
		p.Part.NominalPosVolts, p.Part.NominalNegVolts = 35, -35 // 70 V across the part, above 60 V DC
		p.Tests = p.Tests[1:2]
		p.Units = p.Units[:1]
		for _, consent := range []safety.HazardConsent{{AllowOption: true}, {AllowOption: true, Interactive: true}} {
			fb := newFakeBench(p)
			if _, err := runFake(context.Background(), t, p, fb, RunOptions{Consent: consent}); err == nil || len(fb.calls) != 0 {
				t.Fatalf("consent %+v: err %v after %d calls", consent, err, len(fb.calls))
			}
		}
		fb := newFakeBench(p)
		out, err := runFake(context.Background(), t, p, fb, RunOptions{Consent: safety.HazardConsent{AllowOption: true, Interactive: true, Confirmed: true}})
		if err != nil || !out.Complete {
			t.Fatalf("err %v", err)
		}
		noViolations(t, fb)
	})
	t.Run("missing role on the rig", func(t *testing.T) {
		p := testPlan()
		fb := newFakeBench(p)
		rig := fb.rig()
		rig.SourceRef = nil
		_, err := Run(context.Background(), p, rig, RunOptions{Clock: fb.clk})
		if err == nil || !strings.Contains(err.Error(), "source_ref") || len(fb.calls) != 0 {
			t.Fatalf("err %v after %d calls", err, len(fb.calls))
		}
	})
	t.Run("hand swap without operator", func(t *testing.T) {
		p := testPlan()
		p.Bench.Roles.Switch = plan.RoleBinding{}
		for i := range p.Units {
			p.Units[i].Channel = ""
		}
		fb := newFakeBench(p)
		_, err := runFake(context.Background(), t, p, fb, RunOptions{})
		if err == nil || !strings.Contains(err.Error(), "operator") || len(fb.calls) != 0 {
			t.Fatalf("err %v after %d calls", err, len(fb.calls))
		}
	})
}

// measurementSpotter tells the meter's measurement reads from its settling
// reads in the fake's call log. Both are read-n calls (the settling check
// averages as many readings per trigger as the measurement), and the runner
// reads the stimulus back between the last settling read and the
// measurement, so a measurement is the first read-n after a read-volts.
type measurementSpotter struct{ afterReadBack bool }

// measurement reports whether c is a measurement read; feed it every call
// in order.
func (s *measurementSpotter) measurement(c fakeCall) bool {
	switch c.Op {
	case "read-volts":
		s.afterReadBack = true
	case "set-volts", "output", "current-limit", "close", "open", "open-all":
		// A read-back followed by a move is not a point's read-back (the
		// bench is switched off at the start from read-back values).
		s.afterReadBack = false
	case "read-n":
		was := s.afterReadBack
		s.afterReadBack = false
		return was
	}
	return false
}

// failNthMeterRead is failNth for the meter's nth measurement read
// (measurement true) or its nth settling read (false).
func failNthMeterRead(measurement bool, nth int, err error, sticky bool) func(fakeCall) error {
	var spot measurementSpotter
	seen, dead := 0, false
	return func(c fakeCall) error {
		if dead && c.Role == plan.RoleMeter {
			return fmt.Errorf("%s: %w", c, err)
		}
		if spot.measurement(c) == measurement && c.Op == "read-n" {
			if seen++; seen == nth {
				dead = sticky
				return fmt.Errorf("%s: %w", c, err)
			}
		}
		return nil
	}
}

// lastReadCall is the number of the last call that read something.
func lastReadCall(fb *fakeBench) int {
	n := 0
	for _, c := range fb.callsSnapshot() {
		if strings.HasPrefix(c.Op, "read") {
			n = c.N
		}
	}
	return n
}

// checkSafeState checks the calls made after call n (the fault): every
// source call comes before the first supply call; then, as supplies says,
// the supplies end at 0 V and off ("down"), are not touched ("left", a
// source could not be switched off), or were tried ("dead"); the chamber
// (if used) is back at ambient.
func checkSafeState(t *testing.T, fb *fakeBench, p *plan.Plan, after int, supplies string) {
	t.Helper()
	calls := fb.callsSnapshot()
	lastSrc, firstSup := -1, -1
	for _, c := range calls[after:] {
		switch {
		case isSourceRole(c.Role) && (c.Op == "set-volts" || c.Op == "output"):
			lastSrc = c.N
		case (c.Role == plan.RoleSupplyPos || c.Role == plan.RoleSupplyNeg) && (c.Op == "set-volts" || c.Op == "output") && firstSup < 0:
			firstSup = c.N
		}
	}
	if lastSrc > 0 && firstSup > 0 && lastSrc > firstSup {
		t.Errorf("a source was driven (call %d) after the supplies started down (call %d):\n%s", lastSrc, firstSup, joinCalls(calls[after:]))
	}
	switch supplies {
	case "left":
		if firstSup > 0 {
			t.Errorf("supplies touched (call %d) although a source could not be switched off", firstSup)
		}
	case "dead":
		if firstSup < 0 {
			t.Error("the safe state did not try the supplies")
		}
	case "down":
		for _, role := range safety.SourceRoles(p) {
			if o := fb.out[role]; o.on {
				t.Errorf("%s left on at %g V", role, o.volts)
			}
		}
		for _, role := range []string{plan.RoleSupplyPos, plan.RoleSupplyNeg} {
			if o := fb.out[role]; o.on || o.volts != 0 {
				t.Errorf("%s left at %g V, on=%v", role, o.volts, o.on)
			}
		}
	default:
		t.Fatalf("bad expectation %q", supplies)
	}
	if p.Temperature.Mode == plan.TempChamber && len(fb.setPoints) > 0 {
		if last := fb.setPoints[len(fb.setPoints)-1].c; last != p.Temperature.AmbientCelsius {
			t.Errorf("chamber left at %g °C, want ambient %g", last, p.Temperature.AmbientCelsius)
		}
	}
}

func TestRunFaultBringsBenchToSafeState(t *testing.T) {
	scpiErr := &instrument.InstrumentError{Instrument: "dmm", Command: "READ?", Code: -222, Message: "Data out of range"}
	cases := []struct {
		name   string
		plan   func() *plan.Plan
		fault  func() func(fakeCall) error
		cancel func(c fakeCall) bool // cancel the run's context after this call
		// expectations
		is          error
		stage       string
		unit, test  string
		interrupted bool
		supplies    string // after the fault: "down" (ramped down and off), "left" (left on: a source could not be switched off), "dead" (tried, did not answer)
		safeOK      bool   // the safe state is reached without errors
	}{
		{name: "meter error mid-test", plan: testPlan,
			fault: func() func(fakeCall) error { return failNthMeterRead(true, 14, scpiErr, false) },
			is:    scpiErr, stage: stageMeasure, unit: "U01", test: plan.TestPSRRPos, supplies: "down", safeOK: true},
		{name: "supply time-out once", plan: testPlan,
			fault: func() func(fakeCall) error {
				return failNth(plan.RoleSupplyPos, "set-volts", 40, instrument.ErrTimeout, false)
			},
			is: instrument.ErrTimeout, stage: stageLevel, unit: "U01", test: plan.TestCMRR, supplies: "down", safeOK: true},
		{name: "supply instrument stops answering", plan: testPlan,
			fault: func() func(fakeCall) error {
				return failNth(plan.RoleSupplyNeg, "set-volts", 60, instrument.ErrTimeout, true)
			},
			is: instrument.ErrTimeout, stage: stageLevel, unit: "U01", supplies: "dead", safeOK: false},
		{name: "meter connection lost", plan: testPlan,
			fault: func() func(fakeCall) error { return failNthMeterRead(false, 30, errLost, true) },
			is:    instrument.ErrClosed, stage: stageSettle, unit: "U01", supplies: "down", safeOK: true},
		{name: "ctrl-c while settling", plan: testPlan,
			cancel: func() func(c fakeCall) bool {
				n := 0
				var spot measurementSpotter
				return func(c fakeCall) bool {
					if !spot.measurement(c) && c.Op == "read-n" {
						n++
					}
					return n == 25
				}
			}(),
			is: context.Canceled, stage: stageSettle, unit: "U01", interrupted: true, supplies: "down", safeOK: true},
		{name: "ctrl-c on the second unit's power-up", plan: testPlan,
			cancel: func() func(c fakeCall) bool {
				n := 0
				return func(c fakeCall) bool {
					if c.Role == plan.RoleSupplyPos && c.Op == "output" && c.On {
						n++
					}
					return n == 2
				}
			}(),
			is: context.Canceled, stage: stagePowerUp, unit: "U02", interrupted: true, supplies: "down", safeOK: true},
		{name: "input drive source lost while driving", plan: func() *plan.Plan {
			p := testPlan()
			p.Fixture.CommonMode = plan.CMByInputDrive
			p.Tests = []plan.Test{p.Tests[0]}
			p.Tests[0].Order = plan.OrderAscending
			return p
		},
			// point 4 is at +5 V: the source dies before it is read back
			// (read-back 5: the first is the check before the first unit)
			fault: func() func(fakeCall) error { return failNth(plan.RoleSourceCM, "read-volts", 5, errLost, true) },
			is:    instrument.ErrClosed, stage: stageReadBack, unit: "U01", test: plan.TestCMRR, supplies: "left", safeOK: false},
		{name: "chamber soak time-out", plan: func() *plan.Plan {
			p := withChamber(testPlan(), 25, 60)
			p.Temperature.SoakTimeoutSeconds = 600
			return p
		},
			fault: nil, stage: stageSoak, supplies: "down", safeOK: true},
		{name: "switch refuses a channel", plan: testPlan,
			fault: func() func(fakeCall) error {
				return failNth(plan.RoleSwitch, "close", 2, errors.New("mux: ROUT:CLOS (@102): -222"), false)
			},
			stage: stageSelect, unit: "U02", supplies: "down", safeOK: true},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			p := tc.plan()
			fb := newFakeBench(p)
			if tc.name == "chamber soak time-out" {
				fb.chamberTau = time.Hour // far too slow to get within 0.5 °C of 60 °C in 600 s
			}
			if tc.fault != nil {
				fb.fault = tc.fault()
			}
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			faultAt := 0
			if tc.cancel != nil {
				fb.onCall = func(c fakeCall) {
					if faultAt == 0 && tc.cancel(c) {
						faultAt = c.N
						cancel()
					}
				}
			}
			if tc.fault != nil {
				inner := fb.fault
				fb.fault = func(c fakeCall) error {
					err := inner(c)
					if err != nil && faultAt == 0 {
						faultAt = c.N
					}
					return err
				}
			}
			var log bytes.Buffer
			out, err := runFake(ctx, t, p, fb, RunOptions{Log: &log})
			var re *fault.RunError
			if !errors.As(err, &re) {
				t.Fatalf("error %T %v, want *fault.RunError", err, err)
			}
			if out == nil || out.Complete {
				t.Fatalf("outcome %+v", out)
			}
			if tc.is != nil && !errors.Is(err, tc.is) {
				t.Errorf("error does not wrap %v: %v", tc.is, err)
			}
			if re.Stage != tc.stage || (tc.unit != "" && re.Unit != tc.unit) || (tc.test != "" && re.Test != tc.test) || re.Interrupted != tc.interrupted {
				t.Errorf("stage %q unit %q test %q interrupted %v; want %q %q %q %v\n%v", re.Stage, re.Unit, re.Test, re.Interrupted, tc.stage, tc.unit, tc.test, tc.interrupted, err)
			}
			if (re.SafeState == nil) != tc.safeOK {
				t.Errorf("safe state error %v, want reached = %v", re.SafeState, tc.safeOK)
			}
			if tc.supplies == "left" && !strings.Contains(err.Error(), "LEFT ON") {
				t.Errorf("error does not say the supplies were left on: %v", err)
			}
			msg := err.Error()
			for _, want := range []string{tc.unit, tc.stage} {
				if !strings.Contains(msg, want) {
					t.Errorf("error message lacks %q: %s", want, msg)
				}
			}
			if re.AtStep && !strings.Contains(msg, "level") {
				t.Errorf("error at a step does not name the level: %s", msg)
			}
			noViolations(t, fb)
			if faultAt == 0 { // no injected fault: the safe state follows the last reading
				faultAt = lastReadCall(fb)
			}
			checkSafeState(t, fb, p, faultAt, tc.supplies)
			// Readings taken before the fault are kept.
			if tc.stage == stageMeasure && out.Measured == 0 {
				t.Error("no readings kept")
			}
		})
	}
}

func TestRunHandSwap(t *testing.T) {
	mk := func() *plan.Plan {
		p := testPlan()
		p.Bench.Roles.Switch = plan.RoleBinding{}
		p.Tests = p.Tests[:2]
		p.Units = []plan.Unit{{ID: "U07"}, {ID: "U08"}, {ID: "U09"}}
		return p
	}
	t.Run("swaps with the bench down", func(t *testing.T) {
		p := mk()
		fb := newFakeBench(p)
		op := &fakeOperator{fb: fb}
		out, err := runFake(context.Background(), t, p, fb, RunOptions{Operator: op})
		if err != nil {
			t.Fatal(err)
		}
		noViolations(t, fb)
		if !slices.Equal(op.swaps, []string{"U07", "U08", "U09"}) || len(op.hot) != 0 {
			t.Fatalf("swaps %v, with the bench live: %v", op.swaps, op.hot)
		}
		units := map[string]int{}
		for _, r := range out.Readings {
			units[r.Unit]++
		}
		if len(units) != 3 || units["U08"] != 16 {
			t.Errorf("readings per unit %v, want 16 each", units)
		}
	})
	t.Run("wrong unit in the socket", func(t *testing.T) {
		p := mk()
		fb := newFakeBench(p)
		op := &fakeOperator{fb: fb, ids: map[string]string{"U08": "U09"}}
		out, err := runFake(context.Background(), t, p, fb, RunOptions{Operator: op})
		var re *fault.RunError
		if !errors.As(err, &re) || re.Unit != "U08" || re.Stage != stageSwap || !strings.Contains(err.Error(), `"U09"`) {
			t.Fatalf("err %v", err)
		}
		if out.Measured != 16 {
			t.Errorf("U07's %d readings not kept", out.Measured)
		}
		noViolations(t, fb)
	})
}

func TestRunTemperatureModes(t *testing.T) {
	t.Run("manual", func(t *testing.T) {
		p := testPlan()
		p.Tests = p.Tests[1:2]
		p.Temperature = plan.Temperature{Mode: plan.TempManual, PointsCelsius: []float64{25, 40}, SoakToleranceC: 0.5, SoakTimeoutSeconds: 1, AmbientCelsius: 25}
		fb := newFakeBench(p)
		op := &fakeOperator{fb: fb, temps: []float64{24.6, 39.8}}
		out, err := runFake(context.Background(), t, p, fb, RunOptions{Operator: op})
		if err != nil {
			t.Fatal(err)
		}
		if len(op.requests) != 2 || !op.requests[1].Typed || op.requests[1].PointCelsius != 40 || op.requests[1].Index != 2 {
			t.Fatalf("requests %+v", op.requests)
		}
		for _, r := range out.Readings {
			want := []float64{24.6, 39.8}[r.TempIndex]
			if r.TemperatureC != want {
				t.Errorf("%+v: %g °C, typed %g", journal.KeyOf(r), r.TemperatureC, want)
			}
		}
	})
	t.Run("thermometer", func(t *testing.T) {
		p := testPlan()
		p.Tests = p.Tests[1:2]
		p.Bench.Roles.Thermometer = plan.RoleBinding{Instrument: "chamber"}
		p.Temperature = plan.Temperature{Mode: plan.TempThermometer, SoakToleranceC: 0.5, SoakTimeoutSeconds: 1, AmbientCelsius: 23}
		fb := newFakeBench(p)
		fb.air, fb.sp = 23.4, 23.4
		rig := fb.rig()
		rig.Thermometer = &fakeChamber{fb} // the thermometer role (no chamber role)
		rig.Chamber = nil
		out, err := Run(context.Background(), p, rig, RunOptions{Clock: fb.clk})
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range out.Readings {
			if r.TemperatureC != 23.4 {
				t.Errorf("reading at %g °C, the thermometer reads 23.4", r.TemperatureC)
			}
		}
		if len(fb.setPoints) != 0 {
			t.Errorf("set points sent in thermometer mode: %v", fb.setPoints)
		}
	})
	t.Run("none", func(t *testing.T) {
		p := testPlan()
		p.Tests = p.Tests[1:2]
		fb := newFakeBench(p)
		out, err := runFake(context.Background(), t, p, fb, RunOptions{})
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range out.Readings {
			if r.TemperatureC != p.Temperature.AmbientCelsius {
				t.Errorf("reading at %g °C, ambient is %g", r.TemperatureC, p.Temperature.AmbientCelsius)
			}
		}
	})
}

// TestRunRampDwellIsAMinimum: Timing.RampDwell is the least bench time
// from sending a ramp step to the next action, with the time the driver
// itself took counted (the fake takes 1 ms per set command), not a wait on
// top of it.
func TestRunRampDwellIsAMinimum(t *testing.T) {
	for _, tc := range []struct {
		dwell, wantGap time.Duration
	}{
		{50 * time.Millisecond, 50 * time.Millisecond}, // 1 ms call + 49 ms wait
		{500 * time.Microsecond, 1 * time.Millisecond}, // the call alone is longer: no wait
		{3 * time.Millisecond, 3 * time.Millisecond},   // 1 ms call + 2 ms wait
		{0, 50 * time.Millisecond /* default 50 ms */}, // zero takes the default
	} {
		t.Run(tc.dwell.String(), func(t *testing.T) {
			p := testPlan()
			p.Tests = []plan.Test{p.Tests[1]} // psrr_pos: V+ alone ramps in 1 V steps
			p.Units = p.Units[:1]
			fb := newFakeBench(p)
			if _, err := runFake(context.Background(), t, p, fb, RunOptions{Timing: Timing{RampDwell: tc.dwell}}); err != nil {
				t.Fatal(err)
			}
			calls := fb.callsSnapshot()
			gaps := 0
			for i := 1; i < len(calls); i++ {
				a, b := calls[i-1], calls[i]
				if a.Op != "set-volts" || b.Op != "set-volts" || a.Role != b.Role {
					continue
				}
				gaps++
				if g := b.At - a.At; g != tc.wantGap {
					t.Errorf("calls %d→%d (%s, %s): %v apart, want %v", a.N, b.N, a, b, g, tc.wantGap)
				}
			}
			if gaps < 10 {
				t.Fatalf("only %d successive ramp steps seen", gaps)
			}
		})
	}
}

// TestRunSettlingReadsAverage: the settling check reads as many values per
// trigger as the measurement (so the meter's sample count never changes
// within a test), takes at least two such reads per point, and the
// measurement comes after the stimulus read-back.
func TestRunSettlingReadsAverage(t *testing.T) {
	p := testPlan()
	p.Units = p.Units[:1]
	for i := range p.Tests {
		p.Tests[i].Readings = 3 + i
	}
	fb := newFakeBench(p)
	out, err := runFake(context.Background(), t, p, fb, RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var spot measurementSpotter
	settles, measurements := 0, 0
	test := -1
	for _, c := range fb.callsSnapshot() {
		if c.Role == plan.RoleMeter && c.Op == "configure" {
			test++
		}
		meas := spot.measurement(c)
		if c.Role != plan.RoleMeter || !strings.HasPrefix(c.Op, "read") {
			continue
		}
		if c.Op != "read-n" {
			t.Fatalf("call %d: %s; every meter read should be a read-n", c.N, c)
		}
		if want := float64(p.Tests[test].Readings); c.Arg != want {
			t.Errorf("call %d (%s, test %s): %g readings per trigger, want %g", c.N, c, p.Tests[test].Kind, c.Arg, want)
		}
		if meas {
			measurements++
		} else {
			settles++
		}
	}
	if measurements != len(out.Readings) || settles < 2*measurements {
		t.Errorf("%d measurement reads and %d settling reads for %d readings", measurements, settles, len(out.Readings))
	}
	for _, r := range out.Readings {
		if want := p.Tests[testIndex(p, r.Test)].Readings; r.N != want {
			t.Errorf("%s step %d: n = %d, want %d", r.Test, r.Step, r.N, want)
		}
	}
}

func testIndex(p *plan.Plan, kind string) int {
	for i := range p.Tests {
		if p.Tests[i].Kind == kind {
			return i
		}
	}
	return -1
}

// TestRunSettleTimeoutNeedsAComparison: a settling read that takes longer
// than the whole settle_timeout_s (a stalled exchange, or the wall-clock
// latency of a fast time-scaled bench) does not flag the point unsettled:
// the time-out only ends the wait after two readings failed to agree.
func TestRunSettleTimeoutNeedsAComparison(t *testing.T) {
	p := testPlan()
	p.Tests = []plan.Test{p.Tests[4]} // aol
	p.Units = p.Units[:1]
	fb := newFakeBench(p)
	var spot measurementSpotter
	stalled := 0
	fb.onCall = func(c fakeCall) {
		if !spot.measurement(c) && c.Op == "read-n" && stalled < 3 {
			stalled++
			fb.clk.Advance(time.Duration(p.Tests[0].SettleTimeoutSeconds+5) * time.Second)
		}
	}
	out, err := runFake(context.Background(), t, p, fb, RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if stalled != 3 {
		t.Fatalf("stalled %d settling reads", stalled)
	}
	for _, r := range out.Readings {
		if slices.Contains(r.Flags, journal.FlagSettleTimeout) {
			t.Errorf("step %d flagged %v after a stalled read (settle %.1f s)", r.Step, r.Flags, r.SettleSeconds)
		}
	}
}

// TestRunChecksSupplyCurrent: with a supply-current window in the plan an
// empty socket (no current) or a part drawing too much stops the run at
// power-up, before any reading, and the bench goes to its safe state; a
// part inside the window is measured. An empty fixture must not reach the
// fit, where its flat output would read as an unresolved, "passing"
// rejection (common practice, no published source).
func TestRunChecksSupplyCurrent(t *testing.T) {
	for _, tc := range []struct {
		name  string
		amps  float64
		want  string // "" = the run completes
		reads int
	}{
		{"part in the socket", 0.002, "", -1},
		{"empty socket", 0, "is the part in the socket", 0},
		{"latched part", 0.045, "may be damaged, latched up", 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := testPlan()
			p.Part.SupplyAmpsMin, p.Part.SupplyAmpsMax = 0.0005, 0.01
			fb := newFakeBench(p)
			amps := tc.amps
			fb.supplyAmps = &amps
			out, err := runFake(context.Background(), t, p, fb, RunOptions{})
			noViolations(t, fb)
			if tc.want == "" {
				if err != nil || !out.Complete {
					t.Fatalf("run: %v", err)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), "U01") {
				t.Fatalf("err = %v, want it to say %q about U01", err, tc.want)
			}
			if len(out.Readings) != tc.reads {
				t.Errorf("%d readings taken, want %d", len(out.Readings), tc.reads)
			}
			for role, o := range fb.out {
				if o.on || o.volts != 0 {
					t.Errorf("%s left at %g V, on=%v", role, o.volts, o.on)
				}
			}
		})
	}
}

// TestRunSwitchesALiveBenchOffFirst: a bench left live by a run that was
// killed outright (supplies on at their rails, a source driving the
// inputs) is switched off — sources first, then supplies — before the
// first relay moves or the first part is asked for (SAFETY.md: power
// sequencing; common practice, no published source).
func TestRunSwitchesALiveBenchOffFirst(t *testing.T) {
	p := testPlan()
	fb := newFakeBench(p)
	fb.out[plan.RoleSupplyPos] = &fakeOutput{volts: 15, on: true}
	fb.out[plan.RoleSupplyNeg] = &fakeOutput{volts: -15, on: true}
	fb.out[plan.RoleSourceCM] = &fakeOutput{volts: 2, on: true}
	if _, err := runFake(context.Background(), t, p, fb, RunOptions{}); err != nil {
		t.Fatal(err)
	}
	noViolations(t, fb)
	calls := fb.callsSnapshot()
	firstSwitch, lastSourceOff, firstSupplyOff := -1, -1, -1
	for i, c := range calls {
		switch {
		case c.Role == plan.RoleSwitch && firstSwitch < 0:
			firstSwitch = i
		case c.Op == "output" && !c.On && isSourceRole(c.Role) && firstSwitch < 0:
			lastSourceOff = i
		case c.Op == "output" && !c.On && (c.Role == plan.RoleSupplyPos || c.Role == plan.RoleSupplyNeg) && firstSupplyOff < 0:
			firstSupplyOff = i
		}
	}
	if firstSwitch < 0 || lastSourceOff < 0 || firstSupplyOff < 0 {
		t.Fatalf("switch call %d, source off %d, supply off %d: missing", firstSwitch, lastSourceOff, firstSupplyOff)
	}
	if !(lastSourceOff < firstSupplyOff && firstSupplyOff < firstSwitch) {
		t.Errorf("order: source off at call %d, first supply off at %d, first switch call at %d; want sources, then supplies, then the switch",
			lastSourceOff, firstSupplyOff, firstSwitch)
	}
}

// TestRunSafeStateAfterALostReply: a supply applies a set command but its
// reply is lost (the call times out). The safe state must ramp down from
// where the output really is, read back, so that no step on the live rail
// exceeds the plan's ramp step.
func TestRunSafeStateAfterALostReply(t *testing.T) {
	p := testPlan()
	for _, tc := range p.Tests {
		if tc.Kind == plan.TestPSRRPos {
			p.Tests = []plan.Test{tc}
			break
		}
	}
	p.Tests[0].Levels = []float64{-4, -2, 0, 2, 4}
	p.Units = p.Units[:1]
	fb := newFakeBench(p)
	n := 0
	fb.lateFault = func(c fakeCall) error {
		// V+ moving above nominal during the sweep (16, then 17 V for the
		// +2 V level): the step up to 17 V takes effect, then the reply is
		// lost, so the runner believes 16 V.
		if c.Role == plan.RoleSupplyPos && c.Arg > p.Part.NominalPosVolts {
			if n++; n == 2 {
				return fmt.Errorf("%s: %w", c, errLost)
			}
		}
		return nil
	}
	_, err := runFake(context.Background(), t, p, fb, RunOptions{})
	if err == nil {
		t.Fatal("the run went on after a lost reply")
	}
	noViolations(t, fb)
	for role, o := range fb.out {
		if o.on || o.volts != 0 {
			t.Errorf("%s left at %g V, on=%v", role, o.volts, o.on)
		}
	}
}
