package main

import (
	"os"
	"strings"
	"testing"
)

// TestProbeExerciseCLI: `probe --exercise` with the supply's shipped
// profile file on the simulated bench prints each command with its reply,
// leaves every output off (asked of the simulation, not over SCPI), and
// refuses to send a profile's commands to an instrument it does not match.
// The no-output rule is the tool's own (common practice, no published
// source).
func TestProbeExerciseCLI(t *testing.T) {
	b := cliStartSim(t, "")
	addr := map[string]string{}
	for _, ep := range b.Endpoints() {
		addr[ep.Role] = ep.Address
	}
	supply := cliRepoFile("instrument", "profiles", "supply2.toml")
	sw := cliRepoFile("instrument", "profiles", "switch.toml")

	args := []string{"probe", addr["supply"], "--profile", supply, "--exercise", "--rounds", "1"}
	r := cliExec(t, args...)
	cliWantCode(t, r, 0, args...)
	for _, want := range []string{"exercise:  supply2", "supply.set_output [channel 2]      OUTP OFF", "MEAS:VOLT?", "rejected:  none"} {
		if !strings.Contains(r.out, want) {
			t.Errorf("output lacks %q:\n%s", want, r.out)
		}
	}

	args = []string{"probe", addr["switch"], "--profile", sw, "--exercise", "--channel", "101", "--rounds", "1"}
	r = cliExec(t, args...)
	cliWantCode(t, r, 0, args...)
	if !strings.Contains(r.out, "ROUT:CLOS (@101)") || !strings.Contains(r.out, "not sent: it would close a relay") {
		t.Errorf("switch exercise:\n%s", r.out)
	}

	args = []string{"probe", addr["meter"], "--profile", supply, "--exercise", "--rounds", "1"}
	r = cliExec(t, args...)
	cliWantCode(t, r, exitUsage, args...)
	if !strings.Contains(r.err, "does not match") || strings.Contains(r.out, "exercise:") {
		t.Errorf("mismatched profile: stdout:\n%s\nstderr:\n%s", r.out, r.err)
	}

	// A template the meter does not know: rejected, with the meter's own
	// error-queue text (SCPI-99 -113 "Undefined header"), exit status 2.
	dmm, err := os.ReadFile(cliRepoFile("instrument", "profiles", "dmm.toml"))
	if err != nil {
		t.Fatal(err)
	}
	badText := strings.Replace(string(dmm), `nplc      = "VOLT:DC:NPLC {nplc}"`, `nplc      = "VOLT:DC:NPLX {nplc}"`, 1)
	if badText == string(dmm) {
		t.Fatal("dmm.toml changed; update this test")
	}
	bad := cliWriteFile(t, t.TempDir(), "bad.toml", badText)
	args = []string{"probe", addr["meter"], "--profile", bad, "--exercise", "--rounds", "1"}
	r = cliExec(t, args...)
	cliWantCode(t, r, exitUsage, args...)
	if !strings.Contains(r.out, `error -113,"Undefined header;VOLT:DC:NPLX"`) || !strings.Contains(r.out, "rejected:  meter.nplc") ||
		!strings.Contains(r.err, "the instrument rejected meter.nplc") {
		t.Errorf("bad template: stdout:\n%s\nstderr:\n%s", r.out, r.err)
	}

	snap := b.Inspect()
	for _, c := range append(snap.Supply, snap.Source...) {
		if c.EverOn {
			t.Errorf("output channel %d was turned on: %+v", c.Channel, c)
		}
	}
	if len(snap.EverClosed) > 0 {
		t.Errorf("relays %v were closed", snap.EverClosed)
	}
}
