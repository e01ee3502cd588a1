package plan

import (
	"math"
	"strconv"
)

// ACTest is one rejection-versus-frequency test, a [[ac_test]] table: a
// sine stimulus from the generator role at each of a list of frequencies,
// the stimulus at the part's terminals and the fixture output digitized
// together (the digitizer role, channel 1 stimulus, channel 2 response) or
// read as magnitudes by the ac_meter role.
//
// Kinds are the DC kinds that have a sine form: cmrr, psrr_pos, psrr_neg
// on an op-amp fixture (nulling loop or noise-gain stage), board_cmrr,
// board_psrr_pos, board_psrr_neg on a board. A cmrr test drives the
// inputs' common-mode node (the generator summed into it, offset_volts its
// DC level); a psrr test injects the sine onto one rail through the
// coupling network named by injection.
type ACTest struct {
	Kind string `toml:"kind"`
	// FrequenciesHz are named points (e.g. 50, 60, 100, 120); or leave
	// them out and give StartHz, StopHz and Points for a log-spaced list
	// f_i = start·(stop/start)^(i/(points−1)).
	FrequenciesHz []float64 `toml:"frequencies_hz"`
	StartHz       float64   `toml:"start_hz"`
	StopHz        float64   `toml:"stop_hz"`
	Points        int       `toml:"points"`
	// PeakVolts is the stimulus amplitude at the part's terminals (peak,
	// half the peak-to-peak value); OffsetVolts the DC level of the
	// driven node (cmrr, board_cmrr: the common mode; psrr: must be 0, the
	// rail's DC is its nominal).
	PeakVolts   float64 `toml:"peak_volts"`
	OffsetVolts float64 `toml:"offset_volts"`
	// Injection is how a psrr test puts the sine on the rail:
	// InjectSeries (an injector, e.g. a transformer, in series with the
	// rail) or InjectModulation (the generator into the supply's analog
	// modulation input). CouplingGain is its nominal gain, rail ripple per
	// volt at the generator; the generator is set to PeakVolts/CouplingGain
	// and the real ripple is measured on digitizer channel 1.
	Injection    string  `toml:"injection"`
	CouplingGain float64 `toml:"coupling_gain"`
	// GeneratorChannel overrides the generator role's channel for this
	// test (e.g. the output wired to the V+ injector).
	GeneratorChannel string `toml:"generator_channel"`
	// LimitsDB are the minimum acceptable ratios in dB: one per frequency,
	// or a single value for every frequency. Empty: measured, not judged.
	LimitsDB []float64 `toml:"limits_db"`
	// Through is how the through calibration connects digitizer channel 2
	// to the stimulus: ThroughSwitch (ThroughChannel on the switch role
	// closed during the calibration record) or ThroughManual (the operator
	// moves the channel-2 probe to the stimulus-sense point when prompted).
	Through        string `toml:"through"`
	ThroughChannel string `toml:"through_channel"`
	// MinCycles and MinSamples set each record (coherent: an integer
	// number of cycles, IEEE Std 1241-2010 §4.1.4.5); MaxRateHz is the
	// digitizer's highest sample rate; Records are averaged per point.
	MinCycles  int     `toml:"min_cycles"`
	MinSamples int     `toml:"min_samples"`
	MaxSamples int     `toml:"max_samples"`
	MaxRateHz  float64 `toml:"max_rate_hz"`
	Records    int     `toml:"records"`
	// RangeVolts is the digitizer range (peak) of each channel, stimulus
	// and response.
	StimulusRangeVolts float64 `toml:"stimulus_range_volts"`
	ResponseRangeVolts float64 `toml:"response_range_volts"`
	// SettleCycles is the wait after a frequency change before recording,
	// in periods of the stimulus (at least DwellSeconds).
	SettleCycles int     `toml:"settle_cycles"`
	DwellSeconds float64 `toml:"dwell_s"`
}

