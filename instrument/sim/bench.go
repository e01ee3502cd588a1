package sim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"net"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"
)

// Instrument names on the simulated bench, in serving order, with their
// roles, built-in profile names and identities (instrument/sim/doc.go).
const (
	NameDMM     = "dmm"
	NameSupply  = "psu"
	NameSource  = "src"
	NameSwitch  = "mux"
	NameChamber = "chamber"
	NameGen     = "gen"
	NameDig     = "dig"
	NameACVM    = "acvm"
)

// Identities answered to *IDN? (invented identities of the simulated bench).
const (
	IDNDMM     = "NULLBENCH-SIM,DMM-65,SIM0001,1.0"
	IDNSupply  = "NULLBENCH-SIM,PSU-2CH,SIM0002,1.0"
	IDNSource  = "NULLBENCH-SIM,SRC-3CH,SIM0003,1.0"
	IDNSwitch  = "NULLBENCH-SIM,MUX-40,SIM0004,1.0"
	IDNChamber = "NULLBENCH-SIM,CHAMBER-1,SIM0005,1.0"
	IDNGen     = "NULLBENCH-SIM,GEN-3CH,SIM0006,1.0"
	IDNDig     = "NULLBENCH-SIM,DIG-2CH,SIM0007,1.0"
	IDNACVM    = "NULLBENCH-SIM,ACV-2,SIM0008,1.0"
)

// Config configures a simulated bench.
type Config struct {
	// DUT is the lot on the bench; nil means DefaultDUT().
	DUT *DUTFile
	// TimeScale N runs bench time N times faster than the wall clock
	// (<= 0 means 1). Ignored when Clock is set.
	TimeScale float64
	// Clock overrides the time base, e.g. a *ManualClock for tests or for an
	// in-process run that shares the tool's clock.
	Clock Clock
	// Seed seeds the instruments' fixed errors and noise; 0 means the DUT
	// file's seed. Runs are repeatable given the seed, modulo timing.
	Seed int64
	// AmbientC is the room temperature, °C; 0 means 25.
	AmbientC float64
	// SupplyGainErrors, when it has two values, replaces the drawn
	// programming gain errors of supply channels 1 and 2 (relative: the
	// output is programmed·(1 + g) + offset). Unequal values make a
	// supply-shift step move the span by (g1 − g2)·L: a systematic error
	// the read-backs must reveal. The read-back errors stay as drawn.
	SupplyGainErrors []float64
	// DigitizerMismatch adds a gain and phase to the digitizer's channel 2
	// relative to channel 1 (beyond its drawn errors), e.g. {1, 5} for
	// 1 dB and 5°: what a through calibration must remove.
	DigitizerMismatch DigitizerMismatch
	// Dialects names variants of the instruments' command sets (Dialects;
	// `nullbench sim --dialect`): at most one per instrument. Empty: each
	// instrument speaks its own dialect and has its own built-in profile.
	Dialects []string
}

// ServeOptions says where the instruments listen.
type ServeOptions struct {
	// ListenHost is the address to bind; "" means 127.0.0.1 (loopback only).
	ListenHost string
	// FirstPort is the DMM's TCP port; the others follow in the order dmm,
	// psu, src, mux, chamber, gen, dig, acvm. 0 means ephemeral ports.
	FirstPort int
	// SerialInstrument names one instrument ("dmm", "psu", "src", "mux",
	// "chamber", "gen", "dig" or "acvm") to serve on a pseudo-terminal
	// instead of TCP; "" for none.
	SerialInstrument string
}

// Endpoint is one served instrument.
type Endpoint struct {
	Name    string // "dmm"
	Role    string // "meter", "supply", "source", "switch", "chamber", "generator", "digitizer", "ac_meter"
	Address string // "tcp://127.0.0.1:40001" or "serial:///dev/pts/N?baud=115200"
	Profile string // built-in profile name: dmm, supply2, source3, switch, chamber, generator, digitizer, acvm
	IDN     string
}

