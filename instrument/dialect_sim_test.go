package instrument_test

import (
	"context"
	"errors"
	"math"
	"slices"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
	"nullbench/instrument/sim"
)

// openDialectBench serves the simulated bench in the given dialects and
// opens the named instrument with its endpoint's built-in profile (or
// prof, when not nil).
func openDialectBench(t *testing.T, dialects []string, name string, prof *instrument.Profile) (*sim.Bench, *instrument.Instrument) {
	t.Helper()
	b, err := sim.New(sim.Config{Clock: sim.NewManualClock(), Dialects: dialects})
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	if err := b.Start(ctx, sim.ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = b.Close() })
	for _, ep := range b.Endpoints() {
		if ep.Name != name {
			continue
		}
		addr, err := instrument.ParseAddress(ep.Address)
		if err != nil {
			t.Fatal(err)
		}
		if prof == nil {
			if prof, err = instrument.BuiltinProfile(ep.Profile); err != nil {
				t.Fatal(err)
			}
		}
		in, err := instrument.OpenWith(ctx, name, addr, prof, instrument.OpenOptions{})
		if err != nil {
			t.Fatalf("open %s: %v", name, err)
		}
		t.Cleanup(func() { _ = in.Close() })
		return b, in
	}
	t.Fatalf("no instrument %s on the bench", name)
	return nil, nil
}

var noSettle = instrument.DriverOptions{OverrideSettle: true}

// A switch without open-all (sim dialect mux_noopenall): OpenAll opens the
// relays the driver closed, one by one, and the simulated relays really
// end open; a relay closed by hand is opened once adopted.
func TestSwitchWithoutOpenAllOpensWhatItClosed(t *testing.T) {
	ctx := context.Background()
	b, in := openDialectBench(t, []string{"mux_noopenall"}, "mux", nil)
	if in.Profile.Switch.OpenAll != "" {
		t.Fatalf("profile %s has open_all %q", in.Profile.Name, in.Profile.Switch.OpenAll)
	}
	// The dialect really has no open-all: the default profile's command is refused.
	if err := in.Session.Write(ctx, "ROUT:OPEN:ALL"); err == nil || !strings.Contains(err.Error(), "-113") {
		t.Fatalf("ROUT:OPEN:ALL on mux_noopenall: %v, want -113 Undefined header", err)
	}
	sw, err := instrument.NewSwitch(in.Session, in.Profile, noSettle)
	if err != nil {
		t.Fatal(err)
	}
	for _, ch := range []string{"101", "103"} {
		if err := sw.Close(ctx, ch); err != nil {
			t.Fatal(err)
		}
	}
	if err := sw.Open(ctx, "103"); err != nil {
		t.Fatal(err)
	}
	if err := sw.Close(ctx, "102"); err != nil {
		t.Fatal(err)
	}
	if got := b.Inspect().Closed; !slices.Equal(got, []int{101, 102}) {
		t.Fatalf("closed before OpenAll: %v", got)
	}
	if got := sw.Tracked(); !slices.Equal(got, []string{"101", "102"}) {
		t.Fatalf("tracked %v, want [101 102]", got)
	}
	if err := sw.OpenAll(ctx); err != nil {
		t.Fatal(err)
	}
	if got := b.Inspect().Closed; len(got) != 0 {
		t.Errorf("relays still closed after OpenAll: %v", got)
	}
	if got := sw.Tracked(); len(got) != 0 {
		t.Errorf("still tracked after OpenAll: %v", got)
	}
	// A relay left closed by someone else is unknown until adopted.
	if err := in.Session.Write(ctx, "ROUT:CLOS (@105)"); err != nil {
		t.Fatal(err)
	}
	if err := sw.OpenAll(ctx); err != nil {
		t.Fatal(err)
	}
	if got := b.Inspect().Closed; !slices.Equal(got, []int{105}) {
		t.Fatalf("closed by hand: %v", got)
	}
	if err := sw.Adopt("105", "106"); err != nil {
		t.Fatal(err)
	}
	if err := sw.OpenAll(ctx); err != nil {
		t.Fatal(err)
	}
	if got := b.Inspect().Closed; len(got) != 0 {
		t.Errorf("adopted relay still closed: %v", got)
	}
}

