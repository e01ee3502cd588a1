package instrument_test

import (
	"context"
	"errors"
	"math"
	"math/cmplx"
	"strings"
	"testing"
	"time"

	"nullbench/fit"
	"nullbench/instrument"
	"nullbench/instrument/sim"
)

// freqBench is a simulated bench on a manual clock with the generator,
// digitizer, AC voltmeter, supply, source and switch opened through their
// built-in profiles.
type freqBench struct {
	b    *sim.Bench
	ins  map[string]*instrument.Instrument
	gen  map[string]*instrument.GeneratorDriver
	dig  *instrument.DigitizerDriver
	acvm func(ch string) *instrument.ACVoltmeterDriver
}

const freqDUT = `
seed = 77
[lot]
fixture = "nulling_loop"
noise_gain = 1000.0
[[unit]]
id = "P1"
cmrr_db = 100.0
psrr_pos_db = 106.0
psrr_neg_db = 98.0
cmrr_pole_hz = 1000.0
psrr_pos_pole_hz = 300.0
psrr_neg_pole_hz = 5000.0
gbw_hz = 10e6
noise_nv_per_rthz = 10.0
`

func startFreqBench(t testing.TB, cfg sim.Config) *freqBench {
	t.Helper()
	return startFreqBenchOn(t, cfg, sim.ServeOptions{})
}

func startFreqBenchOn(t testing.TB, cfg sim.Config, serve sim.ServeOptions) *freqBench {
	t.Helper()
	if cfg.DUT == nil {
		dut, err := sim.ParseDUT([]byte(freqDUT), "freq.toml")
		if err != nil {
			t.Fatal(err)
		}
		cfg.DUT = dut
	}
	cfg.Clock = sim.NewManualClock()
	b, err := sim.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	if err := b.Start(ctx, serve); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = b.Close() })
	fb := &freqBench{b: b, ins: map[string]*instrument.Instrument{}, gen: map[string]*instrument.GeneratorDriver{}}
	for _, ep := range b.Endpoints() {
		in, err := instrument.Open(ctx, ep.Name, ep.Address, ep.Profile, instrument.OpenOptions{})
		if err != nil {
			t.Fatalf("open %s: %v", ep.Name, err)
		}
		t.Cleanup(func() { _ = in.Close() })
		fb.ins[ep.Name] = in
	}
	opts := instrument.DriverOptions{OverrideSettle: true}
	for _, ch := range []string{"1", "2", "3"} {
		g, err := instrument.NewGenerator(fb.ins["gen"].Session, fb.ins["gen"].Profile, ch, opts)
		if err != nil {
			t.Fatal(err)
		}
		fb.gen[ch] = g
	}
	fb.dig, err = instrument.NewDigitizer(fb.ins["dig"].Session, fb.ins["dig"].Profile, opts)
	if err != nil {
		t.Fatal(err)
	}
	fb.acvm = func(ch string) *instrument.ACVoltmeterDriver {
		a, err := instrument.NewACVoltmeter(fb.ins["acvm"].Session, fb.ins["acvm"].Profile, ch, opts)
		if err != nil {
			t.Fatal(err)
		}
		return a
	}
	return fb
}

// powerUp puts ±15 V on the rails, the sources at 0 V and closes the
// unit's channel 101, over SCPI like a procedure would.
func (fb *freqBench) powerUp(t *testing.T) {
	t.Helper()
	ctx := context.Background()
	psu, src, mux := fb.ins["psu"].Session, fb.ins["src"].Session, fb.ins["mux"].Session
	for _, cmd := range []string{"INST:NSEL 1;:VOLT 15;:CURR 0.05;:OUTP ON", "INST:NSEL 2;:VOLT 15;:CURR 0.05;:OUTP ON"} {
		if err := psu.Write(ctx, cmd); err != nil {
			t.Fatal(err)
		}
	}
	if err := src.Write(ctx, "SOUR1:VOLT 0;:OUTP1 ON;:SOUR2:VOLT 0;:OUTP2 ON;:SOUR3:VOLT 0;:OUTP3 ON"); err != nil {
		t.Fatal(err)
	}
	fb.b.Clock().(*sim.ManualClock).Advance(time.Second)
	if err := mux.Write(ctx, "ROUT:CLOS (@101)"); err != nil {
		t.Fatal(err)
	}
	fb.b.Clock().(*sim.ManualClock).Advance(time.Second)
}

func (fb *freqBench) through(t *testing.T, closed bool) {
	t.Helper()
	cmd := "ROUT:OPEN (@190)"
	if closed {
		cmd = "ROUT:CLOS (@190)"
	}
	if err := fb.ins["mux"].Session.Write(context.Background(), cmd); err != nil {
		t.Fatal(err)
	}
}