// Bench is the simulated bench: eight SCPI instruments around a physical
// model of the parts. Create it with New, serve it with Start, stop it with
// Close. Truth and Inspect are for tests and the `sim --truth` printout;
// Insert, Remove, Socket and SocketState are the hands of the person at the
// bench (socket.go); nothing they return or do is reachable over SCPI.
type Bench struct {
	cfg      Config
	dut      *DUTFile
	clock    Clock
	start    time.Time
	seed     int64
	ambientC float64

	mu sync.Mutex // guards m
	m  *model

	insts  []*instrument
	byName map[string]*instrument
	dmmDev *dmm

	garbleMu  sync.Mutex
	garbleRng *rand.Rand

	runMu     sync.Mutex
	started   bool
	closed    bool
	runCtx    context.Context
	cancel    context.CancelFunc
	wg        sync.WaitGroup
	stopOnce  sync.Once
	servers   []*tcpServer
	pty       *ptyServer
	endpoints []Endpoint

	// Role lines of the supplies for BenchSection, when a dialect
	// changes them ("" keeps the defaults).
	supplyPosRole, supplyNegRole string

	hist history // every message executed (history.go)
}

// New builds a bench from cfg. It does not serve anything until Start.
func New(cfg Config) (*Bench, error) {
	dut := cfg.DUT
	if dut == nil {
		dut = DefaultDUT()
	}
	if len(dut.Units) == 0 && len(dut.Boards) == 0 {
		return nil, errors.New("sim: the DUT file has no units")
	}
	clock := cfg.Clock
	if clock == nil {
		clock = NewScaledClock(cfg.TimeScale)
	}
	seed := cfg.Seed
	if seed == 0 {
		seed = dut.Seed
	}
	amb := cfg.AmbientC
	if amb == 0 {
		amb = 25
	}
	if amb < -40 || amb > 60 {
		return nil, fmt.Errorf("sim: ambient %.1f °C is outside -40..60 °C", amb)
	}
	b := &Bench{cfg: cfg, dut: dut, clock: clock, start: clock.Now(), seed: seed, ambientC: amb}
	rngFor := func(stream uint64) *rand.Rand { return rand.New(rand.NewPCG(uint64(seed), stream)) }
	b.garbleRng = rngFor(99)

	m := &model{
		ambientC: amb, seed: seed,
		byChan: map[int]*unit{}, paths: map[int]*relayPath{}, closed: map[int]bool{}, everClosed: map[int]bool{},
		chamber: chamberModel{setC: amb, airC: amb, tauS: chamberTauSeconds, rampCPerS: chamberRampCPerS, rng: rngFor(5)},
		openRng: rngFor(6),
	}
	m.offMatrix, m.socketPath = map[*unit]bool{}, newSocketPath(seed)
	psuRng, srcRng := rngFor(2), rngFor(3)
	sup := newChannels(2, true, psuRng)
	src := newChannels(3, false, srcRng)
	if n := len(cfg.SupplyGainErrors); n != 0 && n != 2 {
		return nil, fmt.Errorf("sim: SupplyGainErrors has %d values; give two (channel 1, channel 2) or none", n)
	}
	if len(cfg.SupplyGainErrors) == 2 {
		sup[0].progGain, sup[1].progGain = cfg.SupplyGainErrors[0], cfg.SupplyGainErrors[1]
	}
	copy(m.supply[:], sup)
	copy(m.source[:], src)
	genRng := rngFor(7)
	for i := range m.gen {
		m.gen[i] = newGenChannel(genRng)
	}
	m.inj = newInjectionPaths(rngFor(8))
	m.openOffsetVolts = (2 + 3*m.openRng.Float64()) * 1e-6
	m.openPink = newPinkFromSigma(200e-9)
	part := dut.Part
	for i, us := range dut.Units {
		u := &unit{id: us.ID, fixture: us.Fixture, channel: us.Channel, k: us.NoiseGain,
			amp: newOpamp(us.OpAmp, &part, amb, rngFor(uint64(100+i)))}
		if tol := us.NoiseGainTolerance; tol > 0 {
			u.k *= 1 + tol*(2*rngFor(uint64(300+i)).Float64()-1)
		}
		m.units = append(m.units, u)
		m.byChan[u.channel] = u
	}
	for i, bs := range dut.Boards {
		u := &unit{id: bs.ID, fixture: FixtureBoard, channel: bs.Channel,
			amp: newOpamp(bs.OpAmp, &part, amb, rngFor(uint64(500+i)))}
		u.r1, u.r2, u.r3, u.r4 = boardResistors(bs)
		u.k = 1 + u.r2/u.r1
		m.units = append(m.units, u)
		m.byChan[u.channel] = u
	}
	b.m = m

	b.dmmDev = newDMM(b, rngFor(1))
	supDev := &powerDevice{b: b, chans: sup, isSupply: true, sel: 1, rng: psuRng}
	srcDev := &powerDevice{b: b, chans: src, sel: 1, rng: srcRng, nodeOhms: []float64{10e3, 20e3, 1e6}}
	b.insts = []*instrument{
		newInstrument(NameDMM, "meter", "dmm", IDNDMM, b.dmmDev).withSystem(),
		newInstrument(NameSupply, "supply", "supply2", IDNSupply, supDev).withSystem(),
		newInstrument(NameSource, "source", "source3", IDNSource, srcDev).withSystem(),
		newInstrument(NameSwitch, "switch", "switch", IDNSwitch, &switchDevice{b: b}).withSystem(),
		newInstrument(NameChamber, "chamber", "chamber", IDNChamber, &chamberDevice{b: b}).withSystem(),
		newInstrument(NameGen, "generator", "generator", IDNGen, &genDevice{b: b}).withSystem(),
		newInstrument(NameDig, "digitizer", "digitizer", IDNDig, newDigitizer(b, rngFor(9), cfg.DigitizerMismatch)).withSystem(),
		newInstrument(NameACVM, "ac_meter", "acvm", IDNACVM, newACVM(b, rngFor(10))).withSystem(),
	}
	b.byName = map[string]*instrument{}
	for _, in := range b.insts {
		b.byName[in.name] = in
	}
	if err := applyDialects(b, cfg.Dialects); err != nil {
		return nil, err
	}
	return b, nil
}

