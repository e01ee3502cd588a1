package sim

import (
	"math"
	"math/cmplx"
	"strconv"
	"testing"
	"time"
)

// The frequency-dependent physics measured through SCPI only (generator,
// digitizer, switch) against closed forms derived here from the DUT file's
// keys, as anyone could from the single-pole model:
//
//	|k(f)| = |k_dc|·√(1 + (f/f_p)²),  arg k(f) = arg k_dc + atan(f/f_p)
//	ratio_dB(f) = ratio_dB(DC) − 10·log10(1 + (f/f_p)²)
//
// (a single pole of the ratio, a zero of the coefficient; Sedra & Smith,
// Microelectronic Circuits, single-time-constant networks) and the fixture's
// closed-loop response H(f) = 1/(1 + j·f·K/GBW) (ibid., the non-inverting
// amplifier with a single-pole op-amp).

const acDUT = `
seed = 41
[part]
gbw_hz = 10e6
[lot]
fixture = "nulling_loop"
noise_gain = 1000.0
[[unit]]
id = "A1"
cmrr_db = 100.0
psrr_pos_db = 106.0
psrr_neg_db = 98.0
cmrr_pole_hz = 1000.0
psrr_pos_pole_hz = 300.0
psrr_neg_pole_hz = 5000.0
noise_nv_per_rthz = 10.0
[[unit]]
id = "A2"
fixture = "noise_gain"
cmrr_db = 96.0
psrr_pos_db = 104.0
psrr_neg_db = 100.0
cmrr_pole_hz = 200.0
gbw_hz = 3e6
noise_nv_per_rthz = 10.0
`

// sineFit3 is a three-parameter least-squares sine fit at known f (the
// model of IEEE Std 1057 §4.1.3.1, y = A·cos ωt + B·sin ωt + C, solved here
// by its 3×3 normal equations, independently of the fit package). It
// returns the phasor B + jA of the sine, so that y = Im(P·e^{jωt}) + C.
func sineFit3(y []float64, w float64) complex128 {
	var s [3][4]float64
	for k, v := range y {
		c, sn := math.Cos(w*float64(k)), math.Sin(w*float64(k))
		row := [3]float64{c, sn, 1}
		for i := range 3 {
			for j := range 3 {
				s[i][j] += row[i] * row[j]
			}
			s[i][3] += row[i] * v
		}
	}
	for i := range 3 { // Gauss–Jordan
		p := s[i][i]
		for j := range 4 {
			s[i][j] /= p
		}
		for r := range 3 {
			if r != i {
				f := s[r][i]
				for j := range 4 {
					s[r][j] -= f * s[i][j]
				}
			}
		}
	}
	a, b := s[0][3], s[1][3]
	return complex(b, a)
}

// acRecord sets output out (1..3) to a 1 V peak sine at f, captures n
// samples on both digitizer channels (ASCII transfer) at a rate that holds a
// whole number of cycles, and returns ch2/ch1 as a complex ratio.
func (tb *testBench) acRatio(t *testing.T, out int, f float64, rng2 float64) complex128 {
	t.Helper()
	const n = 10000
	o := strconv.Itoa(out)
	tb.gen.set("OUTP" + o + ":LOAD INF;:SOUR" + o + ":FUNC SIN;:SOUR" + o + ":FREQ " + ff(f) +
		";:SOUR" + o + ":VOLT:UNIT VPK;:SOUR" + o + ":VOLT 1;:OUTP" + o + " ON")
	div := 0
	for cycles := 3; cycles < n/4; cycles++ {
		d := DigitizerClockHz * float64(cycles) / (f * n)
		if d >= 1 && math.Abs(d-math.Round(d)) < 1e-9 {
			div = int(math.Round(d))
			break
		}
	}
	if div == 0 {
		t.Fatalf("no coherent rate for %g Hz", f)
	}
	tb.dig.set("INP1:COUP AC;:INP2:COUP AC;:SENS1:VOLT:RANG 2;:SENS2:VOLT:RANG " + ff(rng2) +
		";:SWE:POIN " + strconv.Itoa(n) + ";:SWE:TINT " + ff(float64(div)/DigitizerClockHz) + ";:FORM:DATA ASC")
	tb.dig.set("INIT")
	w := 2 * math.Pi * f * float64(div) / DigitizerClockHz
	p1 := sineFit3(tb.dig.floats("TRAC:DATA? CH1"), w)
	p2 := sineFit3(tb.dig.floats("TRAC:DATA? CH2"), w)
	tb.gen.set("OUTP" + o + " OFF")
	return p2 / p1
}

