package procedure

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"sync"
	"time"

	"nullbench/instrument"
	"nullbench/procedure/clock"
	"nullbench/procedure/journal"
	"nullbench/procedure/operator"
	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// fakeBench is an in-memory bench for the runner's tests. Every call is
// logged in order, with the bench time it happened at. It keeps the
// physical state of every output (an output that is off drives 0 V) and,
// after every call that changes it, checks what a real part would suffer:
//
//   - an input (or the held output) beyond a rail by more than
//     part.input_beyond_rail_volts, the rails being 0 V when off;
//   - the supply span above part.max_supply_span_volts;
//   - a voltage step larger than safety.ramp_step_volts on a live output,
//     or an output switched on away from 0 V;
//   - a relay moved while a supply output is on (hot switching).
//
// Violations are collected; tests assert there are none. The meter reads
// a linear model of the part (derived from kc + kp + kn + ko = 0, no
// published source) plus an optional settling tail
// that decays after every change of state.
type fakeBench struct {
	mu  sync.Mutex
	p   *plan.Plan
	clk *clock.Manual

	calls []fakeCall
	out   map[string]*fakeOutput // role -> output
	// switch
	closed map[string]bool
	// chamber: air temperature follows the set point with time constant
	// chamberTau; readings are exact.
	sp, air    float64
	airAt      time.Duration
	chamberTau time.Duration
	setPoints  []fakeSetPoint

	// the part: E = K·Vio (see meterValue); a board reads G·Vd + G·Vio
	k, vos, kc, kp, ko float64
	boardGain          float64
	// settling tail: tail·exp(-(t - lastChange)/tau) added to the meter
	tail       float64
	tau        time.Duration
	lastChange time.Duration
	// readback gain error of supplies and sources (read = set·(1+readGain))
	readGain float64
	// lateFault, when set, fails a set-volts call after the output has
	// changed (a reply lost after the instrument acted).
	lateFault func(fakeCall) error
	// supplyAmps is what each supply reports drawing (nil: 2 mA, a part
	// in the socket).
	supplyAmps *float64

	violations []string
	maxSpan    float64 // the largest supply span seen

	// fault returns a non-nil error to fail a call before it acts (the
	// instrument state is then unchanged). nil: no faults.
	fault func(c fakeCall) error
	// onCall runs after each call is logged (tests cancel contexts here).
	onCall func(c fakeCall)
}

type fakeCall struct {
	N    int           // 1-based call number
	At   time.Duration // bench time
	Role string        // "supply_pos", "source_cm", "meter", "switch", "chamber", "thermometer"
	Op   string        // "set-volts", "current-limit", "output", "read-volts", "read-amps", "configure", "read", "read-n", "close", "open", "open-all", "set-point", "read-celsius"
	Arg  float64
	On   bool
	Ch   string
}

func (c fakeCall) String() string {
	switch c.Op {
	case "set-volts", "set-point", "current-limit", "read-n":
		return fmt.Sprintf("%s %s %g", c.Role, c.Op, c.Arg)
	case "output":
		if c.On {
			return c.Role + " output on"
		}
		return c.Role + " output off"
	case "close", "open":
		return fmt.Sprintf("%s %s %s", c.Role, c.Op, c.Ch)
	}
	return c.Role + " " + c.Op
}

type fakeOutput struct {
	volts, amps float64
	on          bool
}

type fakeSetPoint struct {
	at time.Duration
	c  float64
}

func newFakeBench(p *plan.Plan) *fakeBench {
	fb := &fakeBench{p: p, clk: &clock.Manual{}, out: map[string]*fakeOutput{}, closed: map[string]bool{},
		sp: p.Temperature.AmbientCelsius, air: p.Temperature.AmbientCelsius, chamberTau: 2 * time.Minute,
		k: 1000, vos: 20e-6, kc: 3e-6, kp: 5e-6, ko: 1e-6, boardGain: p.Fixture.BoardGain}
	for _, r := range []string{plan.RoleSupplyPos, plan.RoleSupplyNeg, plan.RoleSourceCM, plan.RoleSourceDiff, plan.RoleSourceRef} {
		fb.out[r] = &fakeOutput{}
	}
	return fb
}

