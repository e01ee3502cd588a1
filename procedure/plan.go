package procedure

// Plan is a measurement plan as read from its TOML file. The schema is
// nullbench's own; every key is documented in testdata/plans/*.toml and in
// DEVELOPERS.md. Unknown keys are errors.
//
// Voltages are in volts, currents in amps, temperatures in degrees Celsius,
// durations in seconds of bench time (see Bench.TimeScale).
type Plan struct {
	Campaign    Campaign      `toml:"campaign"`
	Bench       Bench         `toml:"bench"`
	Fixture     Fixture       `toml:"fixture"`
	Part        Part          `toml:"part"`
	Limits      Limits        `toml:"limits"`
	Decision    Decision      `toml:"decision"`
	Tests       []Test        `toml:"test"`
	Units       []Unit        `toml:"unit"`
	Temperature Temperature   `toml:"temperature"`
	Safety      SafetyOptions `toml:"safety"`

	// Source is the file the plan came from (for error messages), and
	// Hash the SHA-256 of its bytes (hex), which ties journals to plans.
	Source string `toml:"-"`
	Hash   string `toml:"-"`
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
}

// Limits are the minimum acceptable ratios in dB, by test kind (cmrr,
// psrr_pos, psrr_neg, psrr_sym, psrr_worst, aol, board_cmrr, board_psrr_pos,
// board_psrr_neg). A test without a limit is measured and reported, not
// judged.
type Limits map[string]float64

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
}

// Unit is one part (or board) of the lot: its id and, on a switch matrix,
// its channel. With no channel the operator swaps units by hand.
type Unit struct {
	ID      string `toml:"id"`
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
	// when ramping up or down (default 1 V, METHODS §6).
	RampStepVolts float64 `toml:"ramp_step_volts"`
}
