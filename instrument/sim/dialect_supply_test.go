package sim

import (
	"bufio"
	"context"
	"net"
	"strings"
	"testing"
	"time"
)

// psuSlowConn serves the bench in dialect psu_slow and dials its supply.
func psuSlowConn(t *testing.T) (*Bench, net.Conn, *bufio.Reader) {
	t.Helper()
	b, err := New(Config{Clock: NewManualClock(), Dialects: []string{"psu_slow"}})
	if err != nil {
		t.Fatal(err)
	}
	if err := b.Start(context.Background(), ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = b.Close() })
	var addr string
	for _, ep := range b.Endpoints() {
		if ep.Name == NameSupply {
			addr = strings.TrimPrefix(ep.Address, "tcp://")
		}
	}
	c, err := net.DialTimeout("tcp", addr, 5*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = c.Close() })
	return b, c, bufio.NewReader(c)
}

// The psu_slow supply ends messages with CR, loses a message that comes
// in the same breath as a set command (-363 Input buffer overrun, SCPI-99
// vol. 2 §21.8.11 device-specific errors), and *OPC? waits until it is
// ready (IEEE 488.2 §12.5.3).
func TestPSUSlowLosesMessagesWhileBusy(t *testing.T) {
	b, c, r := psuSlowConn(t)
	_ = c.SetDeadline(time.Now().Add(5 * time.Second))
	// Both lines arrive together: the query right after the set is lost.
	if _, err := c.Write([]byte("INST:NSEL 2;:VOLT 7\rMEAS:VOLT?\r*OPC?\rSYST:ERR?\r")); err != nil {
		t.Fatal(err)
	}
	first, err := r.ReadString('\r')
	if err != nil {
		t.Fatal(err)
	}
	if first != "1\r" {
		t.Fatalf("first reply %q, want the *OPC? 1 (MEAS:VOLT? lost)", first)
	}
	e, err := r.ReadString('\r')
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(e, "-363,") {
		t.Errorf("SYST:ERR? = %q, want -363 Input buffer overrun", e)
	}
	if got := b.Inspect().Supply[1].ProgrammedVolts; got != 7 {
		t.Errorf("channel 2 programmed %g V, want 7", got)
	}
}

// psu_negout's channel 2 takes -40..0 V and answers in negative volts;
// psu_chanlist needs a channel list on every channel command.
func TestSupplyDialectCommandForms(t *testing.T) {
	for _, tc := range []struct {
		dialect string
		lines   []string // sent in order; queries' replies compared with want
		want    []string
	}{
		{"psu_negout", []string{"INST:NSEL 2", "VOLT -12.5", "VOLT?", "VOLT? MIN", "VOLT 3", "SYST:ERR?"},
			[]string{"-1.25000000E+01", "-4.00000000E+01", `-222,"Data out of range`}},
		{"psu_chanlist", []string{"VOLT 4,(@2)", "VOLT? (@2)", "VOLT? (@1)", "VOLT 4", "SYST:ERR?", "INST:NSEL 2", "SYST:ERR?"},
			[]string{"+4.00000000E+00", "+0.00000000E+00", `-109,"Missing parameter`, `-113,"Undefined header`}},
	} {
		t.Run(tc.dialect, func(t *testing.T) {
			b, err := New(Config{Clock: NewManualClock(), Dialects: []string{tc.dialect}})
			if err != nil {
				t.Fatal(err)
			}
			in := b.byName[NameSupply]
			var got []string
			for _, l := range tc.lines {
				if r, has := in.execute(context.Background(), l); has {
					got = append(got, r)
				}
			}
			if len(got) != len(tc.want) {
				t.Fatalf("replies %q, want %q", got, tc.want)
			}
			for i := range got {
				if !strings.HasPrefix(got[i], tc.want[i]) {
					t.Errorf("reply %d = %q, want %q…", i, got[i], tc.want[i])
				}
			}
		})
	}
}