// rig builds a Rig with every role the plan binds.
func (fb *fakeBench) rig() *Rig {
	r := &Rig{Meter: &fakeMeter{fb}}
	b := &fb.p.Bench.Roles
	if b.SupplyPos.Bound() {
		r.SupplyPos = &fakeSupply{fb, plan.RoleSupplyPos}
	}
	if b.SupplyNeg.Bound() {
		r.SupplyNeg = &fakeSupply{fb, plan.RoleSupplyNeg}
	}
	if b.SourceCM.Bound() {
		r.SourceCM = &fakeSource{fb, plan.RoleSourceCM}
	}
	if b.SourceDiff.Bound() {
		r.SourceDiff = &fakeSource{fb, plan.RoleSourceDiff}
	}
	if b.SourceRef.Bound() {
		r.SourceRef = &fakeSource{fb, plan.RoleSourceRef}
	}
	if b.Switch.Bound() {
		r.Switch = &fakeSwitch{fb}
	}
	if b.Chamber.Bound() {
		r.Chamber = &fakeChamber{fb}
	}
	r.Identities = []journal.Identity{{Instrument: "fake", Roles: []string{"all"}, IDN: "FAKE,BENCH,0,1"}}
	return r
}

// call logs a call, advances the clock by its duration and asks the fault
// hook. It must be called with fb.mu held.
func (fb *fakeBench) call(ctx context.Context, c fakeCall, d time.Duration) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	c.N = len(fb.calls) + 1
	fb.clk.Advance(d)
	c.At = fb.clk.Now()
	fb.calls = append(fb.calls, c)
	if fb.onCall != nil {
		fb.onCall(c)
	}
	if fb.fault != nil {
		if err := fb.fault(c); err != nil {
			return err
		}
	}
	return nil
}

// terminals returns the voltages the part sees now (outputs off are 0 V).
func (fb *fakeBench) terminals() (pos, neg, cm, diff, ref float64) {
	v := func(r string) float64 {
		if o := fb.out[r]; o.on {
			return o.volts
		}
		return 0
	}
	return v(plan.RoleSupplyPos), v(plan.RoleSupplyNeg), v(plan.RoleSourceCM), v(plan.RoleSourceDiff), v(plan.RoleSourceRef)
}

func (fb *fakeBench) suppliesOn() bool {
	return fb.out[plan.RoleSupplyPos].on || fb.out[plan.RoleSupplyNeg].on
}

// check records a violation of the part's absolute maxima after call c.
func (fb *fakeBench) check(c fakeCall) {
	const eps = 1e-9
	pos, neg, cm, diff, ref := fb.terminals()
	beyond := fb.p.Part.InputBeyondRailVolts
	hi, lo := cm, cm
	if fb.p.Fixture.Kind == plan.FixtureBoard {
		hi, lo = cm+math.Abs(diff), cm-math.Abs(diff)
	}
	bad := func(format string, args ...any) {
		fb.violations = append(fb.violations, fmt.Sprintf("call %d (%s): ", c.N, c)+fmt.Sprintf(format, args...))
	}
	if hi > pos+beyond+eps || lo < neg-beyond-eps {
		bad("input %g…%g V beyond the rails %g / %g V", lo, hi, pos, neg)
	}
	if ref > pos+beyond+eps || ref < neg-beyond-eps {
		bad("held output %g V beyond the rails %g / %g V", ref, pos, neg)
	}
	span := pos - neg
	if span > fb.p.Part.MaxSupplySpanVolts+eps {
		bad("span %g V above the maximum %g V", span, fb.p.Part.MaxSupplySpanVolts)
	}
	fb.maxSpan = math.Max(fb.maxSpan, span)
}

func (fb *fakeBench) setVolts(ctx context.Context, role string, v float64) error {
	fb.mu.Lock()
	defer fb.mu.Unlock()
	c := fakeCall{Role: role, Op: "set-volts", Arg: v}
	if err := fb.call(ctx, c, time.Millisecond); err != nil {
		return err
	}
	o := fb.out[role]
	if o.on && math.Abs(v-o.volts) > safety.RampStep(fb.p)+1e-9 {
		fb.violations = append(fb.violations, fmt.Sprintf("call %d (%s): step of %g V on a live output", len(fb.calls), c, v-o.volts))
	}
	if o.volts != v && o.on {
		fb.lastChange = fb.clk.Now()
	}
	o.volts = v
	fb.check(fb.calls[len(fb.calls)-1])
	if fb.lateFault != nil {
		// The change took effect, then the reply was lost.
		return fb.lateFault(c)
	}
	return nil
}