// DUT returns the resolved description of the parts on the bench.
func (b *Bench) DUT() *DUTFile { return b.dut }

// Clock returns the bench's time base.
func (b *Bench) Clock() Clock { return b.clock }

// benchSeconds is the bench time since New, in seconds.
func (b *Bench) benchSeconds() float64 { return b.secondsAt(b.clock.Now()) }

func (b *Bench) secondsAt(t time.Time) float64 { return t.Sub(b.start).Seconds() }

func (b *Bench) runContext() context.Context {
	b.runMu.Lock()
	defer b.runMu.Unlock()
	if b.runCtx == nil {
		return context.Background()
	}
	return b.runCtx
}

// Start serves every instrument until ctx ends or Close is called. It
// returns once all listeners are up (Endpoints is then valid).
func (b *Bench) Start(ctx context.Context, opt ServeOptions) error {
	b.runMu.Lock()
	defer b.runMu.Unlock()
	if b.closed {
		return errors.New("sim: bench is closed")
	}
	if b.started {
		return errors.New("sim: bench already started")
	}
	host := opt.ListenHost
	if host == "" {
		host = "127.0.0.1"
	}
	if opt.SerialInstrument != "" {
		if _, ok := b.byName[opt.SerialInstrument]; !ok {
			return fmt.Errorf("sim: serial instrument %q is not on the bench (want one of dmm, psu, src, mux, chamber, gen, dig, acvm)", opt.SerialInstrument)
		}
	}
	if opt.FirstPort < 0 || opt.FirstPort > 65535-len(b.insts) {
		return fmt.Errorf("sim: first port %d out of range", opt.FirstPort)
	}
	runCtx, cancel := context.WithCancel(ctx)
	var servers []*tcpServer
	var pty *ptyServer
	var eps []Endpoint
	fail := func(err error) error {
		cancel()
		for _, s := range servers {
			s.close()
		}
		if pty != nil {
			pty.close()
		}
		return err
	}
	for i, in := range b.insts {
		in.record = b.record
		ep := Endpoint{Name: in.name, Role: in.role, Profile: in.profile, IDN: in.idn}
		if in.name == opt.SerialInstrument {
			p, err := openPTY()
			if err != nil {
				return fail(fmt.Errorf("sim: serving %s on a pseudo-terminal: %w", in.name, err))
			}
			pty = p
			pty.in = in
			ep.Address = "serial://" + p.path + "?baud=115200"
		} else {
			port := 0
			if opt.FirstPort > 0 {
				port = opt.FirstPort + i
			}
			ln, err := net.Listen("tcp", net.JoinHostPort(host, strconv.Itoa(port)))
			if err != nil {
				return fail(fmt.Errorf("sim: %s cannot listen on %s port %d: %w (choose another --port or 0 for ephemeral ports)", in.name, host, port, err))
			}
			s := &tcpServer{in: in, ln: ln, conn: map[net.Conn]struct{}{}}
			servers = append(servers, s)
			addrHost := host
			if ip := net.ParseIP(host); ip != nil && ip.IsUnspecified() {
				addrHost = "127.0.0.1"
			}
			ep.Address = "tcp://" + net.JoinHostPort(addrHost, strconv.Itoa(ln.Addr().(*net.TCPAddr).Port))
		}
		eps = append(eps, ep)
	}
	b.started = true
	b.runCtx, b.cancel = runCtx, cancel
	b.servers, b.pty, b.endpoints = servers, pty, eps
	for _, s := range servers {
		b.wg.Add(1)
		go s.run(runCtx, &b.wg, b.garbleRng, &b.garbleMu)
	}
	if pty != nil {
		b.wg.Add(1)
		go func() {
			defer b.wg.Done()
			pty.in.serveStream(runCtx, pty.master, false, b.garbleRng, &b.garbleMu)
		}()
	}
	b.wg.Add(1)
	go func() {
		defer b.wg.Done()
		<-runCtx.Done()
		b.stopServers()
	}()
	return nil
}

