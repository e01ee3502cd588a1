package instrument_test

import (
	"context"
	"errors"
	"net"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
)

// The three faults a bench meets most, taken apart and stated cause first
// and once (instrument.Fault.Sentence): a command the instrument refuses
// (its error queue), a query it never answers (time-out, with what the
// queue then held), and a dropped connection, after which later commands
// fail at once as not sent instead of retrying a re-sync over a dead
// socket. Error codes and meanings: SCPI-99 Vol 2 §21.8 (-113 Undefined
// header).
func TestFaultSentences(t *testing.T) {
	ctx := context.Background()
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{CheckErrors: true, Timeout: 200 * time.Millisecond})

	// Refused.
	err := s.Write(ctx, "BOGUS 1")
	fl, ok := instrument.FaultOf(err)
	if !ok || fl.Kind != instrument.FaultRefused || fl.Code != -113 {
		t.Fatalf("refused: %+v from %v", fl, err)
	}
	want := `loop refused "BOGUS 1": error -113 "Undefined header" (SCPI-99: Undefined header`
	if got := fl.Sentence(); !strings.HasPrefix(got, want) {
		t.Errorf("refused:\n%s\nwant it to start\n%s", got, want)
	}

	// No answer: the queue read after the time-out says why.
	_, err = s.Query(ctx, "NOPE?")
	fl, ok = instrument.FaultOf(err)
	if !ok || fl.Kind != instrument.FaultNoAnswer {
		t.Fatalf("no answer: %+v from %v", fl, err)
	}
	for _, w := range []string{`loop did not answer "NOPE?" in time`, `its error queue then held: -113 "Undefined header"`} {
		if !strings.Contains(fl.Sentence(), w) {
			t.Errorf("no answer: %q does not say %q", fl.Sentence(), w)
		}
	}

	// Dropped: the error names the command whose error-queue check found
	// the connection closed; later commands are not sent and say so, still
	// errors.Is ErrClosed (the safe state dials again on it).
	err = s.Write(ctx, "DROP")
	fl, ok = instrument.FaultOf(err)
	if !ok || fl.Kind != instrument.FaultLost || fl.Command != "SYST:ERR?" || fl.After != "DROP" {
		t.Fatalf("dropped: %+v from %v", fl, err)
	}
	if w := `the connection to loop was lost at "SYST:ERR?" (checking "DROP"): `; !strings.HasPrefix(fl.Sentence(), w) {
		t.Errorf("dropped: %q, want it to start %q", fl.Sentence(), w)
	}
	before := len(f.History())
	for _, cmd := range []string{"VOLT 5", "OUTP OFF"} {
		err = s.Write(ctx, cmd)
		fl, ok = instrument.FaultOf(err)
		if !ok || fl.Kind != instrument.FaultNotSent || fl.LostAt != "SYST:ERR?" || !errors.Is(err, instrument.ErrClosed) {
			t.Fatalf("after the drop, %s: %+v from %v", cmd, fl, err)
		}
		if w := `loop: "` + cmd + `" not sent: the connection was lost earlier, at "SYST:ERR?"`; fl.Sentence() != w {
			t.Errorf("after the drop: %q, want %q", fl.Sentence(), w)
		}
		for _, bad := range []string{"re-sync", "drain input", "out of step"} {
			if strings.Contains(err.Error(), bad) {
				t.Errorf("after the drop, %s: %v", cmd, err)
			}
		}
	}
	if n := len(f.History()); n != before {
		t.Errorf("%d commands reached the instrument after the drop", n-before)
	}
}

// A driver names its part of the instrument once, in the session's error,
// not as a second label in front of it ("psu (supply channel 2): ...",
// never "psu supply channel 2: psu: ...").
func TestDriverNamesTheInstrumentOnce(t *testing.T) {
	ctx := context.Background()
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{CheckErrors: true, Timeout: 200 * time.Millisecond})
	p, err := instrument.ParseProfile([]byte(`name = "p"
[supply]
channels = ["1", "2"]
select = "INST:NSEL {channel}"
set_volts = "BADVOLT {value}"
set_current_limit = "CURR {value}"
set_output = "OUTP {value}"
read_volts = "MEAS:VOLT?"
read_amps = "MEAS:CURR?"
program_gain_ppm = 1
program_offset_volts = 0
readback_gain_ppm = 1
readback_offset_volts = 0
`), "p.toml")
	if err != nil {
		t.Fatal(err)
	}
	sup, err := instrument.NewSupply(s, p, "2", false, instrument.DriverOptions{OverrideSettle: true})
	if err != nil {
		t.Fatal(err)
	}
	err = sup.SetVolts(ctx, 5)
	if err == nil {
		t.Fatal("BADVOLT accepted")
	}
	msg := err.Error()
	if !strings.HasPrefix(msg, `loop (supply channel 2): after "BADVOLT 5": instrument error -113`) || strings.Count(msg, "loop") != 1 {
		t.Errorf("error %q names the instrument more than once or not first", msg)
	}
}

// An instrument that accepts the connection but never answers is named
// once, with its address, in the error of Open.
func TestOpenErrorNamesTheInstrumentOnce(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	go func() {
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			defer c.Close() // silent: reads nothing, answers nothing
		}
	}()
	addr, err := instrument.ParseAddress("tcp://" + ln.Addr().String())
	if err != nil {
		t.Fatal(err)
	}
	p, err := instrument.BuiltinProfile("source3")
	if err != nil {
		t.Fatal(err)
	}
	p.Timeout = 100 * time.Millisecond
	_, err = instrument.OpenWith(context.Background(), "src", addr, p, instrument.OpenOptions{})
	if !errors.Is(err, instrument.ErrTimeout) {
		t.Fatalf("open a silent instrument: %v, want a time-out", err)
	}
	want := `open failed: src (` + addr.String() + `) did not answer "*IDN?" in time`
	if msg := err.Error(); !strings.HasPrefix(msg, want) || strings.Count(msg, "src") != 1 {
		t.Errorf("%q\nwant it to start %q and name src only there", msg, want)
	}
}
