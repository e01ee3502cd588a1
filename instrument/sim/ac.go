package sim

import (
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
)

// This file is the bench's small-signal (AC) physics: what the function
// generator's sine does at the part's terminals and at the fixture output.
// A signal is the imaginary part of its phasor times e^{jθ(t)}, θ being the
// generator's running phase, so a phasor P gives |P|·sin(θ(t) + arg P).
//
// Wiring (instrument/sim/doc.go):
//
//	generator output 1 → the common-mode node, summed into source ch1's
//	                     output through a unity-gain summing input
//	generator output 2 → an injector in series with the V+ rail
//	generator output 3 → an injector in series with the V− rail
//
// Only one output may be on at a time: the fixture's stimulus-sense line
// (digitizer channel 1, AC voltmeter input 1) follows the output that is on
// (the common-mode node when none is). Channel 2 sees the fixture output,
// the quantity the DMM reads at DC, or the stimulus-sense line when the
// through relay (switch channel ThroughChannel) is closed.

// Generator outputs and their wiring.
const (
	genCM  = 0 // output 1: common-mode node
	genPos = 1 // output 2: V+ injector
	genNeg = 2 // output 3: V− injector
)

// ThroughChannel is the switch channel of the through relay: closed, it
// connects digitizer channel 2 (and AC voltmeter input 2) to the
// stimulus-sense line instead of the fixture output, for a through
// calibration of the channel mismatch.
const ThroughChannel = 190

// InjectorCouplingGain is the rail injectors' nominal coupling gain (rail
// ripple per volt at the injector's input, 1:1 transformers);
// InjectorTolerance is the relative tolerance of each injector's actual
// gain in its pass band (common practice for injection transformers, no
// published source). A plan states the nominal; the ripple is measured.
const (
	InjectorCouplingGain = 1.0
	InjectorTolerance    = 0.05
)

// Generator and fixture electrical constants (typical data-sheet figures
// of bench function generators, common practice).
const (
	genSourceOhms    = 50.0   // output impedance
	fixtureInputOhms = 10e3   // summing input and injector primaries
	genMaxEMFVolts   = 20.0   // |offset| + peak of the open-circuit voltage
	genMaxHz         = 10e6   // highest sine frequency
	genMinHz         = 1e-3   // lowest
	genBandwidthHz   = 30e6   // output amplifier, single pole (flatness)
	genAmpTolerance  = 0.005  // drawn amplitude error, ± relative (profile: ±1 %)
	genClockPPM      = 10.0   // drawn frequency error, ± ppm (profile: ±20 ppm)
	genOffsetVolts   = 2e-3   // drawn offset error, ± volts
	cmPathTolerance  = 0.002  // summing input gain error, ± relative
	cmPathPoleHz     = 2e6    // summing input bandwidth
	injHighPassHz    = 2.0    // injector magnetising corner
	injLowPassHz     = 500e3  // injector leakage corner (±20 % drawn)
	railNoiseVolts   = 20e-6  // rms noise on a rail at the part (per sample)
	cmNoiseVolts     = 5e-6   // rms noise on the common-mode node (per sample)
	openNoiseVolts   = 200e-6 // rms noise on an open digitizer input
)

// genChannel is one generator output: its settings, its fixed errors and
// its running phase.
type genChannel struct {
	function string  // "SIN" or "DC"
	freqHz   float64 // programmed
	ampl     float64 // programmed amplitude in unit
	unit     string  // "VPP", "VPK" or "VRMS"
	offset   float64 // programmed offset, volts into the load setting
	loadOhms float64 // load setting; +Inf for high impedance
	on       bool
	everOn   bool // the output has been on at some time (tests: Inspect)

	refT, refPhase float64 // phase refPhase (rad) at bench time refT

	ampErr, clockRel, offErr float64 // fixed errors (seeded)
}

func newGenChannel(rng *rand.Rand) *genChannel {
	g := &genChannel{}
	g.ampErr = genAmpTolerance * (2*rng.Float64() - 1)
	g.clockRel = genClockPPM * 1e-6 * (2*rng.Float64() - 1)
	g.offErr = genOffsetVolts * (2*rng.Float64() - 1)
	g.reset()
	return g
}

func (g *genChannel) reset() {
	g.function, g.freqHz, g.ampl, g.unit, g.offset = "SIN", 1e3, 0.1, "VPP", 0
	g.loadOhms, g.on = 50, false
	g.refT, g.refPhase = 0, 0
}

// peakOf converts an amplitude in unit to peak volts.
func peakOf(ampl float64, unit string) float64 {
	switch unit {
	case "VPP":
		return ampl / 2
	case "VRMS":
		return ampl * math.Sqrt2
	}
	return ampl
}