func (b *Bench) stopServers() {
	b.stopOnce.Do(func() {
		for _, s := range b.servers {
			s.close()
		}
		if b.pty != nil {
			b.pty.close()
		}
	})
}

// Endpoints lists the served instruments (after Start).
func (b *Bench) Endpoints() []Endpoint {
	b.runMu.Lock()
	defer b.runMu.Unlock()
	return append([]Endpoint(nil), b.endpoints...)
}

// Close stops serving, closes every connection and waits for all of the
// bench's goroutines to end. It is safe to call more than once.
func (b *Bench) Close() error {
	b.runMu.Lock()
	b.closed = true
	cancel := b.cancel
	b.runMu.Unlock()
	if cancel != nil {
		cancel()
	}
	b.dmmDev.abort()
	b.wg.Wait()
	return nil
}

// TimeScale is the scale written to the bench section: the ScaledClock's N,
// else Config.TimeScale (default 1).
func (b *Bench) TimeScale() float64 {
	if sc, ok := b.clock.(*ScaledClock); ok {
		return sc.Scale()
	}
	if b.cfg.TimeScale > 0 {
		return b.cfg.TimeScale
	}
	return 1
}

func tomlFloat(v float64) string {
	s := strconv.FormatFloat(v, 'f', -1, 64)
	if !strings.ContainsAny(s, ".eE") {
		s += ".0"
	}
	return s
}

// BenchSection returns the plan's [bench] TOML section for this bench, in
// the exact shape of instrument/sim/doc.go (sim --bench-out writes it). Call after Start.
func (b *Bench) BenchSection() string {
	var sb strings.Builder
	sb.WriteString("[bench]\n")
	sb.WriteString("time_scale = " + tomlFloat(b.TimeScale()) + "\n")
	for _, ep := range b.Endpoints() {
		fmt.Fprintf(&sb, "\n[bench.instrument.%s]\naddress = %q\nprofile = %q\n", ep.Name, ep.Address, ep.Profile)
	}
	pos, neg := b.supplyPosRole, b.supplyNegRole
	if pos == "" {
		pos = `{ instrument = "psu", channel = "1" }`
	}
	if neg == "" {
		neg = `{ instrument = "psu", channel = "2", negative = true }`
	}
	sb.WriteString(`
[bench.roles]
meter       = { instrument = "dmm" }
supply_pos  = ` + pos + `
supply_neg  = ` + neg + `
source_cm   = { instrument = "src", channel = "1" }
source_diff = { instrument = "src", channel = "2" }
source_ref  = { instrument = "src", channel = "3" }
switch      = { instrument = "mux" }
chamber     = { instrument = "chamber" }
thermometer = { instrument = "chamber" }
`)
	return sb.String()
}

// InjectFault arms a fault on the named instrument ("dmm", "psu", "src",
// "mux", "chamber").
func (b *Bench) InjectFault(instrument string, f Fault) error {
	in, ok := b.byName[instrument]
	if !ok {
		return fmt.Errorf("sim: no instrument %q on the bench", instrument)
	}
	if f.Kind < FaultDrop || f.Kind > FaultGarble {
		return fmt.Errorf("sim: unknown fault kind %d", f.Kind)
	}
	if f.Kind == FaultQueueError && f.Code == 0 {
		return errors.New("sim: a queue-error fault needs a non-zero Code")
	}
	in.faults.add(f)
	return nil
}