// coherent returns a sample rate the digitizer can make (its 10 MHz clock
// divided by an integer) and a record of n samples holding a whole number
// of cycles of f: fs = f·n/cycles with 1e7/fs an integer.
func coherent(t *testing.T, f float64, n int) float64 {
	t.Helper()
	for cycles := 3; cycles < n/4; cycles++ {
		div := sim.DigitizerClockHz * float64(cycles) / (f * float64(n))
		if div >= 1 && math.Abs(div-math.Round(div)) < 1e-9 {
			return sim.DigitizerClockHz / math.Round(div)
		}
	}
	t.Fatalf("no coherent rate for %g Hz with %d samples", f, n)
	return 0
}

// captureFit takes one record and fits each channel with the IEEE 1057
// three-parameter sine fit at f (fit.Sine3Param).
func (fb *freqBench) captureFit(t *testing.T, f float64, n int, ranges []float64) []fit.SineFit {
	t.Helper()
	ctx := context.Background()
	fs := coherent(t, f, n)
	if err := fb.dig.Configure(ctx, fs, n, ranges); err != nil {
		t.Fatal(err)
	}
	if got := fb.dig.RateHz(); math.Abs(got/fs-1) > 1e-9 {
		t.Fatalf("rate read back %v Hz, asked %v Hz", got, fs)
	}
	wf, err := fb.dig.Capture(ctx)
	if err != nil {
		t.Fatal(err)
	}
	var out []fit.SineFit
	for _, w := range wf {
		ts := make([]float64, len(w.Volts))
		for k := range ts {
			ts[k] = float64(k) / w.RateHz
		}
		sf, err := fit.Sine3Param(ts, w.Volts, f)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, sf)
	}
	return out
}

// TestCoherentCaptureMatchesSim: a sine from the generator on the
// common-mode node, captured through SCPI (int16 blocks, little-endian, as
// the built-in profile asks) and fitted with the IEEE 1057 three-parameter
// fit, has the amplitude and channel-to-channel phase the bench really
// produced, within the digitizer's stated accuracy (its profile's
// amplitude_accuracy_pct, flatness_db, phase_mismatch_deg: the data-sheet
// figures the budget uses) plus the fit's own uncertainty.
func TestCoherentCaptureMatchesSim(t *testing.T) {
	fb := startFreqBench(t, sim.Config{})
	fb.powerUp(t)
	ctx := context.Background()
	g := fb.gen["1"]
	fig := fb.ins["dig"].Profile.Figures.AC
	for _, f := range []float64{60, 1e3, 20e3} {
		if err := g.SetSine(ctx, f, 1.0, 0); err != nil {
			t.Fatal(err)
		}
		if err := g.SetOutput(ctx, true); err != nil {
			t.Fatal(err)
		}
		truth := fb.b.ACInspect()
		fits := fb.captureFit(t, f, 10000, []float64{2, 0.5})
		acc := fig.AmplitudeAccuracyPct / 100
		flat, _ := fig.FlatnessDBAt(f)
		tolRel := acc + (math.Pow(10, flat/20) - 1) + 3*fits[0].UAmplitudeV/fits[0].AmplitudeV
		if got, want := fits[0].AmplitudeV, cmplx.Abs(truth.Sense); math.Abs(got/want-1) > tolRel {
			t.Errorf("%g Hz: ch1 amplitude %.6f V, true %.6f V: off by %.3g, more than the %.3g the profile allows", f, got, want, got/want-1, tolRel)
		}
		// The programmed 1 V peak reaches the node within the generator's
		// own accuracy (its profile: amplitude_accuracy_pct) and the
		// 50 Ω / 10 kΩ divider (instrument/sim/doc.go).
		genAcc := fb.ins["gen"].Profile.Figures.AC.AmplitudeAccuracyPct / 100
		if a := cmplx.Abs(truth.Sense); math.Abs(a/(1e4/(1e4+50))-1) > genAcc {
			t.Errorf("%g Hz: node amplitude %.6f V for 1 V programmed", f, a)
		}
		dph := math.Remainder(fits[1].PhaseRad-fits[0].PhaseRad, 2*math.Pi) * 180 / math.Pi
		wantPh := math.Remainder(cmplx.Phase(truth.Fixture)-cmplx.Phase(truth.Sense), 2*math.Pi) * 180 / math.Pi
		pm, _ := fig.PhaseMismatchDegAt(f)
		uPh := 3 * math.Hypot(fits[0].UPhaseRad, fits[1].UPhaseRad) * 180 / math.Pi
		if d := math.Abs(math.Remainder(dph-wantPh, 360)); d > pm+uPh {
			t.Errorf("%g Hz: ch2 − ch1 phase %.3f°, true %.3f°: off by %.3f°, more than %.3f° (mismatch %.3f° + 3u)", f, dph, wantPh, d, pm+uPh, pm)
		}
		t.Logf("%g Hz: ch1 %.6f V (true %.6f), ch2 %.6f V (true %.6f), phase %.3f° (true %.3f°)",
			f, fits[0].AmplitudeV, cmplx.Abs(truth.Sense), fits[1].AmplitudeV, cmplx.Abs(truth.Fixture), dph, wantPh)
		if err := g.SetOutput(ctx, false); err != nil {
			t.Fatal(err)
		}
	}
}

