package procedure

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
	"nullbench/procedure/fault"
	"nullbench/procedure/journal"
	"nullbench/procedure/operator"
	"nullbench/procedure/plan"
)

// fakeAC is the AC side of the fake bench: a generator whose outputs
// each drive one node, a two-channel digitizer that returns sines at the
// generator's frequency (channel 2 = ratio × channel 1 through the
// fixture, channel 1 itself through the relay), and the through relay on
// the fake switch.
type fakeAC struct {
	fb      *fakeBench
	ratio   complex128 // fixture output per volt of stimulus
	mis     complex128 // digitizer channel 2 gain relative to channel 1
	noise   float64    // rms volts per sample
	rng     *rand.Rand
	rate    float64
	samples int
	gen     map[string]*fakeGenOut
	relay   string
	// probeOnStimulus: the operator moved the channel-2 probe to the
	// stimulus (manual through calibration).
	probeOnStimulus bool
	// clip, when set, makes a capture return its waveforms with an
	// error wrapping instrument.ErrClipped (as the profile driver does).
	clip     func(n int) bool
	captures int
}

type fakeGenOut struct {
	f, peak, offset float64
	on, set         bool
}

func newFakeAC(fb *fakeBench) *fakeAC {
	return &fakeAC{fb: fb, ratio: 1e-4, mis: 1, noise: 1e-6, rng: rand.New(rand.NewPCG(1, 2)), gen: map[string]*fakeGenOut{}, relay: "190"}
}

func (a *fakeAC) rig() *Rig {
	r := a.fb.rig()
	r.Generators = map[string]instrument.Generator{}
	for _, ch := range plan.GeneratorChannels(a.fb.p) {
		a.gen[ch] = &fakeGenOut{}
		r.Generators[ch] = &fakeGenerator{a, ch}
	}
	r.Digitizer = &fakeDigitizer{a}
	return r
}

type fakeGenerator struct {
	a  *fakeAC
	ch string
}

func (g *fakeGenerator) SetSine(ctx context.Context, f, peak, offset float64) error {
	fb := g.a.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	if err := fb.call(ctx, fakeCall{Role: "generator", Op: "sine", Arg: peak, Ch: g.ch}, time.Millisecond); err != nil {
		return err
	}
	o := g.a.gen[g.ch]
	o.f, o.peak, o.offset, o.set = f, peak, offset, true
	return nil
}

func (g *fakeGenerator) SetOutput(ctx context.Context, on bool) error {
	fb := g.a.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	c := fakeCall{Role: "generator", Op: "output", On: on, Ch: g.ch}
	if err := fb.call(ctx, c, time.Millisecond); err != nil {
		return err
	}
	o := g.a.gen[g.ch]
	if on && !o.set {
		fb.violations = append(fb.violations, "generator output "+g.ch+" switched on before its sine was set")
	}
	if on && !fb.suppliesOn() {
		fb.violations = append(fb.violations, "generator output "+g.ch+" switched on with the supplies off")
	}
	o.on = on
	return nil
}

type fakeDigitizer struct{ a *fakeAC }

func (d *fakeDigitizer) Configure(ctx context.Context, rate float64, n int, ranges []float64) error {
	fb := d.a.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	if err := fb.call(ctx, fakeCall{Role: "digitizer", Op: "configure", Arg: rate}, time.Millisecond); err != nil {
		return err
	}
	d.a.rate, d.a.samples = rate, n
	return nil
}

func (d *fakeDigitizer) Capture(ctx context.Context) ([]instrument.Waveform, error) {
	a := d.a
	fb := a.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	rec := time.Duration(float64(a.samples) / a.rate * float64(time.Second))
	if err := fb.call(ctx, fakeCall{Role: "digitizer", Op: "capture"}, rec); err != nil {
		return nil, err
	}
	var f float64
	var stim complex128
	for _, o := range a.gen {
		if o.on {
			f, stim = o.f, complex(o.peak, 0)
		}
		if f == 0 && o.set {
			f = o.f
		}
	}
	ch2 := stim * a.ratio
	if fb.closed[a.relay] || a.probeOnStimulus {
		ch2 = stim
	}
	ch2 *= a.mis
	phase := a.rng.Float64() * 2 * math.Pi // the record starts anywhere in the cycle
	w := []instrument.Waveform{{RateHz: a.rate, Volts: make([]float64, a.samples)}, {RateHz: a.rate, Volts: make([]float64, a.samples)}}
	for n := 0; n < a.samples; n++ {
		th := 2*math.Pi*f*float64(n)/a.rate + phase
		w[0].Volts[n] = real(stim)*math.Sin(th) + imag(stim)*math.Cos(th) + a.noise*a.rng.NormFloat64()
		w[1].Volts[n] = real(ch2)*math.Sin(th) + imag(ch2)*math.Cos(th) + a.noise*a.rng.NormFloat64()
	}
	a.captures++
	if a.clip != nil && a.clip(a.captures) {
		return w, fmt.Errorf("fake digitizer: channel 2: 10 of %d samples at full scale: %w", a.samples, instrument.ErrClipped)
	}
	return w, nil
}

