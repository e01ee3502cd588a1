package estimate

import (
	"math"

	"nullbench/procedure/plan"
	"nullbench/procedure/safety"
)

// LineFrequencyHz is the mains frequency used to turn NPLC into seconds for
// estimates (one power-line cycle = 1/50 Hz = 20 ms). At 60 Hz
// the integration is shorter, so the estimate errs long.
const LineFrequencyHz = 50.0

// SequencerWaits are the runner's own waits (procedure.Timing): the
// duration model counts them exactly as the runner makes them. Seconds of
// bench time.
type SequencerWaits struct {
	// RampDwellSeconds: least time from one ramp step of a supply or
	// source to the next action (steps ≤ 1 V with settling: common
	// practice, no published source).
	RampDwellSeconds float64
	// RelaySettleSeconds: waited after closing a unit's switch channel
	// (relay operate and bounce, common practice).
	RelaySettleSeconds float64
	// SettleIntervalSeconds separates the starts of the settling check's
	// successive readings.
	SettleIntervalSeconds float64
	// SoakIntervalSeconds separates the temperature readings while
	// soaking (at most a fifth of soak_s, not under 1 s).
	SoakIntervalSeconds float64
	// ChamberTickSeconds is the period of a chamber ramp's set-point steps.
	ChamberTickSeconds float64
}

// DefaultSequencerWaits are the runner's defaults (procedure.Timing).
func DefaultSequencerWaits() SequencerWaits {
	return SequencerWaits{RampDwellSeconds: 0.05, RelaySettleSeconds: 0.05, SettleIntervalSeconds: 1,
		SoakIntervalSeconds: 10, ChamberTickSeconds: 30}
}

// RoleFigures is what one role's instrument costs in bench time.
type RoleFigures struct {
	// SetSeconds is one set command's exchanges (the command, a channel
	// select, the error-queue check), QuerySeconds one query's; both in
	// bench seconds (wall time × time_scale on a simulated bench).
	SetSeconds, QuerySeconds float64
	// SettleSeconds is the driver's wait after every set command (the
	// profile's settle).
	SettleSeconds float64
}

// Figures are the instruments' timing and noise figures the predictions
// need. cmd fills them from the profiles the plan names
// (instrument.ProfileFigures); this package reads no file.
type Figures struct {
	// Roles by role name (RoleMeter, RoleSupplyPos, ...). A missing role
	// costs nothing.
	Roles map[string]RoleFigures
	// Meter: a reading lasts NPLC/LineHz × ReadingOverhead; each trigger
	// costs TriggerSeconds more.
	LineHz, ReadingOverhead, TriggerSeconds float64
	// MeterOnePerTrigger: the meter takes one reading per trigger (its
	// profile has no count template), so n readings are n triggers.
	// MeterTriggerSets and MeterTriggerQueries are the commands (init,
	// *TRG) and queries (*OPC?) of one trigger besides the one that
	// returns the readings.
	MeterOnePerTrigger                    bool
	MeterTriggerSets, MeterTriggerQueries int
	// Meter noise: rms of one reading relative to the range at each of
	// NoiseNPLC (ascending), and the low-frequency floor relative to the
	// range, which averaging does not reduce.
	NoiseNPLC, NoiseRelOfRange []float64
	FloorRelOfRange            float64
	// Meter accuracy, ± (GainPPM × reading + OffsetPPMOfRange × range).
	MeterGainPPM, MeterOffsetPPMOfRange float64
	// ChamberAirTauSeconds: the chamber air follows the set point with
	// this first-order time constant (0: at once).
	ChamberAirTauSeconds float64
	Waits                SequencerWaits
	// WaitGranularitySeconds and WaitOverrunSeconds describe the host's
	// timer, in bench seconds: a timed wait of d lasts d rounded up to a
	// whole number of granules, plus the overrun (the scheduling latency
	// of the wake-up). A host whose timer rounds waits up to whole
	// milliseconds turns a wait of 0.2 ms into about 1.1 ms and one of
	// 1.2 ms into about 2.2 ms. On a real bench (microseconds against
	// waits of tens of ms) both are negligible and 0; on a simulated bench
	// at time_scale N each is the host's wall-clock figure × N, which is
	// where the time of a fast simulated run goes (cmd measures them).
	WaitGranularitySeconds, WaitOverrunSeconds float64
}

