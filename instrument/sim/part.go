package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// terminals are the voltages on an op-amp's pins, volts to bench ground.
// An op-amp has no ground pin: its behaviour depends only on differences.
type terminals struct {
	vp, vn float64 // rails
	vin    float64 // input common mode (both inputs, to within Vio)
	vout   float64
}

// opamp is the physical model of one op-amp. Its input offset voltage (the
// voltage v_n − v_p at which its closed loop settles, so that a noise-gain
// stage gives Vout − Vcm = K·Vio) is
//
//	Vio = Vos + a(T)·(u_cm − u_cm0) + b_e(T)·(s − s0) + c(T)·(u_o − u_o0)
//	      + q·(Vcm − (V+ + V−)/2)² + edge terms
//	      + drift·(Tj − Tj0) + g·(Tj − Tj_ss)
//
// with u_cm = Vcm − V−, s = V+ − V−, u_o = Vout − V− and the 0-subscripted
// values at the reference operating point (nominal rails, Vcm at mid-rail,
// output at 0 V). Every term depends on differences of its own terminals, so
// moving all of them together changes nothing and kc+kp+kn+ko = 0
// (the identity derived in fit/doc.go).
//
// Self-heating: the die sits θ·P above its case, P = s·Iq, with time
// constant τ_die. In steady state drift·θ·Iq·(s − s0) adds to the supply
// term, so the electrical coefficient is b_e = kp − drift·θ·Iq and the
// steady-state DC coefficients are exactly kc, kp, kn, ko of the DUT file;
// the transient after a supply step (and the gradient term g, zero in steady
// state) is the thermal tail.
//
// Temperature: a, b, c scale with the case temperature so that each ratio
// changes by its tempco in dB/°C; Vos follows the die temperature.
type opamp struct {
	spec OpAmpSpec
	part *PartSpec

	kc, kp, ko float64 // V/V at 25 °C (kn = −(kc+kp+ko))
	vos        float64 // V
	drift      float64 // V/°C
	grad       float64 // V/°C
	quad       float64 // V/V²
	edgeCM     float64 // V at the end of the input range
	edgeOut    float64 // V at the output swing limit
	en         float64 // V/√Hz
	pink       pinkNoise
	rng        *rand.Rand

	// thermal state
	caseC    float64 // case temperature
	dieRiseC float64 // die above case

	// damage (permanent)
	damaged      bool
	damageReason string
	damageAt     float64 // bench seconds
	damageSign   float64
}

func newOpamp(spec OpAmpSpec, part *PartSpec, ambientC float64, rng *rand.Rand) *opamp {
	return &opamp{
		spec: spec, part: part,
		kc: spec.Kc, kp: spec.Kp, ko: spec.Ko,
		vos:     spec.VosUV * 1e-6,
		drift:   spec.DriftUVPerC * 1e-6,
		grad:    spec.GradientUVPerC * 1e-6,
		quad:    spec.CurvatureUVPerV2 * 1e-6,
		edgeCM:  spec.CMEdgeUV * 1e-6,
		edgeOut: spec.OutEdgeUV * 1e-6,
		en:      spec.NoiseNVPerRtHz * 1e-9,
		pink:    newPinkFromDensity(spec.NoiseNVPerRtHz*1e-9, spec.FlickerCornerHz),
		rng:     rng,
		caseC:   ambientC,
	}
}

// refSpan and friends are the reference operating point.
func (o *opamp) refSpan() float64 { return o.part.NominalPosVolts - o.part.NominalNegVolts }

// supplyAmps is the current the part draws from rail to rail at span s
// (volts). A healthy part draws Iq once the span passes 2 V; a damaged part
// also conducts through a ~150 Ω path.
func (o *opamp) supplyAmps(s float64) float64 {
	if s <= 0 {
		return 0
	}
	i := o.part.QuiescentAmps * math.Min(1, s/2)
	if o.damaged {
		i += s / 150
	}
	return i
}

// powerWatts is the dissipation at span s.
func (o *opamp) powerWatts(s float64) float64 { return s * o.supplyAmps(s) }

// operating reports whether the rails let the part work at all.
func (o *opamp) operating(vp, vn float64) bool { return vp-vn >= o.part.MinOperatingSpanVolts }

// outputRange is the output swing at the given rails.
func (o *opamp) outputRange(vp, vn float64) (lo, hi float64) {
	h := o.part.OutputHeadroomVolts
	return vn + h, vp - h
}

// tcScale converts a ratio's tempco (dB/°C) into a factor on its coefficient:
// ratio_dB(T) = ratio_dB(25) + tc·(T − 25)  ⇒  |k(T)| = |k(25)|·10^(−tc·(T−25)/20).
func tcScale(tcDBPerC, tC float64) float64 { return math.Pow(10, -tcDBPerC*(tC-25)/20) }

