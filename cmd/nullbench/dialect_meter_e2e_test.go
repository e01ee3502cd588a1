package main

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"nullbench/instrument"
	"nullbench/instrument/sim"
	"nullbench/procedure/plan"
)

// The meter dialects of the simulated bench change only how readings are
// asked for and handed over (instrument/sim/dialect_meter.go), never the
// physics, so the same plan with each dialect's built-in profile (which
// sim writes into the bench section) must measure the same coefficients:
// within U_d = sqrt(U_1² + U_2²) of the default bench's (GUM JCGM
// 100:2008 §5.1.2 for independent runs), and covering the truth as in
// TestEndToEndCoverage (GUM 6.2.2). "readings1" runs the plan with
// readings = 1 on the meter without a sample count: each point one
// reading, settling on successive single readings.
var readingsLine = regexp.MustCompile(`(?m)^readings = \d+\n`)

func TestDialectMeterEndToEnd(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the lot plan seven times")
	}
	base := e2eDialectRun(t)
	baseBy := map[string][2]float64{} // k, U in µV/V
	for _, r := range base.results.Ratios {
		baseBy[r.Unit+"/"+r.Name] = [2]float64{r.Rejection.CoefficientUVPerV, r.Rejection.ExpandedUUVPerV}
	}
	if len(baseBy) == 0 {
		t.Fatalf("the default bench gave no results; problems: %v", base.results.Problems)
	}
	for _, tc := range []struct {
		name, dialect string
		readings      int
	}{
		{"dmm_single", "dmm_single", 5},
		{"dmm_single readings1", "dmm_single", 1},
		{"dmm_initfetch", "dmm_initfetch", 5},
		{"dmm_trigfetch", "dmm_trigfetch", 5},
		{"dmm_opc", "dmm_opc", 5},
		{"dmm_buffer", "dmm_buffer", 5},
	} {
		t.Run(tc.name, func(t *testing.T) {
			edit := e2eOnly25
			if tc.readings != 5 {
				edit = func(b *sim.Bench, text string) string {
					text = readingsLine.ReplaceAllString(e2eOnly25(b, text), "")
					return strings.ReplaceAll(text, "[[test]]\n", fmt.Sprintf("[[test]]\nreadings = %d\n", tc.readings))
				}
			}
			run := runE2EWith(t, sim.Config{Dialects: []string{tc.dialect}}, e2eDUT(7411, e2eLot(3, 85, 120)), edit, nil)
			if got := run.plan.Bench.Instruments[sim.NameDMM].Profile; got != tc.dialect {
				t.Errorf("the bench section names profile %q for the meter, want %q", got, tc.dialect)
			}
			for _, tt := range run.plan.Tests {
				if tt.Readings != tc.readings {
					t.Fatalf("test %s has readings = %d, want %d", tt.Kind, tt.Readings, tc.readings)
				}
			}
			for _, r := range run.readings {
				if r.N != tc.readings || len(r.Flags) > 0 {
					t.Fatalf("a point of %d readings with flags %v (%s), want %d and none", r.N, r.Flags, r.Problem, tc.readings)
				}
			}
			if len(run.results.Ratios) != len(base.results.Ratios) {
				t.Fatalf("%d results, the default bench gave %d; problems: %v", len(run.results.Ratios), len(base.results.Ratios), run.results.Problems)
			}
			for _, r := range run.results.Ratios {
				key := r.Unit + "/" + r.Name
				b, ok := baseBy[key]
				if !ok {
					t.Errorf("%s: no such result on the default bench", key)
					continue
				}
				k, u := r.Rejection.CoefficientUVPerV, r.Rejection.ExpandedUUVPerV
				ud := math.Hypot(u, b[1])
				t.Logf("%-12s %+.4f µV/V (U %.4f), default %+.4f (U %.4f)", key, k, u, b[0], b[1])
				if math.Abs(k-b[0]) > ud {
					t.Errorf("%s: %+.4f µV/V differs from the default bench's %+.4f by more than U_d = %.4f", key, k, b[0], ud)
				}
			}
			checks := compareWithTruth(t, run)
			inside := logCoverage(t, checks)
			// 12 results: at 95 % coverage, 10 or more inside has
			// probability 0.98 (binomial, n = 12, p = 0.95).
			if len(checks) != 12 || inside < 10 {
				t.Errorf("%d of %d results cover the truth; want at least 10 of 12", inside, len(checks))
			}
		})
	}
}

