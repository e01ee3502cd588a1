package main

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strings"
	"sync"
	"testing"
	"time"

	"nullbench/instrument"
	"nullbench/instrument/sim"
	"nullbench/internal/simtest"
	"nullbench/procedure"
	"nullbench/procedure/clock"
	"nullbench/procedure/estimate"
	"nullbench/procedure/operator"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// scaleProgress records, on the run's clock, when each test of each unit
// and temperature starts (the runner's note after configuring the meter)
// and when its last point ends.
type scaleProgress struct {
	mu     sync.Mutex
	clk    clock.Clock
	starts map[string]float64 // "unit/test/temp" → bench s
	ends   map[string]float64
	temp   int
	cur    string
	// lefts: at each point, the bench time then and the progress bar's
	// estimate of the time left.
	lefts [][2]float64
}

var (
	scaleTestNote   = regexp.MustCompile(`^unit (\S+): test\[(\d+)\]`)
	scaleACTestNote = regexp.MustCompile(`^unit (\S+): ac_test\[(\d+)\]`)
	scaleTempNote   = regexp.MustCompile(`^temperature \d+ of`)
)

func (p *scaleProgress) Begin(int, int) {}
func (p *scaleProgress) End()           {}
func (p *scaleProgress) Note(msg string) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if scaleTempNote.MatchString(msg) {
		p.temp++
	}
	if m := scaleACTestNote.FindStringSubmatch(msg); m != nil {
		// A frequency-response test: its time is not a [[test]]'s.
		p.cur = fmt.Sprintf("%s/ac%s/%d", m[1], m[2], max(p.temp, 0))
		p.starts[p.cur] = p.clk.Now().Seconds()
	}
	if m := scaleTestNote.FindStringSubmatch(msg); m != nil {
		p.cur = fmt.Sprintf("%s/%s/%d", m[1], m[2], max(p.temp, 0))
		p.starts[p.cur] = p.clk.Now().Seconds()
	}
}
func (p *scaleProgress) Point(pi procedure.PointInfo) {
	p.mu.Lock()
	defer p.mu.Unlock()
	now := p.clk.Now().Seconds()
	p.ends[p.cur] = now
	p.lefts = append(p.lefts, [2]float64{now, pi.Left.Seconds()})
}

// socketOperator is the person at the bench for a hand-swap plan: it
// takes the part out of the simulated socket and puts the next one in.
type socketOperator struct{ b *sim.Bench }

func (o socketOperator) SwapUnit(_ context.Context, next plan.Unit) (string, error) {
	if o.b.Socket() != "" {
		if err := o.b.Remove(); err != nil {
			return "", err
		}
	}
	return "", o.b.Insert(next.ID)
}

func (o socketOperator) Temperature(context.Context, operator.TemperatureRequest) (float64, error) {
	return 25, nil
}

// shippedPlan is one plan the project ships and the simulated parts it
// runs on.
type shippedPlan struct {
	name string
	// text returns the plan to run on bench b: the shipped file with its
	// [bench] section replaced by b's, or the demo's plan for b.
	text func(t testing.TB, b *sim.Bench, dut *sim.DUTFile) string
	dut  string // the DUT file; "" = the simulated bench's demo lot
}

// withBench replaces the [bench] section (and its instrument tables) of
// the shipped plan file with b's.
func withBench(file string) func(t testing.TB, b *sim.Bench, dut *sim.DUTFile) string {
	return func(t testing.TB, b *sim.Bench, _ *sim.DUTFile) string {
		text, err := os.ReadFile(file)
		if err != nil {
			t.Fatal(err)
		}
		benchRe := regexp.MustCompile(`(?s)\n\[bench\].*?\n\[fixture\]`)
		if !benchRe.Match(text) {
			t.Fatalf("%s: no [bench] section before [fixture]", file)
		}
		return benchRe.ReplaceAllString(string(text), "\n"+b.BenchSection()+"\n[fixture]")
	}
}