// ClearFaults removes every armed fault of the named instrument.
func (b *Bench) ClearFaults(instrument string) error {
	in, ok := b.byName[instrument]
	if !ok {
		return fmt.Errorf("sim: no instrument %q on the bench", instrument)
	}
	in.faults.clear()
	return nil
}

// UnitTruth is the true description of one unit (JSON for `sim --truth`).
// Ratios are magnitudes in dB at 25 °C, DC, at the reference operating
// point; coefficients are signed, in µV/V, with kc+kp+kn+ko = 0. For a
// board, the top-level ratios are its op-amp's and Board holds the board's.
type UnitTruth struct {
	ID        string  `json:"id"`
	Kind      string  `json:"kind"` // "opamp" or "board"
	Part      string  `json:"part"`
	Fixture   string  `json:"fixture"`
	Channel   string  `json:"channel"`
	NoiseGain float64 `json:"noise_gain,omitempty"` // nominal K
	// NoiseGainActual is the fixture's actual K (nominal unless the lot
	// has a noise_gain_tolerance).
	NoiseGainActual float64 `json:"noise_gain_actual,omitempty"`
	CMRRdB          float64 `json:"cmrr_db"`
	PSRRPosdB       float64 `json:"psrr_pos_db"`
	PSRRNegdB       float64 `json:"psrr_neg_db"`
	AOLdB           float64 `json:"aol_db"`
	AOLDerived      bool    `json:"aol_derived"`
	KcUVPerV        float64 `json:"kc_uv_per_v"`
	KpUVPerV        float64 `json:"kp_uv_per_v"`
	KnUVPerV        float64 `json:"kn_uv_per_v"`
	KoUVPerV        float64 `json:"ko_uv_per_v"`
	Signs           string  `json:"signs"` // signs of kc, kp, kn, ko, e.g. "+-++"
	VosUV           float64 `json:"vos_uv"`
	DriftUVPerC     float64 `json:"drift_uv_per_c"`
	CMRRTCdBPerC    float64 `json:"cmrr_tc_db_per_c"`
	PSRRTCdBPerC    float64 `json:"psrr_tc_db_per_c"`
	AOLTCdBPerC     float64 `json:"aol_tc_db_per_c"`
	// Frequency dependence (DUT-file keys; 0 or absent: none): the ratio's
	// single pole and the part's gain-bandwidth (instrument/sim/ac.go).
	CMRRPoleHz    float64     `json:"cmrr_pole_hz,omitempty"`
	PSRRPosPoleHz float64     `json:"psrr_pos_pole_hz,omitempty"`
	PSRRNegPoleHz float64     `json:"psrr_neg_pole_hz,omitempty"`
	GBWHz         float64     `json:"gbw_hz,omitempty"`
	Board         *BoardTruth `json:"board,omitempty"`
	Notes         []string    `json:"notes,omitempty"`
	Damage        string      `json:"damage,omitempty"`
}

// BoardTruth is a board's own behaviour at 25 °C, nominal rails:
// Vout = Ad·Vd + Acm·Vcm + …; CMRR = |Ad/Acm|; the PSRRs are referred to
// the input: |Ad·ΔV/ΔVout| for each rail moved alone.
type BoardTruth struct {
	GainVPerV      float64    `json:"gain_v_per_v"`
	AcmVPerV       float64    `json:"acm_v_per_v"`
	CMRRdB         float64    `json:"cmrr_db"`
	PSRRPosdB      float64    `json:"psrr_pos_db"`
	PSRRNegdB      float64    `json:"psrr_neg_db"`
	ResistorCMRRdB float64    `json:"resistor_cmrr_db"` // resistors alone, ideal op-amp
	ResistorsOhms  [4]float64 `json:"resistors_ohms"`   // R1..R4
}

func signString(ks ...float64) string {
	var sb strings.Builder
	for _, k := range ks {
		if k < 0 {
			sb.WriteByte('-')
		} else {
			sb.WriteByte('+')
		}
	}
	return sb.String()
}

