package sim

import (
	"math"
	"math/rand/v2"
	"sort"
)

// outputChannel is one channel of the supply or the source: a programmed
// level with a fixed programming error, an output that slews and settles to
// it (first order), an optional current limit, and a read-back with its own
// fixed error. Supply channels are magnitudes (>= 0); source channels are
// signed.
type outputChannel struct {
	progVolts  float64
	limitAmps  float64
	on         bool
	everOn     bool // the output has been on at some time (tests: Inspect)
	minV, maxV float64

	progGain, progOffset float64 // programming error: out = prog·(1+g) + o
	rbGain, rbOffset     float64 // read-back error
	iGain, iOffset       float64 // current read-back error

	volts float64 // actual output
	cc    bool    // in constant-current mode
}

// Output dynamics of supply and source channels (typical data-sheet figures; common practice).
const (
	slewVoltsPerSecond = 1000  // 1 V/ms
	settleTauSeconds   = 2e-3  // first-order settling
	fineStepSeconds    = 1e-4  // model step while an output is moving
	coarseStepSeconds  = 1.0   // model step while only temperatures move
	movingVolts        = 10e-3 // an output farther than this from its target is "moving"
)

// ideal is the output the channel settles to without a current limit.
func (c *outputChannel) ideal() float64 {
	if !c.on {
		return 0
	}
	v := c.progVolts*(1+c.progGain) + c.progOffset
	if c.minV >= 0 && v < 0 {
		v = 0
	}
	return v
}

// slewLag advances x toward target for dt seconds with
//
//	dx/dt = clamp((target − x)/τ, −S, +S)
//
// solved exactly: linear at rate S while |target − x| > S·τ, then
// exponential with time constant τ.
func slewLag(x, target, tau, slew, dt float64) float64 {
	e := target - x
	if e == 0 || dt <= 0 {
		return x
	}
	sgn := 1.0
	if e < 0 {
		sgn = -1
	}
	ae := math.Abs(e)
	knee := slew * tau
	if ae > knee {
		t1 := (ae - knee) / slew
		if dt <= t1 {
			return x + sgn*slew*dt
		}
		dt -= t1
		ae = knee
	}
	return target - sgn*ae*math.Exp(-dt/tau)
}

// chamberModel: the air follows the set point with a first-order lag and a
// maximum ramp rate (common practice for bench chambers).
type chamberModel struct {
	setC, airC float64
	tauS       float64 // air time constant, seconds
	rampCPerS  float64 // maximum ramp rate
	rng        *rand.Rand
}

// relayPath is a closed switch path: a thermal EMF that depends on the
// temperature difference across the chamber wall (Cu–Cu order, typical data-sheet figures, common practice)
// and wanders slowly, and a settling tail after the relay closes.
type relayPath struct {
	emfVolts  float64 // at no gradient
	emfPerC   float64 // per °C of (air − ambient)
	wander    ouProcess
	tailVolts float64 // at the instant of closing
	tailTauS  float64
	closedAt  float64
	rng       *rand.Rand
}

func newRelayPath(seed int64, ch int) *relayPath {
	rng := rand.New(rand.NewPCG(uint64(seed), uint64(0xC0FFEE00+ch)))
	sgn := func() float64 {
		if rng.IntN(2) == 0 {
			return -1
		}
		return 1
	}
	return &relayPath{
		emfVolts:  sgn() * (100 + 300*rng.Float64()) * 1e-9,
		emfPerC:   sgn() * (0.05 + 0.15*rng.Float64()) * 1e-6,
		wander:    ouProcess{sigma: 20e-9, tau: 600},
		tailVolts: sgn() * (1 + 4*rng.Float64()) * 1e-6,
		tailTauS:  0.015 + 0.035*rng.Float64(),
		rng:       rng,
	}
}

// model is the physical state of the whole bench. Every method expects the
// Bench mutex to be held. Time is in bench seconds since the bench started.
type model struct {
	t        float64
	ambientC float64
	seed     int64

	supply [2]*outputChannel // ch1 → V+, ch2 → V− (floating, + on ground)
	source [3]*outputChannel // ch1 → Vcm, ch2 → Vd, ch3 → loop reference
	gen    [3]*genChannel    // function generator outputs (ac.go)
	inj    injectionPaths    // from the generator's outputs to their nodes

	chamber chamberModel

	units      []*unit
	byChan     map[int]*unit
	paths      map[int]*relayPath // every channel ever closed
	closed     map[int]bool
	mostClosed int // the most relays closed at once since New (Snapshot.MostClosed)
	// everClosed holds every relay closed at some time since New
	// (tests: Inspect).
	everClosed map[int]bool

	// socket is the unit in the hand socket (nil when empty); socketPath
	// its contacts' thermal EMF; offMatrix the units the person has taken
	// out of their switch-matrix positions (see socket.go).
	socket     *unit
	socketPath *relayPath
	offMatrix  map[*unit]bool

	openOffsetVolts float64
	openRng         *rand.Rand
	openPink        pinkNoise
}