func closedForm(kdcMag, sign, fp, f float64) complex128 {
	k := complex(sign*kdcMag, 0)
	if fp > 0 {
		k *= complex(1, f/fp)
	}
	return k
}

// TestACRatiosAgainstClosedForm: at 10 Hz .. 100 kHz, for the common mode
// and each rail, the through-calibrated ratio (ch2/ch1 over ch2/ch1 with
// the through relay closed) divided by the fixture's K·H(f) is the
// coefficient k(f) of the closed form: magnitude within 0.1 dB, phase
// within 1°. The sign of k_dc is the one the bench drew (Truth).
func TestACRatiosAgainstClosedForm(t *testing.T) {
	dut, err := ParseDUT([]byte(acDUT), "ac.toml")
	if err != nil {
		t.Fatal(err)
	}
	tb := startBench(t, Config{DUT: dut})
	tb.powerUp(t, 15, -15, 101)
	truth := tb.b.Truth()[0]
	const K, gbw = 1000.0, 10e6
	sign := func(c byte) float64 {
		if c == '-' {
			return -1
		}
		return 1
	}
	cases := []struct {
		name    string
		out     int
		db, fp  float64
		signIdx int
	}{
		{"cmrr", 1, 100, 1000, 0},
		{"psrr_pos", 2, 106, 300, 1},
		{"psrr_neg", 3, 98, 5000, 2},
	}
	for _, f := range []float64{10, 100, 1e3, 1e4, 1e5} {
		for _, c := range cases {
			tb.mux.set("ROUT:CLOS (@190)")
			thr := tb.acRatio(t, c.out, f, 2)
			tb.mux.set("ROUT:OPEN (@190)")
			tb.wait(time.Second)
			meas := tb.acRatio(t, c.out, f, 0.5) / thr
			h := 1 / complex(1, f*K/gbw)
			k := meas / (complex(K, 0) * h)
			want := closedForm(math.Pow(10, -c.db/20), sign(truth.Signs[c.signIdx]), c.fp, f)
			gotDB := -20 * math.Log10(cmplx.Abs(k))
			wantDB := c.db - 10*math.Log10(1+(f/c.fp)*(f/c.fp))
			dph := math.Remainder(cmplx.Phase(k)-cmplx.Phase(want), 2*math.Pi) * 180 / math.Pi
			if math.Abs(gotDB-wantDB) > 0.1 || math.Abs(dph) > 1 {
				t.Errorf("%s at %g Hz: %.3f dB, phase off %.3f°; closed form %.3f dB", c.name, f, gotDB, dph, wantDB)
			}
		}
	}
}

// TestACNoiseGainFixture: in the noise-gain stage the output moves with the
// common mode, so the output term ko adds to kc: x = K·H·(kc + ko)/(1 − K·H·ko)
// per volt of common mode (the DC equation of the stage, linearised, with
// its closed-loop pole; ko from the truth, kc from the closed form).
func TestACNoiseGainFixture(t *testing.T) {
	dut, err := ParseDUT([]byte(acDUT), "ac.toml")
	if err != nil {
		t.Fatal(err)
	}
	tb := startBench(t, Config{DUT: dut})
	tb.powerUp(t, 15, -15, 102)
	tr := tb.b.Truth()[1]
	ko := tr.KoUVPerV * 1e-6
	sgn := 1.0
	if tr.Signs[0] == '-' {
		sgn = -1
	}
	const K, gbw = 1000.0, 3e6
	for _, f := range []float64{50, 1e3, 2e4} {
		tb.mux.set("ROUT:CLOS (@190)")
		thr := tb.acRatio(t, 1, f, 2)
		tb.mux.set("ROUT:OPEN (@190)")
		meas := tb.acRatio(t, 1, f, 0.5) / thr
		kh := complex(K, 0) / complex(1, f*K/gbw)
		kc := closedForm(math.Pow(10, -96.0/20), sgn, 200, f)
		want := kh * (kc + complex(ko, 0)) / (1 - kh*complex(ko, 0))
		if d := 20 * math.Log10(cmplx.Abs(meas)/cmplx.Abs(want)); math.Abs(d) > 0.1 {
			t.Errorf("%g Hz: |x| %.5g, closed form %.5g (%.3f dB)", f, cmplx.Abs(meas), cmplx.Abs(want), d)
		}
		if d := math.Remainder(cmplx.Phase(meas)-cmplx.Phase(want), 2*math.Pi) * 180 / math.Pi; math.Abs(d) > 1 {
			t.Errorf("%g Hz: phase off %.3f°", f, d)
		}
	}
}

