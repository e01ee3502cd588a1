package sim

import (
	"context"
	"sync"
	"testing"
	"time"
)

// countingClock is a ManualClock that counts its sleeps.
type countingClock struct {
	*ManualClock
	mu     sync.Mutex
	sleeps int
}

func (c *countingClock) Sleep(ctx context.Context, d time.Duration) error {
	c.mu.Lock()
	c.sleeps++
	c.mu.Unlock()
	return c.ManualClock.Sleep(ctx, d)
}

func (c *countingClock) count() int {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.sleeps
}

// TestReadSleepsOnce: a READ? of n readings waits for its integration with
// one sleep to the end of the last window, not one per reading or per
// sample (on a time-scaled bench every tiny sleep costs the wall clock's
// timer granularity), and still takes n × NPLC/50 s of bench time with the
// tail of a just-closed relay in its first window (the samples are taken
// at their times in each window, as before).
func TestReadSleepsOnce(t *testing.T) {
	d, err := ParseDUT([]byte("seed = 3\n[[unit]]\nid = \"R\"\ndrift_uv_per_c = 0.0\ngradient_uv_per_c = 0.0\n"), "relay.toml")
	if err != nil {
		t.Fatal(err)
	}
	clk := &countingClock{ManualClock: NewManualClock()}
	b, err := New(Config{DUT: d, Clock: clk})
	if err != nil {
		t.Fatal(err)
	}
	if err := b.Start(context.Background(), ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = b.Close() })
	var dmm, psu, mux *client
	for _, ep := range b.Endpoints() {
		switch ep.Name {
		case NameDMM:
			dmm = dial(t, ep.Address)
		case NameSupply:
			psu = dial(t, ep.Address)
		case NameSwitch:
			mux = dial(t, ep.Address)
		}
	}
	dmm.query("CONF:VOLT:DC 1;:VOLT:DC:NPLC 10;:SAMP:COUN 20;*OPC?")
	psu.query("INST:NSEL 1;:VOLT 15;:OUTP ON;:INST:NSEL 2;:VOLT 15;:OUTP ON;*OPC?")
	clk.Advance(time.Minute)
	mux.query("ROUT:CLOS (@101);*OPC?")
	before, t0 := clk.count(), clk.Now()
	vs := dmm.floats("READ?")
	if n := clk.count() - before; n != 1 {
		t.Errorf("READ? of 20 readings slept %d times, want 1", n)
	}
	if got, want := clk.Now().Sub(t0), 20*200*time.Millisecond; got != want {
		t.Errorf("READ? took %v of bench time, want 20 × 10 PLC = %v", got, want)
	}
	if len(vs) != 20 {
		t.Fatalf("%d readings", len(vs))
	}
	// The relay tail (1–5 µV RTI, τ ≤ 50 ms) is in the first 200 ms window
	// only: the first reading stands out from the rest by at least a
	// tenth of a µV × K (K = 1000) but the later ones agree.
	rest, _ := stats(vs[5:])
	t.Logf("first %.6g V, later mean %.6g V: %.3g µV RTI", vs[0], rest, (vs[0]-rest)/1000*1e6)
	if d := vs[0] - rest; d*d < (0.1e-3)*(0.1e-3) {
		t.Errorf("first reading %.6g V, later mean %.6g V: the relay tail was not integrated", vs[0], rest)
	}
}