// connected returns the units on the fixture buses: those whose switch
// channels are closed (and that still sit in their matrix positions), in
// channel order, then the unit in the hand socket, which is wired straight
// onto the buses.
func (m *model) connected() []*unit {
	var out []*unit
	for ch := range m.closed {
		if u := m.byChan[ch]; u != nil && !m.offMatrix[u] {
			out = append(out, u)
		}
	}
	sort.Slice(out, func(i, j int) bool { return out[i].channel < out[j].channel })
	if m.socket != nil {
		out = append(out, m.socket)
	}
	return out
}

// pathOf is the contact path in series with u's input: its relay path on
// the matrix, or the socket's contacts.
func (m *model) pathOf(u *unit) *relayPath {
	if u == m.socket {
		return m.socketPath
	}
	return m.paths[u.channel]
}

// rails returns the rail voltages at the units (V+, V−).
func (m *model) rails() (vp, vn float64) { return m.supply[0].volts, -m.supply[1].volts }

// loadAmps is the rail-to-rail current the connected units draw at span s.
func (m *model) loadAmps(s float64, conn []*unit) float64 {
	var i float64
	for _, u := range conn {
		i += u.amp.supplyAmps(s)
	}
	return i
}

// supplyTargets returns the voltages the two supply channels settle to, with
// constant-current mode: the channels are in series through the parts, so
// if the parts would draw more than a channel's limit, the channel with the
// lower limit drops its voltage until the current equals its limit.
func (m *model) supplyTargets(conn []*unit) (tp, tn float64, ccP, ccN bool) {
	p, n := m.supply[0], m.supply[1]
	tp, tn = p.ideal(), n.ideal()
	if len(conn) == 0 {
		return
	}
	i := m.loadAmps(tp+tn, conn)
	solve := func(other, limit, max float64) float64 {
		lo, hi := 0.0, max
		for k := 0; k < 60; k++ {
			mid := 0.5 * (lo + hi)
			if m.loadAmps(mid+other, conn) > limit {
				hi = mid
			} else {
				lo = mid
			}
		}
		return lo
	}
	// The lower limit binds first. A unipolar channel cannot go below 0 V
	// (its reverse diode conducts), so if the other channel still drives
	// more than its own limit through the parts, it goes into constant
	// current too.
	if p.on && i > p.limitAmps && (!n.on || p.limitAmps <= n.limitAmps) {
		tp, ccP = solve(tn, p.limitAmps, tp), true
		i = m.loadAmps(tp+tn, conn)
	}
	if n.on && i > n.limitAmps {
		tn, ccN = solve(tp, n.limitAmps, tn), true
		i = m.loadAmps(tp+tn, conn)
	}
	if p.on && !ccP && i > p.limitAmps {
		tp, ccP = solve(tn, p.limitAmps, tp), true
	}
	return
}

// nodes returns the node voltages the units see.
func (m *model) nodes() (vp, vn, vcm, vd, vref float64) {
	vp, vn = m.rails()
	return vp, vn, m.source[0].volts + m.genCMOffset(), m.source[1].volts, m.source[2].volts
}

// electricalMoving reports whether any output is still far from its target.
func (m *model) electricalMoving(conn []*unit) bool {
	tp, tn, _, _ := m.supplyTargets(conn)
	if math.Abs(m.supply[0].volts-tp) > movingVolts || math.Abs(m.supply[1].volts-tn) > movingVolts {
		return true
	}
	for _, c := range m.source {
		if math.Abs(c.volts-c.ideal()) > movingVolts {
			return true
		}
	}
	return false
}

// thermalMoving reports whether any temperature is still changing.
func (m *model) thermalMoving(conn []*unit) bool {
	ch := &m.chamber
	if math.Abs(ch.setC-ch.airC) > 1e-6 {
		return true
	}
	vp, vn := m.rails()
	on := map[*unit]bool{}
	for _, u := range conn {
		on[u] = true
	}
	for _, u := range m.units {
		p := 0.0
		if on[u] {
			p = u.amp.powerWatts(math.Max(vp-vn, 0))
		}
		if !u.amp.thermalSettled(ch.airC, p) {
			return true
		}
	}
	return false
}

// advance brings the model to bench time t (seconds). Outputs move in fine
// steps while they slew (so absolute-maximum checks see the trajectory);
// temperatures in coarse steps while they move; a settled bench jumps.
func (m *model) advance(t float64) {
	for m.t < t {
		conn := m.connected()
		dt := t - m.t
		switch {
		case m.electricalMoving(conn):
			dt = math.Min(dt, fineStepSeconds)
		case m.thermalMoving(conn):
			dt = math.Min(dt, coarseStepSeconds)
		}
		m.step(dt, conn)
	}
}

