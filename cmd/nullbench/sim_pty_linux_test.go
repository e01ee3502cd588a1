//go:build linux

package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// The switch matrix served on a pseudo-terminal (a real tty, so the serial
// transport is exercised for real): probe finds it at its serial://
// address, and a one-unit plan runs with the switch on that line and the
// other instruments on TCP.
func TestSimAndProbeOverPTY(t *testing.T) {
	dir := t.TempDir()
	benchOut := filepath.Join(dir, "bench.toml")
	eps := cliServeSim(t, "--serial", "mux", "--time-scale", "2000", "--bench-out", benchOut)
	cliCheckEndpoints(t, eps, "mux")
	mux := eps[3]
	if !strings.HasPrefix(mux.address, "serial:///dev/pts/") || !strings.HasSuffix(mux.address, "?baud=115200") {
		t.Fatalf("mux address %q, want serial:///dev/pts/N?baud=115200", mux.address)
	}
	cliProbe(t, mux.address, mux.idn, "switch")

	section, err := os.ReadFile(benchOut)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(section), `address = "`+mux.address+`"`) {
		t.Fatalf("bench section does not put the mux at %s:\n%s", mux.address, section)
	}
	body := strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0")
	body = body[:strings.Index(body, "[[unit]]\nid = \"U02\"")] // one unit
	plan := cliWriteFile(t, dir, "pty-plan.toml", string(section)+body)
	out := filepath.Join(dir, "out")
	r := cliExec(t, "run", plan, "--out", out, "--json", "--no-charts")
	cliWantCode(t, r, exitOK, "run", plan)
	results := cliJSONLines(t, r.out)
	if len(results) != 2 {
		t.Fatalf("%d results, want 2 (cmrr and psrr_pos of U01):\n%s", len(results), r.out)
	}
	for _, m := range results {
		if m["unit"] != "U01" || m["resolved"] != true {
			t.Errorf("result %v: want unit U01, resolved", m)
		}
	}
	journal, err := os.ReadFile(filepath.Join(out, "journal.jsonl"))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(journal), `"address":"`+mux.address) {
		t.Errorf("the journal does not record the switch at %s", mux.address)
	}
}