// emfScale is the open-circuit voltage per volt programmed: the setting is
// the voltage across the load setting, behind 50 Ω.
func (g *genChannel) emfScale() float64 {
	if math.IsInf(g.loadOhms, 1) {
		return 1
	}
	return (g.loadOhms + genSourceOhms) / g.loadOhms
}

// emfPeak and emfOffset are the programmed open-circuit sine peak and
// offset (without the fixed errors): what the limits apply to.
func (g *genChannel) emfPeak() float64 {
	if g.function == "DC" {
		return 0
	}
	return peakOf(g.ampl, g.unit) * g.emfScale()
}
func (g *genChannel) emfOffset() float64 { return g.offset * g.emfScale() }

// trueHz is the frequency actually produced.
func (g *genChannel) trueHz() float64 { return g.freqHz * (1 + g.clockRel) }

// phaseAt is the running phase at bench time t (radians).
func (g *genChannel) phaseAt(t float64) float64 {
	return g.refPhase + 2*math.Pi*g.trueHz()*(t-g.refT)
}

// retime keeps the phase continuous across a frequency change at time t.
func (g *genChannel) retime(t float64) {
	g.refPhase = math.Mod(g.phaseAt(t), 2*math.Pi)
	g.refT = t
}

// loaded is the factor from open-circuit voltage to the fixture input.
const loaded = fixtureInputOhms / (fixtureInputOhms + genSourceOhms)

// phasor is the sine at the fixture input (peak volts, phase 0 at θ): the
// programmed peak with the amplitude error, the output amplifier's roll-off
// and the divider into the fixture's input.
func (g *genChannel) phasor() complex128 {
	if !g.on || g.function == "DC" {
		return 0
	}
	f := g.trueHz()
	return complex(g.emfPeak()*(1+g.ampErr)*loaded, 0) / complex(1, f/genBandwidthHz)
}

// dcAtInput is the DC the output puts on the fixture input (0 when off).
func (g *genChannel) dcAtInput() float64 {
	if !g.on {
		return 0
	}
	return (g.emfOffset() + g.offErr) * loaded
}

// injectionPaths are the fixed (seeded) gains from the generator's outputs
// to their nodes.
type injectionPaths struct {
	cmGain           float64 // summing input, relative error
	injGain          [2]float64
	injLowPassHz     [2]float64
	injHighPassHz    [2]float64
	railNoise, cmRms float64
}

func newInjectionPaths(rng *rand.Rand) injectionPaths {
	var p injectionPaths
	p.cmGain = cmPathTolerance * (2*rng.Float64() - 1)
	for i := range 2 {
		p.injGain[i] = InjectorTolerance * (2*rng.Float64() - 1)
		p.injLowPassHz[i] = injLowPassHz * (1 + 0.2*(2*rng.Float64()-1))
		p.injHighPassHz[i] = injHighPassHz * (1 + 0.2*(2*rng.Float64()-1))
	}
	p.railNoise, p.cmRms = railNoiseVolts, cmNoiseVolts
	return p
}

// gain is the path from generator output i's fixture input to its node at
// frequency f: the summing input (flat with a pole) or an injector (band
// pass: magnetising high-pass and leakage low-pass).
func (p injectionPaths) gain(i int, f float64) complex128 {
	if i == genCM {
		return complex(1+p.cmGain, 0) / complex(1, f/cmPathPoleHz)
	}
	k := i - 1
	hp := complex(0, f/p.injHighPassHz[k]) / complex(1, f/p.injHighPassHz[k])
	lp := 1 / complex(1, f/p.injLowPassHz[k])
	return complex(InjectorCouplingGain*(1+p.injGain[k]), 0) * hp * lp
}

// activeGen is the output that is on (−1 for none).
func (m *model) activeGen() int {
	for i, g := range m.gen {
		if g != nil && g.on {
			return i
		}
	}
	return -1
}

// acStimulus returns the active output, its true frequency and the phasors
// it puts on the common-mode node and the two rails (at the part).
func (m *model) acStimulus() (i int, f float64, dcm, dp, dn complex128) {
	i = m.activeGen()
	if i < 0 || m.gen[i].function == "DC" {
		return i, 0, 0, 0, 0
	}
	g := m.gen[i]
	f = g.trueHz()
	v := g.phasor() * m.inj.gain(i, f)
	switch i {
	case genCM:
		dcm = v
	case genPos:
		dp = v
	default:
		dn = v
	}
	return i, f, dcm, dp, dn
}

// acPeaks are the largest AC excursions now on the common-mode node and
// the rails (peak volts), for the absolute-maximum checks.
func (m *model) acPeaks() (cm, vp, vn float64) {
	_, _, dcm, dp, dn := m.acStimulus()
	return cmplx.Abs(dcm), cmplx.Abs(dp), cmplx.Abs(dn)
}