func (fb *fakeBench) setOutput(ctx context.Context, role string, on bool) error {
	fb.mu.Lock()
	defer fb.mu.Unlock()
	c := fakeCall{Role: role, Op: "output", On: on}
	if err := fb.call(ctx, c, time.Millisecond); err != nil {
		return err
	}
	o := fb.out[role]
	if on && !o.on && o.volts != 0 {
		fb.violations = append(fb.violations, fmt.Sprintf("call %d (%s): output switched on at %g V", len(fb.calls), c, o.volts))
	}
	if o.on != on {
		fb.lastChange = fb.clk.Now()
	}
	o.on = on
	fb.check(fb.calls[len(fb.calls)-1])
	return nil
}

func (fb *fakeBench) readVolts(ctx context.Context, role string) (float64, error) {
	fb.mu.Lock()
	defer fb.mu.Unlock()
	if err := fb.call(ctx, fakeCall{Role: role, Op: "read-volts"}, time.Millisecond); err != nil {
		return 0, err
	}
	o := fb.out[role]
	if !o.on {
		return 0, nil
	}
	return o.volts * (1 + fb.readGain), nil
}

// meterValue is the model's output now (fb.mu held).
func (fb *fakeBench) meterValue() float64 {
	pos, neg, cm, diff, ref := fb.terminals()
	var v float64
	if fb.p.Fixture.Kind == plan.FixtureBoard {
		// board: G·Vd + Acm·Vcm + supply terms, Acm = G·kc
		v = fb.boardGain*diff + fb.boardGain*(fb.vos+fb.kc*cm+fb.kp*(pos-fb.p.Part.NominalPosVolts)-(fb.kc+fb.kp+fb.ko)*(neg-fb.p.Part.NominalNegVolts))
	} else {
		// Derived, no published source: the offset depends only on voltages
		// between the
		// part's own terminals, Vio = vos + kc·(Vin - V-) + kp·(V+ - V-) +
		// ko·(Vout - V-), so kn = -(kc + kp + ko). Taken from the nominal
		// rails, where Vio = vos.
		n0, p0 := fb.p.Part.NominalNegVolts, fb.p.Part.NominalPosVolts
		vio := fb.vos + fb.kc*((cm-neg)-(0-n0)) + fb.kp*((pos-neg)-(p0-n0)) + fb.ko*((ref-neg)-(0-n0))
		v = fb.k * vio
	}
	if fb.tail != 0 && fb.tau > 0 {
		v += fb.tail * math.Exp(-float64(fb.clk.Now()-fb.lastChange)/float64(fb.tau))
	}
	return v
}

type fakeSupply struct {
	fb   *fakeBench
	role string
}

func (s *fakeSupply) SetVolts(ctx context.Context, v float64) error {
	return s.fb.setVolts(ctx, s.role, v)
}
func (s *fakeSupply) SetOutput(ctx context.Context, on bool) error {
	return s.fb.setOutput(ctx, s.role, on)
}
func (s *fakeSupply) ReadVolts(ctx context.Context) (float64, error) {
	return s.fb.readVolts(ctx, s.role)
}
func (s *fakeSupply) SetCurrentLimit(ctx context.Context, a float64) error {
	fb := s.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	if err := fb.call(ctx, fakeCall{Role: s.role, Op: "current-limit", Arg: a}, time.Millisecond); err != nil {
		return err
	}
	fb.out[s.role].amps = a
	return nil
}
func (s *fakeSupply) ReadAmps(ctx context.Context) (float64, error) {
	fb := s.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	amps := 0.002
	if fb.supplyAmps != nil {
		amps = *fb.supplyAmps
	}
	return amps, fb.call(ctx, fakeCall{Role: s.role, Op: "read-amps"}, time.Millisecond)
}

type fakeSource struct {
	fb   *fakeBench
	role string
}

