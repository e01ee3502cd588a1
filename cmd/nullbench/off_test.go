package main

import (
	"bufio"
	"net"
	"strings"
	"testing"
	"time"
)

// sendSCPI writes commands to a simulated instrument, as someone at the
// bench would by hand, and waits for *OPC? so they have taken effect.
func sendSCPI(t *testing.T, address string, cmds ...string) {
	t.Helper()
	c, err := net.DialTimeout("tcp", strings.TrimPrefix(address, "tcp://"), 5*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	for _, cmd := range cmds {
		if _, err := c.Write([]byte(cmd + "\n")); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := c.Write([]byte("*OPC?\n")); err != nil {
		t.Fatal(err)
	}
	_ = c.SetReadDeadline(time.Now().Add(5 * time.Second))
	if _, err := bufio.NewReader(c).ReadString('\n'); err != nil {
		t.Fatal(err)
	}
}

// A bench left on by hand (rails at ±15 V, the common-mode source at
// +4 V, a unit's channel closed) is brought to its safe state by "off",
// and nothing is measured.
func TestOffCommand(t *testing.T) {
	b := cliStartSim(t, "")
	addr := map[string]string{}
	for _, e := range b.Endpoints() {
		addr[e.Role] = e.Address
	}
	sendSCPI(t, addr["supply"], "INST:NSEL 1", "VOLT 15", "OUTP ON", "INST:NSEL 2", "VOLT 15", "OUTP ON")
	sendSCPI(t, addr["source"], "INST:NSEL 1", "VOLT 4", "OUTP ON")
	s := b.Inspect()
	if !s.Supply[0].On || !s.Source[0].On {
		t.Fatalf("the bench was not switched on by hand: %+v", s)
	}
	plan := cliWriteFile(t, t.TempDir(), "plan.toml", b.BenchSection()+strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"))
	r := cliExec(t, "off", plan)
	cliWantCode(t, r, exitOK, "off", plan)
	s = b.Inspect()
	for _, c := range append(s.Supply, s.Source...) {
		if c.On || c.OutputVolts != 0 {
			t.Errorf("channel %d left on %v at %g V", c.Channel, c.On, c.OutputVolts)
		}
	}
	for _, u := range s.Units {
		if u.Damaged {
			t.Errorf("unit %s damaged: %s", u.ID, u.DamageReason)
		}
	}
	if len(s.Closed) != 0 {
		t.Errorf("switch channels %v still closed", s.Closed)
	}
	for _, w := range []string{"source_cm: ramped from +4", "supply_pos: output off", "safe state"} {
		if !strings.Contains(r.out, w) {
			t.Errorf("output does not say %q:\n%s", w, r.out)
		}
	}
}
