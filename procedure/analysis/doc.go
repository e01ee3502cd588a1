// Package analysis turns a plan and its readings into results: readings
// and plan in, Results out, calling package fit. It knows nothing of the
// runner or the instruments, so it refits a journal as well as a live run.
//
// Analyze fits each unit × test × temperature with package fit (read-back
// stimulus, optional drift and quadratic terms), refers the slope to the
// input by the noise gain, builds the GUM budget, judges it by the plan's
// ILAC-G8 rule, and adds the nulling-loop closure, the open-loop-gain
// correction of the supply-shift CMRR, board CMRR = A_d/A_cm with the
// resistor-matching limit, lot statistics, temperature coefficients and
// repeatability. Its doc comment states every sign convention. Inputs
// carries the instruments' accuracies (estimate.Accuracy) for the Type B rows
// of the budgets. The frequency-response results ([[ac_test]]) are package
// freq's (procedure/analysis/freq), which imports this one for the DC
// results it compares with.
//
// Units: volts, degrees Celsius and seconds of bench time throughout.
package analysis
