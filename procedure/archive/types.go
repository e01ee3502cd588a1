package archive

import "time"

// Campaign is one measured campaign as the archive stores it. NaN in a
// float field means "not available" and is stored as NULL.
type Campaign struct {
	// JournalHash is the SHA-256 (hex) of the journal's bytes: the
	// campaign's identity; adding a campaign whose journal hash is
	// stored changes nothing.
	JournalHash string
	// RunKey is the SHA-256 (hex) of the journal's start record: the same
	// run after a resume keeps it, so the longer journal replaces the
	// shorter one. Empty: JournalHash.
	RunKey string
	// JournalBytes is the journal's length in bytes: of two journals of
	// the same run the longer is kept (0: not known).
	JournalBytes int64
	// JournalPath is where the journal was read from (informative).
	JournalPath string
	PlanHash    string // SHA-256 of the plan file, hex
	PlanFile    string
	Name        string // campaign name (user text)
	Part        string // part or board number
	Lot         string
	Operator    string
	Notes       string
	// Bench names the bench: given by the user, or derived from the
	// instruments' identities (BenchFromInstruments).
	Bench        string
	Started      time.Time
	Finished     time.Time
	Tool         string // e.g. "nullbench 0.4.0"
	DecisionRule string // in words
	// TemperaturesC lists the campaign's nominal temperatures (°C).
	TemperaturesC []float64
	Incomplete    bool
	MissingPoints int
	// Integrity is "" for an intact journal, else what is wrong with it.
	Integrity string

	Instruments []Instrument
	Units       []Unit
	Results     []Result
	Budgets     []BudgetRow
	Readings    []Reading
	ACReadings  []ACReading
}

// Instrument is one instrument of the bench as the run saw it.
type Instrument struct {
	Name           string
	Roles          []string
	Address        string
	Identity       string // its *IDN? answer, verbatim
	CalibrationDue string // YYYY-MM-DD or ""
}

// Unit is one unit of the campaign's lot.
type Unit struct {
	ID      string
	Serial  string
	Channel string
	Notes   string
	Skipped string // reason, "" when measured
}

// Result is the judged outcome of one unit × test × temperature (and
// frequency, for a frequency-response result; 0 at DC).
type Result struct {
	Unit         string
	Test         string
	TemperatureC float64
	// FrequencyHz is 0 at DC; NaN for a frequency-response result that
	// could not be analysed (its problem names no frequency).
	FrequencyHz float64
	// CoefficientUVPerV is the input-referred coefficient (µV/V), with its
	// standard uncertainty u and expanded uncertainty U = k·u.
	CoefficientUVPerV          float64
	CoefficientStdUUVPerV      float64
	CoefficientExpandedUUVPerV float64
	RatioDB                    float64 // NaN when not resolved
	ExpandedUDB                float64 // U in dB
	CoverageK                  float64 // k
	DOFEffective               float64 // ν_eff; +Inf allowed
	Resolved                   bool
	LowerBoundDB               float64
	LimitDB                    float64 // NaN: not judged
	PhaseDeg                   float64 // frequency response with phase; NaN otherwise
	// PhaseExpandedUDeg is the phase's expanded uncertainty U = k·u (same
	// CoverageK); NaN without phase.
	PhaseExpandedUDeg float64
	// NoiseFloorDB is the largest ratio the setup resolved at this
	// frequency; NaN at DC or without a floor record.
	NoiseFloorDB float64
	// Coverage is the coverage probability of the expanded uncertainties
	// (e.g. 0.95); NaN: not stated.
	Coverage float64
	Verdict  string // "pass", "conditional pass", ...
	Rule     string // decision rule applied, e.g. "guarded"
	Flags    []string
	Notes    []string
}

// ReportedDB is the ratio when resolved, otherwise the lower bound.
func (r Result) ReportedDB() float64 {
	if r.Resolved {
		return r.RatioDB
	}
	return r.LowerBoundDB
}

// BudgetRow is one component of a result's uncertainty budget (GUM §5.1).
type BudgetRow struct {
	Unit           string
	Test           string
	TemperatureC   float64
	FrequencyHz    float64 // 0: DC
	Quantity       string  // "" (magnitude) or "phase"
	Component      string
	Kind           string // "A" or "B"
	Distribution   string
	Value          float64
	ValueUnit      string
	StdUncertainty float64
	Sensitivity    float64
	Contribution   float64
	DOF            float64 // +Inf allowed
}

// Reading is one averaged point as acquired.
type Reading struct {
	Time          time.Time
	BenchSeconds  float64
	Unit          string
	Test          string
	Sweep         string
	TemperatureC  float64
	MeasuredC     float64 // NaN: no thermometer
	Repeat        int
	Step          int
	SetVolts      float64
	ReadVolts     float64
	MeterVolts    float64
	MeterSDVolts  float64
	N             int
	SettleSeconds float64
	Flags         []string
}

// ACReading is one frequency-response record as acquired: the sine fits
// of a digitizer record or the RMS volts of an AC voltmeter record.
type ACReading struct {
	Time                 time.Time
	BenchSeconds         float64
	Unit                 string
	Test                 string
	TempIndex            int
	TemperatureC         float64
	Session              int
	FreqIndex            int
	FrequencyHz          float64
	Record               string // "floor", "through" or "stimulus"
	Repeat               int
	GeneratorChannel     string
	GeneratorPeakVolts   float64
	GeneratorOffsetVolts float64
	GeneratorOn          bool
	RateHz               float64
	Samples              int
	Cycles               int
	// ChannelFits is the record's per-channel sine fits (coefficients,
	// covariance, residual) as JSON, verbatim from the journal ("" for an
	// AC voltmeter record).
	ChannelFits string
	RMSVolts    []float64
	Flags       []string
	Problem     string
}
