// Package procedure is the runner: it executes a validated plan on bench
// roles through safe, drift-cancelling step sequences and journals every
// reading.
//
// Data flows one way: plan → procedure (run) → journal (readings) →
// analysis/fit → results → report. The plan and its step table live in
// package plan; the safety rules and power sequences in package safety;
// the reading and the journal in package journal; the fits in package
// analysis; the remaining-time model in package estimate; the person at
// the bench (Operator, the terminal's LineOperator, unit skips) in package
// operator; the bench time base in package clock; the wording of a stopped
// run and of the safe state (RunError, SafeStateError) in package fault. This package never
// imports instrument/sim or analysis; it receives role values
// (instrument.Supply, Meter, …) from cmd.
//
// Run executes a validated plan on a Rig: one role value per instrument
// role, opened by cmd. It re-checks safety, powers the part up in the
// order safety.PowerUpOrder gives, steps each test's levels in their
// drift-cancelling order, waits the dwell and then until successive
// readings agree (flagging a point that does not settle in time), averages
// the meter readings, reads the applied stimulus back, and journals every
// reading before the next step. Lots run unit by unit on a switch matrix,
// or through an operator.Operator who swaps parts by hand with the bench powered
// down; temperatures come from a chamber (ramp-limited, soaked to a
// tolerance for a time), a thermometer or the operator. On Ctrl-C, an
// instrument error, a lost connection or a time-out the bench goes to its
// safe state on a fresh context (sources to 0 V and off before the
// supplies ramp down, chamber to ambient, switch open) and Run returns a
// fault.RunError naming the unit, test, temperature, step and level. A resumed
// run skips exactly the points its journal holds. All waits use a
// clock.Clock, so a time-scaled simulated bench and the tool share one
// time base.
// Progress reports each point to the terminal.
//
// Units: volts, amps, degrees Celsius and seconds of bench time
// (plan.Bench.TimeScale) throughout.
package procedure
