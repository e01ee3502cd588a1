package procedure

import (
	"context"
	"math"
	"os"
	"regexp"
	"testing"
	"time"

	"nullbench/instrument/sim"
	"nullbench/internal/simtest"
	"nullbench/procedure/clock"
	"nullbench/procedure/estimate"
	"nullbench/procedure/plan"
)

// timedProgress records the bench time at which each test of each unit
// starts (the runner's note after configuring the meter) and each point
// ends, on the run's clock.
type timedProgress struct {
	clk    clock.Clock
	starts map[string]float64 // "unit/test index/temp" -> bench s
	ends   map[string]float64
	temp   int
	cur    string
	// lefts: at each point, the bench time then and the estimate of the
	// time left.
	lefts [][2]float64
}

var testNote = regexp.MustCompile(`^unit (\S+): test\[(\d+)\]`)

func (p *timedProgress) Begin(int, int) {}
func (p *timedProgress) End()           {}
func (p *timedProgress) Note(msg string) {
	if m := testNote.FindStringSubmatch(msg); m != nil {
		p.cur = m[1] + "/" + m[2] + "/" + string(rune('0'+p.temp))
		p.starts[p.cur] = p.clk.Now().Seconds()
	}
	if regexp.MustCompile(`^temperature \d+ of`).MatchString(msg) {
		p.temp++
	}
}
func (p *timedProgress) Point(pi PointInfo) {
	now := p.clk.Now().Seconds()
	p.ends[p.cur] = now
	p.lefts = append(p.lefts, [2]float64{now, pi.Left.Seconds()})
}

// runTimed runs planText's tests (its [bench] section replaced by the
// simulated bench's) on a virtual clock shared with the bench, and returns
// the plan, the whole run's bench seconds and the measured span of every
// test of every unit and temperature (from its start to its last point).
func runTimed(t *testing.T, dut *sim.DUTFile, planText string) (*plan.Plan, float64, map[string]float64, [][2]float64) {
	t.Helper()
	b := simtest.Start(t, sim.Config{DUT: dut})
	p, err := plan.Parse([]byte(b.WithBench(t, planText)), "timed.toml")
	if err != nil {
		t.Fatal(err)
	}
	clk := b.RunClock()
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	rig, closeRig, err := OpenRig(ctx, p, RigOptions{Sleep: clk.Sleep})
	if err != nil {
		t.Fatal(err)
	}
	defer closeRig()
	pr := &timedProgress{clk: clk, starts: map[string]float64{}, ends: map[string]float64{}, temp: -1}
	if p.Temperature.Mode != plan.TempChamber {
		pr.temp = 0
	}
	out, err := Run(ctx, p, rig, RunOptions{Clock: clk, Progress: pr})
	if err != nil {
		t.Fatal(err)
	}
	spans := map[string]float64{}
	for k, s := range pr.starts {
		spans[k] = pr.ends[k] - s
	}
	return p, out.BenchSeconds, spans, pr.lefts
}

