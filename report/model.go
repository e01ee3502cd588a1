package report

import (
	"math"
	"strings"
	"time"
)

// Campaign is everything a report shows about one measurement campaign, in
// a flat form of its own: report imports no other nullbench package, and
// the caller maps procedure and fit results into these types.
//
// Conventions for every numeric field:
//   - NaN means "not available" and is written as an empty cell (workbook,
//     CSV) or null (JSON lines);
//   - ±Inf is written as the text "inf"/"-inf" in the workbook, "+Inf"/"-Inf"
//     in CSV (strconv form) and null in JSON lines;
//   - temperatures are nominal (set-point) temperatures in °C and are the
//     key that joins readings, fits and results, compared to 0.01 °C.
//
// Every string field that came from a user, a plan file or an instrument is
// written as literal text, never as a spreadsheet formula (see doc.go).
type Campaign struct {
	Name      string    // campaign name (user text)
	Part      string    // part or board number, e.g. "HX-4107" (user text)
	Lot       string    // lot or batch id (user text)
	Operator  string    // who ran it (user text)
	Notes     string    // free text (user text)
	Started   time.Time // wall clock of the first step (zero: unknown)
	Finished  time.Time // wall clock of the last step (zero: unknown)
	PlanFile  string    // plan file name as given
	PlanHash  string    // hash of the plan file, e.g. "sha256:9f2c…"
	Generator string    // tool name and version, e.g. "nullbench 0.4.0"

	Instruments  []InstrumentInfo
	Fixture      FixtureInfo
	DecisionRule string // in words, e.g. "guarded acceptance, w = U (ILAC-G8:09/2019 §4.2)"
	// Method is the method statement, one paragraph per entry: what each
	// figure is and how it was obtained (written on the Summary sheet).
	Method     []string
	SafetyNote string // what the bench did to stay safe, in words

	Units       []UnitInfo   // optional: the lot's units with serials and notes
	Results     []Result     // one per unit × test × temperature
	Budgets     []BudgetRow  // uncertainty budget rows, grouped by unit × test × temperature
	Fits        []FitRow     // one per unit × test × sweep × temperature
	Readings    []Reading    // every averaged point, in acquisition order
	LotStats    []LotRow     // one per test × temperature
	Temperature []TempRow    // ratio against temperature, per unit and for the lot
	Closures    []ClosureRow // CMRR/PSRR closure checks (the identity derived in fit/doc.go), optional
	Boards      []BoardRow   // finished-board CMRR against worst-case limits, optional
	// Problems: what the analysis could not do, with the cause (the
	// Problems sheet, problems.jsonl); a campaign with any is not all pass.
	Problems []Problem

	// Frequency response (see freq.go), optional: one FreqResult per unit ×
	// test × temperature × frequency, their budget rows, and one
	// single-pole fit per unit × test × temperature.
	FreqResults []FreqResult
	FreqBudgets []FreqBudgetRow
	FreqFits    []FreqFitRow

	// ReportID identifies this report (e.g. the plan hash and journal seal
	// shortened); it is printed in every page header.
	ReportID string
	// Completeness: PlannedPoints the plan asked for (skipped units left
	// out), MissingPoints of those not measured. Incomplete marks the
	// campaign INCOMPLETE on the Summary and Units sheets and in the
	// exports.
	PlannedPoints int
	MissingPoints int
	Incomplete    bool
	// Integrity is "" for an intact journal, else what is wrong with it,
	// e.g. "journal edited or truncated at line 42".
	Integrity string
	Events    []EventRow // faults, resumes, operator prompts, skips
	// TestConditions (rails, common-mode range, temperatures, NPLC,
	// readings per point, per test) and Ratings (the part's ratings and the
	// limits at 25 °C and over the full range) are label/value rows for
	// the Summary sheet.
	TestConditions []KeyValue
	Ratings        []KeyValue
	// ReferenceTests are result names kept for reference that do not
	// decide a unit's verdict (e.g. an uncorrected ratio).
	ReferenceTests []string
}

// EventRow is one event of the run, in journal order.
type EventRow struct {
	Time         time.Time
	Type         string // "abort", "resume", "unit-skipped", ...
	Unit         string
	TemperatureC float64
	Detail       string // reason and detail in words
}