// edge is the smooth departure near a limit: zero beyond 1 V inside, rising
// as (1 − d)³ to 1 at the limit (d = 0) and growing beyond it, capped.
func edge(d float64) float64 {
	if d >= 1 {
		return 0
	}
	x := 1 - d
	return math.Min(x*x*x, 30)
}

// coefficientsAt returns a, b_e, c at case temperature tC (V/V).
func (o *opamp) coefficientsAt(tC float64) (a, be, c float64) {
	a = o.kc * tcScale(o.spec.CMRRTCdBPerC, tC)
	b := o.kp * tcScale(o.spec.PSRRTCdBPerC, tC)
	c = o.ko * tcScale(o.spec.AOLTCdBPerC, tC)
	be = b - o.drift*o.part.ThetaCPerWatt*o.part.QuiescentAmps
	if o.damaged {
		a, be, c = a*300, be*300, c*300
	}
	return a, be, c
}

// vio is the input offset (volts) at the given terminals and the present
// thermal state, without noise.
func (o *opamp) vio(t terminals) float64 {
	p := o.part
	a, be, c := o.coefficientsAt(o.caseC)
	s0 := o.refSpan()
	ucm0 := 0.5*(p.NominalPosVolts+p.NominalNegVolts) - p.NominalNegVolts
	uo0 := -p.NominalNegVolts
	ucm := t.vin - t.vn
	s := t.vp - t.vn
	uo := t.vout - t.vn
	v := o.vos + a*(ucm-ucm0) + be*(s-s0) + c*(uo-uo0)
	mid := t.vin - 0.5*(t.vp+t.vn)
	v += o.quad * mid * mid
	v += o.edgeCM * (edge(t.vp-t.vin-p.CMHeadroomPosVolts) + 0.8*edge(t.vin-t.vn-p.CMHeadroomNegVolts))
	v += o.edgeOut * (edge(t.vp-t.vout-p.OutputHeadroomVolts) - edge(t.vout-t.vn-p.OutputHeadroomVolts))
	// Thermal: die temperature against its reference (25 °C case, nominal
	// span) and against its own steady state at the present power.
	tj := o.caseC + o.dieRiseC
	tj0 := 25 + p.ThetaCPerWatt*o.powerWatts(s0)
	tjss := o.caseC + p.ThetaCPerWatt*o.powerWatts(math.Max(s, 0))
	v += o.drift*(tj-tj0) + o.grad*(tj-tjss)
	if o.damaged {
		v += o.damageSign * 35e-3
	}
	return v
}

// noiseWindow is the input noise (volts, RTI) averaged over [t0, t1].
func (o *opamp) noiseWindow(t0, t1 float64) float64 {
	v := whiteWindowMean(o.rng, o.en, t1-t0) + o.pink.windowMean(o.rng, t0, t1)
	if o.damaged {
		v *= 30
	}
	return v
}

// markDamaged records permanent damage.
func (o *opamp) markDamaged(t float64, format string, args ...any) {
	if o.damaged {
		return
	}
	o.damaged = true
	o.damageAt = t
	o.damageReason = fmt.Sprintf(format, args...)
	o.damageSign = 1
	if o.rng.IntN(2) == 0 {
		o.damageSign = -1
	}
}

// step advances the thermal state by dt seconds: the case follows the air
// (first order, τ_case), the die rise follows θ·P (first order, τ_die).
func (o *opamp) step(dt, airC, powerW float64) {
	p := o.part
	o.caseC = airC + (o.caseC-airC)*math.Exp(-dt/p.CaseTauSeconds)
	target := p.ThetaCPerWatt * powerW
	o.dieRiseC = target + (o.dieRiseC-target)*math.Exp(-dt/p.DieTauSeconds)
}

// thermalSettled reports whether the thermal state is at rest.
func (o *opamp) thermalSettled(airC, powerW float64) bool {
	return math.Abs(o.caseC-airC) < 1e-6 && math.Abs(o.dieRiseC-o.part.ThetaCPerWatt*powerW) < 1e-7
}

// unit is one thing on a switch channel: an op-amp in its fixture, or a board.
type unit struct {
	id      string
	fixture string
	channel int
	k       float64 // noise gain of fixtures 1 and 2
	amp     *opamp
	// board resistors, ohms
	r1, r2, r3, r4 float64
}

// auxRailVolts is the nulling loop's auxiliary amplifier output limit.
const auxRailVolts = 14.0