func ampTruth(t *UnitTruth, a OpAmpSpec) {
	t.CMRRdB, t.PSRRPosdB, t.PSRRNegdB, t.AOLdB = a.CMRRdB, a.PSRRPosdB, a.PSRRNegdB, a.AOLdB
	t.AOLDerived = a.AOLDerived
	t.KcUVPerV, t.KpUVPerV, t.KnUVPerV, t.KoUVPerV = a.Kc*1e6, a.Kp*1e6, a.Kn*1e6, a.Ko*1e6
	t.Signs = signString(a.Kc, a.Kp, a.Kn, a.Ko)
	t.VosUV, t.DriftUVPerC = a.VosUV, a.DriftUVPerC
	t.CMRRTCdBPerC, t.PSRRTCdBPerC, t.AOLTCdBPerC = a.CMRRTCdBPerC, a.PSRRTCdBPerC, a.AOLTCdBPerC
	t.Notes = append([]string(nil), a.Notes...)
	t.CMRRPoleHz, t.PSRRPosPoleHz, t.PSRRNegPoleHz, t.GBWHz = a.CMRRPoleHz, a.PSRRPosPoleHz, a.PSRRNegPoleHz, a.GBWHz
}

// Truth returns the true values of every unit, op-amps first.
func (b *Bench) Truth() []UnitTruth {
	b.mu.Lock()
	defer b.mu.Unlock()
	var out []UnitTruth
	for _, us := range b.dut.Units {
		t := UnitTruth{ID: us.ID, Kind: "opamp", Part: b.dut.Part.Number, Fixture: us.Fixture,
			Channel: strconv.Itoa(us.Channel), NoiseGain: us.NoiseGain}
		ampTruth(&t, us.OpAmp)
		if u := b.m.byChan[us.Channel]; u != nil {
			t.NoiseGainActual = u.k // drawn within noise_gain_tolerance
			if u.amp.damaged {
				t.Damage = u.amp.damageReason
			}
		}
		out = append(out, t)
	}
	for _, bs := range b.dut.Boards {
		t := UnitTruth{ID: bs.ID, Kind: "board", Part: bs.Number, Fixture: FixtureBoard, Channel: strconv.Itoa(bs.Channel)}
		ampTruth(&t, bs.OpAmp)
		u := b.m.byChan[bs.Channel]
		t.Board = boardTruth(u, &b.dut.Part)
		if u.amp.damaged {
			t.Damage = u.amp.damageReason
		}
		out = append(out, t)
	}
	return out
}

// boardTruth evaluates the board's static model at 25 °C (case), its die
// in thermal steady state, no noise, no path EMF, by central differences of
// ±1 V (curvature terms cancel), on a healthy copy of its op-amp.
func boardTruth(u *unit, part *PartSpec) *BoardTruth {
	cp := *u.amp
	cp.damaged = false
	cp.caseC = 25
	o := &cp
	vp0, vn0 := part.NominalPosVolts, part.NominalNegVolts
	tu := *u
	tu.amp = o
	out := func(vp, vn, vcm, vd float64) float64 {
		o.dieRiseC = part.ThetaCPerWatt * o.powerWatts(vp-vn)
		v, _ := tu.meterAndPins(vp, vn, vcm, vd, 0, 0)
		return v
	}
	mid := 0.5 * (vp0 + vn0)
	ad := (out(vp0, vn0, mid, 1) - out(vp0, vn0, mid, -1)) / 2
	acm := (out(vp0, vn0, mid+1, 0) - out(vp0, vn0, mid-1, 0)) / 2
	dp := (out(vp0+1, vn0, mid, 0) - out(vp0-1, vn0, mid, 0)) / 2
	dn := (out(vp0, vn0+1, mid, 0) - out(vp0, vn0-1, mid, 0)) / 2
	r1, r2, r3, r4 := u.r1, u.r2, u.r3, u.r4
	// Exact bridge algebra of the four-resistor difference amplifier with
	// an ideal op-amp: Vout = V+in·R4/(R3+R4)·(1 + R2/R1) − V−in·R2/R1.
	alpha := r4 / (r3 + r4) * (1 + r2/r1)
	beta := r2 / r1
	adR := (alpha + beta) / 2
	acmR := alpha - beta
	return &BoardTruth{
		GainVPerV: ad, AcmVPerV: acm,
		CMRRdB:         20 * math.Log10(math.Abs(ad/acm)),
		PSRRPosdB:      20 * math.Log10(math.Abs(ad/dp)),
		PSRRNegdB:      20 * math.Log10(math.Abs(ad/dn)),
		ResistorCMRRdB: 20 * math.Log10(math.Abs(adR/acmR)),
		ResistorsOhms:  [4]float64{r1, r2, r3, r4},
	}
}

