package plan

import "strconv"

// Plan is a measurement plan as read from its TOML file. The schema is
// nullbench's own; every key is documented in testdata/plans/*.toml and in
// DEVELOPERS.md. Unknown keys are errors.
//
// Voltages are in volts, currents in amps, temperatures in degrees Celsius,
// durations in seconds of bench time (see Bench.TimeScale).
type Plan struct {
	Campaign Campaign `toml:"campaign"`
	Bench    Bench    `toml:"bench"`
	Fixture  Fixture  `toml:"fixture"`
	Part     Part     `toml:"part"`
	Limits   Limits   `toml:"limits"`
	// LimitsFullRange are the limits over the full temperature range, as
	// data sheets state them beside the 25 °C ones (see LimitAt).
	LimitsFullRange Limits   `toml:"limits_full_range"`
	Decision        Decision `toml:"decision"`
	Tests           []Test   `toml:"test"`
	// ACTests are the rejection-versus-frequency tests (ac.go).
	ACTests     []ACTest        `toml:"ac_test"`
	Generator   GeneratorLimits `toml:"generator"`
	Units       []Unit          `toml:"unit"`
	Temperature Temperature     `toml:"temperature"`
	Safety      SafetyOptions   `toml:"safety"`

	// Source is the file the plan came from (for error messages), and
	// Hash the SHA-256 of its bytes (hex), which ties journals to plans.
	Source string `toml:"-"`
	Hash   string `toml:"-"`

	// keys locates each key of the source file (line numbers for error
	// messages and the set of keys present, for defaults). Nil for plans
	// built in code.
	keys *keyIndex
}

// Campaign names the work for the report.
type Campaign struct {
	Name     string `toml:"name"`
	Operator string `toml:"operator"`
	Lot      string `toml:"lot"`
	Notes    string `toml:"notes"`
}

// Bench lists the instruments by name and binds roles to them.
type Bench struct {
	// TimeScale runs waits this many times faster, to match a simulated
	// bench started with the same --time-scale. 1 (the default) on a real
	// bench.
	TimeScale   float64               `toml:"time_scale"`
	Instruments map[string]Instrument `toml:"instrument"`
	Roles       Roles                 `toml:"roles"`
}

// Instrument is one connection: its address and the profile that drives it.
type Instrument struct {
	Address string `toml:"address"` // tcp://HOST[:PORT] or serial:///dev/tty...?baud=...
	Profile string `toml:"profile"` // a built-in profile name or a path to a profile file
	// CalibrationDue is the date its calibration falls due, YYYY-MM-DD
	// (from its calibration label); the report prints it beside the
	// instrument's identity and marks it overdue after that date.
	CalibrationDue string `toml:"calibration_due"`
}

// Roles binds each role the plan needs to an instrument and channel. A role
// left empty is not on this bench; validation says which tests need it.
type Roles struct {
	Meter       RoleBinding `toml:"meter"`
	SupplyPos   RoleBinding `toml:"supply_pos"`
	SupplyNeg   RoleBinding `toml:"supply_neg"`
	SourceCM    RoleBinding `toml:"source_cm"`
	SourceDiff  RoleBinding `toml:"source_diff"`
	SourceRef   RoleBinding `toml:"source_ref"`
	Switch      RoleBinding `toml:"switch"`
	Chamber     RoleBinding `toml:"chamber"`
	Thermometer RoleBinding `toml:"thermometer"`
	// Frequency response ([[ac_test]]): the sine generator, the
	// two-channel digitizer (channel 1 stimulus, 2 response) or the AC
	// voltmeter instead of it.
	Generator RoleBinding `toml:"generator"`
	Digitizer RoleBinding `toml:"digitizer"`
	ACMeter   RoleBinding `toml:"ac_meter"`
}

// RoleBinding names the instrument serving a role and, for multi-channel
// instruments, the channel. Negative marks a supply channel wired as a
// negative rail (floating output, + terminal on ground).
type RoleBinding struct {
	Instrument string `toml:"instrument"`
	Channel    string `toml:"channel"`
	Negative   bool   `toml:"negative"`
}

// Fixture kinds.
const (
	FixtureNullingLoop = "nulling_loop" // auxiliary-amplifier loop, MIL-STD-883 Method 4003
	FixtureNoiseGain   = "noise_gain"   // closed-loop stage with known noise gain
	FixtureBoard       = "board"        // finished difference or instrumentation amplifier
)

// Common-mode application methods.
const (
	CMBySupplyShift = "supply_shift" // both rails shifted together, inputs at ground
	CMByInputDrive  = "input_drive"  // inputs driven from the common-mode source
)

