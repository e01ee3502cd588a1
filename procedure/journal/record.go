package journal

import (
	"time"

	"nullbench/procedure/plan"
)

// Reading is one averaged point of a test: the stimulus as set and as read
// back, the meter's value, and the conditions it was taken under. It is the
// unit of the journal and what the fit consumes.
type Reading struct {
	Time         time.Time `json:"time"`           // wall clock, UTC
	BenchSeconds float64   `json:"bench_s"`        // bench time since the run started (drift term)
	Unit         string    `json:"unit"`           // unit id
	Test         string    `json:"test"`           // test kind
	Part         string    `json:"part,omitempty"` // for boards: "diff" or "cm" sweep of board_cmrr
	TemperatureC float64   `json:"temperature_c"`  // NaN-free: ambient when not recorded
	TempIndex    int       `json:"temp_index"`     // index into Plan.TemperaturePoints(), from 0 (work key for resume)
	Repeat       int       `json:"repeat"`         // pass number, from 0
	Step         int       `json:"step"`           // index in the ordered sequence, from 0
	SetVolts     float64   `json:"set_volts"`      // stimulus as programmed
	ReadVolts    float64   `json:"read_volts"`     // stimulus as read back (= SetVolts when the bench cannot read it)
	ReadBack     bool      `json:"read_back"`      // whether ReadVolts was measured
	// PosRailVolts and NegRailVolts are the two rails as read back (V−
	// negative) when the test moves both rails (supply-shift cmrr,
	// psrr_sym) and both were read back (RailsReadBack). ReadVolts keeps
	// only their combination along the level; these keep what it drops:
	// the span change in a supply shift, the mean shift in psrr_sym.
	PosRailVolts  float64 `json:"pos_rail_volts,omitempty"`
	NegRailVolts  float64 `json:"neg_rail_volts,omitempty"`
	RailsReadBack bool    `json:"rails_read_back,omitempty"`
	// Session is the run of the journal that took the reading: 0 for the
	// first, n after the n-th resume. A sweep whose readings come from two
	// sessions may carry an offset step (the bench was restarted between).
	Session       int      `json:"session,omitempty"`
	MeterVolts    float64  `json:"meter_volts"`     // mean of the averaged meter readings
	MeterSDVolts  float64  `json:"meter_sd_volts"`  // their standard deviation
	N             int      `json:"n"`               // readings averaged
	SettleSeconds float64  `json:"settle_s"`        // bench time from the step to the first accepted reading
	Flags         []string `json:"flags,omitempty"` // e.g. "settle-timeout", "overload"
	// Problem says, cause first, why a flagged point is not a measurement
	// (FlagImplausible: the instrument, command and value refused;
	// FlagOverload: the instrument, command and the range too small).
	Problem string `json:"problem,omitempty"`
}

// Reading flags.
const (
	FlagSettleTimeout = "settle-timeout"
	FlagOverload      = "overload"
	// FlagImplausible marks a point whose meter answer was refused: SCPI
	// NaN (9.91E37) or a finite value beyond 1.2 × the range that is not
	// the overload code. The point is kept in the journal, left out of
	// the fit, and Problem names the instrument and command.
	FlagImplausible = "implausible"
)

// KeyOf is the work key of the point a reading records: the journal's
// reading records are what marks points done for resume.
func KeyOf(r Reading) plan.WorkKey {
	return plan.WorkKey{TempIndex: r.TempIndex, Unit: r.Unit, Test: r.Test, Repeat: r.Repeat, Part: r.Part, Step: r.Step}
}
