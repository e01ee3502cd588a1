// Package fault words what went wrong on the bench, for the person who
// must act on it: a run stopped by a fault or an interruption (RunError:
// the cause first and once, then where in the plan, then whether the
// bench reached its safe state) and a safe state with problems
// (SafeStateError: "SAFE STATE NOT REACHED" only when something that can
// hurt the part or a person may remain).
//
// An instrument fault (instrument.Fault) is named with what the plan binds
// to that instrument: its role, channel and address (BenchContext,
// Describe). Commands not sent after a lost connection are gathered into
// one line per instrument.
//
// The runner (package procedure) fills these values; this package only
// words them. It imports instrument and procedure/plan, nothing of the
// runner.
package fault