// TestThroughCalibrationRemovesMismatch: with a 1 dB, 5° mismatch on
// channel 2 the through-calibrated ratio equals the one of a bench without
// it (the same seed, so the same part and errors); uncalibrated, the
// mismatch shows in full.
func TestThroughCalibrationRemovesMismatch(t *testing.T) {
	const f = 1e3
	ratio := func(mis sim.DigitizerMismatch) (raw, cal complex128) {
		fb := startFreqBench(t, sim.Config{DigitizerMismatch: mis})
		fb.powerUp(t)
		ctx := context.Background()
		g := fb.gen["1"]
		if err := g.SetSine(ctx, f, 1.0, 0); err != nil {
			t.Fatal(err)
		}
		if err := g.SetOutput(ctx, true); err != nil {
			t.Fatal(err)
		}
		c := func(fs []fit.SineFit) complex128 {
			return cmplx.Rect(fs[1].AmplitudeV/fs[0].AmplitudeV, fs[1].PhaseRad-fs[0].PhaseRad)
		}
		fb.through(t, true)
		thr := c(fb.captureFit(t, f, 8192, []float64{2, 2}))
		fb.through(t, false)
		raw = c(fb.captureFit(t, f, 8192, []float64{2, 0.5}))
		return raw, raw / thr
	}
	rawP, calP := ratio(sim.DigitizerMismatch{})
	rawM, calM := ratio(sim.DigitizerMismatch{GainDB: 1, PhaseDeg: 5})
	db := func(z complex128) float64 { return 20 * math.Log10(cmplx.Abs(z)) }
	deg := func(z complex128) float64 { return cmplx.Phase(z) * 180 / math.Pi }
	// Uncalibrated: the mismatch is there (1 dB, 5° by construction).
	if d := db(rawM) - db(rawP); math.Abs(d-1) > 0.02 {
		t.Errorf("uncalibrated gain difference %.4f dB, want the 1 dB mismatch", d)
	}
	if d := math.Remainder(deg(rawM)-deg(rawP), 360); math.Abs(d-5) > 0.2 {
		t.Errorf("uncalibrated phase difference %.3f°, want the 5° mismatch", d)
	}
	// Calibrated: the same within the noise of the two records (the fixture
	// output is ~10 mV peak in ~1 mV rms noise: a few 0.01 dB).
	if d := db(calM) - db(calP); math.Abs(d) > 0.02 {
		t.Errorf("calibrated ratios differ by %.4f dB", d)
	}
	if d := math.Remainder(deg(calM)-deg(calP), 360); math.Abs(d) > 0.2 {
		t.Errorf("calibrated phases differ by %.3f°", d)
	}
	t.Logf("perfect: %.4f dB %.3f°; mismatched: raw %.4f dB %.3f°, calibrated %.4f dB %.3f°",
		db(calP), deg(calP), db(rawM), deg(rawM), db(calM), deg(calM))
}

// TestGeneratorDriverRefusesBeyondLimits: the driver refuses, before
// sending, what the profile's limits exclude, and the instrument refuses
// a second output on.
func TestGeneratorDriverRefusesBeyondLimits(t *testing.T) {
	fb := startFreqBench(t, sim.Config{})
	ctx := context.Background()
	g := fb.gen["1"]
	if err := g.SetSine(ctx, 1e3, 8, 3); err == nil {
		t.Error("11 V peak accepted by a 10 V profile")
	}
	if err := g.SetSine(ctx, 2e7, 1, 0); err == nil {
		t.Error("20 MHz accepted by a 10 MHz profile")
	}
	if err := g.SetSine(ctx, 1e3, 1, 0); err != nil {
		t.Fatal(err)
	}
	if err := g.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	err := fb.gen["2"].SetOutput(ctx, true)
	var ie *instrument.InstrumentError
	if !errors.As(err, &ie) || ie.Code != -221 {
		t.Errorf("second output on: %v, want the instrument's −221 settings conflict", err)
	}
}

