package sim

import (
	"bufio"
	"context"
	"net"
	"os"
	"strconv"
	"strings"
	"testing"
	"time"
)

// client is a raw SCPI-over-TCP client written for these tests (the sim may
// not use the tool's instrument package).
type client struct {
	t    testing.TB
	conn net.Conn
	r    *bufio.Reader
}

// ioGuard bounds every read so a broken server fails the test instead of
// hanging it; it is a guard, not a timing assertion.
const ioGuard = 20 * time.Second

func dial(t testing.TB, address string) *client {
	t.Helper()
	hostport := strings.TrimPrefix(address, "tcp://")
	c, err := net.Dial("tcp", hostport)
	if err != nil {
		t.Fatalf("dial %s: %v", address, err)
	}
	t.Cleanup(func() { _ = c.Close() })
	return &client{t: t, conn: c, r: bufio.NewReader(c)}
}

func (c *client) send(line string) {
	c.t.Helper()
	_ = c.conn.SetWriteDeadline(time.Now().Add(ioGuard))
	if _, err := c.conn.Write([]byte(line + "\n")); err != nil {
		c.t.Fatalf("write %q: %v", line, err)
	}
}

// readLine reads one response line (error returned, not fatal).
func (c *client) readLine(guard time.Duration) (string, error) {
	_ = c.conn.SetReadDeadline(time.Now().Add(guard))
	s, err := c.r.ReadString('\n')
	return strings.TrimRight(s, "\r\n"), err
}

func (c *client) query(line string) string {
	c.t.Helper()
	c.send(line)
	s, err := c.readLine(ioGuard)
	if err != nil {
		c.t.Fatalf("query %q: %v", line, err)
	}
	return s
}

func (c *client) float(line string) float64 {
	c.t.Helper()
	s := c.query(line)
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil {
		c.t.Fatalf("query %q: %q is not a number", line, s)
	}
	return v
}

func (c *client) floats(line string) []float64 {
	c.t.Helper()
	s := c.query(line)
	var out []float64
	for _, f := range strings.Split(s, ",") {
		v, err := strconv.ParseFloat(strings.TrimSpace(f), 64)
		if err != nil {
			c.t.Fatalf("query %q: %q is not a list of numbers", line, s)
		}
		out = append(out, v)
	}
	return out
}

// set sends a command line and waits until the instrument has executed it
// (so commands on different connections happen in the order written), then
// checks the error queue is empty.
func (c *client) set(line string) {
	c.t.Helper()
	if r := c.query(line + ";*OPC?"); !strings.HasSuffix(r, "1") {
		c.t.Fatalf("%q: sync got %q", line, r)
	}
	c.noError()
}

// noError checks the error queue is empty.
func (c *client) noError() {
	c.t.Helper()
	if e := c.query("SYST:ERR?"); e != `0,"No error"` {
		c.t.Fatalf("error queue: %s", e)
	}
}

// testBench is a started bench on a ManualClock with one client per
// instrument.
type testBench struct {
	b                           *Bench
	clock                       *ManualClock
	dmm, psu, src, mux, chamber *client
	gen, dig, acvm              *client
}

func startBench(t testing.TB, cfg Config) *testBench {
	t.Helper()
	clk := NewManualClock()
	cfg.Clock = clk
	// SIM_TEST_SEED reruns the statistical tests with other noise seeds.
	if s := os.Getenv("SIM_TEST_SEED"); s != "" && cfg.Seed == 0 {
		cfg.Seed, _ = strconv.ParseInt(s, 10, 64)
	}
	b, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	if err := b.Start(context.Background(), ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = b.Close() })
	tb := &testBench{b: b, clock: clk}
	for _, ep := range b.Endpoints() {
		c := dial(t, ep.Address)
		switch ep.Name {
		case NameDMM:
			tb.dmm = c
		case NameSupply:
			tb.psu = c
		case NameSource:
			tb.src = c
		case NameSwitch:
			tb.mux = c
		case NameChamber:
			tb.chamber = c
		case NameGen:
			tb.gen = c
		case NameDig:
			tb.dig = c
		case NameACVM:
			tb.acvm = c
		}
	}
	return tb
}

// wait advances bench time.
func (tb *testBench) wait(d time.Duration) { tb.clock.Advance(d) }

// powerUp sets ±pos/neg rails with a 50 mA limit and turns them on, with
// the source outputs on at 0 V, then closes channel ch.
func (tb *testBench) powerUp(t testing.TB, pos, neg float64, ch int) {
	t.Helper()
	tb.psu.set("INST:NSEL 1;:VOLT " + ff(pos) + ";:CURR 0.05;:OUTP ON")
	tb.psu.set("INST:NSEL 2;:VOLT " + ff(-neg) + ";:CURR 0.05;:OUTP ON")
	tb.src.set("SOUR1:VOLT 0;:OUTP1 ON;:SOUR2:VOLT 0;:OUTP2 ON;:SOUR3:VOLT 0;:OUTP3 ON")
	tb.wait(time.Second)
	tb.mux.set("ROUT:CLOS (@" + strconv.Itoa(ch) + ")")
}

// rails programs V+ and V− (the supply's ch2 is a positive magnitude), in
// the order that never widens the span beyond the larger of old and new.
func (tb *testBench) rails(t testing.TB, pos, neg float64) {
	t.Helper()
	tb.psu.set("INST:NSEL 1;:VOLT " + ff(pos) + ";:INST:NSEL 2;:VOLT " + ff(-neg))
}

func ff(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// meanRead configures NPLC and takes n readings, returning their mean.
func (tb *testBench) meanRead(t testing.TB, n int) float64 {
	t.Helper()
	vs := tb.dmm.floats("SAMP:COUN " + strconv.Itoa(n) + ";:READ?")
	var s float64
	for _, v := range vs {
		s += v
	}
	return s / float64(len(vs))
}