// acPlan is the example frequency-response plan with shorter records.
func acPlan(t testing.TB) *plan.Plan {
	t.Helper()
	p, err := plan.Load(filepath.Join("..", "testdata", "plans", "freq_noise_gain.toml"))
	if err != nil {
		t.Fatal(err)
	}
	p.Bench.TimeScale = 1 // the fake bench does not identify as simulated
	return p
}

func runFakeAC(ctx context.Context, t *testing.T, p *plan.Plan, a *fakeAC, opt RunOptions) (*Outcome, error) {
	t.Helper()
	opt.Clock = a.fb.clk
	if opt.Log == nil {
		opt.Log = &bytes.Buffer{}
	}
	return Run(ctx, p, a.rig(), opt)
}

// acRecordsOf counts the plan's AC records: units × Σ frequencies × 3
// records (floor, through, stimulus) × records per point.
func acRecordsOf(p *plan.Plan) int {
	n := 0
	for _, t := range p.ACTests {
		n += len(t.Frequencies()) * 3 * t.Records
	}
	return n * len(p.Units)
}

func TestRunACCampaign(t *testing.T) {
	p := acPlan(t)
	fb := newFakeBench(p)
	a := newFakeAC(fb)
	path := filepath.Join(t.TempDir(), "ac.jsonl")
	w, err := journal.Open(path, journal.Header{PlanHash: p.Hash, PlanPath: p.Source, ToolVersion: "test", TimeScale: 1})
	if err != nil {
		t.Fatal(err)
	}
	out, err := runFakeAC(context.Background(), t, p, a, RunOptions{Journal: w})
	w.Close()
	if err != nil {
		t.Fatal(err)
	}
	noViolations(t, fb)
	want := acRecordsOf(p) // 2 units × (8 + 8 + 4) frequencies × 3 records
	if want != 120 || len(out.ACReadings) != want || out.Total != want || !out.Complete {
		t.Fatalf("%d ac readings of %d (total %d), complete %v", len(out.ACReadings), want, out.Total, out.Complete)
	}
	c, err := journal.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.ACReadings) != want {
		t.Fatalf("journal holds %d ac readings, want %d", len(c.ACReadings), want)
	}
	if err := journal.CheckReadings(p, c); err != nil {
		t.Fatal(err)
	}
	// Each record's fits say what the fake bench applied: floor with the
	// generator off (ch1 ≈ 0), through with ch2 = ch1, stimulus with
	// ch2/ch1 = the fixture ratio 1e-4. The 3-parameter fit of a record of
	// N samples with noise σ has u(R) ≈ σ·√(2/N) (IEEE Std 1057-2017
	// §4.1.3.1 covariance), so 10⁻⁵ relative on 1 V with σ = 1 µV.
	amp := func(f journal.ACChannelFit) float64 { return math.Hypot(f.A, f.B) }
	for _, r := range c.ACReadings {
		if len(r.Channels) != 2 || r.Samples < p.ACTests[0].MinSamples || r.Cycles < p.ACTests[0].MinCycles {
			t.Fatalf("record %+v", r)
		}
		s, x := amp(r.Channels[0]), amp(r.Channels[1])
		var pk float64
		for _, tt := range p.ACTests {
			if tt.Kind == r.Test {
				pk = tt.GeneratorPeakVolts()
			}
		}
		switch r.Record {
		case journal.ACFloor:
			if r.GeneratorOn || s > 1e-5 {
				t.Errorf("floor record with ch1 %g V, generator on %v", s, r.GeneratorOn)
			}
		case journal.ACThrough:
			if math.Abs(x/s-1) > 1e-4 || math.Abs(s-pk) > 1e-4 {
				t.Errorf("through at %g Hz: ch1 %g, ch2 %g V, want both %g", r.FrequencyHz, s, x, pk)
			}
		case journal.ACStimulus:
			if math.Abs(x/s/1e-4-1) > 0.05 {
				t.Errorf("stimulus at %g Hz: ratio %g, want 1e-4", r.FrequencyHz, x/s)
			}
		}
	}
	// Order per frequency: floor with the output off, then the relay
	// closed and the output on (through), the relay open (stimulus). The
	// sine is programmed before the output goes on; every output is off at
	// the end and the generator goes off before the supplies.
	calls := fb.callsSnapshot()
	var seq []string
	lastGenOff, firstSupplyOffAfter := -1, -1
	for i, c := range calls {
		switch {
		case c.Role == "generator" || (c.Role == plan.RoleSwitch && c.Ch == "190"):
			seq = append(seq, c.String()+" "+c.Ch)
			if c.Role == "generator" && c.Op == "output" && !c.On {
				lastGenOff = i
			}
		case c.Role == plan.RoleSupplyPos && c.Op == "output" && !c.On && lastGenOff >= 0:
			firstSupplyOffAfter = i
		}
	}
	head := strings.Join(seq[:min(8, len(seq))], "; ")
	// benchOff first switches every output off (outputs 1, 2, 3).
	wantHead := "generator output off 1; generator output off 2; generator output off 3; generator sine 1; generator output off 1; switch close 190 190; generator output on 1; switch open 190 190"
	if head != wantHead {
		t.Errorf("sequence\n got %s\nwant %s", head, wantHead)
	}
	if firstSupplyOffAfter < lastGenOff {
		t.Errorf("supplies switched off (call %d) before the last generator off (call %d)", firstSupplyOffAfter, lastGenOff)
	}
	for ch, o := range a.gen {
		if o.on {
			t.Errorf("generator output %s left on", ch)
		}
	}
	if fb.closed["190"] {
		t.Error("through relay left closed")
	}
}