// Fixture describes how the part is wired and what the meter sees.
type Fixture struct {
	Kind string `toml:"kind"` // FixtureNullingLoop, FixtureNoiseGain or FixtureBoard
	// NoiseGain K = 1 + Rf/Ri of the nulling loop or noise-gain stage: the
	// meter reads K times the change of input offset.
	NoiseGain float64 `toml:"noise_gain"`
	// NoiseGainTolerance is the relative half-width of K's tolerance
	// (rectangular, GUM 4.3.7), e.g. 0.001 for 0.1 %.
	NoiseGainTolerance float64 `toml:"noise_gain_tolerance"`
	// CommonMode is CMBySupplyShift or CMByInputDrive.
	CommonMode string `toml:"common_mode"`
	// MaxStimulusVolts is the largest |voltage| the fixture allows any
	// source to apply to it.
	MaxStimulusVolts float64 `toml:"max_stimulus_volts"`
	// Output says in words which node the meter measures (for the report).
	Output string `toml:"output"`
	// Board-only: nominal differential gain and the resistor tolerance
	// (relative) of its difference stage.
	BoardGain         float64 `toml:"board_gain"`
	ResistorTolerance float64 `toml:"resistor_tolerance"`
	OpAmpCMRRdB       float64 `toml:"opamp_cmrr_db"` // the board op-amp's datasheet CMRR, for the combined limit
}

// Part gives the part's ratings and nominal operating point.
type Part struct {
	Number             string  `toml:"number"`
	NominalPosVolts    float64 `toml:"nominal_pos_volts"`
	NominalNegVolts    float64 `toml:"nominal_neg_volts"`     // negative, e.g. -15
	MaxSupplySpanVolts float64 `toml:"max_supply_span_volts"` // absolute maximum V+ - V-
	// Input common-mode range as headroom to each rail: V+ - Vcm must stay
	// >= CMHeadroomPosVolts and Vcm - V- >= CMHeadroomNegVolts.
	CMHeadroomPosVolts float64 `toml:"cm_headroom_pos_volts"`
	CMHeadroomNegVolts float64 `toml:"cm_headroom_neg_volts"`
	// CMMarginVolts is the plan's extra margin inside that range.
	CMMarginVolts float64 `toml:"cm_margin_volts"`
	// CurrentLimitAmps is the supply current limit per rail (required).
	CurrentLimitAmps float64 `toml:"current_limit_amps"`
	// InputBeyondRailVolts is how far an input may go beyond a rail
	// (absolute maximum; typically 0.3 V).
	InputBeyondRailVolts float64 `toml:"input_beyond_rail_volts"`
	// SupplyAmpsMin and SupplyAmpsMax bound the current each rail should
	// draw once the part is powered at its nominal rails (its quiescent
	// current and the fixture's load, from the datasheet). Outside them the
	// run stops before measuring: below, no part is in the socket or a
	// contact is open (an empty fixture shows no change at the output and
	// would "pass" any rejection test as an unresolved lower bound);
	// above, the part is damaged, latched up or mis-inserted. 0 leaves a
	// bound unchecked.
	SupplyAmpsMin float64 `toml:"supply_amps_min"`
	SupplyAmpsMax float64 `toml:"supply_amps_max"`
	// AOLMinDB is the part's rated (datasheet minimum) open-loop gain in
	// dB, 0 when not given. The analysis uses it to bound the open-loop
	// term k_o = ±1/A_OL where aol was not measured: in a supply-shift
	// common-mode result (which measures k_c + k_o) and in the noise-gain
	// stage's 1/(1 − K·k_o) scale.
	AOLMinDB float64 `toml:"aol_min_db"`
	// NoiseNVPerRtHz is the part's input voltage noise density (white,
	// nV/√Hz, from its data sheet). Only check's uncertainty prediction
	// uses it; 0 counts the meter's noise alone.
	NoiseNVPerRtHz float64 `toml:"noise_nv_per_rthz"`
	// FlickerCornerHz is the corner below which that noise rises as 1/f
	// (data sheet); 0: white only.
	FlickerCornerHz float64 `toml:"flicker_corner_hz"`
	// GBWHz is the part's gain-bandwidth product (data sheet, typical);
	// GBWTolerance its relative half-width (rectangular). A noise-gain or
	// nulling fixture of noise gain K then responds with
	// K/(1 + j·f·K/GBW) at frequency f, which the frequency-response
	// analysis divides out; 0: the fixture is taken as flat.
	GBWHz        float64 `toml:"gbw_hz"`
	GBWTolerance float64 `toml:"gbw_tolerance"`
}