// demoPlan is the demo's plan for b (writeDemoPlans): index 0 the lot,
// 1 the first board.
func demoPlan(index int) func(t testing.TB, b *sim.Bench, dut *sim.DUTFile) string {
	return func(t testing.TB, b *sim.Bench, dut *sim.DUTFile) string {
		paths, err := writeDemoPlans(t.TempDir(), b, dut, b.TimeScale())
		if err != nil {
			t.Fatal(err)
		}
		if index >= len(paths) {
			t.Fatalf("demo wrote %d plans, want plan %d", len(paths), index)
		}
		text, err := os.ReadFile(paths[index])
		if err != nil {
			t.Fatal(err)
		}
		return string(text)
	}
}

// scaleBoardsDUT: the board plan's boards (HB-220, gain 10) for
// testdata/plans/board.toml.
const scaleBoardsDUT = `seed = 7
[part]
number = "HB-220"
nominal_pos_volts = 15.0
nominal_neg_volts = -15.0
max_supply_span_volts = 36.0
cm_headroom_pos_volts = 2.0
cm_headroom_neg_volts = 2.0
output_headroom_volts = 1.5
input_beyond_rail_volts = 0.3
quiescent_amps = 0.002
[lot]
id = "B-LOT"
fixture = "nulling_loop"
noise_gain = 1000.0
[[board]]
id = "B01"
number = "HB-220"
gain = 10.0
resistor_tolerance = 0.001
[[board]]
id = "B02"
number = "HB-220"
gain = 10.0
resistor_tolerance = 0.001
`

// scaleNoiseGainDUT: two HX-4107 in the noise-gain stage of
// testdata/plans/noise_gain.toml (K = 101), swapped by hand.
const scaleNoiseGainDUT = `seed = 3
` + simtest.PartHX4107 + `output_headroom_volts = 1.5
input_beyond_rail_volts = 0.3
quiescent_amps = 0.002
[lot]
id = "N-LOT"
fixture = "noise_gain"
noise_gain = 101.0
[[unit]]
id = "N01"
[[unit]]
id = "N02"
`

// scaleRun is what runAtScale measured: the plan as run, its figures,
// the run's bench seconds, every test's measured span per unit and
// temperature, the progress bar's estimates (scaleProgress.lefts), the
// run's wall seconds and the model's count of instrument exchanges in it.
type scaleRun struct {
	p         *plan.Plan
	f         estimate.Figures
	total     float64
	spans     map[string]float64
	lefts     [][2]float64
	wall      float64
	exchanges float64
}