// TestDigitizerClipFlagged: a 1 V sine on a 0.5 V range comes back with
// ErrClipped naming channel 1.
func TestDigitizerClipFlagged(t *testing.T) {
	fb := startFreqBench(t, sim.Config{})
	fb.powerUp(t)
	ctx := context.Background()
	g := fb.gen["1"]
	if err := g.SetSine(ctx, 1e3, 1, 0); err != nil {
		t.Fatal(err)
	}
	if err := g.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	if err := fb.dig.Configure(ctx, 1e5, 1000, []float64{0.5, 2}); err != nil {
		t.Fatal(err)
	}
	wf, err := fb.dig.Capture(ctx)
	if !errors.Is(err, instrument.ErrClipped) || len(wf) != 2 {
		t.Fatalf("capture: %d waveforms, %v; want both with ErrClipped", len(wf), err)
	}
	if msg := err.Error(); !containsStr(msg, "channel 1") || containsStr(msg, "channel 2") {
		t.Errorf("clip message %q should name channel 1 only", msg)
	}
}

// TestACVoltmeterReadsRMS: the AC voltmeter on input 1 reads the sense
// line's RMS (peak/√2) within its profile's accuracy and flatness.
func TestACVoltmeterReadsRMS(t *testing.T) {
	fb := startFreqBench(t, sim.Config{})
	fb.powerUp(t)
	ctx := context.Background()
	g := fb.gen["1"]
	fig := fb.ins["acvm"].Profile.Figures.AC
	for _, f := range []float64{50, 1e3, 50e3} {
		if err := g.SetSine(ctx, f, 1, 0); err != nil {
			t.Fatal(err)
		}
		if err := g.SetOutput(ctx, true); err != nil {
			t.Fatal(err)
		}
		a := fb.acvm("1")
		if err := a.ConfigureACVolts(ctx, 1, f); err != nil {
			t.Fatal(err)
		}
		v, err := a.ReadRMS(ctx)
		if err != nil {
			t.Fatal(err)
		}
		want := cmplx.Abs(fb.b.ACInspect().Sense) / math.Sqrt2 // RMS of a sine: peak/√2
		flat, _ := fig.FlatnessDBAt(f)
		tol := fig.AmplitudeAccuracyPct/100 + (math.Pow(10, flat/20) - 1) + 1e-4
		if math.Abs(v/want-1) > tol {
			t.Errorf("%g Hz: %.6f V RMS, true %.6f V: off by %.3g > %.3g", f, v, want, v/want-1, tol)
		}
	}
}

func containsStr(s, sub string) bool { return strings.Contains(s, sub) }

// TestRecordScatterMatchesFitUncertainty: over repeated records the scatter
// of the fixture output's fitted amplitude and phase is what the IEEE 1057
// fit's own standard uncertainties say (within 25 %), so the simulated
// noise is white as the fit assumes and a budget built on those
// uncertainties neither over- nor under-covers from the bench's noise.
func TestRecordScatterMatchesFitUncertainty(t *testing.T) {
	fb := startFreqBench(t, sim.Config{})
	fb.powerUp(t)
	ctx := context.Background()
	g := fb.gen["1"]
	const f = 1e3
	if err := g.SetSine(ctx, f, 1.0, 0); err != nil {
		t.Fatal(err)
	}
	if err := g.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	const n = 120
	var amps, phs, uA, uP []float64
	for range n {
		fs := fb.captureFit(t, f, 4000, []float64{2, 0.2})
		amps = append(amps, fs[1].AmplitudeV)
		phs = append(phs, math.Remainder(fs[1].PhaseRad-fs[0].PhaseRad, 2*math.Pi))
		uA = append(uA, fs[1].UAmplitudeV)
		uP = append(uP, math.Hypot(fs[1].UPhaseRad, fs[0].UPhaseRad))
	}
	sd := func(v []float64) float64 {
		var m, s float64
		for _, x := range v {
			m += x
		}
		m /= float64(len(v))
		for _, x := range v {
			s += (x - m) * (x - m)
		}
		return math.Sqrt(s / float64(len(v)-1))
	}
	mean := func(v []float64) float64 {
		var m float64
		for _, x := range v {
			m += x
		}
		return m / float64(len(v))
	}
	// With 120 records the sample SD is within ±13 % of the true one at
	// about 2 standard errors (SE of an SD ≈ σ/√(2(n−1)), a textbook
	// normal-theory result); 25 % leaves room for that and the fit's own
	// estimate of σ.
	if r := sd(amps) / mean(uA); r < 0.75 || r > 1.25 {
		t.Errorf("amplitude scatter %.3g V, fit u %.3g V: ratio %.2f", sd(amps), mean(uA), r)
	}
	if r := sd(phs) / mean(uP); r < 0.75 || r > 1.25 {
		t.Errorf("phase scatter %.3g rad, fit u %.3g rad: ratio %.2f", sd(phs), mean(uP), r)
	}
	t.Logf("amplitude %.5g V: sd %.3g, u %.3g; phase sd %.3g rad, u %.3g", mean(amps), sd(amps), mean(uA), sd(phs), mean(uP))
}