// When a relay does not open, OpenAll says which, keeps it for the next
// try, and still opens the others.
func TestSwitchWithoutOpenAllKeepsAFailedRelay(t *testing.T) {
	ctx := context.Background()
	b, in := openDialectBench(t, []string{"mux_noopenall"}, "mux", nil)
	sw, err := instrument.NewSwitch(in.Session, in.Profile, noSettle)
	if err != nil {
		t.Fatal(err)
	}
	for _, ch := range []string{"101", "102"} {
		if err := sw.Close(ctx, ch); err != nil {
			t.Fatal(err)
		}
	}
	if err := b.InjectFault("mux", sim.Fault{Kind: sim.FaultQueueError, Match: "OPEN (@101)", Code: -240, Message: "Hardware error"}); err != nil {
		t.Fatal(err)
	}
	err = sw.OpenAll(ctx)
	if err == nil || !strings.Contains(err.Error(), "101") || !strings.Contains(err.Error(), "no open_all") {
		t.Fatalf("OpenAll with a failing relay: %v", err)
	}
	if strings.Count(err.Error(), "mux switch") != 1 {
		t.Errorf("label repeated: %v", err)
	}
	if got := sw.Tracked(); !slices.Equal(got, []string{"101"}) {
		t.Errorf("tracked after the failure %v, want [101]", got)
	}
	if got := b.Inspect().Closed; slices.Contains(got, 102) {
		t.Errorf("102 not opened because 101 failed: %v", got)
	}
	if err := sw.OpenAll(ctx); err != nil {
		t.Fatal(err)
	}
	if got := b.Inspect().Closed; len(got) != 0 {
		t.Errorf("still closed: %v", got)
	}
}

// Each supply dialect's built-in profile programs the rails the same way
// seen from the tool: V+ = +12 V, V- = -12 V read back within the
// profile's read-back accuracy (± 500 ppm + 10 mV), and the sim's
// outputs really at 12 V each.
func TestSupplyDialectsProgramTheRails(t *testing.T) {
	for _, tc := range []struct {
		dialect, negInst, negCh string
	}{
		{"", "psu", "2"},
		{"psu_chanlist", "psu", "2"},
		{"psu_single", "psu2", "1"},
		{"psu_negout", "psu", "2"},
		{"psu_slow", "psu", "2"},
	} {
		t.Run(tc.dialect, func(t *testing.T) {
			ctx := context.Background()
			var ds []string
			if tc.dialect != "" {
				ds = []string{tc.dialect}
			}
			b, in := openDialectBench(t, ds, "psu", nil)
			negIn := in
			if tc.negInst != "psu" {
				var err error
				ep := endpoint(t, b, tc.negInst)
				if negIn, err = instrument.Open(ctx, tc.negInst, ep.Address, ep.Profile, instrument.OpenOptions{}); err != nil {
					t.Fatal(err)
				}
				t.Cleanup(func() { _ = negIn.Close() })
			}
			pos, err := instrument.NewSupply(in.Session, in.Profile, "1", false, noSettle)
			if err != nil {
				t.Fatal(err)
			}
			neg, err := instrument.NewSupply(negIn.Session, negIn.Profile, tc.negCh, true, noSettle)
			if err != nil {
				t.Fatal(err)
			}
			if got, want := neg.NegativeOutput(), tc.dialect == "psu_negout"; got != want {
				t.Errorf("NegativeOutput %v, want %v", got, want)
			}
			for _, st := range []struct {
				d *instrument.SupplyDriver
				v float64
			}{{pos, 12}, {neg, -12}} {
				if err := st.d.SetCurrentLimit(ctx, 0.05); err != nil {
					t.Fatal(err)
				}
				if err := st.d.SetVolts(ctx, st.v); err != nil {
					t.Fatal(err)
				}
				if err := st.d.SetOutput(ctx, true); err != nil {
					t.Fatal(err)
				}
			}
			b.Clock().(*sim.ManualClock).Advance(time.Second)
			for _, st := range []struct {
				d *instrument.SupplyDriver
				v float64
			}{{pos, 12}, {neg, -12}} {
				got, err := st.d.ReadVolts(ctx)
				if err != nil {
					t.Fatal(err)
				}
				a := st.d.Accuracy()
				// read-back limit plus the programming limit: the output itself is off by up to that
				if lim := a.ReadbackHalfWidthVolts(st.v) + a.ProgramHalfWidthVolts(st.v); math.Abs(got-st.v) > lim {
					t.Errorf("read back %g V, programmed %g V (limit ± %g V)", got, st.v, lim)
				}
			}
			s := b.Inspect()
			for i, c := range s.Supply {
				if !c.On || math.Abs(c.ProgrammedVolts-12) > 1e-9 {
					t.Errorf("sim channel %d: %+v, want 12 V (magnitude) and on", i+1, c)
				}
			}
			// The negative rail refuses a positive voltage whichever way it is made.
			if err := neg.SetVolts(ctx, 1); err == nil {
				t.Error("the negative rail accepted +1 V")
			}
		})
	}
}