// runAtScale runs sp on a simulated bench with at most maxUnits units.
// scale 0 runs on a virtual clock (exchanges take no bench time, every
// wait exactly its length; the figures are the profiles' with free
// exchanges, as estimate.DefaultFigures); scale N > 0 runs bench and
// runner N times faster than the wall clock, with the profiles' figures
// and this machine's timer figures (hostTimer) and time per exchange
// (calibrateExchange), measured before the run.
func runAtScale(t testing.TB, sp shippedPlan, scale float64, maxUnits int) scaleRun {
	t.Helper()
	var dut *sim.DUTFile
	if sp.dut != "" {
		var err error
		if dut, err = sim.ParseDUT([]byte(sp.dut), sp.name+"-dut.toml"); err != nil {
			t.Fatal(err)
		}
	}
	cfg := sim.Config{DUT: dut, TimeScale: scale}
	var mc *sim.ManualClock
	if scale == 0 {
		mc = sim.NewManualClock()
		cfg = sim.Config{DUT: dut, Clock: mc}
	}
	b, err := sim.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.Close() })
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	if err := b.Start(ctx, sim.ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	if dut == nil {
		dut = b.DUT()
	}
	path := filepath.Join(t.TempDir(), sp.name+".toml")
	if err := os.WriteFile(path, []byte(sp.text(t, b, dut)), 0o644); err != nil {
		t.Fatal(err)
	}
	p, err := plan.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	if len(p.Units) > maxUnits {
		p.Units = p.Units[:maxUnits]
	}
	if err := safety.CheckSafety(p); err != nil {
		t.Fatal(err)
	}
	f, problems := planFigures(p)
	if len(problems) > 0 {
		t.Fatal(problems)
	}
	exchanges := exchangeCount(p, f)
	// The run's clock starts once the instruments are open (dialling and
	// identifying them is not a wait of the run, and check does not count
	// it), as on a bench whose instruments are already connected.
	var clk clock.Clock
	newClock := func() clock.Clock {
		if mc != nil {
			return simtest.Clock{C: mc, T0: mc.Now()}
		}
		return clock.NewScaled(p.Bench.TimeScale)
	}
	clk = newClock()
	sleep := func(ctx context.Context, d time.Duration) error { return clk.Sleep(ctx, d) }
	rig, closeRig, err := openBench(ctx, p, planProfiles(p), sleep)
	if err != nil {
		t.Fatal(err)
	}
	defer closeRig()
	if mc != nil {
		free := estimate.DefaultFigures()
		f.Roles, f.TriggerSeconds, f.WaitGranularitySeconds, f.WaitOverrunSeconds = free.Roles, 0, 0, 0
	} else {
		calibrateExchange(t, &f)
		gran, late := hostTimer()
		f.WaitGranularitySeconds, f.WaitOverrunSeconds = gran*scale, late*scale
	}
	clk = newClock()
	pr := &scaleProgress{clk: clk, starts: map[string]float64{}, ends: map[string]float64{}, temp: -1}
	opt := procedure.RunOptions{Clock: clk, Progress: pr, Figures: &f}
	if operator.NeedsOperator(p) != "" {
		opt.Operator = socketOperator{b}
	}
	w0 := time.Now()
	out, err := procedure.Run(ctx, p, rig, opt)
	wall := time.Since(w0).Seconds()
	if mc == nil {
		t.Logf("timer: waits rounded up to %.3f ms, %.3f ms late", 1e3*f.WaitGranularitySeconds/scale, 1e3*f.WaitOverrunSeconds/scale)
	}
	if err != nil {
		t.Fatal(err)
	}
	spans := map[string]float64{}
	for k, s := range pr.starts {
		spans[k] = pr.ends[k] - s
	}
	return scaleRun{p: p, f: f, total: out.BenchSeconds, spans: spans, lefts: pr.lefts, wall: wall, exchanges: exchanges}
}

// hostTimer measures this machine's timer now, in wall seconds, for the
// figures check takes as typical (hostTimerGranularitySeconds,
// hostTimerLateSeconds): gran, the step to which it rounds waits up (the
// shortest wait, the median of 15 waits of 20 µs, rounded down to a
// multiple of 0.5 ms; 0 when it is shorter than that), and late, the
// median of what waits of 0.3, 1.3, 2.3 and 4.3 ms (9 each) last beyond
// their length rounded up to gran.
func hostTimer() (gran, late float64) {
	wait := func(d time.Duration) float64 {
		t0 := time.Now()
		t := time.NewTimer(d)
		<-t.C
		return time.Since(t0).Seconds()
	}
	median := func(v []float64) float64 {
		sort.Float64s(v)
		return v[len(v)/2]
	}
	var shortest []float64
	for range 15 {
		shortest = append(shortest, wait(20*time.Microsecond))
	}
	gran = math.Floor(median(shortest)/0.0005) * 0.0005
	var over []float64
	for _, ms := range []float64{0.3, 1.3, 2.3, 4.3} {
		d := ms / 1e3
		rounded := d
		if gran > 0 {
			rounded = math.Ceil(d/gran-1e-9) * gran
		}
		for range 9 {
			over = append(over, wait(time.Duration(d*float64(time.Second)))-rounded)
		}
	}
	return gran, math.Max(median(over), 0)
}

