package sim

import (
	"context"
	"errors"
	"io"
	"net"
	"runtime"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"
	"unicode/utf8"
)

func endpoint(t testing.TB, b *Bench, name string) Endpoint {
	t.Helper()
	for _, ep := range b.Endpoints() {
		if ep.Name == name {
			return ep
		}
	}
	t.Fatalf("no endpoint %s", name)
	return Endpoint{}
}

// TestFaults exercises each injected fault, one-shot and persistent.
func TestFaults(t *testing.T) {
	cases := []struct {
		name  string
		inst  string
		fault Fault
		check func(t *testing.T, tb *testBench, addr string)
	}{
		{"drop one-shot", NameDMM, Fault{Kind: FaultDrop, Match: "READ?"}, func(t *testing.T, tb *testBench, addr string) {
			c := dial(t, addr)
			if got := c.query("*IDN?"); got != IDNDMM {
				t.Fatalf("IDN %q", got)
			}
			c.send("READ?")
			if _, err := c.readLine(ioGuard); !errors.Is(err, io.EOF) {
				t.Fatalf("want the connection closed (EOF), got %v", err)
			}
			c2 := dial(t, addr)
			if vs := c2.floats("READ?"); len(vs) != 1 {
				t.Fatalf("second READ? %v", vs)
			}
		}},
		{"drop persistent", NameSupply, Fault{Kind: FaultDrop, Match: "*idn?", Persistent: true}, func(t *testing.T, tb *testBench, addr string) {
			for i := 0; i < 2; i++ {
				c := dial(t, addr)
				if got := c.query("*OPC?"); got != "1" {
					t.Fatalf("OPC %q", got)
				}
				c.send("*IDN?")
				if _, err := c.readLine(ioGuard); !errors.Is(err, io.EOF) {
					t.Fatalf("pass %d: want EOF, got %v", i, err)
				}
			}
			if err := tb.b.ClearFaults(NameSupply); err != nil {
				t.Fatal(err)
			}
			if got := dial(t, addr).query("*IDN?"); got != IDNSupply {
				t.Fatalf("after ClearFaults: %q", got)
			}
		}},
		{"delay", NameSource, Fault{Kind: FaultDelay, Match: "*IDN?", Delay: 1500 * time.Millisecond}, func(t *testing.T, tb *testBench, addr string) {
			c := dial(t, addr)
			c.send("*IDN?")
			// The reply cannot come before the delay: a short read times out.
			_, err := c.readLine(100 * time.Millisecond)
			var ne net.Error
			if !errors.As(err, &ne) || !ne.Timeout() {
				t.Fatalf("want a timeout while delayed, got %v", err)
			}
			if got, err := c.readLine(ioGuard); err != nil || got != IDNSource {
				t.Fatalf("late reply %q %v", got, err)
			}
		}},
		{"no reply", NameSwitch, Fault{Kind: FaultNoReply}, func(t *testing.T, tb *testBench, addr string) {
			c := dial(t, addr)
			c.send("ROUT:CLOS (@101)") // no response: the fault waits for one
			c.send("ROUT:CLOS? (@101)")
			_, err := c.readLine(300 * time.Millisecond)
			var ne net.Error
			if !errors.As(err, &ne) || !ne.Timeout() {
				t.Fatalf("want no reply, got %v", err)
			}
			if got := c.query("ROUT:CLOS? (@101)"); got != "1" {
				t.Fatalf("next query %q (a stale reply would show here)", got)
			}
		}},
		{"queue error", NameChamber, Fault{Kind: FaultQueueError, Code: -300, Message: "Heater overtemperature"}, func(t *testing.T, tb *testBench, addr string) {
			c := dial(t, addr)
			c.send("SOUR:TEMP 30")
			if got := c.query("SYST:ERR?"); got != `-300,"Heater overtemperature"` {
				t.Fatalf("queue %q", got)
			}
			if got := c.query("*ESR?"); got != "136" { // PON 128 + DDE 8
				t.Fatalf("ESR %q, want 136", got)
			}
			c.noError()
		}},
		{"garble", NameDMM, Fault{Kind: FaultGarble, Match: "IDN"}, func(t *testing.T, tb *testBench, addr string) {
			c := dial(t, addr)
			got := c.query("*IDN?")
			if got == IDNDMM || utf8.ValidString(got) || len(got) == 0 {
				t.Fatalf("want garbled bytes, got %q", got)
			}
			if got := c.query("*IDN?"); got != IDNDMM {
				t.Fatalf("one-shot garble repeated: %q", got)
			}
		}},
		{"garble persistent, matching only", NameSupply, Fault{Kind: FaultGarble, Match: "MEAS", Persistent: true}, func(t *testing.T, tb *testBench, addr string) {
			c := dial(t, addr)
			for i := 0; i < 3; i++ {
				if got := c.query("MEAS:VOLT?"); utf8.ValidString(got) {
					t.Fatalf("MEAS reply %q not garbled", got)
				}
				if got := c.query("VOLT?"); got != "+0.00000000E+00" {
					t.Fatalf("VOLT? %q garbled", got)
				}
			}
		}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			tb := startBench(t, Config{})
			if err := tb.b.InjectFault(tc.inst, tc.fault); err != nil {
				t.Fatal(err)
			}
			tc.check(t, tb, endpoint(t, tb.b, tc.inst).Address)
		})
	}
}