// inputs returns the terminal voltages of the unit's op-amp and the voltage
// its fixture puts on the meter (volts), given the bench node voltages:
// rails vp, vn; common-mode node vcm (source ch1); differential drive vd
// (source ch2, boards only); loop reference vref (source ch3); and extra, a
// voltage in series with the input (thermal EMF, relay tail).
//
//   - nulling loop: the auxiliary amplifier holds the output at vref;
//     E0 − Vcm = K·Vio; the meter reads E0 − Vcm.
//   - noise-gain stage: Vout − Vcm = K·Vio(Vout), solved; the meter reads
//     Vout − Vcm.
//   - board: inputs Vcm ± Vd/2 through R3/R4 (non-inverting) and R1/R2
//     (inverting); the op-amp settles where v_n − v_p = Vio(Vout); the meter
//     reads Vout to ground.
func (u *unit) meterAndPins(vp, vn, vcm, vd, vref, extra float64) (meter float64, pins terminals) {
	o := u.amp
	pins = terminals{vp: vp, vn: vn, vin: vcm}
	lo, hi := o.outputRange(vp, vn)
	switch u.fixture {
	case FixtureNullingLoop:
		pins.vout = vref
		if !o.operating(vp, vn) {
			pins.vout = 0
			return auxRailVolts - vcm, pins
		}
		if vref < lo || vref > hi {
			pins.vout = math.Max(lo, math.Min(hi, vref))
			if vref > hi {
				return auxRailVolts - vcm, pins
			}
			return -auxRailVolts - vcm, pins
		}
		e0 := vcm + u.k*(o.vio(pins)+extra)
		e0 = math.Max(-auxRailVolts, math.Min(auxRailVolts, e0))
		return e0 - vcm, pins
	case FixtureNoiseGain:
		if !o.operating(vp, vn) {
			pins.vout = 0
			return -vcm, pins
		}
		f := func(vout float64) float64 {
			pins.vout = vout
			return vout - vcm - u.k*(o.vio(pins)+extra)
		}
		pins.vout = solveOutput(f, vcm, lo, hi)
		return pins.vout - vcm, pins
	default: // board
		vinP := vcm + vd/2 + extra
		vinN := vcm - vd/2
		vpNode := vinP * u.r4 / (u.r3 + u.r4)
		pins.vin = vpNode
		if !o.operating(vp, vn) {
			pins.vout = 0
			return 0, pins
		}
		f := func(vout float64) float64 {
			pins.vout = vout
			vnNode := vpNode + o.vio(pins)
			// v_n = (vinN·R2 + Vout·R1)/(R1 + R2) solved for Vout.
			return vout - (vnNode*(u.r1+u.r2)-vinN*u.r2)/u.r1
		}
		ideal := vpNode*(u.r1+u.r2)/u.r1 - vinN*u.r2/u.r1
		pins.vout = solveOutput(f, ideal, lo, hi)
		return pins.vout, pins
	}
}

// solveOutput finds the root of f (an output voltage equation, nearly
// linear with slope ≈ 1) by Newton steps with a numerical derivative,
// clamped to the output swing [lo, hi]. A loop that cannot settle inside
// the swing ends at the rail it is driven to.
func solveOutput(f func(float64) float64, x0, lo, hi float64) float64 {
	if hi < lo {
		return 0.5 * (lo + hi)
	}
	x := math.Max(lo, math.Min(hi, x0))
	for i := 0; i < 8; i++ {
		fx := f(x)
		const h = 1e-3
		d := (f(x+h) - fx) / h
		if !(d > 1e-6) {
			// Positive feedback or a dead loop: driven to a rail.
			if fx > 0 {
				return lo
			}
			return hi
		}
		nx := x - fx/d
		nx = math.Max(lo, math.Min(hi, nx))
		if math.Abs(nx-x) < 1e-13 {
			x = nx
			break
		}
		x = nx
	}
	f(x) // leave the caller's pins at the solution
	return x
}

// rtiGain is the gain from the op-amp's input noise to the meter; pathGain
// from a voltage in series with the input (thermal EMF) to the meter.
func (u *unit) rtiGain() float64 {
	if u.fixture == FixtureBoard {
		return 1 + u.r2/u.r1
	}
	return u.k
}

// boardResistors builds R1..R4 of a difference amplifier (nominal
// R2/R1 = R4/R3 = G) with the given relative errors.
func boardResistors(b BoardSpec) (r1, r2, r3, r4 float64) {
	r := b.InputOhms
	e := b.ResistorErrors
	return r * (1 + e[0]), b.Gain * r * (1 + e[1]), r * (1 + e[2]), b.Gain * r * (1 + e[3])
}
