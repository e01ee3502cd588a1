// Package freq is the frequency-response analysis: the journal's
// ac-reading records (one IEEE Std 1057 sine fit per digitizer channel per
// record) and the plan's [[ac_test]] tables in, a FreqResponse per unit,
// test and temperature out (AnalyzeFreq): the input-referred coefficient
// at each frequency with its GUM budget and decision, lower bounds below
// the noise floor, and a single-pole fit across frequencies checked
// against the unit's DC result (package analysis). It calls package fit
// and knows nothing of the runner or the instruments; freq.go states the
// formulas and their sources.
package freq