func TestInjectFaultErrors(t *testing.T) {
	b, err := New(Config{Clock: NewManualClock()})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	for _, tc := range []struct {
		inst string
		f    Fault
	}{
		{"scope", Fault{Kind: FaultDrop}}, {NameDMM, Fault{Kind: 99}}, {NameDMM, Fault{Kind: FaultQueueError}},
	} {
		if err := b.InjectFault(tc.inst, tc.f); err == nil {
			t.Errorf("InjectFault(%q, %+v): no error", tc.inst, tc.f)
		}
	}
}

// waitGoroutines waits (bounded) until the goroutine count falls to n.
func waitGoroutines(t *testing.T, n int) {
	t.Helper()
	deadline := time.Now().Add(5 * time.Second)
	for runtime.NumGoroutine() > n {
		if time.Now().After(deadline) {
			buf := make([]byte, 1<<16)
			t.Fatalf("%d goroutines left, want <= %d:\n%s", runtime.NumGoroutine(), n, buf[:runtime.Stack(buf, true)])
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// TestCloseLeavesNoGoroutines: Close ends connections, blocked readings and
// running INITs, on the real scaled clock.
func TestCloseLeavesNoGoroutines(t *testing.T) {
	base := runtime.NumGoroutine()
	b, err := New(Config{TimeScale: 1})
	if err != nil {
		t.Fatal(err)
	}
	if err := b.Start(context.Background(), ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	var conns []net.Conn
	for _, ep := range b.Endpoints() {
		for i := 0; i < 2; i++ {
			c, err := net.Dial("tcp", strings.TrimPrefix(ep.Address, "tcp://"))
			if err != nil {
				t.Fatal(err)
			}
			conns = append(conns, c)
		}
	}
	// A long reading in progress (NPLC 100 × 1000 = 2000 s) and an INIT.
	_, _ = conns[0].Write([]byte("VOLT:DC:NPLC 100;:SAMP:COUN 1000;:READ?\n"))
	_, _ = conns[1].Write([]byte("INIT\n"))
	// Make sure both were received before closing.
	for _, c := range conns[2:4] {
		_, _ = c.Write([]byte("*IDN?\n"))
		buf := make([]byte, 100)
		_ = c.SetReadDeadline(time.Now().Add(ioGuard))
		if _, err := c.Read(buf); err != nil {
			t.Fatal(err)
		}
	}
	if err := b.Close(); err != nil {
		t.Fatal(err)
	}
	for _, c := range conns {
		_ = c.SetReadDeadline(time.Now().Add(ioGuard))
		// A close seen as EOF or as a reset (the bench closed with unread
		// bytes in its buffer) both mean closed; a time-out does not.
		if _, err := io.ReadAll(c); err != nil && !errors.Is(err, syscall.ECONNRESET) {
			t.Errorf("connection not closed by the bench: %v", err)
		}
		_ = c.Close()
	}
	if err := b.Close(); err != nil {
		t.Fatal(err)
	}
	waitGoroutines(t, base)
}

// TestContextCancelStops: cancelling Start's context stops serving.
func TestContextCancelStops(t *testing.T) {
	base := runtime.NumGoroutine()
	b, err := New(Config{Clock: NewManualClock()})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	if err := b.Start(ctx, ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	addr := strings.TrimPrefix(b.Endpoints()[0].Address, "tcp://")
	c := dial(t, "tcp://"+addr)
	if got := c.query("*IDN?"); got != IDNDMM {
		t.Fatal(got)
	}
	cancel()
	if _, err := c.readLine(ioGuard); !errors.Is(err, io.EOF) {
		t.Errorf("open connection after cancel: %v, want EOF", err)
	}
	deadline := time.Now().Add(ioGuard)
	for {
		cc, err := net.Dial("tcp", addr)
		if err != nil {
			break
		}
		_ = cc.Close()
		if time.Now().After(deadline) {
			t.Fatal("still accepting after cancel")
		}
		time.Sleep(10 * time.Millisecond)
	}
	_ = b.Close()
	_ = c.conn.Close()
	waitGoroutines(t, base)
}

func TestStartOptions(t *testing.T) {
	b, err := New(Config{Clock: NewManualClock()})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	if err := b.Start(context.Background(), ServeOptions{SerialInstrument: "scope"}); err == nil {
		t.Error("unknown serial instrument accepted")
	}
	// Find five free consecutive ports for FirstPort.
	var first int
	for try := 0; try < 20 && first == 0; try++ {
		ln, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatal(err)
		}
		p := ln.Addr().(*net.TCPAddr).Port
		_ = ln.Close()
		if p+8 < 65535 {
			first = p
		}
	}
	if err := b.Start(context.Background(), ServeOptions{FirstPort: first}); err != nil {
		t.Skipf("ports %d.. not free: %v", first, err)
	}
	for i, ep := range b.Endpoints() {
		want := "tcp://127.0.0.1:" + strconv.Itoa(first+i)
		if ep.Address != want {
			t.Errorf("%s at %s, want %s", ep.Name, ep.Address, want)
		}
	}
	if err := b.Start(context.Background(), ServeOptions{}); err == nil {
		t.Error("second Start accepted")
	}
	want := []struct{ name, role, profile, idn string }{
		{"dmm", "meter", "dmm", IDNDMM}, {"psu", "supply", "supply2", IDNSupply}, {"src", "source", "source3", IDNSource},
		{"mux", "switch", "switch", IDNSwitch}, {"chamber", "chamber", "chamber", IDNChamber},
		{"gen", "generator", "generator", IDNGen}, {"dig", "digitizer", "digitizer", IDNDig}, {"acvm", "ac_meter", "acvm", IDNACVM},
	}
	if n := len(b.Endpoints()); n != len(want) {
		t.Fatalf("%d endpoints, want %d", n, len(want))
	}
	for i, ep := range b.Endpoints() {
		w := want[i]
		if ep.Name != w.name || ep.Role != w.role || ep.Profile != w.profile || ep.IDN != w.idn {
			t.Errorf("endpoint %d: %+v", i, ep)
		}
	}
	_ = b.Close()
	if err := b.Start(context.Background(), ServeOptions{}); err == nil {
		t.Error("Start after Close accepted")
	}
}

// TestBenchSection checks the exact shape of the [bench] section sim --bench-out writes.
func TestBenchSection(t *testing.T) {
	b, err := New(Config{TimeScale: 100})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	if err := b.Start(context.Background(), ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	s := b.BenchSection()
	eps := b.Endpoints()
	want := "[bench]\ntime_scale = 100.0\n"
	for _, ep := range eps {
		want += "\n[bench.instrument." + ep.Name + "]\naddress = \"" + ep.Address + "\"\nprofile = \"" + ep.Profile + "\"\n"
	}
	want += `
[bench.roles]
meter       = { instrument = "dmm" }
supply_pos  = { instrument = "psu", channel = "1" }
supply_neg  = { instrument = "psu", channel = "2", negative = true }
source_cm   = { instrument = "src", channel = "1" }
source_diff = { instrument = "src", channel = "2" }
source_ref  = { instrument = "src", channel = "3" }
switch      = { instrument = "mux" }
chamber     = { instrument = "chamber" }
thermometer = { instrument = "chamber" }
`
	if s != want {
		t.Errorf("bench section:\n%s\nwant:\n%s", s, want)
	}
}

// TestConcurrentClients: several connections per instrument at once (run
// with -race); each instrument executes one message at a time.
func TestConcurrentClients(t *testing.T) {
	tb := startBench(t, Config{})
	tb.powerUp(t, 15, -15, 101)
	var wg sync.WaitGroup
	errs := make(chan error, 64)
	for _, ep := range tb.b.Endpoints() {
		for k := 0; k < 3; k++ {
			wg.Add(1)
			go func(ep Endpoint) {
				defer wg.Done()
				c, err := net.Dial("tcp", strings.TrimPrefix(ep.Address, "tcp://"))
				if err != nil {
					errs <- err
					return
				}
				defer c.Close()
				r := make([]byte, 4096)
				for i := 0; i < 20; i++ {
					line := "*IDN?;*OPC?\n"
					switch ep.Name {
					case NameDMM:
						line = "VOLT:DC:NPLC 0.2;:READ?\n"
					case NameSupply:
						line = "MEAS:VOLT?;:MEAS:CURR?\n"
					case NameChamber:
						line = "MEAS:TEMP?\n"
					}
					if _, err := c.Write([]byte(line)); err != nil {
						errs <- err
						return
					}
					_ = c.SetReadDeadline(time.Now().Add(ioGuard))
					n, err := c.Read(r)
					if err != nil || n == 0 || r[n-1] != '\n' {
						errs <- errors.New(ep.Name + ": bad reply " + string(r[:n]))
						return
					}
				}
			}(ep)
		}
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
}
