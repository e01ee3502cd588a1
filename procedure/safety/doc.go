// Package safety holds the rules that decide what voltages may reach a
// part, judged from the plan alone before any instrument is touched, and
// the power sequences the runner follows. It imports plan only; the
// runner, the estimation model and cmd import it.
//
// Refusals. CheckSafety refuses a plan whose rails exceed the part's
// maximum span or have the wrong polarity for their channels, whose common
// mode leaves the input range (with the plan's margin), whose inputs go
// beyond a rail, whose sources exceed the fixture's maximum stimulus, whose
// supplies lack a current limit, or whose terminals exceed HazardousVolts
// (60 V DC, the SELV/ES1 limit of IEC 60950-1 §1.2.8 and IEC 62368-1)
// without the operator's explicit consent (CheckSafetyWith, HazardConsent).
// Each refusal is a plan.Error naming file, line and key, with the safe
// range of levels (SafeLevels) in its fix. The sine of an [[ac_test]] is
// judged at both peaks, DC level plus peak amplitude (ac.go).
//
// Power sequences. PowerUpOrder, PowerDownOrder and Transition give the
// power sequences as data: current limits first, inputs only after the
// rails, everything ramped in steps of at most safety.ramp_step_volts, and
// when the rails shift, first the rail whose move shrinks the span.
// MaxProgrammedVolts bounds what a switch-off or safe state may command on
// a role, whatever an instrument answers (bounds.go).
//
// Units: volts and amps throughout.
package safety