// genCMOffset is the DC the generator's output 1 adds to the common-mode
// node (the injectors pass no DC).
func (m *model) genCMOffset() float64 {
	if m.gen[genCM] == nil {
		return 0
	}
	return m.gen[genCM].dcAtInput() * (1 + m.inj.cmGain)
}

// closedLoop is a fixture's response 1/(1 + j·f·K/GBW) for noise gain K
// (single-pole op-amp of gain-bandwidth GBW; Sedra & Smith, Microelectronic
// Circuits, frequency response of the non-inverting amplifier); 1 without a
// GBW.
func closedLoop(f, k, gbw float64) complex128 {
	if !(gbw > 0) {
		return 1
	}
	return 1 / complex(1, f*k/gbw)
}

// poleCoef is k_dc·(1 + j·f/f_p): a coefficient with a single pole of its
// ratio at f_p (0: none).
func poleCoef(k, f, fp float64) complex128 {
	if !(fp > 0) {
		return complex(k, 0)
	}
	return complex(k, 0) * complex(1, f/fp)
}

// acCoefficients are the op-amp's small-signal coefficients at frequency f
// and its present case temperature: kc, kp, kn with their poles and ko at
// its DC value. The slow self-heating path (τ_die ~ seconds) does not
// follow a sine, so kp is the DUT file's value scaled by its tempco, not the
// electrical part alone.
func (o *opamp) acCoefficients(f float64) (kc, kp, kn, ko complex128) {
	a := o.kc * tcScale(o.spec.CMRRTCdBPerC, o.caseC)
	b := o.kp * tcScale(o.spec.PSRRTCdBPerC, o.caseC)
	c := o.ko * tcScale(o.spec.AOLTCdBPerC, o.caseC)
	n := -(a + b + c)
	if o.damaged {
		a, b, c, n = a*300, b*300, c*300, n*300
	}
	return poleCoef(a, f, o.spec.CMRRPoleHz), poleCoef(b, f, o.spec.PSRRPosPoleHz),
		poleCoef(n, f, o.spec.PSRRNegPoleHz), complex(c, 0)
}

// acOutput is the fixture output's phasor (what the DMM reads at DC) for
// the node phasors dcm (common mode), dp (V+), dn (V−) at frequency f:
//
//   - nulling loop: E0 − Vcm = K·H·(kc·dcm + kp·dp + kn·dn), output held;
//   - noise-gain stage: x = Vout − Vcm = K·H·((kc + ko)·dcm + kp·dp + kn·dn)/(1 − K·H·ko);
//   - board: Vout = H·[G·(1 + kc)·v₊ + G·(kp·dp + kn·dn) − β·dcm]/(1 − H·G·ko),
//     v₊ = dcm·R4/(R3 + R4), G = 1 + R2/R1, β = R2/R1;
//
// with H = closedLoop(f, K or G, GBW). These are the DC equations of
// part.go, linearised, with the closed-loop pole.
func (u *unit) acOutput(f float64, dcm, dp, dn complex128, operating bool) complex128 {
	if !operating {
		return 0
	}
	o := u.amp
	kc, kp, kn, ko := o.acCoefficients(f)
	switch u.fixture {
	case FixtureNullingLoop:
		h := closedLoop(f, u.k, o.spec.GBWHz)
		return complex(u.k, 0) * h * (kc*dcm + kp*dp + kn*dn)
	case FixtureNoiseGain:
		kh := complex(u.k, 0) * closedLoop(f, u.k, o.spec.GBWHz)
		return kh * ((kc+ko)*dcm + kp*dp + kn*dn) / (1 - kh*ko)
	default:
		g := 1 + u.r2/u.r1
		beta := complex(u.r2/u.r1, 0)
		h := closedLoop(f, g, o.spec.GBWHz)
		vpn := dcm * complex(u.r4/(u.r3+u.r4), 0)
		G := complex(g, 0)
		return h * (G*(1+kc)*vpn + G*(kp*dp+kn*dn) - beta*dcm) / (1 - h*G*ko)
	}
}

// acNoiseVolts is the rms white noise one sample of the fixture output
// carries at sample rate fs: the part's input noise density times its
// noise gain over the closed loop's noise bandwidth (π/2 × its −3 dB
// bandwidth for a single pole; Sedra & Smith, noise bandwidth), or over
// min(fs/2, 100 kHz) (the fixture's filtering) without a GBW.
func (u *unit) acNoiseVolts(fs float64) float64 {
	g := u.rtiGain()
	bw := math.Min(fs/2, 100e3)
	if gbw := u.amp.spec.GBWHz; gbw > 0 {
		bw = math.Min(fs/2, math.Pi/2*gbw/g)
	}
	v := u.amp.en * g * math.Sqrt(bw)
	if u.amp.damaged {
		v *= 30
	}
	return v
}