// wait is the bench time a timed wait of d seconds takes:
// ⌈d/g⌉·g + overrun with g = WaitGranularitySeconds (d + overrun when g
// is 0).
func (f *Figures) wait(d float64) float64 {
	if !(d > 0) {
		return 0
	}
	if g := f.WaitGranularitySeconds; g > 0 {
		d = math.Ceil(d/g-1e-9) * g
	}
	return d + f.WaitOverrunSeconds
}

// DefaultFigures are the built-in profiles' figures with exchanges taking
// no time: what a virtual clock sees (the simulated bench run in tests).
func DefaultFigures() Figures {
	r := map[string]RoleFigures{
		plan.RoleMeter: {}, plan.RoleSupplyPos: {SettleSeconds: 0.1}, plan.RoleSupplyNeg: {SettleSeconds: 0.1},
		plan.RoleSourceCM: {SettleSeconds: 0.05}, plan.RoleSourceDiff: {SettleSeconds: 0.05}, plan.RoleSourceRef: {SettleSeconds: 0.05},
		plan.RoleSwitch: {SettleSeconds: 0.02}, plan.RoleChamber: {}, plan.RoleThermometer: {},
	}
	return Figures{Roles: r, LineHz: 50, ReadingOverhead: 1,
		NoiseNPLC: []float64{0.02, 0.2, 1, 10, 100}, NoiseRelOfRange: []float64{1e-4, 1e-5, 3e-6, 1e-6, 3e-7},
		FloorRelOfRange: 1.5e-7, MeterGainPPM: 15, MeterOffsetPPMOfRange: 4,
		ChamberAirTauSeconds: 240, Waits: DefaultSequencerWaits()}
}

// readingSeconds is one meter reading at nplc.
func (f *Figures) readingSeconds(nplc float64) float64 {
	hz := f.LineHz
	if !(hz > 0) {
		hz = LineFrequencyHz
	}
	ovh := f.ReadingOverhead
	if !(ovh > 0) {
		ovh = 1
	}
	return nplc / hz * ovh
}

// Timeline is the duration model's account of a campaign in run order.
type Timeline struct {
	// Points lists every point of the campaign in the order the runner
	// measures it, with its predicted bench seconds (the ramp to its
	// level, dwell, settling, read-back, readings, temperature reading) and
	// the predicted bench time at which it ends.
	Points []TimedPoint
	// TestSeconds[i] is test i's measuring time for one unit at one
	// temperature (its points, all repeats); TestCampaignSeconds[i] the
	// same over every unit and temperature, with the meter's configuration
	// and the return to the nominal rails.
	TestSeconds, TestCampaignSeconds []float64
	// ACTestSeconds[i] is [[ac_test]] i's time for one unit at one
	// temperature (acTestSeconds), ACTestCampaignSeconds[i] the same over
	// every unit and temperature.
	ACTestSeconds, ACTestCampaignSeconds []float64
	// Overheads: bench switched off at the start, unit connections,
	// power-ups and downs, chamber ramps and soaks, the finish.
	BenchOffSeconds, ConnectSeconds, PowerSeconds, ChamberSeconds, FinishSeconds float64
	TotalSeconds                                                                 float64
}

// TimedPoint is one point of the Timeline.
type TimedPoint struct {
	Key     plan.WorkKey
	Test    int
	Seconds float64
	EndsAt  float64
}