func (m *model) step(dt float64, conn []*unit) {
	tp, tn, ccP, ccN := m.supplyTargets(conn)
	m.supply[0].volts = slewLag(m.supply[0].volts, tp, settleTauSeconds, slewVoltsPerSecond, dt)
	m.supply[1].volts = slewLag(m.supply[1].volts, tn, settleTauSeconds, slewVoltsPerSecond, dt)
	m.supply[0].cc, m.supply[1].cc = ccP, ccN
	for _, c := range m.source {
		c.volts = slewLag(c.volts, c.ideal(), settleTauSeconds, slewVoltsPerSecond, dt)
	}
	ch := &m.chamber
	airBefore := ch.airC
	ch.airC = slewLag(ch.airC, ch.setC, ch.tauS, ch.rampCPerS, dt)
	airMid := 0.5 * (airBefore + ch.airC)
	vp, vn := m.rails()
	span := math.Max(vp-vn, 0)
	on := map[*unit]bool{}
	for _, u := range conn {
		on[u] = true
	}
	for _, u := range m.units {
		p := 0.0
		if on[u] {
			p = u.amp.powerWatts(span)
		}
		u.amp.step(dt, airMid, p)
	}
	m.t += dt
	m.checkDamage(conn)
}

// checkDamage applies the absolute maximum ratings to the connected units:
// supply span over the maximum, or an input beyond a rail by more than the
// allowed margin (JEDEC JESD78; common practice), which includes any input drive while the part
// is unpowered. Damage is permanent.
func (m *model) checkDamage(conn []*unit) {
	if len(conn) == 0 {
		return
	}
	vp, vn, vcm, vd, vref := m.nodes()
	// The generator's sine peaks count: the rails at their widest and the
	// input at its farthest (ac.go).
	cmPk, vpPk, vnPk := m.acPeaks()
	for _, u := range conn {
		o := u.amp
		if o.damaged {
			continue
		}
		p := o.part
		if span := vp + vpPk - (vn - vnPk); span > p.MaxSupplySpanVolts {
			o.markDamaged(m.t, "supply span %.3f V (V+ %.3f V, V− %.3f V, ripple peaks %.3g V and %.3g V) exceeded the absolute maximum %.3g V", span, vp, vn, vpPk, vnPk, p.MaxSupplySpanVolts)
			continue
		}
		_, pins := u.meterAndPins(vp, vn, vcm, vd, vref, 0)
		lim := p.InputBeyondRailVolts
		if pins.vin+cmPk > vp-vpPk+lim || pins.vin-cmPk < vn+vnPk-lim {
			state := "powered"
			if !o.operating(vp, vn) {
				state = "unpowered"
			}
			o.markDamaged(m.t, "input at %.3f V beyond the rails (V+ %.3f V, V− %.3f V, %s) by more than %.2g V", pins.vin, vp, vn, state, lim)
		}
	}
}

// pathExtra is the voltage the closed relay path of u (or the hand
// socket's contacts) adds in series with its input at the model's time,
// without the slow wander (see noise).
func (m *model) pathExtra(u *unit) float64 {
	rp := m.pathOf(u)
	if rp == nil {
		return 0
	}
	v := rp.emfVolts + rp.emfPerC*(m.chamber.airC-m.ambientC)
	if age := m.t - rp.closedAt; age >= 0 {
		v += rp.tailVolts * math.Exp(-age/rp.tailTauS)
	}
	return v
}

// meterDeterministic is what the meter input sees now, without noise: the
// fixture output of the connected unit (the mean if several are paralleled),
// or an open input's offset.
func (m *model) meterDeterministic() float64 {
	conn := m.connected()
	if len(conn) == 0 {
		return m.openOffsetVolts
	}
	vp, vn, vcm, vd, vref := m.nodes()
	var s float64
	for _, u := range conn {
		v, _ := u.meterAndPins(vp, vn, vcm, vd, vref, m.pathExtra(u))
		s += v
	}
	return s / float64(len(conn))
}

// meterNoise is the noise the meter input sees averaged over [t0, t1]: the
// part's input noise times its noise gain, the relay path's (or socket
// contacts') slow EMF wander times the path gain; an open input picks up
// more.
func (m *model) meterNoise(t0, t1 float64) float64 {
	conn := m.connected()
	if len(conn) == 0 {
		return whiteWindowMean(m.openRng, 50e-9, t1-t0) + m.openPink.windowMean(m.openRng, t0, t1)
	}
	var s float64
	for _, u := range conn {
		g := u.rtiGain()
		v := u.amp.noiseWindow(t0, t1)
		if rp := m.pathOf(u); rp != nil {
			v += rp.wander.windowMean(rp.rng, t0, t1)
		}
		s += g * v
	}
	return s / float64(len(conn))
}