func (s *fakeSource) SetVolts(ctx context.Context, v float64) error {
	return s.fb.setVolts(ctx, s.role, v)
}
func (s *fakeSource) SetOutput(ctx context.Context, on bool) error {
	return s.fb.setOutput(ctx, s.role, on)
}
func (s *fakeSource) ReadVolts(ctx context.Context) (float64, error) {
	return s.fb.readVolts(ctx, s.role)
}

type fakeMeter struct{ fb *fakeBench }

func (m *fakeMeter) ConfigureDCVolts(ctx context.Context, rng, nplc float64) error {
	fb := m.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	return fb.call(ctx, fakeCall{Role: plan.RoleMeter, Op: "configure", Arg: rng}, time.Millisecond)
}

func (m *fakeMeter) Read(ctx context.Context) (float64, error) {
	fb := m.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	if err := fb.call(ctx, fakeCall{Role: plan.RoleMeter, Op: "read"}, 20*time.Millisecond); err != nil {
		return 0, err
	}
	return fb.meterValue(), nil
}

func (m *fakeMeter) ReadN(ctx context.Context, n int) ([]float64, error) {
	fb := m.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	out := make([]float64, n)
	if err := fb.call(ctx, fakeCall{Role: plan.RoleMeter, Op: "read-n", Arg: float64(n)}, 0); err != nil {
		return nil, err
	}
	for i := range out {
		fb.clk.Advance(20 * time.Millisecond)
		// a small deterministic spread so that the SD is not zero
		out[i] = fb.meterValue() + 1e-7*float64(i%3-1)
	}
	return out, nil
}

type fakeSwitch struct{ fb *fakeBench }

func (s *fakeSwitch) move(ctx context.Context, op, ch string) error {
	fb := s.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	c := fakeCall{Role: plan.RoleSwitch, Op: op, Ch: ch}
	if err := fb.call(ctx, c, time.Millisecond); err != nil {
		return err
	}
	// A through relay ([[ac_test]] through_channel) moves only the
	// digitizer's channel 2 between two signals; it is switched with the
	// part powered, by design.
	through := map[string]bool{}
	for _, t := range fb.p.ACTests {
		if t.Through == plan.ThroughSwitch {
			through[t.ThroughChannel] = true
		}
	}
	if fb.suppliesOn() && !through[ch] {
		fb.violations = append(fb.violations, fmt.Sprintf("call %d (%s): relay moved with a supply on", len(fb.calls), c))
	}
	switch op {
	case "close":
		fb.closed[ch] = true
	case "open":
		delete(fb.closed, ch)
	case "open-all":
		fb.closed = map[string]bool{}
	}
	units := 0
	for k := range fb.closed {
		if !through[k] {
			units++
		}
	}
	if units > 1 {
		fb.violations = append(fb.violations, fmt.Sprintf("call %d (%s): %d channels closed at once", len(fb.calls), c, len(fb.closed)))
	}
	return nil
}

func (s *fakeSwitch) Close(ctx context.Context, ch string) error { return s.move(ctx, "close", ch) }
func (s *fakeSwitch) Open(ctx context.Context, ch string) error  { return s.move(ctx, "open", ch) }
func (s *fakeSwitch) OpenAll(ctx context.Context) error          { return s.move(ctx, "open-all", "") }

type fakeChamber struct{ fb *fakeBench }

// airNow advances the chamber's air temperature to now (fb.mu held).
func (fb *fakeBench) airNow() float64 {
	now := fb.clk.Now()
	if dt := now - fb.airAt; dt > 0 {
		fb.air = fb.sp + (fb.air-fb.sp)*math.Exp(-float64(dt)/float64(fb.chamberTau))
		fb.airAt = now
	}
	return fb.air
}

func (c *fakeChamber) SetPointCelsius(ctx context.Context, t float64) error {
	fb := c.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	if err := fb.call(ctx, fakeCall{Role: plan.RoleChamber, Op: "set-point", Arg: t}, time.Millisecond); err != nil {
		return err
	}
	fb.airNow()
	fb.sp = t
	fb.setPoints = append(fb.setPoints, fakeSetPoint{at: fb.clk.Now(), c: t})
	return nil
}

