// Package simtest starts the simulated bench for tests: a bench on a
// virtual clock, served on loopback until the test ends, a clock for the
// runner on the same time base, and the plan text that binds a plan to
// the bench. Only tests import it; it imports instrument/sim and
// procedure/plan, so the tests of every package above those can use it
// (procedure's own tests too: it does not import procedure).
package simtest

import (
	"context"
	"regexp"
	"strings"
	"testing"
	"time"

	"nullbench/instrument/sim"
	"nullbench/procedure/plan"
)

// Bench is a simulated bench served on loopback and the virtual clock it
// runs on: its time stands still until a wait moves it, so hours of bench
// time take milliseconds, repeatably.
type Bench struct {
	*sim.Bench
	Manual *sim.ManualClock
}

// Start serves a simulated bench configured by cfg, on a fresh virtual
// clock (cfg.Clock is replaced), until the test ends.
func Start(t testing.TB, cfg sim.Config) *Bench {
	t.Helper()
	mc := sim.NewManualClock()
	cfg.Clock = mc
	b, err := sim.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.Close() })
	if err := b.Start(context.Background(), sim.ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	return &Bench{Bench: b, Manual: mc}
}

// RunClock is a clock for the runner (procedure/clock.Clock) on the
// bench's virtual time, reading zero now: the runner's waits move the
// bench's time, and the bench's exchanges take none.
func (b *Bench) RunClock() Clock { return Clock{C: b.Manual, T0: b.Manual.Now()} }

// Clock adapts the simulated bench's clock to the runner's: bench time
// since T0.
type Clock struct {
	C  sim.Clock
	T0 time.Time
}

// Now is the bench time since T0.
func (c Clock) Now() time.Duration { return c.C.Now().Sub(c.T0) }

// Sleep waits d of bench time on the bench's clock.
func (c Clock) Sleep(ctx context.Context, d time.Duration) error { return c.C.Sleep(ctx, d) }

// Units writes a [[unit]] table for each id, with the switch channel the
// bench wired that unit to (its truth); an id the bench does not have
// fails the test.
func (b *Bench) Units(t testing.TB, ids ...string) string {
	t.Helper()
	var sb strings.Builder
	for _, id := range ids {
		found := false
		for _, u := range b.Truth() {
			if u.ID == id {
				sb.WriteString("\n[[unit]]\nid = \"" + id + "\"\nchannel = \"" + u.Channel + "\"\n")
				found = true
			}
		}
		if !found {
			t.Fatalf("simtest: no unit %q on the simulated bench", id)
		}
	}
	return sb.String()
}

// Plan parses the bench's [bench] section followed by rest (everything
// of a plan but its [bench] section) as the plan file name.
func (b *Bench) Plan(t testing.TB, rest, name string) *plan.Plan {
	t.Helper()
	p, err := plan.Parse([]byte(b.BenchSection()+rest), name)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

var benchSectionRE = regexp.MustCompile(`(?s)\n?\[bench\].*?\n\[fixture\]`)

// WithBench replaces the [bench] section of a plan file's text (with its
// instrument and role tables, up to [fixture]) by the bench's.
func (b *Bench) WithBench(t testing.TB, text string) string {
	t.Helper()
	if !benchSectionRE.MatchString(text) {
		t.Fatal("simtest: the plan has no [bench] section before [fixture]")
	}
	return benchSectionRE.ReplaceAllLiteralString(text, "\n"+b.BenchSection()+"\n[fixture]")
}

// PartHX4107 opens the [part] table of a plan or of a DUT file (the two
// share these keys) with the ratings of the simulated bench's demo op-amp
// (HX-4107 of its built-in lot, invented): ±15 V nominal rails, 36 V
// maximum span, 2 V common-mode headroom on each side. A plan adds its
// own keys (cm_margin_volts, current_limit_amps, …) after it, a DUT file
// the part's physics (output_headroom_volts, quiescent_amps, …).
const PartHX4107 = `[part]
number = "HX-4107"
nominal_pos_volts = 15.0
nominal_neg_volts = -15.0
max_supply_span_volts = 36.0
cm_headroom_pos_volts = 2.0
cm_headroom_neg_volts = 2.0
`