// TestDurationModelOnSimulatedBench runs the shipped plans on the
// simulated bench (virtual clock: exchanges take no bench time, every
// wait counts as the runner makes it) and compares the duration model
// with the measured bench time, per test of every unit and temperature
// and for the whole campaign. The bar, ±15 %, is the project's
// requirement for `check` (no published source).
func TestDurationModelOnSimulatedBench(t *testing.T) {
	if testing.Short() {
		t.Skip("runs whole campaigns on the simulated bench")
	}
	boards := `seed = 7
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
[[board]]
id = "B03"
number = "HB-220"
gain = 10.0
resistor_tolerance = 0.001
`
	cases := []struct {
		name, file string
		dut        string // "" = the simulated bench's default lot
	}{
		{"lot", "../testdata/plans/lot.toml", ""},
		{"board", "../testdata/plans/board.toml", boards},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			text, err := os.ReadFile(c.file)
			if err != nil {
				t.Fatal(err)
			}
			var dut *sim.DUTFile
			if c.dut != "" {
				if dut, err = sim.ParseDUT([]byte(c.dut), "boards.toml"); err != nil {
					t.Fatal(err)
				}
			}
			p, total, spans, lefts := runTimed(t, dut, string(text))
			f := estimate.DefaultFigures()
			tl := f.Timeline(p)
			if r := tl.TotalSeconds / total; math.Abs(r-1) > 0.15 {
				t.Errorf("campaign: model %.0f s, measured %.0f s (ratio %.3f)", tl.TotalSeconds, total, r)
			} else {
				t.Logf("campaign: model %.0f s, measured %.0f s (ratio %.3f)", tl.TotalSeconds, total, r)
			}
			worst := 0.0
			for k, got := range spans {
				var ti int
				var unit string
				var temp int
				if _, err := fmtSscan(k, &unit, &ti, &temp); err != nil {
					t.Fatal(err)
				}
				want := tl.TestSeconds[ti-1]
				r := want / got
				worst = math.Max(worst, math.Abs(r-1))
				if math.Abs(r-1) > 0.15 {
					t.Errorf("%s: model %.1f s, measured %.1f s (ratio %.3f)", k, want, got, r)
				}
			}
			t.Logf("%d test spans, worst |model/measured - 1| = %.3f", len(spans), worst)
			// The progress bar's remaining time at a quarter, half and
			// three quarters of the points, against what was left.
			for _, frac := range []float64{0.25, 0.5, 0.75} {
				l := lefts[int(frac*float64(len(lefts)))]
				actual := total - l[0]
				if r := l[1] / actual; math.Abs(r-1) > 0.15 {
					t.Errorf("at %.0f %% of the points: %.0f s left estimated, %.0f s actually (ratio %.3f)", 100*frac, l[1], actual, r)
				}
			}
		})
	}
}

// fmtSscan splits a "unit/test/temp" key.
func fmtSscan(k string, unit *string, ti, temp *int) (int, error) {
	m := regexp.MustCompile(`^(.*)/(\d+)/(\d+)$`).FindStringSubmatch(k)
	if m == nil {
		return 0, os.ErrInvalid
	}
	*unit = m[1]
	*ti = atoi(m[2])
	*temp = atoi(m[3])
	return 3, nil
}

func atoi(s string) int {
	n := 0
	for _, c := range s {
		n = n*10 + int(c-'0')
	}
	return n
}

// TestDurationModelACOnSimulatedBench runs the shipped frequency-response
// plan (testdata/plans/freq_noise_gain.toml: three [[ac_test]] tables, 8
// and 4 frequencies, two units) on the simulated bench with a virtual
// clock and compares the duration model (acTestSeconds: the floor,
// through and stimulus records at the coherent rate and length, each
// after the generator settle) with the bench time the run took, ±15 %
// as for the DC tests (the project's requirement, no published source).
func TestDurationModelACOnSimulatedBench(t *testing.T) {
	if testing.Short() {
		t.Skip("runs a campaign on the simulated bench")
	}
	text, err := os.ReadFile("../testdata/plans/freq_noise_gain.toml")
	if err != nil {
		t.Fatal(err)
	}
	// The simulated bench's section binds no generator or digitizer role:
	// add them at the end (runTimed replaces the plan's own [bench]).
	withRoles := string(text) + "\n[bench.roles.generator]\ninstrument = \"gen\"\nchannel = \"1\"\n[bench.roles.digitizer]\ninstrument = \"dig\"\n"
	p, total, _, _ := runTimed(t, nil, withRoles)
	f := estimate.DefaultFigures()
	tl := f.Timeline(p)
	ac := 0.0
	for _, s := range tl.ACTestCampaignSeconds {
		ac += s
	}
	if !(ac > 0.5*tl.TotalSeconds) {
		t.Errorf("the ac tests are %.1f s of the model's %.1f s: not counted", ac, tl.TotalSeconds)
	}
	if r := tl.TotalSeconds / total; math.Abs(r-1) > 0.15 {
		t.Errorf("campaign: model %.1f s (ac tests %.1f s), measured %.1f s (ratio %.3f)", tl.TotalSeconds, ac, total, r)
	} else {
		t.Logf("campaign: model %.1f s (ac tests %.1f s), measured %.1f s (ratio %.3f)", tl.TotalSeconds, ac, total, r)
	}
}
