//go:build unix

package main

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"nullbench/instrument/sim"
	"nullbench/procedure/journal"
)

// SAFETY.md: on Ctrl-C (SIGINT), kill (SIGTERM) or a closed terminal
// (SIGHUP) the tool brings the bench to its safe state by itself and the
// journal gets its end record; a closed output pipe does not stop a run.
// These run the real binary as a child against the simulated bench and
// send it the real signal.
func TestSignalsBringTheBenchToItsSafeState(t *testing.T) {
	bin := cliBinary(t)
	for _, tc := range []struct {
		name string
		sig  syscall.Signal
	}{
		{"SIGINT", syscall.SIGINT},
		{"SIGTERM", syscall.SIGTERM},
		{"SIGHUP", syscall.SIGHUP},
	} {
		t.Run(tc.name, func(t *testing.T) {
			b := cliStartSim(t, "")
			dir := t.TempDir()
			cliWriteFile(t, dir, "plan.toml", b.BenchSection()+strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"))
			child := exec.Command(bin, "run", "plan.toml", "--out", "out")
			child.Dir = dir
			var childErr bytes.Buffer
			child.Stderr = &childErr
			if err := child.Start(); err != nil {
				t.Fatal(err)
			}
			waited := make(chan error, 1)
			go func() { waited <- child.Wait() }()
			jp := filepath.Join(dir, "out", "journal.jsonl")
			deadline := time.After(60 * time.Second)
		poll:
			for {
				select {
				case err := <-waited:
					t.Fatalf("the run ended (%v) before the signal:\n%s", err, childErr.String())
				case <-deadline:
					_ = child.Process.Kill()
					t.Fatalf("no readings after 60 s:\n%s", childErr.String())
				case <-time.After(time.Millisecond):
					if cliCount(t, jp, "reading") >= 5 {
						break poll
					}
				}
			}
			if err := child.Process.Signal(tc.sig); err != nil {
				t.Fatal(err)
			}
			var code int
			select {
			case err := <-waited:
				if ee, ok := err.(*exec.ExitError); ok {
					code = ee.ExitCode()
				} else if err != nil {
					t.Fatal(err)
				}
			case <-time.After(60 * time.Second):
				_ = child.Process.Kill()
				t.Fatalf("the run did not stop after %s:\n%s", tc.name, childErr.String())
			}
			if code != exitFailure || !strings.Contains(childErr.String(), "the bench is in its safe state") {
				t.Errorf("exit %d, want %d with the safe state reached:\n%s", code, exitFailure, childErr.String())
			}
			checkCliBenchSafe(t, b)
			c, err := journal.ReadFile(jp)
			if err != nil {
				t.Fatal(err)
			}
			if c.End == nil || c.End.Status != journal.EndInterrupted {
				t.Errorf("journal end %+v, want %q", c.End, journal.EndInterrupted)
			}
		})
	}

	t.Run("closed output pipe", func(t *testing.T) {
		b := cliStartSim(t, "")
		dir := t.TempDir()
		cliWriteFile(t, dir, "plan.toml", b.BenchSection()+strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"))
		child := exec.Command(bin, "run", "plan.toml", "--out", "out")
		child.Dir = dir
		r, w, err := os.Pipe()
		if err != nil {
			t.Fatal(err)
		}
		child.Stdout, child.Stderr = w, w
		if err := child.Start(); err != nil {
			t.Fatal(err)
		}
		w.Close()
		r.Close() // nobody reads: every write of the child fails (EPIPE)
		done := make(chan error, 1)
		go func() { done <- child.Wait() }()
		select {
		case <-done:
		case <-time.After(120 * time.Second):
			_ = child.Process.Kill()
			t.Fatal("the run did not finish")
		}
		checkCliBenchSafe(t, b)
		c, err := journal.ReadFile(filepath.Join(dir, "out", "journal.jsonl"))
		if err != nil {
			t.Fatal(err)
		}
		if c.End == nil || c.End.Status != journal.EndComplete {
			t.Errorf("journal end %+v: a closed output pipe stopped the run", c.End)
		}
		if _, err := os.Stat(filepath.Join(dir, "out", "campaign.xlsx")); err != nil {
			t.Errorf("no workbook: %v", err)
		}
	})
}

// checkCliBenchSafe wants every output of the simulated bench at 0 V or
// off, the switch open and no unit damaged.
func checkCliBenchSafe(t *testing.T, b *sim.Bench) {
	t.Helper()
	s := b.Inspect()
	for _, c := range append(append([]sim.ChannelSnapshot(nil), s.Supply...), s.Source...) {
		if c.On && c.OutputVolts != 0 {
			t.Errorf("channel %d left on at %g V", c.Channel, c.OutputVolts)
		}
	}
	if len(s.Closed) != 0 {
		t.Errorf("switch channels left closed: %v", s.Closed)
	}
	for _, u := range s.Units {
		if u.Damaged {
			t.Errorf("unit %s damaged: %s", u.ID, u.DamageReason)
		}
	}
}
