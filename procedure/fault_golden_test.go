package procedure

import (
	"context"
	"errors"
	"flag"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"nullbench/instrument/sim"
	"nullbench/procedure/fault"
	"nullbench/procedure/plan"
)

var updateFaults = flag.Bool("update", false, "rewrite the golden files under testdata/")

// faultPort hides the loopback ports the simulated bench drew.
var faultPort = regexp.MustCompile(`tcp://127\.0\.0\.1:[0-9]+`)

// The message of a run stopped by an instrument fault on the simulated
// bench, in golden files (testdata/faults/*.golden; -update rewrites
// them): the cause first and once (instrument, its role, channel and
// address, the command, the error-queue entry), then where in the plan
// (file:line of the [[test]]), then the safe state: "SAFE STATE NOT
// REACHED" only when an output may still be on, and the relays said as
// they are known. Each fault is armed after the cmrr point at +5 V of U01
// and fires on the next matching command.
func TestFaultMessagesGolden(t *testing.T) {
	type injected struct {
		instrument string
		f          sim.Fault
	}
	cases := []struct {
		name    string
		faults  []injected
		hazard  bool // SAFE STATE NOT REACHED expected
		reached bool // the safe state reached without any problem
	}{
		{"set_refused", []injected{{sim.NameSupply, sim.Fault{Kind: sim.FaultQueueError, Match: "VOLT 1", Code: -222, Message: "Data out of range"}}}, false, true},
		{"query_timeout", []injected{{sim.NameSupply, sim.Fault{Kind: sim.FaultNoReply, Match: "MEAS:VOLT?"}}}, false, true},
		{"query_timeout_queue", []injected{
			{sim.NameSupply, sim.Fault{Kind: sim.FaultQueueError, Match: "MEAS:VOLT?", Code: -230, Message: "Data corrupt or stale"}},
			{sim.NameSupply, sim.Fault{Kind: sim.FaultNoReply, Match: "MEAS:VOLT?"}},
		}, false, true},
		{"connection_dropped_redialed", []injected{{sim.NameSupply, sim.Fault{Kind: sim.FaultDrop, Match: "MEAS:VOLT?"}}}, false, true},
		{"connection_dropped_for_good", []injected{{sim.NameSupply, sim.Fault{Kind: sim.FaultDrop, Match: "VOLT", Persistent: true}}}, true, false},
		{"relays_not_opened", []injected{
			{sim.NameDMM, sim.Fault{Kind: sim.FaultNoReply, Match: "READ?"}},
			{sim.NameSwitch, sim.Fault{Kind: sim.FaultQueueError, Match: "ROUT:OPEN", Code: -240, Message: "Hardware error;relay driver", Persistent: true}},
		}, false, false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			su := startSim(t, plan.CMBySupplyShift, false, 500*time.Millisecond)
			armed := false
			hook := progressHook{fn: func(i PointInfo) {
				if armed || i.Unit != "U01" || i.Test != plan.TestCMRR || i.LevelVolts != 5 {
					return
				}
				armed = true
				for _, f := range tc.faults {
					if err := su.bench.InjectFault(f.instrument, f.f); err != nil {
						t.Error(err)
					}
				}
			}}
			_, err := Run(context.Background(), su.plan, su.rig, RunOptions{Clock: su.clock, Progress: hook,
				Timing: Timing{SafeCallTimeout: time.Second, SafeStateTimeout: 20 * time.Second}})
			var re *fault.RunError
			if !errors.As(err, &re) || !armed {
				t.Fatalf("armed %v, err %v", armed, err)
			}
			msg := faultPort.ReplaceAllString(err.Error(), "tcp://127.0.0.1:PORT")
			if got := strings.Contains(msg, "SAFE STATE NOT REACHED"); got != tc.hazard {
				t.Errorf("says SAFE STATE NOT REACHED = %v, want %v", got, tc.hazard)
			}
			if (re.SafeState == nil) != tc.reached {
				t.Errorf("safe state problems %v, want reached = %v", re.SafeState, tc.reached)
			}
			// The hazard verdict agrees with the simulated bench.
			s := su.bench.Inspect()
			live := false
			for _, c := range append(append([]sim.ChannelSnapshot(nil), s.Supply...), s.Source...) {
				if c.On {
					live = true
				}
			}
			if live != tc.hazard {
				t.Errorf("an output is on = %v on the simulated bench, message hazard = %v", live, tc.hazard)
			}
			// The cause once: the first line is not repeated, and no
			// re-sync chain.
			first, _, _ := strings.Cut(msg, "\n")
			if strings.Count(msg, first) != 1 {
				t.Errorf("the first line is repeated:\n%s", msg)
			}
			for _, bad := range []string{"session out of step", "re-sync after", "drain input", "error: error"} {
				if strings.Contains(msg, bad) {
					t.Errorf("message holds %q:\n%s", bad, msg)
				}
			}
			golden := filepath.Join("testdata", "faults", tc.name+".golden")
			if *updateFaults {
				if err := os.MkdirAll(filepath.Dir(golden), 0o755); err != nil {
					t.Fatal(err)
				}
				if err := os.WriteFile(golden, []byte(msg+"\n"), 0o644); err != nil {
					t.Fatal(err)
				}
			}
			want, err := os.ReadFile(golden)
			if err != nil {
				t.Fatalf("%v (run with -update to write it)", err)
			}
			if msg+"\n" != string(want) {
				t.Errorf("message differs from %s:\n--- got\n%s\n--- want\n%s", golden, msg, want)
			}
		})
	}
}