// Timeline walks the plan exactly as the runner does (bench off; per
// temperature the chamber ramp in ticks and the soak; per unit the relay,
// the power-up sequence and current check; per test the meter's
// configuration, every point and the return to nominal; the power-down;
// the chamber back to ambient) and adds up every wait and exchange:
//
//	set command      = exchanges + driver settle; a voltage step at least the ramp dwell
//	meter trigger    = query + trigger + n·(NPLC/f_line)·overhead
//	point            = ramp + dwell + settling (two triggers, SettleInterval apart) + read-back + trigger + thermometer
//	chamber ramp     = ⌈|ΔT| / (rate·tick)⌉ ticks of ChamberTick
//	soak             = the air's first-order approach (air_tau_s) until within tolerance, + soak_s, polled
//	ac_test          = per frequency: configure, sine, three records (floor, through, stimulus) each after
//	                   the generator settle, each records × (record N/f_s + transfer); see acTestSeconds
//
// The settling check is taken to pass at its first comparison, and hand
// swaps and operator prompts take no time.
func (f *Figures) Timeline(p *plan.Plan) Timeline {
	w := f.Waits
	if w == (SequencerWaits{}) {
		w = DefaultSequencerWaits()
	}
	tl := Timeline{TestSeconds: make([]float64, len(p.Tests)), TestCampaignSeconds: make([]float64, len(p.Tests)),
		ACTestSeconds: make([]float64, len(p.ACTests)), ACTestCampaignSeconds: make([]float64, len(p.ACTests))}
	role := func(r string) RoleFigures { return f.Roles[r] }
	now := 0.0
	setCost := func(r string) float64 { rf := role(r); return rf.SetSeconds + f.wait(rf.SettleSeconds) }
	// A voltage step is followed by what is left of the ramp dwell after
	// the set command and its settle (the runner's execute).
	dwellAfter := func(c float64) float64 { return c + f.wait(w.RampDwellSeconds-c) }
	actCost := func(a safety.PowerAction) float64 {
		c := setCost(a.Role)
		if a.Op == safety.PowerSetVolts {
			c = dwellAfter(c)
		}
		return c
	}
	actsCost := func(acts []safety.PowerAction) float64 {
		s := 0.0
		for _, a := range acts {
			s += actCost(a)
		}
		return s
	}
	query := func(r string) float64 { return role(r).QuerySeconds }

	// Bench off: every source and supply read back and switched off (and
	// the supplies programmed to 0 V), from outputs assumed at 0 V.
	srcs := safety.SourceRoles(p)
	for _, r := range srcs {
		tl.BenchOffSeconds += query(r) + setCost(r)
	}
	for _, r := range []string{plan.RoleSupplyPos, plan.RoleSupplyNeg} {
		tl.BenchOffSeconds += query(r) + setCost(r) + dwellAfter(setCost(r))
	}
	now += tl.BenchOffSeconds

	tp := &p.Temperature
	air := tp.AmbientCelsius
	temps := p.TemperaturePoints()
	nominal := plan.NominalState(p)
	for ti := range temps {
		point := temps[ti]
		if tp.Mode == plan.TempChamber {
			start := now
			now += rampChamberAt(f, p, w, &air, point)
			now += soakTime(f, p, w, &air, point)
			tl.ChamberSeconds += now - start
		}
		for _, u := range p.Units {
			if u.Channel != "" {
				c := 2*setCost(plan.RoleSwitch) + f.wait(w.RelaySettleSeconds)
				tl.ConnectSeconds += c
				now += c
			}
			pw := actsCost(safety.PowerUpOrder(p))
			if p.Part.SupplyAmpsMin > 0 || p.Part.SupplyAmpsMax > 0 {
				pw += query(plan.RoleSupplyPos) + query(plan.RoleSupplyNeg)
			}
			tl.PowerSeconds += pw
			now += pw
			state := nominal
			for i := range p.Tests {
				t := &p.Tests[i]
				testStart := now
				now += 2 * setCost(plan.RoleMeter) // configure, NPLC
				countSent := false
				// One point's readings: a trigger of n, or n triggers of one.
				trigger := func() float64 {
					triggers, per := 1, max(t.Readings, 1)
					if f.MeterOnePerTrigger {
						triggers, per = per, 1
					}
					one := float64(1+f.MeterTriggerQueries)*query(plan.RoleMeter) + float64(f.MeterTriggerSets)*role(plan.RoleMeter).SetSeconds +
						f.TriggerSeconds + f.wait(float64(per)*f.readingSeconds(t.NPLC))
					c := float64(triggers) * one
					if !countSent && !f.MeterOnePerTrigger {
						c += role(plan.RoleMeter).SetSeconds
						countSent = true
					}
					return c
				}
				steps := plan.TestSteps(p, i)
				for rep := 0; rep < t.Repeats; rep++ {
					for _, st := range steps {
						ps := 0.0
						if acts, err := safety.Transition(p, state, st.State); err == nil {
							ps += actsCost(acts)
						}
						state = st.State
						ps += f.wait(t.DwellSeconds)
						first := trigger()
						again := trigger()
						comparison := f.wait(w.SettleIntervalSeconds-again) + again
						ps += first + f.wait(w.SettleIntervalSeconds-first) + again
						ps += settleRetries(p, f, t, w) * comparison
						for _, r := range stimulusRoleNames(p, t, st.Part) {
							ps += query(r)
						}
						ps += trigger()
						if tp.Mode == plan.TempChamber || tp.Mode == plan.TempThermometer {
							ps += query(plan.RoleThermometer)
						}
						now += ps
						tl.TestSeconds[i] += ps
						tl.Points = append(tl.Points, TimedPoint{Key: st.Key(ti, u.ID, rep), Test: i, Seconds: ps, EndsAt: now})
					}
				}
				if acts, err := safety.Transition(p, state, nominal); err == nil {
					now += actsCost(acts)
				}
				state = nominal
				tl.TestCampaignSeconds[i] += now - testStart
			}
			// The [[ac_test]] tables, after the DC tests, at the nominal
			// rails (procedure.runACTests).
			for i := range p.ACTests {
				s := f.acTestSeconds(p, &p.ACTests[i], w)
				tl.ACTestSeconds[i] = s
				tl.ACTestCampaignSeconds[i] += s
				now += s
			}
			pd := actsCost(safety.PowerDownFrom(p, nominal))
			tl.PowerSeconds += pd
			now += pd
		}
	}
	// TestSeconds so far summed every unit and temperature: per unit and
	// temperature is the mean.
	if n := float64(len(p.Units) * len(temps)); n > 0 {
		for i := range tl.TestSeconds {
			tl.TestSeconds[i] /= n
		}
	}
	if tp.Mode == plan.TempChamber {
		tl.FinishSeconds += rampChamberAt(f, p, w, &air, tp.AmbientCelsius)
	}
	if len(p.Units) > 0 && p.Units[0].Channel != "" {
		tl.FinishSeconds += setCost(plan.RoleSwitch)
	}
	now += tl.FinishSeconds
	tl.TotalSeconds = now
	return tl
}