// TestRunACSafeStateGeneratorFirst: a capture fails mid-campaign; the
// safe state switches every generator output off before it touches any
// source or supply: a sine on an input or a rail must not outlive the
// rails it rides on (common practice, no published source).
func TestRunACSafeStateGeneratorFirst(t *testing.T) {
	p := acPlan(t)
	fb := newFakeBench(p)
	a := newFakeAC(fb)
	fb.fault = failNth("digitizer", "capture", 7, errors.New("digitizer timed out"), false)
	_, err := runFakeAC(context.Background(), t, p, a, RunOptions{})
	var re *fault.RunError
	if !errors.As(err, &re) || re.SafeState != nil || re.Stage != stageACCapture {
		t.Fatalf("want a RunError at the capture with the safe state reached, got %v", err)
	}
	// 7th capture: unit N01, ac_test[1] cmrr, the third frequency's floor.
	if !strings.Contains(err.Error(), "unit N01, ac_test[1] cmrr at 138.9") {
		t.Errorf("error does not say where: %v", err)
	}
	calls := fb.callsSnapshot()
	at := -1
	for i, c := range calls {
		if c.Role == "digitizer" && c.Op == "capture" {
			at = i
		}
	}
	after := calls[at+1:]
	gens := 0
	for _, c := range after {
		if c.Role == "generator" {
			if c.Op != "output" || c.On {
				t.Fatalf("safe state: %s", c)
			}
			gens++
			continue
		}
		if gens < 3 {
			t.Fatalf("safe state touched %s before every generator output was off (%d of 3)", c, gens)
		}
		break
	}
	noViolations(t, fb)
	for ch, o := range a.gen {
		if o.on {
			t.Errorf("generator output %s left on", ch)
		}
	}
}