// Unit verdicts on the Units sheet beyond the result verdicts.
const (
	UnitSkipped    = "skipped"    // left out on purpose (socket empty, part cracked)
	UnitIncomplete = "incomplete" // some of its points were not measured
	UnitNoResults  = "no results" // nothing measured
)

// InstrumentInfo is one instrument on the bench as the tool saw it.
type InstrumentInfo struct {
	Name     string   // the plan's name for it
	Roles    []string // roles it served: "supply", "meter", ...
	Address  string   // e.g. "tcp://192.0.2.10:5025", "serial:///dev/ttyUSB0"
	Identity string   // its *IDN? response, verbatim (instrument text)
	// CalibrationDue is the date its calibration falls due (YYYY-MM-DD,
	// from the plan), "" when not stated.
	CalibrationDue string
}

// FixtureInfo describes how the part was wired (mirrors the plan's fixture).
type FixtureInfo struct {
	Kind       string // "nulling_loop", "noise_gain" or "board"
	CommonMode string // how common mode was applied: "supply_shift" or "input_drive"
	Output     string // which node the meter measured, in words
	// NoiseGain K = 1 + Rf/Ri; the meter reads K × the change of input offset.
	NoiseGain float64
	// NoiseGainTolerance is K's relative half-width (rectangular), e.g. 0.001.
	NoiseGainTolerance float64
	MaxStimulusVolts   float64
	// Boards only (NaN or 0 when not a board): nominal differential gain,
	// relative resistor tolerance and the op-amp's datasheet CMRR.
	BoardGain         float64
	ResistorTolerance float64
	OpAmpCMRRdB       float64
}

// UnitInfo is one unit of the lot.
type UnitInfo struct {
	ID      string // unit id used in every other row (user text)
	Serial  string // serial number (user text)
	Channel string // switch-matrix channel, "" when swapped by hand
	Notes   string // user text
	// Skipped is the reason the unit was skipped ("" = not skipped);
	// MissingPoints its points not measured.
	Skipped       string
	MissingPoints int
}

// Result is the judged outcome of one unit × test × temperature.
type Result struct {
	Unit         string
	Test         string  // test kind: "cmrr", "psrr_pos", ...
	TemperatureC float64 // nominal temperature
	// CoefficientUVPerV is the input-referred change per volt of stimulus
	// (µV/V), CoefficientStdUUVPerV its standard uncertainty u and
	// CoefficientExpandedUUVPerV its expanded uncertainty U = k·u.
	CoefficientUVPerV          float64
	CoefficientStdUUVPerV      float64
	CoefficientExpandedUUVPerV float64
	// RatioDB = 20·log10(10⁶ / |CoefficientUVPerV|) (JEDEC JESD99B); NaN
	// (null in JSON, empty in CSV and the workbook) when the result is not
	// resolved: then only LowerBoundDB states something about the part.
	RatioDB float64
	// ExpandedUDB is U = k·u in dB; ExpandedUDBLow/High are the downward and
	// upward half-widths when the interval is asymmetric (NaN: symmetric).
	ExpandedUDB     float64
	ExpandedUDBLow  float64
	ExpandedUDBHigh float64
	CoverageK       float64
	DOFEffective    float64 // Welch–Satterthwaite ν_eff (GUM G.2b); +Inf allowed
	// Resolved is false when |coefficient| < k·u: then only LowerBoundDB is
	// a statement about the part (JCGM 100:2008 (GUM), unresolved rejection).
	Resolved     bool
	LowerBoundDB float64
	LimitDB      float64 // minimum acceptable ratio; NaN: not judged
	Verdict      string  // see the Verdict* constants
	Rule         string  // decision rule applied, e.g. "guarded" or "simple"
	Flags        []string
	// Incomplete says the campaign this result belongs to has points not
	// measured (MissingPoints of them): exported with every result so a
	// program reading one line cannot miss it.
	Incomplete    bool
	MissingPoints int
	// Notes are the analysis's sentences about this result: what the
	// figure contains (e.g. k_c + k_o), terms dropped or added, points
	// flagged or left out, corrections applied.
	Notes []string
	// PredictedUUVPerV is the expanded uncertainty (95 %) of the
	// coefficient check predicted for the test before the run (µV/V),
	// beside the achieved CoefficientExpandedUUVPerV; NaN: not available.
	PredictedUUVPerV float64
}