func (c *fakeChamber) ReadCelsius(ctx context.Context) (float64, error) {
	fb := c.fb
	fb.mu.Lock()
	defer fb.mu.Unlock()
	if err := fb.call(ctx, fakeCall{Role: plan.RoleChamber, Op: "read-celsius"}, time.Millisecond); err != nil {
		return 0, err
	}
	return fb.airNow(), nil
}

// callsSnapshot returns a copy of the call log.
func (fb *fakeBench) callsSnapshot() []fakeCall {
	fb.mu.Lock()
	defer fb.mu.Unlock()
	return append([]fakeCall(nil), fb.calls...)
}

// failNth fails the nth call (1-based, counting calls that match) whose
// role and op match (empty matches any), with err. With sticky, every
// later call to the same instrument group fails too (a lost connection).
func failNth(role, op string, nth int, err error, sticky bool) func(fakeCall) error {
	seen := 0
	dead := false
	group := instrumentGroup(role)
	return func(c fakeCall) error {
		if dead && instrumentGroup(c.Role) == group {
			return fmt.Errorf("%s: %w", c, err)
		}
		if (role == "" || c.Role == role) && (op == "" || c.Op == op) {
			seen++
			if seen == nth {
				dead = sticky
				return fmt.Errorf("%s: %w", c, err)
			}
		}
		return nil
	}
}

// instrumentGroup maps a role to the instrument serving it on the
// simulated bench's wiring (package instrument/sim): both supplies on one,
// the three
// sources on another.
func instrumentGroup(role string) string {
	switch role {
	case plan.RoleSupplyPos, plan.RoleSupplyNeg:
		return "psu"
	case plan.RoleSourceCM, plan.RoleSourceDiff, plan.RoleSourceRef:
		return "src"
	case plan.RoleChamber, plan.RoleThermometer:
		return "chamber"
	}
	return role
}

// errLost stands for a dropped connection.
var errLost = fmt.Errorf("connection lost: %w", instrument.ErrClosed)

// fakeOperator is a scripted operator. It checks, at every swap, that the
// bench is powered down.
type fakeOperator struct {
	fb       *fakeBench
	ids      map[string]string // plan id -> id to answer ("" = confirm)
	temps    []float64         // answers to Temperature, in order
	swaps    []string
	requests []operator.TemperatureRequest
	swapErr  error
	skip     map[string]string // plan id -> reason to skip it
	hot      []string          // swaps asked while powered
}

func (o *fakeOperator) SwapUnit(ctx context.Context, next plan.Unit) (string, error) {
	o.fb.mu.Lock()
	pos, neg, cm, diff, ref := o.fb.terminals()
	o.fb.mu.Unlock()
	if pos != 0 || neg != 0 || cm != 0 || diff != 0 || ref != 0 {
		o.hot = append(o.hot, next.ID)
	}
	o.swaps = append(o.swaps, next.ID)
	if o.swapErr != nil {
		return "", o.swapErr
	}
	if why, ok := o.skip[next.ID]; ok {
		return "", &operator.SkipUnitError{Unit: next.ID, Reason: why}
	}
	return o.ids[next.ID], nil
}

func (o *fakeOperator) Temperature(ctx context.Context, req operator.TemperatureRequest) (float64, error) {
	o.requests = append(o.requests, req)
	if len(o.temps) == 0 {
		return 0, errors.New("no more temperatures scripted")
	}
	c := o.temps[0]
	o.temps = o.temps[1:]
	return c, nil
}

// recProgress records progress calls.
type recProgress struct {
	total, done int
	began       int
	points      []PointInfo
	notes       []string
	ended       int
}

func (p *recProgress) Begin(total, done int) { p.total, p.done, p.began = total, done, p.began+1 }
func (p *recProgress) Point(i PointInfo)     { p.points = append(p.points, i) }
func (p *recProgress) Note(m string)         { p.notes = append(p.notes, m) }
func (p *recProgress) End()                  { p.ended++ }

// joinCalls formats calls one per line (for failure messages).
func joinCalls(cs []fakeCall) string {
	var b strings.Builder
	for _, c := range cs {
		fmt.Fprintf(&b, "%4d %8.3fs %s\n", c.N, c.At.Seconds(), c)
	}
	return b.String()
}