// settleRetries is the expected number of further comparisons the
// settling check makes at a point whose reading has settled: two means of
// `readings` readings, each with standard deviation σ (pointNoise), differ
// by more than settle_volts with probability q = erfc(s/(2σ)) (their
// difference is normal with standard deviation √2·σ), and the check
// repeats until a difference is within it, a geometric number of times
// with mean q/(1 − q) (e.g. Papoulis, Probability, Random Variables and
// Stochastic Processes, the geometric distribution; from memory), at most
// until the time-out. A settling tail of the part itself is not counted.
func settleRetries(p *plan.Plan, f *Figures, t *plan.Test, w SequencerWaits) float64 {
	divisor := p.Fixture.NoiseGain
	if p.Fixture.Kind == plan.FixtureBoard {
		divisor = p.Fixture.BoardGain
	}
	sigma := pointNoise(p, f, t, divisor, 0)
	if !(sigma > 0) || !(t.SettleVolts > 0) {
		return 0
	}
	q := math.Erfc(t.SettleVolts / (2 * sigma))
	most := 0.0
	if w.SettleIntervalSeconds > 0 {
		most = math.Floor(t.SettleTimeoutSeconds / w.SettleIntervalSeconds)
	}
	if q >= 1 {
		return most
	}
	return math.Min(q/(1-q), most)
}

