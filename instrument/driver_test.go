package instrument_test

import (
	"context"
	"errors"
	"math"
	"os"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
	pb "nullbench/instrument/instrumenttest"
)

// Driver tests play back SCPI exchanges in the forms of instrument/sim/doc.go, so each
// reads like the bench log of the operation.

// noErr is the empty error-queue answer (SCPI-99 Vol 2 §21.8).
var noErr = pb.Exchange{Comment: "check errors", Send: "SYST:ERR?", Reply: `0,"No error"`}

// sleeps records the settle waits a driver asks for instead of sleeping.
type sleeps []time.Duration

func (s *sleeps) sleep(_ context.Context, d time.Duration) error {
	*s = append(*s, d)
	return nil
}

func builtin(t *testing.T, name string) *instrument.Profile {
	t.Helper()
	p, err := instrument.BuiltinProfile(name)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func session(t *testing.T, name string, p *instrument.Profile, script []pb.Exchange) *instrument.Session {
	t.Helper()
	return instrument.NewSession(name, pb.NewPlayback(t, script), p.SessionOptions())
}

func TestMeterDriver(t *testing.T) {
	ctx := context.Background()
	p := builtin(t, "dmm")
	s := session(t, "dmm", p, []pb.Exchange{
		{Comment: "identify", Send: "*IDN?", Reply: "NULLBENCH-SIM,DMM-65,SIM0001,1.0"},
		{Comment: "select DC volts, 10 V range", Send: "CONF:VOLT:DC 10"}, noErr,
		{Comment: "integrate 10 PLC", Send: "VOLT:DC:NPLC 10"}, noErr,
		{Comment: "three readings per trigger", Send: "SAMP:COUN 3"}, noErr,
		{Comment: "read", Send: "READ?", Reply: "+1.00000000E-03,+1.10000000E-03,+9.00000000E-04"},
		{Comment: "one reading per trigger", Send: "SAMP:COUN 1"}, noErr,
		{Comment: "read: input beyond 1.2 x range", Send: "READ?", Reply: "+9.90000000E+37"},
		{Comment: "two readings", Send: "SAMP:COUN 2"}, noErr,
		{Comment: "read: second is SCPI NaN", Send: "READ?", Reply: "+1.0E-03,+9.91E37"},
		// The count is still 2: the driver does not send it again.
		{Comment: "read: the meter sends one value only", Send: "READ?", Reply: "+1.0E-03"},
	})
	var slept sleeps
	m, err := instrument.NewMeter(s, p, instrument.DriverOptions{Sleep: slept.sleep})
	if err != nil {
		t.Fatal(err)
	}
	if got := m.Identity(); got != "dmm (not identified; profile dmm)" {
		t.Errorf("Identity before *IDN? = %q", got)
	}
	if _, err := s.Identify(ctx); err != nil {
		t.Fatal(err)
	}
	if got := m.Identity(); got != "NULLBENCH-SIM,DMM-65,SIM0001,1.0" {
		t.Errorf("Identity = %q", got)
	}
	if err := m.ConfigureDCVolts(ctx, 10, 10); err != nil {
		t.Fatal(err)
	}
	if m.RangeVolts() != 10 || len(slept) != 0 { // the dmm profile settles 0 s
		t.Errorf("range %v, sleeps %v", m.RangeVolts(), slept)
	}
	v, err := m.ReadN(ctx, 3)
	if err != nil || len(v) != 3 || v[0] != 1e-3 || v[1] != 1.1e-3 || v[2] != 9e-4 {
		t.Errorf("ReadN(3) = %v, %v", v, err)
	}
	// Overload (SCPI-99; IEEE 488.2: 9.9E37 = +INF): +Inf and ErrOverload.
	r, err := m.Read(ctx)
	if !math.IsInf(r, 1) || !errors.Is(err, instrument.ErrOverload) || !strings.Contains(err.Error(), "the 10 V range is too small") {
		t.Errorf("Read on overload = %v, %v", r, err)
	}
	v, err = m.ReadN(ctx, 2)
	if len(v) != 2 || !math.IsNaN(v[1]) || !errors.Is(err, instrument.ErrNotANumber) {
		t.Errorf("ReadN with NaN = %v, %v", v, err)
	}
	if _, err := m.ReadN(ctx, 2); err == nil || !strings.Contains(err.Error(), "returned 1 readings, asked for 2") {
		t.Errorf("short READ? reply: %v", err)
	}
	if acc := m.Accuracy(); acc.GainPPM != 15 || acc.OffsetPPMOfRange != 4 {
		t.Errorf("Accuracy = %+v", acc)
	}
	// Bad arguments never reach the instrument.
	for _, bad := range [][2]float64{{0, 1}, {-10, 1}, {math.NaN(), 1}, {10, 0}, {10, math.Inf(1)}} {
		if err := m.ConfigureDCVolts(ctx, bad[0], bad[1]); err == nil {
			t.Errorf("ConfigureDCVolts(%v) accepted", bad)
		}
	}
	if _, err := m.ReadN(ctx, 0); err == nil {
		t.Error("ReadN(0) accepted")
	}
}

func TestSupplyNegativeRail(t *testing.T) {
	ctx := context.Background()
	p := builtin(t, "supply2")
	s := session(t, "psu", p, []pb.Exchange{
		{Comment: "select the V- channel", Send: "INST:NSEL 2"}, noErr,
		{Comment: "program -15 V as the magnitude 15", Send: "VOLT 15"}, noErr,
		{Comment: "select the V- channel", Send: "INST:NSEL 2"}, noErr,
		{Comment: "current limit 50 mA", Send: "CURR 0.05"}, noErr,
		{Comment: "select the V- channel", Send: "INST:NSEL 2"}, noErr,
		{Comment: "output on", Send: "OUTP ON"}, noErr,
		{Comment: "select the V- channel", Send: "INST:NSEL 2"}, noErr,
		{Comment: "read back: a positive magnitude", Send: "MEAS:VOLT?", Reply: "+1.50012000E+01"},
		{Comment: "select the V- channel", Send: "INST:NSEL 2"}, noErr,
		{Comment: "read current", Send: "MEAS:CURR?", Reply: "+1.2E-03"},
		{Comment: "select the V- channel", Send: "INST:NSEL 2"}, noErr,
		{Comment: "too much: -50 V", Send: "VOLT 50"},
		{Comment: "check errors: out of range", Send: "SYST:ERR?", Reply: `-222,"Data out of range"`}, noErr,
	})
	var slept sleeps
	d, err := instrument.NewSupply(s, p, "2", true, instrument.DriverOptions{Sleep: slept.sleep})
	if err != nil {
		t.Fatal(err)
	}
	if err := d.SetVolts(ctx, -15); err != nil {
		t.Fatal(err)
	}
	if err := d.SetCurrentLimit(ctx, 0.05); err != nil {
		t.Fatal(err)
	}
	if err := d.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	// The supply2 profile settles 100 ms after each set command.
	if len(slept) != 3 || slept[0] != 100*time.Millisecond {
		t.Errorf("settle waits = %v, want 3 × 100ms", slept)
	}
	v, err := d.ReadVolts(ctx)
	if err != nil || v != -15.0012 {
		t.Errorf("ReadVolts = %v, %v; want -15.0012 (sign restored)", v, err)
	}
	a, err := d.ReadAmps(ctx)
	if err != nil || a != 1.2e-3 {
		t.Errorf("ReadAmps = %v, %v", a, err)
	}
	// A positive request on the negative rail is refused before any I/O.
	err = d.SetVolts(ctx, 5)
	if err == nil || !strings.Contains(err.Error(), "negative rail") || !strings.Contains(err.Error(), "psu") {
		t.Errorf("SetVolts(+5) on the negative rail: %v", err)
	}
	// The instrument's error comes back typed, naming the command.
	err = d.SetVolts(ctx, -50)
	var ie *instrument.InstrumentError
	if !errors.As(err, &ie) || ie.Code != -222 || ie.Command != "VOLT 50" {
		t.Errorf("SetVolts(-50) = %v", err)
	}
	if len(slept) != 3 {
		t.Errorf("settled after a failed set: %v", slept)
	}
	if !d.Negative() || d.Channel() != "2" || d.Accuracy().ProgramGainPPM != 500 {
		t.Errorf("driver state: %v %v %+v", d.Negative(), d.Channel(), d.Accuracy())
	}
}

func TestSupplyPositiveRailAndChannels(t *testing.T) {
	ctx := context.Background()
	p := builtin(t, "supply2")
	s := session(t, "psu", p, []pb.Exchange{
		{Comment: "select V+", Send: "INST:NSEL 1"}, noErr,
		{Comment: "program +15 V", Send: "VOLT 15"}, noErr,
		{Comment: "select V+", Send: "INST:NSEL 1"}, noErr,
		{Comment: "read back", Send: "MEAS:VOLT?", Reply: "+1.49990000E+01"},
	})
	d, err := instrument.NewSupply(s, p, "1", false, instrument.DriverOptions{OverrideSettle: true})
	if err != nil {
		t.Fatal(err)
	}
	if err := d.SetVolts(ctx, 15); err != nil {
		t.Fatal(err)
	}
	if v, err := d.ReadVolts(ctx); err != nil || v != 14.999 {
		t.Errorf("ReadVolts = %v, %v", v, err)
	}
	if err := d.SetVolts(ctx, -1); err == nil || !strings.Contains(err.Error(), "negative = true") {
		t.Errorf("SetVolts(-1) on a positive channel: %v", err)
	}
	for _, ch := range []string{"3", "", "1;*RST", "1 2"} {
		if _, err := instrument.NewSupply(s, p, ch, false, instrument.DriverOptions{}); err == nil {
			t.Errorf("NewSupply accepted channel %q", ch)
		}
	}
	if _, err := instrument.NewMeter(s, p, instrument.DriverOptions{}); err == nil || !strings.Contains(err.Error(), "[supply]") {
		t.Errorf("NewMeter on a supply profile: %v", err)
	}
}

func TestSourceDriver(t *testing.T) {
	ctx := context.Background()
	p := builtin(t, "source3")
	s := session(t, "src", p, []pb.Exchange{
		{Comment: "select the nulling-loop reference", Send: "INST:NSEL 3"}, noErr,
		{Comment: "step the reference to -2.5 V", Send: "VOLT -2.5"}, noErr,
		{Comment: "select the nulling-loop reference", Send: "INST:NSEL 3"}, noErr,
		{Comment: "output off", Send: "OUTP OFF"}, noErr,
		{Comment: "select the nulling-loop reference", Send: "INST:NSEL 3"}, noErr,
		{Comment: "read back", Send: "MEAS:VOLT?", Reply: "-2.50010E+00"},
	})
	var slept sleeps
	d, err := instrument.NewSource(s, p, "3", instrument.DriverOptions{Sleep: slept.sleep, OverrideSettle: true, Settle: 7 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	if err := d.SetVolts(ctx, -2.5); err != nil {
		t.Fatal(err)
	}
	if err := d.SetOutput(ctx, false); err != nil {
		t.Fatal(err)
	}
	if v, err := d.ReadVolts(ctx); err != nil || v != -2.5001 {
		t.Errorf("ReadVolts = %v, %v", v, err)
	}
	if len(slept) != 2 || slept[0] != 7*time.Millisecond {
		t.Errorf("settle waits = %v, want the override 7ms twice", slept)
	}
	if _, err := instrument.NewSource(s, p, "4", instrument.DriverOptions{}); err == nil {
		t.Error("NewSource accepted channel 4 of a three-channel source")
	}
}

func TestSwitchDriver(t *testing.T) {
	ctx := context.Background()
	p := builtin(t, "switch")
	s := session(t, "mux", p, []pb.Exchange{
		{Comment: "open everything", Send: "ROUT:OPEN:ALL"}, noErr,
		{Comment: "connect unit 1", Send: "ROUT:CLOS (@101)"}, noErr,
		{Comment: "check the relay", Send: "ROUT:CLOS? (@101)", Reply: "1"},
		{Comment: "disconnect unit 1", Send: "ROUT:OPEN (@101)"}, noErr,
		{Comment: "check the relay", Send: "ROUT:CLOS? (@101)", Reply: "0"},
		{Comment: "connect unit 2", Send: "ROUT:CLOS (@102)"}, noErr,
		{Comment: "check the relay: stuck open", Send: "ROUT:CLOS? (@102)", Reply: "0"},
	})
	var slept sleeps
	d, err := instrument.NewSwitch(s, p, instrument.DriverOptions{Sleep: slept.sleep})
	if err != nil {
		t.Fatal(err)
	}
	if err := d.OpenAll(ctx); err != nil {
		t.Fatal(err)
	}
	if err := d.Close(ctx, "101"); err != nil {
		t.Fatal(err)
	}
	if err := d.Open(ctx, "101"); err != nil {
		t.Fatal(err)
	}
	err = d.Close(ctx, "102")
	if !errors.Is(err, instrument.ErrRelayState) || !strings.Contains(err.Error(), "mux switch") {
		t.Errorf("stuck relay: %v", err)
	}
	if len(slept) != 3 || slept[0] != 20*time.Millisecond {
		t.Errorf("settle waits = %v, want 3 × 20ms (switch profile)", slept)
	}
	for _, ch := range []string{"101,102", "101:104", "", "(@101)"} {
		if err := d.Close(ctx, ch); err == nil {
			t.Errorf("Close(%q) accepted", ch)
		}
	}
}

func TestChamberAndThermometer(t *testing.T) {
	ctx := context.Background()
	p := builtin(t, "chamber")
	s := session(t, "chamber", p, []pb.Exchange{
		{Comment: "set point 85 °C", Send: "SOUR:TEMP 85"}, noErr,
		{Comment: "air temperature", Send: "MEAS:TEMP?", Reply: "+2.53000E+01"},
		{Comment: "thermometer role, same sensor", Send: "MEAS:TEMP?", Reply: "+2.54E+01"},
	})
	c, err := instrument.NewChamber(s, p, instrument.DriverOptions{})
	if err != nil {
		t.Fatal(err)
	}
	th, err := instrument.NewThermometer(s, p, instrument.DriverOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := c.SetPointCelsius(ctx, 85); err != nil {
		t.Fatal(err)
	}
	if v, err := c.ReadCelsius(ctx); err != nil || v != 25.3 {
		t.Errorf("chamber ReadCelsius = %v, %v", v, err)
	}
	if v, err := th.ReadCelsius(ctx); err != nil || v != 25.4 {
		t.Errorf("thermometer ReadCelsius = %v, %v", v, err)
	}
	if c.AccuracyCelsius() != 0.5 || th.AccuracyCelsius() != 0.5 {
		t.Errorf("accuracy %v %v", c.AccuracyCelsius(), th.AccuracyCelsius())
	}
	if err := c.SetPointCelsius(ctx, math.NaN()); err == nil {
		t.Error("NaN set point accepted")
	}
}

// TestSessionRecoveryPlayback shows the recovery as a bench log: a query
// times out, its answer arrives late, and the *OPC? re-sync reads past it.
func TestSessionRecoveryPlayback(t *testing.T) {
	ctx := context.Background()
	conn := pb.NewPlayback(t, []pb.Exchange{
		{Comment: "read back, but the answer is late", Send: "MEAS:VOLT?", Reply: "+5.0E+00", Timeout: true},
		{Comment: "re-sync: the late answer comes first", Send: "*OPC?", Reply: "1"},
		{Comment: "check errors after the time-out", Send: "SYST:ERR?", Reply: `-410,"Query INTERRUPTED"`}, noErr,
		{Comment: "next query is answered in step", Send: "MEAS:VOLT?", Reply: "+5.1E+00"},
	})
	s := instrument.NewSession("src", conn, instrument.SessionOptions{CheckErrors: true})
	_, err := s.QueryFloat(ctx, "MEAS:VOLT?")
	var op *instrument.OpError
	if !errors.As(err, &op) || !op.Timeout() || op.Recovery != nil || len(op.Queue) != 1 || op.Queue[0].Code != -410 {
		t.Fatalf("timeout: %v (%+v)", err, op)
	}
	if !strings.Contains(err.Error(), "query error, sets ESR bit 2 QYE") {
		t.Errorf("error %q does not explain -410", err)
	}
	if v, err := s.QueryFloat(ctx, "MEAS:VOLT?"); err != nil || v != 5.1 {
		t.Errorf("after recovery: %v, %v; want 5.1", v, err)
	}
}

// deadlineConn notes how long each READ? may take.
type deadlineConn struct {
	*pb.Playback
	readBudget time.Duration
}

func (c *deadlineConn) Write(ctx context.Context, b []byte) error {
	if strings.HasPrefix(string(b), "READ?") {
		if dl, ok := ctx.Deadline(); ok {
			c.readBudget = time.Until(dl)
		}
	}
	return c.Playback.Write(ctx, b)
}

func TestMeterReadTimeoutGrowsWithIntegration(t *testing.T) {
	ctx := context.Background()
	p := builtin(t, "dmm")
	p.CheckErrors = false
	conn := &deadlineConn{Playback: pb.NewPlayback(t, []pb.Exchange{
		{Comment: "range", Send: "CONF:VOLT:DC 1"},
		{Comment: "100 PLC", Send: "VOLT:DC:NPLC 100"},
		{Comment: "50 readings", Send: "SAMP:COUN 50"},
		{Comment: "read", Send: "READ?", Reply: strings.TrimSuffix(strings.Repeat("+1.0E-06,", 50), ",")},
	})}
	s := instrument.NewSession("dmm", conn, p.SessionOptions())
	m, err := instrument.NewMeter(s, p, instrument.DriverOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := m.ConfigureDCVolts(ctx, 1, 100); err != nil {
		t.Fatal(err)
	}
	if _, err := m.ReadN(ctx, 50); err != nil {
		t.Fatal(err)
	}
	// 50 readings × 100 PLC × 20 ms = 100 s of integration (one PLC at
	// 50 Hz is 20 ms, typical data-sheet figures, common practice); the exchange may take 5 s + 2 × 100 s.
	if conn.readBudget < 200*time.Second || conn.readBudget > 205*time.Second {
		t.Errorf("READ? budget %v, want about 205 s", conn.readBudget)
	}
}

// TestScriptFilePlayback plays a bench log kept as a text script
// (instrumenttest.WriteScript's format) in testdata.
func TestScriptFilePlayback(t *testing.T) {
	f, err := os.Open("testdata/psu_negative_rail.script")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	script, err := pb.ParseScript(f)
	if err != nil {
		t.Fatal(err)
	}
	p := builtin(t, "supply2")
	d, err := instrument.NewSupply(session(t, "psu", p, script), p, "2", true, instrument.DriverOptions{OverrideSettle: true})
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	if err := d.SetVolts(ctx, -15); err != nil {
		t.Fatal(err)
	}
	if v, err := d.ReadVolts(ctx); err != nil || v != -14.9995 {
		t.Errorf("ReadVolts = %v, %v; want -14.9995", v, err)
	}
}
