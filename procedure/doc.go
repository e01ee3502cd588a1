// Package procedure turns a measurement plan into safe, drift-cancelling
// step sequences, runs them on bench roles, journals every reading, and
// hands the readings to fit.
//
// Data flows one way: plan → procedure → readings → fit → results →
// report. This package never imports instrument/sim; the runner receives
// role values (instrument.Supply, Meter, …) from cmd.
//
// # The pure half (no instrument contact)
//
// Plans. LoadPlan and ParsePlan read a TOML plan (go-toml v2, unknown keys
// refused), apply the defaults of the keys left out and validate it. Every
// error is a PlanError naming file, line and key and saying how to fix it:
//
//	plans/lot.toml:41: key "test[2].levels": psrr_pos level +20 V: V+ = +35 V, V- = -15 V: the span 50 V exceeds the part's absolute maximum 36 V (part.max_supply_span_volts); keep test[2].levels within -12.5 V … +6 V
//
// Key paths count [[test]] and [[unit]] tables from 1, as a reader does.
//
// Safety. CheckSafety refuses, from the plan alone and before any
// instrument is touched, a plan whose rails exceed the part's maximum span
// or have the wrong polarity for their channels, whose common mode leaves
// the input range (with the plan's margin), whose inputs go beyond a rail,
// whose sources exceed the fixture's maximum stimulus, whose supplies lack a
// current limit, or whose terminals exceed HazardousVolts (60 V DC, the
// SELV/ES1 limit of IEC 60950-1 §1.2.8 and IEC 62368-1) without the
// operator's explicit consent. BenchState documents what each test's level
// means (supply-shift common mode follows MIL-M-38510/114 Table III).
// PowerUpOrder, PowerDownOrder and Transition give the power sequences as
// data: current limits first, inputs only after the rails, everything
// ramped in steps of at most safety.ramp_step_volts, and when the rails
// shift, first the rail whose move shrinks the span.
//
// Levels. OrderLevels visits the levels as a palindrome (zigzag about the
// centre and back, or ascending then descending), so that every level's
// mean time equals the pass's mean time and a drift linear in time adds
// exactly nothing to the fitted slope.
//
// The step table. StepTable, EstimateDuration and WriteCheck show what a
// run would do: each level's rails, common mode and its distance to each
// rail, the highest terminal voltage and the time it takes.
//
// The journal. OpenJournal writes JSON lines, each record in one write
// followed by fsync, so a run killed at any point loses at most the record
// in flight. ReadJournal skips (and reports) a torn last line and refuses
// garbage anywhere else with its line number; Done gives the finished
// work keys so that ResumeJournal and the runner skip what is done, and
// CheckPlanMatch refuses a journal of another plan.
//
// # The runner (instrument contact)
//
// Run executes a validated plan on a Rig: one role value per instrument
// role, opened by cmd. It re-checks safety, powers the part up in the
// order above, steps each test's levels in their drift-cancelling order,
// waits the dwell and then until successive readings agree (flagging a
// point that does not settle in time), averages the meter readings, reads
// the applied stimulus back, and journals every reading before the next
// step. Lots run unit by unit on a switch matrix, or through an Operator
// who swaps parts by hand with the bench powered down; temperatures come
// from a chamber (ramp-limited, soaked to a tolerance for a time), a
// thermometer or the operator. On Ctrl-C, an instrument error, a lost
// connection or a time-out the bench goes to its safe state on a fresh
// context (sources to 0 V and off before the supplies ramp down, chamber to
// ambient, switch open) and Run returns a RunError naming the unit, test,
// temperature, step and level. A resumed run skips exactly the points its
// journal holds. All waits use a Clock, so a time-scaled simulated bench
// and the tool share one time base.
//
// # Analysis
//
// Analyze fits each unit × test × temperature with package fit (read-back
// stimulus, optional drift and quadratic terms), refers the slope to the
// input by the noise gain, builds the GUM budget, judges it by the plan's
// ILAC-G8 rule, and adds the nulling-loop closure, the open-loop-gain
// correction of the supply-shift CMRR, board CMRR = A_d/A_cm with the
// resistor-matching limit, lot statistics, temperature coefficients and
// repeatability. Its doc comment states every sign convention.
//
// Units: volts, amps, degrees Celsius and seconds of bench time
// (Bench.TimeScale) throughout.
package procedure
