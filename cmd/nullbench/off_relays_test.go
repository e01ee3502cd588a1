package main

import (
	"context"
	"slices"
	"strconv"
	"strings"
	"testing"

	"nullbench/instrument/sim"
)

// cliStartSimDialects serves the CLI tests' lot on a bench in dialects.
func cliStartSimDialects(t *testing.T, dialects ...string) *sim.Bench {
	t.Helper()
	d, err := sim.ParseDUT([]byte(cliDUT), "cli-dut.toml")
	if err != nil {
		t.Fatal(err)
	}
	b, err := sim.New(sim.Config{DUT: d, TimeScale: cliTimeScale, Dialects: dialects})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	if err := b.Start(ctx, sim.ServeOptions{}); err != nil {
		cancel()
		t.Fatal(err)
	}
	t.Cleanup(func() { cancel(); b.Close() })
	return b
}

// "off" says "every switch channel open" only when it knows it: after the
// profile's open-all command. On a switch without one it names the
// channels it opened (the plan's unit channels), says they were read back,
// and that a relay it did not close may remain closed; the simulated
// relay closed by hand on a channel outside the plan shows it was right
// not to claim more.
func TestOffSaysWhatItKnowsOfTheRelays(t *testing.T) {
	for _, tc := range []struct {
		dialect     string
		every       bool
		want        []string
		stillClosed []string // relays the sim still has closed afterwards
	}{
		{"", true, []string{`every channel open ("ROUT:OPEN:ALL" sent and accepted)`, "every switch channel open"}, nil},
		{"mux_noopenall", false, []string{"opened channel(s) 101, 102 one by one, each read back open",
			"relays this tool did not close may remain closed", "profile mux_noopenall has no open_all"}, []string{"140"}},
	} {
		t.Run("dialect "+tc.dialect, func(t *testing.T) {
			var dialects []string
			if tc.dialect != "" {
				dialects = []string{tc.dialect}
			}
			b := cliStartSimDialects(t, dialects...)
			var mux string
			for _, e := range b.Endpoints() {
				if e.Name == sim.NameSwitch {
					mux = e.Address
				}
			}
			// Closed by hand: a plan channel and one the plan does not name.
			sendSCPI(t, mux, "ROUT:CLOS (@102)", "ROUT:CLOS (@140)")
			if got := b.Inspect().Closed; len(got) != 2 {
				t.Fatalf("relays closed by hand: %v", got)
			}
			plan := cliWriteFile(t, t.TempDir(), "plan.toml", b.BenchSection()+strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"))
			r := cliExec(t, "off", plan)
			cliWantCode(t, r, exitOK, "off", plan)
			for _, w := range tc.want {
				if !strings.Contains(r.out, w) {
					t.Errorf("off does not say %q:\n%s", w, r.out)
				}
			}
			if !tc.every && strings.Contains(r.out, "every channel open") || strings.Contains(r.out, "every switch channel open") != tc.every {
				t.Errorf("off claims every channel open = %v, want %v:\n%s", !tc.every, tc.every, r.out)
			}
			closed := b.Inspect().Closed
			var got []string
			for _, ch := range closed {
				got = append(got, strconv.Itoa(ch))
			}
			slices.Sort(got)
			if strings.Join(got, ",") != strings.Join(tc.stillClosed, ",") {
				t.Errorf("relays still closed after off: %v, want %v", got, tc.stillClosed)
			}
		})
	}
}