// acChannels is what the two sensing lines carry now: DC levels, phasors
// at the active output's frequency f, and per-sample rms noise.
type acChannels struct {
	f             float64
	dc            [2]float64
	ph            [2]complex128
	noise         [2]float64
	senseIsRail   bool
	activeOutput  int
	fixtureOutput complex128
}

// acSense evaluates the sensing lines (the Bench mutex held, model advanced).
func (m *model) acSense(fs float64) acChannels {
	var a acChannels
	i, f, dcm, dp, dn := m.acStimulus()
	a.f, a.activeOutput = f, i
	vp, vn, vcm, _, _ := m.nodes()
	// Channel 1: the stimulus-sense line.
	switch i {
	case genPos:
		a.dc[0], a.ph[0], a.noise[0], a.senseIsRail = vp, dp, m.inj.railNoise, true
	case genNeg:
		a.dc[0], a.ph[0], a.noise[0], a.senseIsRail = vn, dn, m.inj.railNoise, true
	default:
		a.dc[0], a.ph[0], a.noise[0] = vcm, dcm, m.inj.cmRms
	}
	// Channel 2: the fixture output, or the sense line through the relay.
	conn := m.connected()
	if len(conn) == 0 {
		a.dc[1], a.noise[1] = m.openOffsetVolts, openNoiseVolts
	} else {
		a.dc[1] = m.meterDeterministic()
		var out complex128
		var nv float64
		for _, u := range conn {
			out += u.acOutput(f, dcm, dp, dn, u.amp.operating(vp, vn))
			n := u.acNoiseVolts(fs)
			nv += n * n
		}
		k := float64(len(conn))
		a.ph[1] = out / complex(k, 0)
		a.noise[1] = math.Sqrt(nv) / k
	}
	a.fixtureOutput = a.ph[1]
	if m.closed[ThroughChannel] {
		a.dc[1], a.ph[1], a.noise[1] = a.dc[0], a.ph[0], a.noise[0]
	}
	return a
}

// ACSnapshot is a test-only view of the sensing lines' true AC signals
// (before the digitizer's or voltmeter's own errors). Never reachable over
// SCPI.
type ACSnapshot struct {
	Output      int        // generator output on (1..3), 0 for none
	FrequencyHz float64    // its true frequency
	Sense       complex128 // stimulus-sense line phasor, peak volts (digitizer ch1)
	Fixture     complex128 // fixture output phasor (ch2 without the through relay)
	Channel2    complex128 // what ch2 sees (Sense when the through relay is closed)
	SenseDC     float64
	FixtureDC   float64 // what ch2 sees at DC (the sense line's while the through relay is closed)
}

// ACInspect returns the sensing lines' true AC signals now.
func (b *Bench) ACInspect() ACSnapshot {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.m.advance(b.benchSeconds())
	a := b.m.acSense(DigitizerClockHz)
	return ACSnapshot{Output: a.activeOutput + 1, FrequencyHz: a.f, Sense: a.ph[0], Fixture: a.fixtureOutput,
		Channel2: a.ph[1], SenseDC: a.dc[0], FixtureDC: a.dc[1]}
}

// ACResponse is a unit's true small-signal response at one frequency, at
// 25 °C, undamaged (for tests and people, like Truth): the fixture
// output's phasor per volt (peak) of common mode at the part's node, of
// ripple on V+ and on V− (what digitizer channel 2 sees per volt on
// channel 1, before the digitizer's own errors), the fixture's closed-loop
// response H(f), and the op-amp's coefficients kc(f), kp(f), kn(f) (its
// input-referred part: ratio_dB(f) = −20·log10|k(f)|).
type ACResponse struct {
	FrequencyHz    float64
	PerCM          complex128
	PerPos, PerNeg complex128
	H              complex128
	Kc, Kp, Kn     complex128
}

// ACResponseOf returns the ACResponse of unit id at f Hz.
func (b *Bench) ACResponseOf(id string, f float64) (ACResponse, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	for _, u := range b.m.units {
		if u.id != id {
			continue
		}
		amp := *u.amp
		amp.damaged, amp.caseC = false, 25
		cu := *u
		cu.amp = &amp
		r := ACResponse{FrequencyHz: f}
		r.PerCM = cu.acOutput(f, 1, 0, 0, true)
		r.PerPos = cu.acOutput(f, 0, 1, 0, true)
		r.PerNeg = cu.acOutput(f, 0, 0, 1, true)
		r.H = closedLoop(f, cu.k, amp.spec.GBWHz) // a board's k is 1 + R2/R1
		r.Kc, r.Kp, r.Kn, _ = amp.acCoefficients(f)
		return r, nil
	}
	return ACResponse{}, fmt.Errorf("sim: no unit %q on the bench", id)
}