// airAfter is the chamber air after d seconds of following set point sp
// from a, as a first-order lag of time constant tau (0: at once).
func airAfter(a, sp, d, tau float64) float64 {
	if tau <= 0 {
		return sp
	}
	return sp + (a-sp)*math.Exp(-d/tau)
}

// rampChamberAt is the runner's chamber ramp from the present reading
// (*air) to target: one reading, then ⌈|Δ|/step⌉ ticks each followed by a
// set point; *air follows the staircase.
func rampChamberAt(f *Figures, p *plan.Plan, w SequencerWaits, air *float64, target float64) float64 {
	set := f.Roles[plan.RoleChamber].SetSeconds + f.Roles[plan.RoleChamber].SettleSeconds
	t := f.Roles[plan.RoleChamber].QuerySeconds
	rate := p.Temperature.RampMaxCPerMinute
	from := *air
	if !(rate > 0) || from == target {
		return t + set
	}
	step := rate * w.ChamberTickSeconds / 60
	sp := from
	for sp != target {
		t += f.wait(w.ChamberTickSeconds) + set
		*air = airAfter(*air, sp, w.ChamberTickSeconds, f.ChamberAirTauSeconds)
		sp = safety.StepToward(sp, target, step)
	}
	return t
}

// soakTime is the runner's soak at point: read every poll interval until
// the reading has stayed within ±soak_tolerance_c for soak_s (or the
// time-out); *air approaches point meanwhile.
func soakTime(f *Figures, p *plan.Plan, w SequencerWaits, air *float64, point float64) float64 {
	tp := &p.Temperature
	q := f.Roles[plan.RoleThermometer].QuerySeconds
	poll := w.SoakIntervalSeconds
	if tp.SoakSeconds > 0 && poll > tp.SoakSeconds/5 {
		poll = math.Max(tp.SoakSeconds/5, 1)
	}
	t, inSince := 0.0, -1.0
	for {
		t += q
		if math.Abs(*air-point) <= tp.SoakToleranceC {
			if inSince < 0 {
				inSince = t
			}
			if t-inSince >= tp.SoakSeconds {
				return t
			}
		} else {
			inSince = -1
		}
		if t >= tp.SoakTimeoutSeconds {
			return t
		}
		t += f.wait(poll)
		*air = airAfter(*air, point, poll, f.ChamberAirTauSeconds)
	}
}

// stimulusRoleNames lists the roles a level of test t moves (the runner
// reads each back after settling).
func stimulusRoleNames(p *plan.Plan, t *plan.Test, part string) []string {
	s0, s1 := plan.StateAt(p, t, part, 0), plan.StateAt(p, t, part, 1)
	var out []string
	add := func(role string, a, b float64) {
		if math.Abs(b-a) > 1e-12 {
			out = append(out, role)
		}
	}
	add(plan.RoleSupplyPos, s0.PosVolts, s1.PosVolts)
	add(plan.RoleSupplyNeg, s0.NegVolts, s1.NegVolts)
	add(plan.RoleSourceCM, s0.CMVolts, s1.CMVolts)
	add(plan.RoleSourceDiff, s0.DiffVolts, s1.DiffVolts)
	add(plan.RoleSourceRef, s0.RefVolts, s1.RefVolts)
	return out
}