// Injection networks of a psrr ACTest.
const (
	InjectSeries     = "series_injector"  // injector in series with the rail
	InjectModulation = "modulation_input" // generator into the supply's modulation input
)

// Through-calibration methods.
const (
	ThroughSwitch = "switch" // a relay on the switch role connects channel 2 to the stimulus
	ThroughManual = "manual" // the operator moves the channel-2 probe when prompted
)

// Generator limits: the plan's [generator] table states what the
// generator may ever be set to; the runner refuses any setting beyond it.
type GeneratorLimits struct {
	MaxPeakVolts   float64 `toml:"max_peak_volts"`   // largest amplitude (peak) at its output
	MaxOffsetVolts float64 `toml:"max_offset_volts"` // largest |offset|
}

// Defaults of [[ac_test]] keys.
const (
	DefaultACMinCycles  = 8
	DefaultACMinSamples = 2000
	DefaultACMaxSamples = 20000
	// DefaultACMaxRateHz: 1 MSa/s, a modest two-channel digitizer
	// (common practice, no published source).
	DefaultACMaxRateHz    = 1e6
	DefaultACRecords      = 1
	DefaultACSettleCycles = 10
	DefaultACDwellSeconds = 0.2
	DefaultCouplingGain   = 1.0
	DefaultACRangeVolts   = 1.0
	DefaultThrough        = ThroughSwitch
	DefaultInjection      = InjectSeries
)

// Frequencies returns the test's frequencies in Hz: the named points, or
// the log-spaced list from StartHz to StopHz.
func (t *ACTest) Frequencies() []float64 {
	if len(t.FrequenciesHz) > 0 {
		return append([]float64(nil), t.FrequenciesHz...)
	}
	return LogSpaced(t.StartHz, t.StopHz, t.Points)
}

// LogSpaced returns n frequencies from lo to hi equally spaced in log f:
// f_i = lo·(hi/lo)^(i/(n−1)). n < 2 or a bad range gives nil.
func LogSpaced(lo, hi float64, n int) []float64 {
	if n < 2 || !(lo > 0) || !(hi > lo) {
		return nil
	}
	out := make([]float64, n)
	r := math.Log(hi / lo)
	for i := range out {
		out[i] = lo * math.Exp(r*float64(i)/float64(n-1))
	}
	out[n-1] = hi
	return out
}

// LimitAtDB returns the limit of the i-th frequency (ok false: not judged).
func (t *ACTest) LimitAtDB(i int) (float64, bool) {
	switch len(t.LimitsDB) {
	case 0:
		return 0, false
	case 1:
		return t.LimitsDB[0], true
	}
	if i < 0 || i >= len(t.LimitsDB) {
		return 0, false
	}
	return t.LimitsDB[i], true
}

// GeneratorPeakVolts is what the generator is set to for the test's
// stimulus: the peak at the terminals divided by the injection's coupling
// gain (psrr), or the peak itself (a common-mode drive).
func (t *ACTest) GeneratorPeakVolts() float64 {
	if t.isPSRR() && t.CouplingGain > 0 {
		return t.PeakVolts / t.CouplingGain
	}
	return t.PeakVolts
}

// IsPSRR reports whether the test injects its sine onto a supply rail (a
// PSRR kind) rather than the common-mode node.
func (t *ACTest) IsPSRR() bool { return t.isPSRR() }

func (t *ACTest) isPSRR() bool {
	switch t.Kind {
	case TestPSRRPos, TestPSRRNeg, TestBoardPSRRPos, TestBoardPSRRNeg:
		return true
	}
	return false
}

// ACStateAt is the bench state at the sine's instantaneous value v
// (−PeakVolts … +PeakVolts) about its offset: the common-mode node at
// offset + v, or the rail at its nominal + v.
func ACStateAt(p *Plan, t *ACTest, v float64) BenchState {
	s := NominalState(p)
	switch t.Kind {
	case TestCMRR, TestBoardCMRR:
		s.CMVolts = t.OffsetVolts + v
	case TestPSRRPos, TestBoardPSRRPos:
		s.PosVolts += v
	case TestPSRRNeg, TestBoardPSRRNeg:
		s.NegVolts += v
	}
	return s
}