func endpoint(t *testing.T, b *sim.Bench, name string) sim.Endpoint {
	t.Helper()
	for _, ep := range b.Endpoints() {
		if ep.Name == name {
			return ep
		}
	}
	t.Fatalf("no endpoint %s", name)
	return sim.Endpoint{}
}

// A true negative output bound as the positive rail is refused.
func TestNegativeOutputOnlyServesTheNegativeRail(t *testing.T) {
	p, err := instrument.BuiltinProfile("psu_negout")
	if err != nil {
		t.Fatal(err)
	}
	s := instrument.NewSession("psu", nil, instrument.SessionOptions{})
	_, err = instrument.NewSupply(s, p, "2", false, noSettle)
	if err == nil || !strings.Contains(err.Error(), "negative = true") {
		t.Fatalf("channel 2 bound as a positive rail: %v", err)
	}
}

// The slow supply (sim dialect psu_slow) loses messages sent while it is
// busy; a profile pause (wait) or *OPC? after each set (opc_after_set)
// both keep it working, and so does a compound message.
func TestSlowSupplyNeedsWaitOrOPC(t *testing.T) {
	base, err := instrument.BuiltinProfile("psu_slow")
	if err != nil {
		t.Fatal(err)
	}
	if base.Terminator != "\r" || !base.OPCAfterSet || !base.Compound {
		t.Fatalf("psu_slow profile: terminator %q opc_after_set %v compound %v", base.Terminator, base.OPCAfterSet, base.Compound)
	}
	withWait := *base
	withWait.OPCAfterSet, withWait.Compound, withWait.Wait = false, false, 20*time.Millisecond
	for _, tc := range []struct {
		name string
		p    *instrument.Profile
	}{{"opc_after_set+compound", base}, {"wait", &withWait}} {
		t.Run(tc.name, func(t *testing.T) {
			ctx := context.Background()
			b, in := openDialectBench(t, []string{"psu_slow"}, "psu", tc.p)
			d, err := instrument.NewSupply(in.Session, in.Profile, "2", true, noSettle)
			if err != nil {
				t.Fatal(err)
			}
			for _, v := range []float64{-3, -6, -9} {
				if err := d.SetVolts(ctx, v); err != nil {
					t.Fatal(err)
				}
			}
			if got := b.Inspect().Supply[1].ProgrammedVolts; got != 9 {
				t.Errorf("channel 2 at %g V, want 9", got)
			}
		})
	}
}

