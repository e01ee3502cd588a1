package fault

import (
	"errors"
	"fmt"
	"strings"

	"nullbench/procedure/plan"
)

// RunError is a run stopped by a fault or an interruption: where it was,
// what failed, and whether the bench reached its safe state.
type RunError struct {
	Stage        string  // what the runner was doing, e.g. "settle", "power up", "soak"
	TempIndex    int     // index into Plan.TemperaturePoints; -1 before the first, or when the plan has no temperature points
	TemperatureC float64 // the temperature point (set point or planned)
	Unit         string  // "" before the first unit
	TestIndex    int     // index into Plan.Tests, -1 outside a test
	Test, Part   string
	Repeat, Step int
	LevelVolts   float64
	AtStep       bool // Repeat, Step and LevelVolts are meaningful
	// ACTest is the [[ac_test]] index the run was in (-1: none) and
	// FrequencyHz its frequency.
	ACTest      int
	FrequencyHz float64
	// Err is the cause: the instrument's error (naming instrument and
	// command), a soak time-out, or ctx's error on an interruption.
	Err error
	// Interrupted says the run's context was cancelled (Ctrl-C).
	Interrupted bool
	// SafeState is nil when the bench reached its safe state, else every
	// problem met on the way (the bench needs a look by hand).
	SafeState error
	// Relays says what is known about the switch's relays after the safe
	// state opened them ("" when it did not try): "every channel open"
	// only after an accepted open-all command (instrument.Opening).
	Relays string
	// Cause is Err stated cause first and once, with the plan's role and
	// address of a failing instrument (Describe); "" falls back to
	// Err's own text.
	Cause string
	// PlanFile and TestLine point at the [[test]] (or [[ac_test]]) table
	// the run was in (line 0: not known).
	PlanFile string
	TestLine int
}

// Error states the cause first, once, then where the run was, then the
// safe state: "SAFE STATE NOT REACHED" only when something that can hurt
// the part or a person may remain (SafeStateError.Hazard), then how to
// continue. Lines after the first are indented.
func (e *RunError) Error() string {
	var b strings.Builder
	if e.Interrupted {
		b.WriteString("run interrupted: ")
	} else {
		b.WriteString("run stopped: ")
	}
	if e.Cause != "" && !e.Interrupted {
		b.WriteString(e.Cause)
	} else {
		fmt.Fprintf(&b, "%v", e.Err)
	}
	loc := e.where()
	if loc != "" || e.Stage != "" {
		b.WriteString("\n  at ")
		b.WriteString(loc)
		if e.Stage != "" {
			if loc != "" {
				b.WriteString(", ")
			}
			fmt.Fprintf(&b, "while %s", e.Stage)
		}
	}
	var se *SafeStateError
	switch {
	case e.SafeState == nil:
		b.WriteString("\n  the bench is in its safe state (sources at 0 V and off, supplies ramped down and off)")
		if e.Relays != "" {
			b.WriteString("; switch: " + e.Relays)
		}
	case errors.As(e.SafeState, &se):
		b.WriteString("\n  " + se.Error())
		if !se.Hazard && e.Relays != "" {
			b.WriteString("\n    - switch: " + e.Relays)
		}
	default:
		fmt.Fprintf(&b, "\n  SAFE STATE NOT REACHED, check the bench by hand: %v", e.SafeState)
	}
	b.WriteString("\n  readings taken so far are kept (resume the journal to continue)")
	return b.String()
}

func (e *RunError) where() string {
	var parts []string
	if e.TempIndex >= 0 {
		parts = append(parts, fmt.Sprintf("temperature %d (%g °C)", e.TempIndex+1, e.TemperatureC))
	}
	if e.Unit != "" {
		parts = append(parts, "unit "+e.Unit)
	}
	if e.TestIndex >= 0 {
		s := fmt.Sprintf("test[%d] %s", e.TestIndex+1, e.Test)
		if e.Part != "" {
			s += "/" + e.Part
		}
		s += e.planLine()
		parts = append(parts, s)
	}
	if e.AtStep {
		parts = append(parts, fmt.Sprintf("repeat %d, step %d (level %s)", e.Repeat+1, e.Step+1, plan.FormatVolts(e.LevelVolts)))
	}
	if e.ACTest >= 0 && e.TestIndex < 0 {
		s := fmt.Sprintf("ac_test[%d] %s", e.ACTest+1, e.Test)
		if e.FrequencyHz > 0 {
			s += fmt.Sprintf(" at %g Hz", e.FrequencyHz)
		}
		s += e.planLine()
		parts = append(parts, s)
	}
	return strings.Join(parts, ", ")
}

// planLine is " (plan.toml:95)" for the test's table, or "".
func (e *RunError) planLine() string {
	if e.PlanFile == "" || e.TestLine <= 0 {
		return ""
	}
	return fmt.Sprintf(" (%s:%d)", e.PlanFile, e.TestLine)
}

// Unwrap gives errors.Is/As both the cause and the safe-state problems.
func (e *RunError) Unwrap() []error {
	out := []error{e.Err}
	if e.SafeState != nil {
		out = append(out, e.SafeState)
	}
	return out
}