// ReportedDB is the value the report states for r: the ratio when it was
// resolved, otherwise the one-sided lower bound.
func (r Result) ReportedDB() float64 {
	if r.Resolved {
		return r.RatioDB
	}
	return r.LowerBoundDB
}

// BudgetRow is one component of an uncertainty budget (GUM §5.1): an input
// quantity with its value, standard uncertainty u_i, sensitivity c_i and the
// contribution |c_i·u_i| to the coefficient's combined uncertainty.
type BudgetRow struct {
	Unit           string
	Test           string
	TemperatureC   float64
	Component      string  // e.g. "slope (Type A)", "noise gain K"
	Kind           string  // "A" or "B" (GUM §4.2, §4.3)
	Distribution   string  // "normal", "rectangular", "triangular", "t"
	Value          float64 // the input quantity's value, in ValueUnit
	ValueUnit      string  // e.g. "V/V", "1", "V"
	StdUncertainty float64 // u_i, in ValueUnit
	Sensitivity    float64 // c_i, (µV/V) per ValueUnit
	Contribution   float64 // |c_i·u_i|, µV/V
	DOF            float64 // ν_i; +Inf for Type B taken as exact
}

// FitRow is one least-squares fit of meter readings against stimulus. The
// model, with x = Reading.ReadVolts and t = Reading.BenchSeconds, is
//
//	MeterVolts = Intercept + SlopeVPerV·x + Quadratic·x² + DriftVPerS·(t − DriftOriginSeconds)
//
// (terms not fitted are 0). The report uses it to draw the fitted line and
// residuals; it does not refit.
type FitRow struct {
	Unit                 string
	Test                 string
	Sweep                string // "" or, for board_cmrr, "diff" / "cm"
	TemperatureC         float64
	N                    int
	Intercept            float64 // V
	SlopeVPerV           float64 // V/V at the meter
	SlopeU               float64 // standard uncertainty, V/V
	DriftVPerS           float64 // V/s
	DriftU               float64
	DriftOriginSeconds   float64 // bench time where the drift term is zero
	Quadratic            float64 // V/V²
	QuadraticU           float64
	ResidualSDVolts      float64
	DOF                  int
	MaxDeviationUV       float64 // largest |residual| in µV at the meter
	QuadraticSignificant bool
	SpanMismatch         bool // stimulus read back differs from the plan
}

// Reading is one averaged point as acquired.
type Reading struct {
	Time          time.Time // wall clock (written in UTC)
	BenchSeconds  float64   // bench time since the run started
	Unit          string
	Test          string
	Sweep         string  // "" or "diff" / "cm" for board_cmrr
	TemperatureC  float64 // nominal temperature (join key)
	MeasuredC     float64 // thermometer at this point; NaN: none
	Repeat        int
	Step          int
	SetVolts      float64 // stimulus as programmed
	ReadVolts     float64 // stimulus as read back (= SetVolts when not read back)
	MeterVolts    float64
	MeterSDVolts  float64
	N             int // meter readings averaged
	SettleSeconds float64
	Flags         []string
}

// LotRow is the lot statistics of one test at one temperature (values in dB
// unless stated).
type LotRow struct {
	Test         string
	TemperatureC float64
	N            int // units in the statistics
	Unresolved   int // of which only a lower bound was known
	Mean, SD     float64
	Min, Median  float64
	Max          float64
	LimitDB      float64 // NaN: none
	Cpl          float64 // (Mean − LimitDB)/(3·SD)
	// ToleranceBoundDB is the one-sided lower tolerance bound covering
	// Coverage of the population with Confidence (both fractions, e.g.
	// 0.99 and 0.95).
	ToleranceBoundDB float64
	Coverage         float64
	Confidence       float64
	Yield            float64 // predicted fraction above the limit
	Outliers         []string
}

// TempRow is the change of ratio with temperature; Unit is "lot" for the
// lot's median.
type TempRow struct {
	Unit            string
	Test            string
	SlopeDBPerC     float64
	SlopeU          float64 // standard uncertainty, dB/°C
	RepeatabilityDB float64 // SD of repeated runs at one temperature
}