// withExchange returns f (planFigures' figures, every role's exchanges
// at the profiles' exchange_s × time_scale) with every exchange costing
// ex seconds of bench time instead.
func withExchange(f estimate.Figures, p *plan.Plan, ex float64) estimate.Figures {
	prof, err := instrument.ResolveProfile("dmm")
	if err != nil {
		panic(err)
	}
	scale := p.Bench.TimeScale
	if !(scale > 0) {
		scale = 1
	}
	k := ex / (prof.Figures.ExchangeSeconds * scale)
	g := f
	g.Roles = map[string]estimate.RoleFigures{}
	for r, rf := range f.Roles {
		rf.SetSeconds *= k
		rf.QuerySeconds *= k
		g.Roles[r] = rf
	}
	return g
}

// exchangeCount is the number of instrument exchanges (commands and
// queries) the duration model counts in a run of p: the model is linear
// in the time per exchange, so this is its total at 1 s per exchange less
// its total at none.
func exchangeCount(p *plan.Plan, f estimate.Figures) float64 {
	one, none := withExchange(f, p, 1), withExchange(f, p, 0)
	return one.Timeline(p).TotalSeconds - none.Timeline(p).TotalSeconds
}

// calibrateExchange measures what one exchange costs a run on the
// simulated bench on this machine now (measuredExchange on the board plan,
// as BenchmarkSimExchange) and puts it in f in place of the profiles'
// exchange_s, as an engineer measures a bench's exchange time for its
// profiles: the model is what is tested here, not the figure.
func calibrateExchange(t testing.TB, f *estimate.Figures) {
	t.Helper()
	ex := measuredExchange(t, shippedPlans[1].sp, 2)
	prof, err := instrument.ResolveProfile("dmm")
	if err != nil {
		t.Fatal(err)
	}
	k := ex / prof.Figures.ExchangeSeconds
	t.Logf("exchange %.3f ms in a run on this machine now (profile %.3f ms)", 1e3*ex, 1e3*prof.Figures.ExchangeSeconds)
	for r, rf := range f.Roles {
		rf.SetSeconds *= k
		rf.QuerySeconds *= k
		f.Roles[r] = rf
	}
}

// measuredExchange is the wall seconds per exchange of a virtual-clock run
// of sp: no wait costs wall time there, so its wall time is the exchanges
// and the work around each (the runner's, the driver's, the simulated
// instrument's), over the exchanges the model counts in the run
// (exchangeCount).
func measuredExchange(t testing.TB, sp shippedPlan, maxUnits int) float64 {
	t.Helper()
	r := runAtScale(t, sp, 0, maxUnits)
	if r.exchanges <= 0 {
		t.Fatalf("%s: the model counts no exchange", sp.name)
	}
	return r.wall / r.exchanges
}

