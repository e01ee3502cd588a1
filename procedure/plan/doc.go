// Package plan is the measurement plan and everything that follows from it
// alone: the schema, TOML parsing with file/line/key errors, validation,
// the bench state at each level, the order of the levels and the step
// table. Its functions are pure: no I/O beyond reading the plan file and
// no instrument contact. The safety rules (package safety), the runner
// (package procedure), the journal, the analysis and the estimation model
// (package estimate) import it; it imports none of them.
//
// Plans. Load and Parse read a TOML plan (go-toml v2, unknown keys
// refused), apply the defaults of the keys left out and validate it. Every
// error is an Error naming file, line and key and saying how to fix it:
//
//	plans/lot.toml:41: key "test[2].levels": psrr_pos level +20 V: V+ = +35 V, V- = -15 V: the span 50 V exceeds the part's absolute maximum 36 V (part.max_supply_span_volts); keep test[2].levels within -12.5 V … +6 V
//
// Key paths count [[test]] and [[unit]] tables from 1, as a reader does.
//
// Bench states. BenchState documents what each test's level means
// (supply-shift common mode follows MIL-M-38510/114 Table III); StateAt and
// TerminalsOf give the rails, sources and pin voltages at a level. The
// safety rules that judge these states live in package safety, which
// imports this one.
//
// Levels. OrderLevels visits the levels as a palindrome (zigzag about the
// centre and back, or ascending then descending), so that every level's
// mean time equals the pass's mean time and a drift linear in time adds
// exactly nothing to the fitted slope.
//
// The step table. StepTable lays out what a run would do: each level's
// rails, common mode and its distance to each rail and the highest
// terminal voltage. Each Step names its point of the campaign with a
// WorkKey, the key the journal and the runner use to skip finished work
// on resume. How long a run takes and what uncertainty it reaches are not
// the plan's: package estimate models them from the instruments' figures
// and prints check's output (estimate.WriteCheck).
//
// Units: volts, amps, degrees Celsius and seconds of bench time
// (Bench.TimeScale) throughout.
package plan