// Limits are the minimum acceptable ratios in dB, by test kind (cmrr,
// psrr_pos, psrr_neg, psrr_sym, psrr_worst, aol, board_cmrr, board_psrr_pos,
// board_psrr_neg). A test without a limit is measured and reported, not
// judged.
type Limits map[string]float64

// Data sheets state limits at TA = 25 °C and, often lower, over the full
// temperature range. LimitRoomC ± LimitRoomToleranceC is the 25 °C point
// (common practice, no published source for the tolerance).
const (
	LimitRoomC          = 25.0
	LimitRoomToleranceC = 1.0
)

// Limit scopes (LimitAt).
const (
	LimitScopeRoom      = "25 °C"
	LimitScopeFullRange = "full temperature range"
)

// LimitAt returns the limit of result name at the nominal temperature
// setPointC and which limit it is: at 25 °C the [limits] value (else the
// full-range one, which holds at 25 °C too); at any other temperature the
// [limits_full_range] value (else the [limits] value, as plans without a
// full-range table always judged).
func (p *Plan) LimitAt(name string, setPointC float64) (limitDB float64, scope string, ok bool) {
	room, hasRoom := p.Limits[name]
	full, hasFull := p.LimitsFullRange[name]
	atRoom := setPointC >= LimitRoomC-LimitRoomToleranceC && setPointC <= LimitRoomC+LimitRoomToleranceC
	switch {
	case atRoom && hasRoom:
		return room, LimitScopeRoom, true
	case hasFull:
		return full, LimitScopeFullRange, true
	case hasRoom:
		return room, LimitScopeRoom, true
	}
	return 0, "", false
}

// Decision rules (ILAC-G8:09/2019 §4.2).
const (
	RuleSimple  = "simple"  // simple acceptance, guard band w = 0
	RuleGuarded = "guarded" // guard band w = U (expanded uncertainty)
)

// Decision states the decision rule and the level order.
type Decision struct {
	Rule string `toml:"rule"` // RuleSimple or RuleGuarded
}

// Test kinds.
const (
	TestCMRR    = "cmrr"
	TestPSRRPos = "psrr_pos"
	TestPSRRNeg = "psrr_neg"
	TestPSRRSym = "psrr_sym"
	TestAOL     = "aol"
	// Boards: differential gain and common-mode gain are both measured
	// by a board_cmrr test; CMRR = Ad/Acm.
	TestBoardCMRR    = "board_cmrr"
	TestBoardPSRRPos = "board_psrr_pos"
	TestBoardPSRRNeg = "board_psrr_neg"
)

// Level orders.
const (
	OrderZigzag    = "zigzag"    // centre, +1, -1, +2, -2, ... and back: drift cancels
	OrderSymmetric = "symmetric" // a b c ... c b a: steady drift cancels in the pairs
	OrderAscending = "ascending" // for comparison only
)

// Test is one measurement: a stimulus stepped through levels.
type Test struct {
	Kind string `toml:"kind"`
	// Levels are stimulus values in volts: the common-mode voltage (cmrr,
	// board_cmrr), the change of the rail(s) from nominal (psrr_*), the
	// auxiliary reference (aol).
	Levels []float64 `toml:"levels"`
	// DiffLevels are the differential drive levels of a board_cmrr test.
	DiffLevels []float64 `toml:"diff_levels"`
	Order      string    `toml:"order"`   // OrderZigzag (default), OrderSymmetric, OrderAscending
	Repeats    int       `toml:"repeats"` // passes through the level sequence
	// Integration: meter NPLC, range and readings averaged per point.
	NPLC       float64 `toml:"nplc"`
	RangeVolts float64 `toml:"range_volts"`
	Readings   int     `toml:"readings"`
	// Settling: wait at least DwellSeconds, then read until two
	// successive readings differ by less than SettleVolts (at the meter),
	// or give up after SettleTimeoutSeconds and flag the point.
	DwellSeconds         float64 `toml:"dwell_s"`
	SettleVolts          float64 `toml:"settle_volts"`
	SettleTimeoutSeconds float64 `toml:"settle_timeout_s"`
	// Fit options.
	DriftTerm     bool `toml:"drift_term"`
	QuadraticTerm bool `toml:"quadratic_term"`
	// MinValidPoints is the fewest valid points (not overloaded, not
	// refused) a sweep of this test needs for its result to be judged;
	// 0: the fit's own minimum of 3 (validate_minpoints.go).
	MinValidPoints int `toml:"min_valid_points"`
}

