package instrument_test

import (
	"context"
	"math"
	"strings"
	"testing"

	"nullbench/instrument"
	"nullbench/instrument/sim"
)

// TestDigitizerBlocksOverPTY: the digitizer served on a pseudo-terminal (a
// real tty in raw mode, the serial transport used for real) transfers
// int16 blocks (any byte value, LF and CR included) and real32 blocks intact:
// the same record read over serial in both formats agrees to the int16
// step.
func TestDigitizerBlocksOverPTY(t *testing.T) {
	fb := startFreqBenchOn(t, sim.Config{}, sim.ServeOptions{SerialInstrument: sim.NameDig})
	if a := fb.ins["dig"].Address.String(); !strings.HasPrefix(a, "serial://") {
		t.Fatalf("digitizer at %s, want a serial address", a)
	}
	fb.powerUp(t)
	ctx := context.Background()
	g := fb.gen["1"]
	if err := g.SetSine(ctx, 1e3, 1, 0); err != nil {
		t.Fatal(err)
	}
	if err := g.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	fits := fb.captureFit(t, 1e3, 2000, []float64{2, 0.5})
	if a := fits[0].AmplitudeV; math.Abs(a-1) > 0.02 {
		t.Errorf("ch1 amplitude %.5f V over serial, want about 1 V", a)
	}
	// The same bench, real32 little-endian: a profile edited in place.
	p := *fb.ins["dig"].Profile
	dc := *p.Digitizer
	dc.Format, dc.Data, dc.ByteOrder = "FORM:DATA REAL,32;:FORM:BORD SWAP", "real32", "little"
	p.Digitizer = &dc
	d, err := instrument.NewDigitizer(fb.ins["dig"].Session, &p, instrument.DriverOptions{OverrideSettle: true})
	if err != nil {
		t.Fatal(err)
	}
	if err := d.Configure(ctx, 1e5, 2000, []float64{2, 0.5}); err != nil {
		t.Fatal(err)
	}
	wf, err := d.Capture(ctx)
	if err != nil {
		t.Fatal(err)
	}
	var peak float64
	for _, v := range wf[0].Volts {
		peak = math.Max(peak, math.Abs(v))
	}
	if len(wf[0].Volts) != 2000 || peak < 0.95 || peak > 1.05 {
		t.Errorf("real32 over serial: %d samples, peak %.4f V", len(wf[0].Volts), peak)
	}
}
