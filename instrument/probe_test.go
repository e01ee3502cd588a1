package instrument_test

import (
	"context"
	"errors"
	"flag"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
)

// fakeProfile is a profile file for the loopback fake instrument.
const fakeProfile = `name = "loopmeter"
description = "the loopback fake of these tests"
idn_pattern = '^HARROWGATE-FAKE,LOOP-1,'
timeout = "2s"
[meter]
configure = "CONF:VOLT:DC {range}"
nplc = "VOLT:DC:NPLC {nplc}"
count = "SAMP:COUN {count}"
read = "READ?"
gain_ppm = 15
offset_ppm_of_range = 4
`

func TestProbe(t *testing.T) {
	f := newFakeInstrument(t)
	ctx := context.Background()
	// Leave two errors in the queue for the probe to find.
	s := dialFake(t, f, instrument.SessionOptions{})
	if err := s.Write(ctx, "TWOERR"); err != nil {
		t.Fatal(err)
	}
	if err := s.WaitComplete(ctx); err != nil {
		t.Fatal(err)
	}

	r, err := instrument.Probe(ctx, f.Addr, nil, 5)
	if err != nil {
		t.Fatal(err)
	}
	if r.Identity.Model != "LOOP-1" || r.Profile != nil || len(r.Errors) != 2 || r.Errors[0].Code != -102 {
		t.Errorf("probe report: %+v", r)
	}
	if r.Rounds != 5 || r.RTTMin <= 0 || r.RTTMin > r.RTTMedian || r.RTTMedian > r.RTTMax {
		t.Errorf("round trips: %d, min %v med %v max %v", r.Rounds, r.RTTMin, r.RTTMedian, r.RTTMax)
	}
	text := r.String()
	for _, want := range []string{f.Addr, "HARROWGATE-FAKE,LOOP-1,0001,0.1", "none matches",
		`-102,"Syntax error"`, "command error", "median", "over 5 round trips"} {
		if !strings.Contains(text, want) {
			t.Errorf("report lacks %q:\n%s", want, text)
		}
	}

	p, err := instrument.ParseProfile([]byte(fakeProfile), "loop.toml")
	if err != nil {
		t.Fatal(err)
	}
	r, err = instrument.Probe(ctx, f.Addr, []*instrument.Profile{p}, 0)
	if err != nil || r.Profile != p || r.Rounds != instrument.DefaultProbeRounds || len(r.Errors) != 0 {
		t.Errorf("probe with a matching profile: %+v, %v", r, err)
	}
	var sb strings.Builder
	if err := r.Write(&sb); err != nil || !strings.Contains(sb.String(), "profile:   loopmeter (loop.toml), roles: meter") ||
		!strings.Contains(sb.String(), "queue empty") {
		t.Errorf("report:\n%s", sb.String())
	}

	if _, err := instrument.Probe(ctx, "tcp//nowhere", nil, 1); err == nil {
		t.Error("a bad address probed")
	}
}

func TestOpen(t *testing.T) {
	f := newFakeInstrument(t)
	ctx := context.Background()
	s := dialFake(t, f, instrument.SessionOptions{})
	if err := s.Write(ctx, "TWOERR"); err != nil {
		t.Fatal(err)
	}
	if err := s.WaitComplete(ctx); err != nil {
		t.Fatal(err)
	}

	// The built-in dmm profile does not describe this instrument.
	_, err := instrument.Open(ctx, "dmm", f.Addr, "dmm", instrument.OpenOptions{})
	if !errors.Is(err, instrument.ErrWrongInstrument) || !strings.Contains(err.Error(), "HARROWGATE-FAKE") {
		t.Errorf("Open with the wrong profile: %v", err)
	}

	file := filepath.Join(t.TempDir(), "loop.toml")
	if err := os.WriteFile(file, []byte(fakeProfile), 0o644); err != nil {
		t.Fatal(err)
	}
	in, err := instrument.Open(ctx, "dmm", f.Addr, file, instrument.OpenOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer in.Close()
	if in.Profile.Name != "loopmeter" || in.Identity.Serial != "0001" || len(in.Stale) != 2 {
		t.Errorf("opened: %+v", in)
	}
	if in.Session.Timeout().Seconds() != 2 {
		t.Errorf("session time-out %v, the profile says 2s", in.Session.Timeout())
	}
	m, err := instrument.NewMeter(in.Session, in.Profile, instrument.DriverOptions{})
	if err != nil || m.Identity() != "HARROWGATE-FAKE,LOOP-1,0001,0.1" {
		t.Errorf("meter on the opened instrument: %v, %v", m, err)
	}
}

func TestDialErrors(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := "tcp://" + ln.Addr().String()
	ln.Close() // nothing listens there now
	a, _ := instrument.ParseAddress(addr)
	_, err = instrument.Dial(context.Background(), a, instrument.DialOptions{})
	if err == nil || !strings.Contains(err.Error(), "refused") || !strings.Contains(err.Error(), "raw SCPI socket") {
		t.Errorf("refused: %v", err)
	}
	_, err = instrument.Dial(context.Background(), a, instrument.DialOptions{Terminator: ";"})
	if err == nil || !strings.Contains(err.Error(), "terminator") {
		t.Errorf("bad terminator: %v", err)
	}
}

var update = flag.Bool("update", false, "rewrite golden files in testdata/")

// TestProbeReportGolden keeps the report a user reads stable; refresh with
// go test ./instrument -run ProbeReportGolden -update.
func TestProbeReportGolden(t *testing.T) {
	p, err := instrument.BuiltinProfile("supply2")
	if err != nil {
		t.Fatal(err)
	}
	id, _ := instrument.ParseIdentity(benchIdentities["supply2"])
	r := instrument.ProbeReport{
		Address:  "tcp://127.0.0.1:40002",
		Identity: id,
		Profile:  p,
		Errors: []instrument.QueueEntry{
			{Code: -113, Message: "Undefined header"},
			{Code: -222, Message: "Data out of range;VOLT max 36"},
			{Code: 120, Message: "Over-temperature"},
		},
		Rounds: 10, RTTMin: 182 * time.Microsecond, RTTMedian: 2345678 * time.Nanosecond, RTTMax: 1500 * time.Millisecond,
	}
	checkGolden(t, "probe_report.golden", r.String())

	r = instrument.ProbeReport{Address: "serial:///dev/ttyUSB0?baud=9600&bits=8&parity=none&stop=1",
		Identity: instrument.Identity{Raw: "HARROWGATE,HX-TC8,0,3.2", Maker: "HARROWGATE", Model: "HX-TC8", Serial: "0", Firmware: "3.2"}}
	checkGolden(t, "probe_report_unmatched.golden", r.String())
}

func checkGolden(t *testing.T, name, got string) {
	t.Helper()
	file := filepath.Join("testdata", name)
	if *update {
		if err := os.WriteFile(file, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(file)
	if err != nil {
		t.Fatalf("%v (run with -update to create it)", err)
	}
	if got != string(want) {
		t.Errorf("%s differs (run with -update if the change is intended):\ngot:\n%s\nwant:\n%s", file, got, want)
	}
}