// A meter profile missing what its way of reading needs is refused by
// check before any instrument is contacted, naming the profile file and
// the key: init without fetch, and sync with a read query.
func TestCheckRefusesAnIncompleteMeterProfile(t *testing.T) {
	for _, tc := range []struct {
		name, keys, want string
	}{
		{"init without fetch", "count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\n", "key meter.fetch: missing"},
		{"sync with read", "read = \"READ?\"\nsync = \"*OPC?\"\n", "key meter.sync: sync waits for readings started by init"},
		{"one_per_trigger with count", "count = \"SAMP:COUN {count}\"\none_per_trigger = true\nread = \"READ?\"\n", "key meter.one_per_trigger"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			if err := os.MkdirAll(filepath.Join(dir, "profiles"), 0o755); err != nil {
				t.Fatal(err)
			}
			cliWriteFile(t, filepath.Join(dir, "profiles"), "mydmm.toml", `name = "mydmm"
idn_pattern = '^NULLBENCH-SIM,DMM-1S,'
[meter]
configure = "CONF:VOLT:DC {range}"
nplc = "VOLT:DC:NPLC {nplc}"
gain_ppm = 15.0
offset_ppm_of_range = 4.0
`+tc.keys)
			b, err := sim.New(sim.Config{Dialects: []string{"dmm_single"}})
			if err != nil {
				t.Fatal(err)
			}
			ctx, cancel := context.WithCancel(context.Background())
			if err := b.Start(ctx, sim.ServeOptions{}); err != nil {
				cancel()
				t.Fatal(err)
			}
			t.Cleanup(func() { cancel(); b.Close() })
			section := strings.Replace(b.BenchSection(), `profile = "dmm_single"`, `profile = "profiles/mydmm.toml"`, 1)
			if section == b.BenchSection() {
				t.Fatalf("no dmm_single profile in the bench section:\n%s", section)
			}
			planFile := cliWriteFile(t, dir, "plan.toml", section+strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"))
			r := cliExec(t, "check", planFile)
			if r.code == exitOK {
				t.Fatalf("check accepted a meter profile with %s:\n%s", tc.name, r.out)
			}
			for _, want := range []string{filepath.Join("profiles", "mydmm.toml"), tc.want} {
				if !strings.Contains(r.out+r.err, want) {
					t.Errorf("check's refusal does not say %q:\n%s%s", want, r.out, r.err)
				}
			}
		})
	}
}

// The duration model learns each meter profile's way of reading: n
// triggers without a count, and the init, *TRG and *OPC? exchanges of a
// trigger (procedure/estimate TestTimelineMeterWithoutCount works out
// their cost).
func TestPlanFiguresKnowTheMeterMode(t *testing.T) {
	for _, tc := range []struct {
		dialect       string
		onePerTrigger bool
		sets, queries int
	}{
		{"", false, 0, 0},
		{"dmm_single", true, 0, 0},
		{"dmm_initfetch", false, 1, 0},
		{"dmm_trigfetch", false, 2, 0},
		{"dmm_opc", false, 1, 1},
		{"dmm_buffer", false, 1, 0},
	} {
		t.Run(tc.dialect, func(t *testing.T) {
			var ds []string
			if tc.dialect != "" {
				ds = []string{tc.dialect}
			}
			b, err := sim.New(sim.Config{Dialects: ds})
			if err != nil {
				t.Fatal(err)
			}
			ctx, cancel := context.WithCancel(context.Background())
			if err := b.Start(ctx, sim.ServeOptions{}); err != nil {
				cancel()
				t.Fatal(err)
			}
			t.Cleanup(func() { cancel(); b.Close() })
			planFile := cliWriteFile(t, t.TempDir(), "plan.toml", b.BenchSection()+strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"))
			p, err := plan.Load(planFile)
			if err != nil {
				t.Fatal(err)
			}
			f, problems := planFigures(p)
			if len(problems) > 0 {
				t.Fatalf("problems: %v", problems)
			}
			if f.MeterOnePerTrigger != tc.onePerTrigger || f.MeterTriggerSets != tc.sets || f.MeterTriggerQueries != tc.queries {
				t.Errorf("one per trigger %v, sets %d, queries %d; want %v, %d, %d",
					f.MeterOnePerTrigger, f.MeterTriggerSets, f.MeterTriggerQueries, tc.onePerTrigger, tc.sets, tc.queries)
			}
		})
	}
}

// sim's help names each dialect's built-in profile by the dialect's name:
// that profile exists, is what the endpoint prints, and matches the
// identity the changed instrument answers.
func TestEveryDialectHasItsProfile(t *testing.T) {
	help := dialectHelp()
	for _, d := range sim.Dialects() {
		t.Run(d.Name, func(t *testing.T) {
			if !strings.Contains(help, "(profile "+d.Name+")") {
				t.Errorf("sim's help does not name profile %s", d.Name)
			}
			p, err := instrument.BuiltinProfile(d.Name)
			if err != nil {
				t.Fatal(err)
			}
			b, err := sim.New(sim.Config{Dialects: []string{d.Name}})
			if err != nil {
				t.Fatal(err)
			}
			ctx, cancel := context.WithCancel(context.Background())
			if err := b.Start(ctx, sim.ServeOptions{}); err != nil {
				cancel()
				t.Fatal(err)
			}
			t.Cleanup(func() { cancel(); b.Close() })
			found := false
			for _, ep := range b.Endpoints() {
				if ep.Name != d.Instrument {
					continue
				}
				found = true
				if ep.Profile != d.Name {
					t.Errorf("%s prints profile=%s, want %s", ep.Name, ep.Profile, d.Name)
				}
				if !p.Matches(ep.IDN) {
					t.Errorf("profile %s does not match %s's identity %q", d.Name, ep.Name, ep.IDN)
				}
			}
			if !found {
				t.Errorf("no endpoint %s", d.Instrument)
			}
		})
	}
}