// TestACTruthKeys: sim --truth carries the DUT file's frequency keys.
func TestACTruthKeys(t *testing.T) {
	dut, err := ParseDUT([]byte(acDUT), "ac.toml")
	if err != nil {
		t.Fatal(err)
	}
	b, err := New(Config{DUT: dut, Clock: NewManualClock()})
	if err != nil {
		t.Fatal(err)
	}
	tr := b.Truth()
	if tr[0].CMRRPoleHz != 1000 || tr[0].PSRRPosPoleHz != 300 || tr[0].PSRRNegPoleHz != 5000 || tr[0].GBWHz != 10e6 {
		t.Errorf("A1 truth %+v", tr[0])
	}
	if tr[1].CMRRPoleHz != 200 || tr[1].PSRRPosPoleHz != 0 || tr[1].GBWHz != 3e6 {
		t.Errorf("A2 truth (its own gbw_hz over the part's): %+v", tr[1])
	}
	for _, bad := range []string{"cmrr_pole_hz = -1.0", "gbw_hz = 1e12", "psrr_neg_pole_hz = nan"} {
		if _, err := ParseDUT([]byte("[[unit]]\nid = \"X\"\n"+bad+"\n"), "bad.toml"); err == nil {
			t.Errorf("%s accepted", bad)
		}
	}
}

// TestGeneratorPeakDamagesUnpoweredPart: the sine's peak counts in the
// absolute-maximum check (JEDEC JESD78: an input beyond a rail): a 1 V sine
// on the common mode of an unpowered part damages it, and the same with the
// rails up does not.
func TestGeneratorPeakDamagesUnpoweredPart(t *testing.T) {
	dut, err := ParseDUT([]byte(acDUT), "ac.toml")
	if err != nil {
		t.Fatal(err)
	}
	tb := startBench(t, Config{DUT: dut})
	tb.powerUp(t, 15, -15, 101)
	tb.gen.set("OUTP1:LOAD INF;:SOUR1:FREQ 1000;:SOUR1:VOLT:UNIT VPK;:SOUR1:VOLT 1;:OUTP1 ON")
	tb.wait(time.Second)
	if s := tb.b.Inspect(); s.Units[0].Damaged {
		t.Fatalf("powered part damaged by a 1 V sine: %s", s.Units[0].DamageReason)
	}
	tb.gen.set("OUTP1 OFF")
	tb.mux.set("ROUT:OPEN (@101)")
	tb.psu.set("INST:NSEL 1;:OUTP OFF;:INST:NSEL 2;:OUTP OFF")
	tb.wait(time.Second)
	tb.mux.set("ROUT:CLOS (@101)")
	tb.gen.set("OUTP1 ON")
	tb.wait(time.Second)
	if s := tb.b.Inspect(); !s.Units[0].Damaged {
		t.Error("unpowered part survived a 1 V peak on its inputs")
	}
}

// TestInjectorCoupling: the rail ripple a 1 V peak sine makes through each
// injector is the nominal coupling gain within its tolerance (plus the
// generator's ±0.5 % and the 50 Ω / 10 kΩ divider, doc.go), measured on
// digitizer channel 1 through SCPI, and is not the same on every bench:
// the plan's nominal gain is not the truth.
func TestInjectorCoupling(t *testing.T) {
	var seen []float64
	for seed := int64(1); seed <= 4; seed++ {
		dut, err := ParseDUT([]byte(acDUT), "ac.toml")
		if err != nil {
			t.Fatal(err)
		}
		tb := startBench(t, Config{DUT: dut, Seed: seed})
		tb.powerUp(t, 15, -15, 101)
		for _, out := range []int{2, 3} {
			tb.mux.set("ROUT:CLOS (@190)")
			o := strconv.Itoa(out)
			tb.gen.set("OUTP" + o + ":LOAD INF;:SOUR" + o + ":FUNC SIN;:SOUR" + o + ":FREQ 1000;:SOUR" + o + ":VOLT:UNIT VPK;:SOUR" + o + ":VOLT 1;:OUTP" + o + " ON")
			tb.dig.set("INP1:COUP AC;:SENS1:VOLT:RANG 2;:SWE:POIN 10000;:SWE:TINT 1E-6;:FORM:DATA ASC")
			tb.dig.set("INIT")
			p := sineFit3(tb.dig.floats("TRAC:DATA? CH1"), 2*math.Pi*1000*1e-6)
			tb.gen.set("OUTP" + o + " OFF")
			g := cmplx.Abs(p) / (1e4 / (1e4 + 50))
			tol := InjectorTolerance + 0.005 + 0.003 + 0.002 // injector, generator, digitizer gain, band edges at 1 kHz
			if math.Abs(g/InjectorCouplingGain-1) > tol {
				t.Errorf("seed %d output %d: coupling %.4f, nominal %g ± %.3f", seed, out, g, InjectorCouplingGain, tol)
			}
			seen = append(seen, g)
		}
	}
	lo, hi := seen[0], seen[0]
	for _, g := range seen {
		lo, hi = math.Min(lo, g), math.Max(hi, g)
	}
	if hi-lo < 0.01 {
		t.Errorf("couplings %v: every injector the same, not drawn within the tolerance", seen)
	}
}