// TestRunACResume stops a campaign part way (Ctrl-C after the 40th
// capture) and resumes it from the journal: every record is measured
// exactly once and the total is complete.
func TestRunACResume(t *testing.T) {
	p := acPlan(t)
	dir := t.TempDir()
	path := filepath.Join(dir, "ac.jsonl")
	fb := newFakeBench(p)
	a := newFakeAC(fb)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	n := 0
	fb.onCall = func(c fakeCall) {
		if c.Role == "digitizer" && c.Op == "capture" {
			if n++; n == 40 {
				cancel()
			}
		}
	}
	w, err := journal.Open(path, journal.Header{PlanHash: p.Hash, PlanPath: p.Source, ToolVersion: "test", TimeScale: 1})
	if err != nil {
		t.Fatal(err)
	}
	out1, err := runFakeAC(ctx, t, p, a, RunOptions{Journal: w})
	w.Close()
	var re *fault.RunError
	if !errors.As(err, &re) || !re.Interrupted {
		t.Fatalf("want an interrupted run, got %v", err)
	}
	first := len(out1.ACReadings)
	if first == 0 || first >= acRecordsOf(p) {
		t.Fatalf("first run took %d records", first)
	}
	w2, c, err := journal.Resume(path, p, journal.Header{PlanHash: p.Hash, PlanPath: p.Source, ToolVersion: "test", TimeScale: 1})
	if err != nil {
		t.Fatal(err)
	}
	fb2 := newFakeBench(p)
	a2 := newFakeAC(fb2)
	out2, err := runFakeAC(context.Background(), t, p, a2, RunOptions{Journal: w2, Resume: c})
	w2.Close()
	if err != nil {
		t.Fatal(err)
	}
	if !out2.Complete || len(out2.ACReadings) != acRecordsOf(p) || out2.Recovered != first {
		t.Fatalf("resumed: complete %v, %d readings (want %d), recovered %d (want %d)", out2.Complete, len(out2.ACReadings), acRecordsOf(p), out2.Recovered, first)
	}
	seen := map[plan.WorkKey]bool{}
	for _, r := range out2.ACReadings {
		k := journal.ACKeyOf(r)
		if seen[k] {
			t.Fatalf("record %+v measured twice", k)
		}
		seen[k] = true
	}
	final, err := journal.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := journal.CheckReadings(p, final); err != nil {
		t.Fatal(err)
	}
	if got := len(final.ACReadings); got != acRecordsOf(p) {
		t.Errorf("journal holds %d ac readings, want %d", got, acRecordsOf(p))
	}
}

// TestRunACRefusesGeneratorBeyondLimit: a plan edited in memory past its
// [generator] limit (validation would refuse the file) is stopped by the
// runner's own guard before anything is sent to the generator.
func TestRunACRefusesGeneratorBeyondLimit(t *testing.T) {
	p := acPlan(t)
	fb := newFakeBench(p)
	a := newFakeAC(fb)
	r := newRunner(p, a.rig(), RunOptions{Clock: fb.clk})
	g := r.rig.Generators["1"]
	err := r.setGenerator(context.Background(), g, "1", 1e3, 2.5, 0)
	if err == nil || !strings.Contains(err.Error(), "max_peak_volts 2 V") {
		t.Fatalf("want a refusal naming max_peak_volts, got %v", err)
	}
	for _, c := range fb.callsSnapshot() {
		if c.Role == "generator" {
			t.Fatalf("generator called: %s", c)
		}
	}
}

// fakeACMeter is input 1 (stimulus) or 2 (response) of an AC voltmeter on
// the fake AC bench: RMS of what the digitizer's channel would carry.
type fakeACMeter struct {
	a     *fakeAC
	input int
}

func (m *fakeACMeter) ConfigureACVolts(ctx context.Context, rng, f float64) error {
	fb := m.a.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	return fb.call(ctx, fakeCall{Role: "ac_meter", Op: "configure", Arg: f}, time.Millisecond)
}

func (m *fakeACMeter) ReadRMS(ctx context.Context) (float64, error) {
	a := m.a
	fb := a.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	if err := fb.call(ctx, fakeCall{Role: "ac_meter", Op: "read", Arg: float64(m.input)}, 100*time.Millisecond); err != nil {
		return 0, err
	}
	var stim float64
	for _, o := range a.gen {
		if o.on {
			stim = o.peak
		}
	}
	v := stim
	if m.input == 2 && !a.probeOnStimulus {
		v = stim * real(a.ratio)
	}
	return math.Hypot(v/math.Sqrt2, a.noise), nil
}

// probeOperator moves the channel-2 probe when asked (through = "manual")
// and records the prompts.
type probeOperator struct {
	*fakeOperator
	a       *fakeAC
	prompts []string
}

func (o *probeOperator) MoveProbe(ctx context.Context, msg string) error {
	o.prompts = append(o.prompts, msg)
	o.a.probeOnStimulus = strings.Contains(msg, "to the stimulus")
	return nil
}