// roundTrip is the mean wall seconds of n *IDN? round trips to b's meter
// through a session, back to back: the bare exchange on loopback.
func roundTrip(ctx context.Context, t testing.TB, b *sim.Bench, n int) float64 {
	t.Helper()
	var addr string
	for _, e := range b.Endpoints() {
		if e.Role == "meter" {
			addr = e.Address
		}
	}
	in, err := instrument.Open(ctx, "dmm", addr, "dmm", instrument.OpenOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer in.Close()
	start := time.Now()
	for range n {
		if _, err := in.Session.Query(ctx, "*IDN?"); err != nil {
			t.Fatal(err)
		}
	}
	return time.Since(start).Seconds() / float64(n)
}

// compareDuration returns check's model against one run: the whole run
// and every test of every unit and temperature, each within ±15 % (the
// project's requirement for check; no published source), as failures.
func compareDuration(t testing.TB, p *plan.Plan, f estimate.Figures, total float64, spans map[string]float64) (fails []string, ratio, worst float64) {
	var worstAt string
	tl := f.Timeline(p)
	r := tl.TotalSeconds / total
	t.Logf("whole run: model %.0f s, measured %.0f s (ratio %.3f); model bench off %.1f s, connect %.1f s, power %.1f s, chamber %.1f s, finish %.1f s, tests %.1f s",
		tl.TotalSeconds, total, r, tl.BenchOffSeconds, tl.ConnectSeconds, tl.PowerSeconds, tl.ChamberSeconds, tl.FinishSeconds, sum(tl.TestCampaignSeconds))
	if math.Abs(r-1) > 0.15 {
		fails = append(fails, fmt.Sprintf("whole run: model %.0f s, measured %.0f s (ratio %.3f), outside ±15 %%", tl.TotalSeconds, total, r))
	}
	for k, got := range spans {
		var ti int
		var want float64
		kind := ""
		if ac, ok := strings.CutPrefix(strings.Split(k, "/")[1], "ac"); ok {
			fmt.Sscan(ac, &ti)
			want, kind = tl.ACTestSeconds[ti-1], "ac_test "+p.ACTests[ti-1].Kind
		} else {
			fmt.Sscan(strings.Split(k, "/")[1], &ti)
			want, kind = tl.TestSeconds[ti-1], p.Tests[ti-1].Kind
		}
		r := want / got
		if math.Abs(r-1) > worst {
			worstAt = fmt.Sprintf("%s (%s): model %.1f s, measured %.1f s", k, kind, want, got)
		}
		worst = math.Max(worst, math.Abs(r-1))
		if math.Abs(r-1) > 0.15 {
			fails = append(fails, fmt.Sprintf("%s (%s): model %.1f s, measured %.1f s (ratio %.3f)", k, kind, want, got, r))
		}
	}
	t.Logf("%d test spans, worst |model/measured − 1| = %.3f: %s", len(spans), worst, worstAt)
	if len(spans) == 0 {
		fails = append(fails, "no test was measured")
	}
	return fails, r, worst
}

// compareLeft checks the progress bar's remaining time (the duration
// model corrected by the bench time measured so far) at a quarter, half
// and three quarters of the points against the time that was actually
// left, within ±15 % (the project's bar for the model; no published
// source).
func compareLeft(t testing.TB, total float64, lefts [][2]float64) []string {
	var fails []string
	if len(lefts) < 4 {
		return []string{"fewer than 4 points measured"}
	}
	for _, frac := range []float64{0.25, 0.5, 0.75} {
		l := lefts[int(frac*float64(len(lefts)))]
		actual := total - l[0]
		r := l[1] / actual
		t.Logf("at %.0f %% of the points: %.0f s left estimated, %.0f s actually (ratio %.3f)", 100*frac, l[1], actual, r)
		if math.Abs(r-1) > 0.15 {
			fails = append(fails, fmt.Sprintf("at %.0f %% of the points: %.0f s left estimated, %.0f s actually (ratio %.3f)", 100*frac, l[1], actual, r))
		}
	}
	return fails
}

// shippedPlans are the plans the project ships that check passes as
// safe (testdata/plans and the demo's lot and board), each with the two
// time scales BenchmarkDurationAtTimeScales runs it at and the units it
// keeps (two; one for the chamber lots, whose soaks are hours of bench
// time; the model counts every unit alike).
var shippedPlans = []struct {
	sp     shippedPlan
	scales []float64
	units  int
}{
	{shippedPlan{name: "testdata-lot", text: withBench("../../testdata/plans/lot.toml")}, []float64{500, 1000}, 1},
	{shippedPlan{name: "testdata-board", text: withBench("../../testdata/plans/board.toml"), dut: scaleBoardsDUT}, []float64{200, 1000}, 2},
	{shippedPlan{name: "testdata-noise_gain", text: withBench("../../testdata/plans/noise_gain.toml"), dut: scaleNoiseGainDUT}, []float64{200, 1000}, 2},
	{shippedPlan{name: "demo-lot", text: demoPlan(0)}, []float64{500, 1000}, 1},
	{shippedPlan{name: "demo-board", text: demoPlan(1)}, []float64{200, 1000}, 2},
}

// TestDurationOfShippedPlans runs every shipped plan on the simulated
// bench on a virtual clock (every wait exactly as the runner asks,
// exchanges free: the model's counting of waits) and compares check's
// duration with the measured bench time, for the whole run and for every
// test of every unit and temperature, within ±15 %, and the progress
// bar's remaining time (compareLeft). The same runs on the wall clock at
// two time scales are BenchmarkDurationAtTimeScales: their outcome
// depends on the machine's load of the moment, so they give figures, not
// a verdict.
func TestDurationOfShippedPlans(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the shipped plans on the simulated bench")
	}
	for _, c := range shippedPlans {
		t.Run(c.sp.name, func(t *testing.T) {
			r := runAtScale(t, c.sp, 0, c.units)
			fails, _, _ := compareDuration(t, r.p, r.f, r.total, r.spans)
			fails = append(fails, compareLeft(t, r.total, r.lefts)...)
			for _, f := range fails {
				t.Error(f)
			}
		})
	}
}