// What goes on the wire for each per-instrument option: *OPC? after a set
// and before the error queue (opc_after_set), a pause after every message
// (wait), and a channel's select joined to its command with ';' and the
// command rooted with ':' (compound).
func TestSessionOptionsOnTheWire(t *testing.T) {
	ctx := context.Background()
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{CheckErrors: true, OPCAfterSet: true, Wait: 5 * time.Millisecond})
	start := time.Now()
	if err := s.Write(ctx, "VOLT 5"); err != nil {
		t.Fatal(err)
	}
	took := time.Since(start)
	if got, want := f.History(), []string{"VOLT 5", "*OPC?", "SYST:ERR?"}; !slices.Equal(got, want) {
		t.Errorf("sent %q, want %q", got, want)
	}
	if took < 15*time.Millisecond {
		t.Errorf("three messages took %v, less than three 5 ms pauses", took)
	}

	f2 := newFakeInstrument(t)
	s2 := dialFake(t, f2, instrument.SessionOptions{})
	p, err := instrument.BuiltinProfile("supply2")
	if err != nil {
		t.Fatal(err)
	}
	cp := *p
	cp.Compound = true
	d, err := instrument.NewSupply(s2, &cp, "2", true, noSettle)
	if err != nil {
		t.Fatal(err)
	}
	if err := d.SetVolts(ctx, -5); err != nil {
		t.Fatal(err)
	}
	select {
	case got := <-f2.received:
		if want := "INST:NSEL 2;:VOLT 5"; got != want {
			t.Errorf("sent %q, want %q", got, want)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("nothing arrived")
	}
}

// A source that ends its messages with CR LF EOT (sim dialect src_eot):
// driven through its built-in profile, set and read-back work on every
// channel; the LF profile of the same source gets no whole reply (the
// instrument never sends a bare LF at the end of a message, and waits for
// CR LF EOT before it acts).
func TestSourceWithEOTTerminator(t *testing.T) {
	ctx := context.Background()
	b, in := openDialectBench(t, []string{"src_eot"}, "src", nil)
	if in.Profile.Terminator != sim.TerminatorEOT {
		t.Fatalf("profile %s terminator %q, want %q", in.Profile.Name, in.Profile.Terminator, sim.TerminatorEOT)
	}
	id, err := in.Session.Identify(ctx)
	if err != nil || id.Raw != sim.IDNSourceEOT {
		t.Fatalf("*IDN? = %q, %v", id.Raw, err)
	}
	for i, ch := range []string{"1", "2", "3"} {
		src, err := instrument.NewSource(in.Session, in.Profile, ch, noSettle)
		if err != nil {
			t.Fatal(err)
		}
		want := 1.5 * float64(i+1)
		if err := src.SetVolts(ctx, want); err != nil {
			t.Fatal(err)
		}
		if err := src.SetOutput(ctx, true); err != nil {
			t.Fatal(err)
		}
		b.Clock().(*sim.ManualClock).Advance(time.Second) // the output slews
		got, err := src.ReadVolts(ctx)
		if err != nil {
			t.Fatal(err)
		}
		// The source's accuracy, 300 ppm + 5 mV on program and read-back
		// each (profile figures, common practice, no published source).
		if tol := 2 * (300e-6*want + 0.005); math.Abs(got-want) > tol {
			t.Errorf("channel %s reads %g V, want %g V ± %g", ch, got, want, tol)
		}
		if err := src.SetOutput(ctx, false); err != nil {
			t.Fatal(err)
		}
	}
	// The same instrument through an LF profile: no reply ends in a bare
	// LF, so the query times out instead of reading a wrong value.
	lf, err := instrument.BuiltinProfile("source3")
	if err != nil {
		t.Fatal(err)
	}
	lf.IDNPattern, lf.Timeout = "", 200*time.Millisecond
	b2, err := sim.New(sim.Config{Clock: sim.NewManualClock(), Dialects: []string{"src_eot"}})
	if err != nil {
		t.Fatal(err)
	}
	if err := b2.Start(ctx, sim.ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	defer b2.Close()
	addr, err := instrument.ParseAddress(endpoint(t, b2, "src").Address)
	if err != nil {
		t.Fatal(err)
	}
	in2, err := instrument.OpenWith(ctx, "src", addr, lf, instrument.OpenOptions{})
	if err == nil {
		defer in2.Close()
		if _, err := in2.Session.Query(ctx, "*IDN?"); err == nil {
			t.Errorf("an LF session read a reply from a CR LF EOT instrument")
		}
	} else if !errors.Is(err, instrument.ErrTimeout) {
		t.Errorf("open through an LF profile: %v, want a time-out", err)
	}
}