// Unit is one part (or board) of the lot: its id and, on a switch matrix,
// its channel. With no channel the operator swaps units by hand.
type Unit struct {
	ID      string `toml:"id"`
	Serial  string `toml:"serial"` // the serial number marked on the part or board (for the report)
	Channel string `toml:"channel"`
	Notes   string `toml:"notes"`
}

// Temperature modes.
const (
	TempNone        = "none"        // ambient, not recorded
	TempChamber     = "chamber"     // set points on a chamber
	TempThermometer = "thermometer" // read from a thermometer
	TempManual      = "manual"      // typed in by the operator
)

// Temperature describes the temperature plan.
type Temperature struct {
	Mode               string    `toml:"mode"`
	PointsCelsius      []float64 `toml:"points_c"`
	SoakToleranceC     float64   `toml:"soak_tolerance_c"`
	SoakSeconds        float64   `toml:"soak_s"`
	SoakTimeoutSeconds float64   `toml:"soak_timeout_s"`
	RampMaxCPerMinute  float64   `toml:"ramp_max_c_per_min"`
	AmbientCelsius     float64   `toml:"ambient_c"`
}

// SafetyOptions are the plan's own safety settings.
type SafetyOptions struct {
	// RampStepVolts is the largest single step of any supply or source
	// when ramping up or down (default 1 V; common practice, no published
	// source).
	RampStepVolts float64 `toml:"ramp_step_volts"`
}

// Role names as written under [bench.roles].
const (
	RoleMeter       = "meter"
	RoleSupplyPos   = "supply_pos"
	RoleSupplyNeg   = "supply_neg"
	RoleSourceCM    = "source_cm"
	RoleSourceDiff  = "source_diff"
	RoleSourceRef   = "source_ref"
	RoleSwitch      = "switch"
	RoleChamber     = "chamber"
	RoleThermometer = "thermometer"
	RoleGenerator   = "generator"
	RoleDigitizer   = "digitizer"
	RoleACMeter     = "ac_meter"
)

// RoleNames lists every role in the order of the [bench.roles] table.
func RoleNames() []string {
	return []string{RoleMeter, RoleSupplyPos, RoleSupplyNeg, RoleSourceCM,
		RoleSourceDiff, RoleSourceRef, RoleSwitch, RoleChamber, RoleThermometer,
		RoleGenerator, RoleDigitizer, RoleACMeter}
}

// Get returns the binding of the named role (zero when the role is unknown
// or not bound).
func (r *Roles) Get(role string) RoleBinding {
	switch role {
	case RoleMeter:
		return r.Meter
	case RoleSupplyPos:
		return r.SupplyPos
	case RoleSupplyNeg:
		return r.SupplyNeg
	case RoleSourceCM:
		return r.SourceCM
	case RoleSourceDiff:
		return r.SourceDiff
	case RoleSourceRef:
		return r.SourceRef
	case RoleSwitch:
		return r.Switch
	case RoleChamber:
		return r.Chamber
	case RoleThermometer:
		return r.Thermometer
	case RoleGenerator:
		return r.Generator
	case RoleDigitizer:
		return r.Digitizer
	case RoleACMeter:
		return r.ACMeter
	}
	return RoleBinding{}
}

// Bound reports whether the role names an instrument.
func (b RoleBinding) Bound() bool { return b.Instrument != "" }

// PsrrWorst names the derived result "worst of psrr_pos and psrr_neg", which
// limits may name although no test of that kind exists.
const PsrrWorst = "psrr_worst"

// Defaults applied to keys the plan leaves out. Every one is stated in the
// example plans under testdata/plans/.
const (
	DefaultOrder    = OrderZigzag
	DefaultRepeats  = 1
	DefaultReadings = 5
	// DefaultNPLC: 10 power-line cycles, where a 6½-digit meter's rms noise
	// is about 1e-6 of range (typical of published 6½-digit DMM
	// specifications; common practice, no single published source).
	DefaultNPLC       = 10.0
	DefaultRangeVolts = 10.0
	DefaultTimeScale  = 1.0
	DefaultRule       = RuleGuarded
	// DefaultRampStepVolts: the largest step of a supply or source while
	// ramping (steps ≤ 1 V with settling: common practice, no published
	// source).
	DefaultRampStepVolts = 1.0
	DefaultDwellSeconds  = 2.0
	// DefaultSettleVolts: two successive readings must agree within 50 µV at
	// the meter, about 3.5 times the rms difference of two 10-NPLC readings
	// on the 10 V range (1e-6 × range rms each, as DefaultNPLC); common
	// practice, no published source.
	DefaultSettleVolts          = 50e-6
	DefaultSettleTimeoutSeconds = 30.0
	DefaultTemperatureMode      = TempNone
	DefaultAmbientCelsius       = 25.0
	DefaultSoakToleranceC       = 0.5
	// DefaultSoakSeconds: 10 minutes, the low end of the 10–30 min thermal
	// soak usual on temperature benches (common practice, no published
	// source).
	DefaultSoakSeconds        = 600.0
	DefaultSoakTimeoutSeconds = 3600.0
	// DefaultRampMaxCPerMinute: chamber slew used for the duration estimate
	// and as the largest set-point change per minute (common practice).
	DefaultRampMaxCPerMinute = 5.0
	// DefaultInputBeyondRailVolts: the usual absolute maximum of an input
	// beyond a rail before its ESD diodes conduct (rail ±0.3 V in typical
	// op-amp data sheets; common practice, no published source).
	DefaultInputBeyondRailVolts = 0.3
)