// TestRunACMeterManualThrough runs the example plan with an AC voltmeter
// instead of the digitizer and a manual through calibration: without an
// operator that can move a probe the run is refused before any instrument
// is touched; with one, every frequency asks twice (probe to the stimulus,
// and back) and each record carries the two RMS readings.
func TestRunACMeterManualThrough(t *testing.T) {
	p := acPlan(t)
	p.ACTests = p.ACTests[2:] // psrr_neg at 4 named frequencies
	p.ACTests[0].Through = plan.ThroughManual
	p.Bench.Roles.Digitizer = plan.RoleBinding{}
	p.Bench.Roles.ACMeter = plan.RoleBinding{Instrument: "dig"} // the digitizer's entry stands in for an AC voltmeter
	fb := newFakeBench(p)
	a := newFakeAC(fb)
	rig := a.rig()
	rig.Digitizer = nil
	rig.ACMeters = []instrument.ACVoltmeter{&fakeACMeter{a, 1}, &fakeACMeter{a, 2}}
	if why := operator.NeedsOperator(p); !strings.Contains(why, "manual") {
		t.Fatalf("NeedsOperator = %q", why)
	}
	_, err := Run(context.Background(), p, rig, RunOptions{Clock: fb.clk, Operator: &fakeOperator{fb: fb}})
	if err == nil || !strings.Contains(err.Error(), "cannot be asked to move a probe") || len(fb.callsSnapshot()) != 0 {
		t.Fatalf("want a refusal before any call, got %v after %d calls", err, len(fb.callsSnapshot()))
	}
	op := &probeOperator{fakeOperator: &fakeOperator{fb: fb}, a: a}
	out, err := Run(context.Background(), p, rig, RunOptions{Clock: fb.clk, Operator: op, Log: &bytes.Buffer{}})
	if err != nil {
		t.Fatal(err)
	}
	noViolations(t, fb)
	if want := acRecordsOf(p); len(out.ACReadings) != want {
		t.Fatalf("%d records, want %d", len(out.ACReadings), want)
	}
	if want := 2 * 4 * len(p.Units); len(op.prompts) != want {
		t.Errorf("%d prompts, want %d (two per frequency and unit)", len(op.prompts), want)
	}
	for _, r := range out.ACReadings {
		if len(r.RMSVolts) != 2 || len(r.Channels) != 0 {
			t.Fatalf("record %+v", r)
		}
		ratio := r.RMSVolts[1] / r.RMSVolts[0]
		switch r.Record {
		case journal.ACThrough:
			if math.Abs(ratio-1) > 1e-3 {
				t.Errorf("through ratio %g, want 1", ratio)
			}
		case journal.ACStimulus:
			if math.Abs(ratio/1e-4-1) > 0.05 {
				t.Errorf("stimulus ratio %g, want 1e-4", ratio)
			}
		}
	}
}

// TestRunACClippedRecordFlagged: a record the digitizer returns as clipped
// is journalled with the overload flag and its problem, and the run goes
// on (like an overloaded DC reading).
func TestRunACClippedRecordFlagged(t *testing.T) {
	p := acPlan(t)
	p.ACTests = p.ACTests[2:]
	fb := newFakeBench(p)
	a := newFakeAC(fb)
	a.clip = func(n int) bool { return n == 5 }
	out, err := runFakeAC(context.Background(), t, p, a, RunOptions{})
	if err != nil {
		t.Fatal(err)
	}
	flagged := 0
	for _, r := range out.ACReadings {
		if len(r.Flags) > 0 {
			flagged++
			if r.Flags[0] != journal.FlagOverload || !strings.Contains(r.Problem, "full scale") {
				t.Errorf("flagged record %+v", r)
			}
		}
	}
	if flagged != 1 || out.Flagged != 1 || len(out.ACReadings) != acRecordsOf(p) {
		t.Errorf("%d flagged (outcome %d) of %d records", flagged, out.Flagged, len(out.ACReadings))
	}
}

// TestOffSwitchesGeneratorsFirst: `nullbench off` switches every generator
// output off before it reads back or ramps any source or supply.
func TestOffSwitchesGeneratorsFirst(t *testing.T) {
	p := acPlan(t)
	fb := newFakeBench(p)
	a := newFakeAC(fb)
	rig := a.rig()
	for _, o := range a.gen {
		o.on, o.set = true, true
	}
	rep, err := Off(context.Background(), p, rig, OffOptions{Clock: fb.clk})
	if err != nil {
		t.Fatal(err)
	}
	calls := fb.callsSnapshot()
	for i, c := range calls[:3] {
		if c.Role != "generator" || c.Op != "output" || c.On {
			t.Fatalf("call %d is %s, want a generator output off first", i+1, c)
		}
	}
	for ch, o := range a.gen {
		if o.on {
			t.Errorf("generator output %s left on", ch)
		}
	}
	if !strings.Contains(strings.Join(rep.Actions, "\n"), "generator output 1: off") {
		t.Errorf("actions %q", rep.Actions)
	}
}