// Snapshot is a test-only view of the bench's physical state. It is never
// reachable over SCPI.
type Snapshot struct {
	BenchSeconds float64
	SetPointC    float64
	AirC         float64
	Supply       []ChannelSnapshot
	Source       []ChannelSnapshot
	Closed       []int
	// MostClosed is the most relays that were closed at once since the
	// bench was built: 1 when every change was break before make.
	MostClosed int
	// GeneratorEverOn holds, per function-generator output, whether it
	// has been on at some time since New.
	GeneratorEverOn []bool
	// EverClosed lists every relay closed at some time since New, even
	// if open now.
	EverClosed []int
	Socket     string // id of the unit in the hand socket, "" when empty
	Units      []UnitSnapshot
}

// ChannelSnapshot is one supply or source channel.
type ChannelSnapshot struct {
	Channel         int
	ProgrammedVolts float64
	LimitAmps       float64
	On              bool
	EverOn          bool    // the output has been on at some time since New
	OutputVolts     float64 // actual output (supply: magnitude)
	ConstantCurrent bool
}

// UnitSnapshot is one unit's state.
type UnitSnapshot struct {
	ID                                        string
	Channel                                   int
	Connected                                 bool // on the fixture buses: channel closed, or in the socket
	InSocket                                  bool // in the hand socket (see Insert)
	Damaged                                   bool
	DamageReason                              string
	DamagedAtSeconds                          float64 // bench time
	CaseC, DieC                               float64
	VPosVolts, VNegVolts, VInVolts, VOutVolts float64 // terminal voltages (0 when disconnected)
	VioUV                                     float64 // input offset now, without noise
	SupplyAmps                                float64
}

// Inspect returns the physical state at the present bench time.
func (b *Bench) Inspect() Snapshot {
	b.mu.Lock()
	defer b.mu.Unlock()
	m := b.m
	m.advance(b.benchSeconds())
	s := Snapshot{BenchSeconds: m.t, SetPointC: m.chamber.setC, AirC: m.chamber.airC}
	for i, c := range m.supply {
		s.Supply = append(s.Supply, ChannelSnapshot{Channel: i + 1, ProgrammedVolts: c.progVolts, LimitAmps: c.limitAmps, On: c.on, EverOn: c.everOn, OutputVolts: c.volts, ConstantCurrent: c.cc})
	}
	for i, c := range m.source {
		s.Source = append(s.Source, ChannelSnapshot{Channel: i + 1, ProgrammedVolts: c.progVolts, On: c.on, EverOn: c.everOn, OutputVolts: c.volts})
	}
	for ch := range m.closed {
		s.Closed = append(s.Closed, ch)
	}
	sort.Ints(s.Closed)
	s.MostClosed = m.mostClosed
	for _, g := range m.gen {
		s.GeneratorEverOn = append(s.GeneratorEverOn, g != nil && (g.on || g.everOn))
	}
	for ch := range m.everClosed {
		s.EverClosed = append(s.EverClosed, ch)
	}
	sort.Ints(s.EverClosed)
	if m.socket != nil {
		s.Socket = m.socket.id
	}
	conn := map[*unit]bool{}
	for _, u := range m.connected() {
		conn[u] = true
	}
	vp, vn, vcm, vd, vref := m.nodes()
	for _, u := range m.units {
		o := u.amp
		us := UnitSnapshot{ID: u.id, Channel: u.channel, Connected: conn[u], Damaged: o.damaged,
			DamageReason: o.damageReason, DamagedAtSeconds: o.damageAt, CaseC: o.caseC, DieC: o.caseC + o.dieRiseC,
			InSocket: u == m.socket}
		if conn[u] {
			_, pins := u.meterAndPins(vp, vn, vcm, vd, vref, m.pathExtra(u))
			us.VPosVolts, us.VNegVolts, us.VInVolts, us.VOutVolts = pins.vp, pins.vn, pins.vin, pins.vout
			us.VioUV = o.vio(pins) * 1e6
			us.SupplyAmps = o.supplyAmps(math.Max(vp-vn, 0))
		}
		s.Units = append(s.Units, us)
	}
	return s
}