// ApplyDefaults fills every unset (zero) field that has a default. Plans
// read by Parse get their defaults from the keys missing in the file
// instead, so that an explicit 0 stays 0 and validation can refuse it.
func (p *Plan) ApplyDefaults() {
	p.applyDefaults(func(string) bool { return false })
}

// applyDefaults fills the defaults of keys for which present(key) is false
// and whose field is zero. Keys are dotted paths as in error messages, with
// 1-based [[test]] indexes: "test[2].nplc".
func (p *Plan) applyDefaults(present func(key string) bool) {
	setF := func(key string, v *float64, def float64) {
		if !present(key) && *v == 0 {
			*v = def
		}
	}
	setI := func(key string, v *int, def int) {
		if !present(key) && *v == 0 {
			*v = def
		}
	}
	setS := func(key string, v *string, def string) {
		if !present(key) && *v == "" {
			*v = def
		}
	}
	setF("bench.time_scale", &p.Bench.TimeScale, DefaultTimeScale)
	setS("decision.rule", &p.Decision.Rule, DefaultRule)
	setF("safety.ramp_step_volts", &p.Safety.RampStepVolts, DefaultRampStepVolts)
	setF("part.input_beyond_rail_volts", &p.Part.InputBeyondRailVolts, DefaultInputBeyondRailVolts)
	if p.Fixture.Kind == FixtureBoard {
		setS("fixture.common_mode", &p.Fixture.CommonMode, CMByInputDrive)
	}
	t := &p.Temperature
	setS("temperature.mode", &t.Mode, DefaultTemperatureMode)
	setF("temperature.ambient_c", &t.AmbientCelsius, DefaultAmbientCelsius)
	setF("temperature.soak_tolerance_c", &t.SoakToleranceC, DefaultSoakToleranceC)
	setF("temperature.soak_s", &t.SoakSeconds, DefaultSoakSeconds)
	setF("temperature.soak_timeout_s", &t.SoakTimeoutSeconds, DefaultSoakTimeoutSeconds)
	setF("temperature.ramp_max_c_per_min", &t.RampMaxCPerMinute, DefaultRampMaxCPerMinute)
	for i := range p.Tests {
		k := testKey(i)
		x := &p.Tests[i]
		setS(k+".order", &x.Order, DefaultOrder)
		setI(k+".repeats", &x.Repeats, DefaultRepeats)
		setI(k+".readings", &x.Readings, DefaultReadings)
		setF(k+".nplc", &x.NPLC, DefaultNPLC)
		setF(k+".range_volts", &x.RangeVolts, DefaultRangeVolts)
		setF(k+".dwell_s", &x.DwellSeconds, DefaultDwellSeconds)
		setF(k+".settle_volts", &x.SettleVolts, DefaultSettleVolts)
		setF(k+".settle_timeout_s", &x.SettleTimeoutSeconds, DefaultSettleTimeoutSeconds)
	}
	p.applyACDefaults(present)
}

// testKey is the key path of the i-th (0-based) [[test]] table in error
// messages: "test[1]" is the first, counting as a reader counts.
func testKey(i int) string { return "test[" + strconv.Itoa(i+1) + "]" }

// unitKey is the key path of the i-th (0-based) [[unit]] table.
func unitKey(i int) string { return "unit[" + strconv.Itoa(i+1) + "]" }

// TemperaturePoints returns the temperatures the campaign visits in order:
// the plan's points, or the single ambient temperature when it lists none.
// The index into this list is the temperature index of journals and work
// keys.
func (p *Plan) TemperaturePoints() []float64 {
	if len(p.Temperature.PointsCelsius) > 0 {
		return append([]float64(nil), p.Temperature.PointsCelsius...)
	}
	return []float64{p.Temperature.AmbientCelsius}
}