// ACPeakStates are the two extreme states of the test's sine: its
// positive and negative peaks. Every safety condition is affine in the
// state, so checking both peaks checks the whole cycle.
func ACPeakStates(p *Plan, t *ACTest) [2]BenchState {
	return [2]BenchState{ACStateAt(p, t, t.PeakVolts), ACStateAt(p, t, -t.PeakVolts)}
}

// GeneratorChannels lists the generator outputs the plan's [[ac_test]]
// tables drive: the generator role's channel and every generator_channel,
// each once, in order of appearance.
func GeneratorChannels(p *Plan) []string {
	var out []string
	seen := map[string]bool{}
	add := func(ch string) {
		if !seen[ch] {
			seen[ch] = true
			out = append(out, ch)
		}
	}
	add(p.Bench.Roles.Generator.Channel)
	for _, t := range p.ACTests {
		if t.GeneratorChannel != "" {
			add(t.GeneratorChannel)
		}
	}
	return out
}

// acTestKey is the key path of the i-th (0-based) [[ac_test]] table.
func acTestKey(i int) string { return "ac_test[" + strconv.Itoa(i+1) + "]" }

func (p *Plan) applyACDefaults(present func(key string) bool) {
	for i := range p.ACTests {
		k := acTestKey(i)
		x := &p.ACTests[i]
		setI := func(key string, v *int, def int) {
			if !present(k+"."+key) && *v == 0 {
				*v = def
			}
		}
		setF := func(key string, v *float64, def float64) {
			if !present(k+"."+key) && *v == 0 {
				*v = def
			}
		}
		setS := func(key string, v *string, def string) {
			if !present(k+"."+key) && *v == "" {
				*v = def
			}
		}
		setI("min_cycles", &x.MinCycles, DefaultACMinCycles)
		setI("min_samples", &x.MinSamples, DefaultACMinSamples)
		setI("max_samples", &x.MaxSamples, DefaultACMaxSamples)
		setF("max_rate_hz", &x.MaxRateHz, DefaultACMaxRateHz)
		setI("records", &x.Records, DefaultACRecords)
		setI("settle_cycles", &x.SettleCycles, DefaultACSettleCycles)
		setF("dwell_s", &x.DwellSeconds, DefaultACDwellSeconds)
		setF("stimulus_range_volts", &x.StimulusRangeVolts, DefaultACRangeVolts)
		setF("response_range_volts", &x.ResponseRangeVolts, DefaultACRangeVolts)
		setS("through", &x.Through, DefaultThrough)
		if x.isPSRR() {
			setF("coupling_gain", &x.CouplingGain, DefaultCouplingGain)
			setS("injection", &x.Injection, DefaultInjection)
		}
	}
}

// ACRecordSeconds estimates one record's length at f: min_samples at the
// highest rate that still holds min_cycles, f·min_samples/min_cycles
// (capped at max_rate_hz); the coherent plan the runner picks rounds
// this to whole cycles.
func ACRecordSeconds(t *ACTest, f float64) float64 {
	if !(f > 0) || t.MinCycles < 1 || t.MinSamples < 1 {
		return 0
	}
	rate := math.Min(t.MaxRateHz, f*float64(t.MinSamples)/float64(t.MinCycles))
	return float64(t.MinSamples) / rate
}

// ACSettleSeconds is the wait after each change of the sine: settle_cycles
// periods, at least dwell_s.
func ACSettleSeconds(t *ACTest, f float64) float64 {
	if !(f > 0) {
		return t.DwellSeconds
	}
	return math.Max(float64(t.SettleCycles)/f, t.DwellSeconds)
}