// LotUnit is the TempRow.Unit value for the lot as a whole.
const LotUnit = "lot"

// ClosureRow is the closure check kc + kp + kn + ko = 0 of the identity derived in fit/doc.go for
// one unit: the supply-shift coefficient against the sum of the two
// single-rail coefficients.
type ClosureRow struct {
	Unit              string
	TemperatureC      float64
	ShiftUVPerV       float64 // both rails shifted
	SumUVPerV         float64 // kp + kn from the single-rail tests
	ClosureUVPerV     float64 // Shift − Sum
	ClosureU          float64 // its standard uncertainty
	Mismatch          bool    // |closure| beyond its expanded uncertainty
	CMRRUncorrectedDB float64 // supply-shift CMRR as measured
	CMRRCorrectedDB   float64 // after removing the open-loop-gain term
}

// BoardRow compares a finished board's measured CMRR with the worst case
// its resistor tolerance allows: CMRR_R ≈ (1+G)/(4t) (Sedra & Smith,
// difference amplifier) and, with the op-amp's own CMRR,
// 1/CMRR = 1/CMRR_R + 1/CMRR_OA (Franco).
type BoardRow struct {
	Unit            string
	TemperatureC    float64
	DiffGain        float64 // V/V
	DiffGainU       float64
	CommonModeGain  float64 // V/V
	CommonModeGainU float64
	CMRRdB          float64
	ExpandedUDB     float64
	ResistorLimitDB float64 // 20·log10((1+G)/(4t))
	CombinedLimitDB float64 // resistor and op-amp combined, worst case
	BelowWorstCase  bool    // measured CMRR below the combined worst case
}

// Verdicts, after the ILAC-G8:09/2019 §4.2 zones. The lead maps the fit
// package's decisions onto these strings; VerdictClass also accepts other
// spellings ("Conditional-Pass", "COND_FAIL", ...).
const (
	VerdictPass            = "pass"
	VerdictConditionalPass = "conditional pass"
	VerdictConditionalFail = "conditional fail"
	VerdictFail            = "fail"
	VerdictNotJudged       = "not judged" // no limit for this test
	// VerdictNoResult: the result could not be formed (a stuck meter, a
	// stimulus that did not move, no part / no gain); Flags give the cause.
	VerdictNoResult = "no result"
)

// VerdictKind classifies a verdict string for counting and styling.
type VerdictKind int

// Verdict classes, in the order the summary lists them.
const (
	KindPass VerdictKind = iota
	KindConditionalPass
	KindConditionalFail
	KindFail
	KindNotJudged
	KindOther // any other string: written verbatim, unstyled
	numVerdictKinds
)

// Label is the text mark the workbook writes for the class, so that the
// verdict reads without colour.
func (k VerdictKind) Label() string {
	switch k {
	case KindPass:
		return "PASS"
	case KindConditionalPass:
		return "COND. PASS"
	case KindConditionalFail:
		return "COND. FAIL"
	case KindFail:
		return "FAIL"
	case KindNotJudged:
		return "NOT JUDGED"
	}
	return "OTHER"
}

var verdictSeparators = strings.NewReplacer("_", " ", "-", " ", ".", " ")

// VerdictClass maps a verdict string to its class, ignoring case and
// treating '_', '-' and runs of spaces alike; "cond." abbreviates
// "conditional".
func VerdictClass(v string) VerdictKind {
	s := verdictSeparators.Replace(strings.ToLower(strings.TrimSpace(v)))
	s = strings.Join(strings.Fields(s), " ")
	s = strings.Replace(s, "cond ", "conditional ", 1)
	switch s {
	case "pass":
		return KindPass
	case "conditional pass":
		return KindConditionalPass
	case "conditional fail":
		return KindConditionalFail
	case "fail":
		return KindFail
	case "not judged", "none", "":
		return KindNotJudged
	}
	return KindOther
}

// tempKey is the join key of a nominal temperature (0.01 °C resolution).
func tempKey(c float64) int64 { return int64(math.Round(c * 100)) }

// KeyValue is one labelled line of the Summary sheet (user text).
type KeyValue struct {
	Label, Value string
}