// BenchmarkDurationAtTimeScales runs every shipped plan on the simulated
// bench on the wall clock at two time scales each, where every exchange
// and every wait's lateness costs its wall time × the scale in bench time
// (the host's timer and exchange time are measured before each run), and
// reports check's duration over the measured one for the whole run
// ("model/measured") and the worst |model/measured − 1| of a test of a
// unit ("worst-test"); the project's bar is 0.15 for both.
//
//	go test ./cmd/nullbench -run XXX -bench DurationAtTimeScales -benchtime 1x
func BenchmarkDurationAtTimeScales(b *testing.B) {
	if raceDetector {
		b.Skip("the race detector slows the simulated bench's exchanges and computation many times over, which no bench figure describes")
	}
	for _, c := range shippedPlans {
		for _, scale := range c.scales {
			b.Run(fmt.Sprintf("%s@%g", c.sp.name, scale), func(b *testing.B) {
				var ratio, worst float64
				for b.Loop() {
					r := runAtScale(b, c.sp, scale, c.units)
					_, ratio, worst = compareDuration(b, r.p, r.f, r.total, r.spans)
				}
				b.ReportMetric(ratio, "model/measured")
				b.ReportMetric(worst, "worst-test")
			})
		}
	}
}

// BenchmarkSimExchange measures what one instrument exchange costs on the
// simulated bench, in wall time: "ms/roundtrip" is a bare *IDN? query to
// the meter on loopback, back to back; "ms/exchange" is a virtual-clock
// run of a board plan (no wait costs wall time there) over the
// exchanges the duration model counts in it, so it includes what the
// runner, the driver and the simulated instrument do around each
// exchange; the plan is testdata/plans/board.toml (DC tests only: a
// digitizer's waveform transfer is no typical exchange). The second is the figure the built-in profiles' exchange_s
// carry, because at time_scale N a run pays it × N in bench time.
//
//	go test ./cmd/nullbench -run XXX -bench SimExchange -benchtime 5x
func BenchmarkSimExchange(b *testing.B) {
	if raceDetector {
		b.Skip("the race detector slows the simulated bench's exchanges many times over, which no bench figure describes")
	}
	sp := shippedPlans[1].sp // testdata-board
	var rt, ex float64
	for b.Loop() {
		bench, err := sim.New(sim.Config{Clock: sim.NewManualClock()})
		if err != nil {
			b.Fatal(err)
		}
		ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
		if err := bench.Start(ctx, sim.ServeOptions{}); err != nil {
			b.Fatal(err)
		}
		rt += roundTrip(ctx, b, bench, 500)
		cancel()
		bench.Close()
		ex += measuredExchange(b, sp, 2)
	}
	b.ReportMetric(1e3*rt/float64(b.N), "ms/roundtrip")
	b.ReportMetric(1e3*ex/float64(b.N), "ms/exchange")
}

func sum(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s
}
