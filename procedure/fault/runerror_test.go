package fault

import (
	"fmt"
	"strings"
	"testing"

	"nullbench/instrument"
	"nullbench/procedure/plan"
)

// TestRunErrorMessage: a RunError names the temperature, unit, test,
// repeat, step and level, the runner's stage, the failing command and the
// safe state.
func TestRunErrorMessage(t *testing.T) {
	// Stage is the runner's stageSettle.
	e := &RunError{Stage: "waiting for the output to settle", TempIndex: 1, TemperatureC: 85, Unit: "U03", TestIndex: 1, Test: plan.TestPSRRPos,
		Repeat: 0, Step: 2, LevelVolts: 5, AtStep: true,
		Err: fmt.Errorf("meter: read: %w", &instrument.InstrumentError{Instrument: "dmm", Command: "READ?", Code: -222, Message: "Data out of range"})}
	got := e.Error()
	for _, want := range []string{"temperature 2 (85 °C)", "unit U03", "test[2] psrr_pos", "repeat 1, step 3 (level +5 V)",
		"while waiting for the output to settle", "READ?", "safe state"} {
		if !strings.Contains(got, want) {
			t.Errorf("message lacks %q:\n%s", want, got)
		}
	}
}