// TestACResponseOfMatchesClosedForm: the truth helper gives the closed
// form of the keys (|k(f)| = |k_dc|·√(1 + (f/f_p)²)) and, for the nulling
// loop, PerCM = K·H·kc.
func TestACResponseOfMatchesClosedForm(t *testing.T) {
	dut, err := ParseDUT([]byte(acDUT), "ac.toml")
	if err != nil {
		t.Fatal(err)
	}
	b, err := New(Config{DUT: dut, Clock: NewManualClock()})
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range []float64{10, 1e3, 1e5} {
		r, err := b.ACResponseOf("A1", f)
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range []struct {
			k      complex128
			db, fp float64
		}{{r.Kc, 100, 1000}, {r.Kp, 106, 300}, {r.Kn, 98, 5000}} {
			want := c.db - 10*math.Log10(1+(f/c.fp)*(f/c.fp))
			if got := -20 * math.Log10(cmplx.Abs(c.k)); math.Abs(got-want) > 1e-9 {
				t.Errorf("%g Hz: %.6f dB, closed form %.6f dB", f, got, want)
			}
		}
		if d := cmplx.Abs(r.PerCM - 1000*r.H*r.Kc); d > 1e-12 {
			t.Errorf("%g Hz: PerCM %v, K·H·kc %v", f, r.PerCM, 1000*r.H*r.Kc)
		}
	}
	if _, err := b.ACResponseOf("nope", 1); err == nil {
		t.Error("unknown unit accepted")
	}
}

// TestACBoardLowFrequencyMatchesDC: far below every pole the board's small-
// signal response equals its DC truth (BoardTruth, found by central
// differences through the nonlinear DC solver of part.go): the common-mode
// gain and both supply gains, two routes to the same physics.
func TestACBoardLowFrequencyMatchesDC(t *testing.T) {
	b, err := New(Config{Clock: NewManualClock()}) // the demo lot and its board B01
	if err != nil {
		t.Fatal(err)
	}
	var bt *BoardTruth
	for _, u := range b.Truth() {
		if u.ID == "B01" {
			bt = u.Board
		}
	}
	if bt == nil {
		t.Fatal("no board B01 in the demo lot")
	}
	r, err := b.ACResponseOf("B01", 1e-3)
	if err != nil {
		t.Fatal(err)
	}
	rel := func(got, want float64) float64 { return math.Abs(got/want - 1) }
	if d := rel(real(r.PerCM), bt.AcmVPerV); d > 1e-6 {
		t.Errorf("CM gain %.6g at 1 mHz, DC truth %.6g", real(r.PerCM), bt.AcmVPerV)
	}
	dp := bt.GainVPerV * math.Pow(10, -bt.PSRRPosdB/20)
	dn := bt.GainVPerV * math.Pow(10, -bt.PSRRNegdB/20)
	if d := rel(cmplx.Abs(r.PerPos), dp); d > 1e-6 {
		t.Errorf("V+ gain %.6g at 1 mHz, DC truth %.6g", cmplx.Abs(r.PerPos), dp)
	}
	if d := rel(cmplx.Abs(r.PerNeg), dn); d > 1e-6 {
		t.Errorf("V− gain %.6g at 1 mHz, DC truth %.6g", cmplx.Abs(r.PerNeg), dn)
	}
	// At 60 Hz the board's CMRR (its differential gain over its
	// common-mode gain) is still the resistors' within 0.1 dB: the op-amp's
	// 2 kHz CMRR pole and 1 MHz GBW hardly act there.
	r60, _ := b.ACResponseOf("B01", 60)
	if d := 20 * math.Log10(cmplx.Abs(r60.PerCM)/math.Abs(bt.AcmVPerV)); math.Abs(d) > 0.1 {
		t.Errorf("board CM gain at 60 Hz %.3f dB from DC", d)
	}
}
