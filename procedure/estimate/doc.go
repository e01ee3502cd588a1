// Package estimate is the planning model: from a plan and the
// instruments' figures (timing, noise, accuracy; cmd fills Figures from
// the profiles) it says, before anything is switched on, how long a run
// takes, what uncertainty each test reaches, the largest ratio it can
// resolve, and how to size a plan to a target uncertainty in the least
// bench time. It imports packages plan and safety (the power sequences it
// times, the verdict check prints) and nothing else of ours; plan does
// not import it, and it knows nothing of the runner, the journal or the
// analysis. The runner uses its Timeline for the progress bar's remaining
// time; the analysis and the rig carry its Accuracy.
//
// Duration. Figures.Timeline walks the plan exactly as the runner does and
// adds up every wait and exchange (ramp steps with the supplies' settle,
// dwell, settling readings at the plan's NPLC, read-backs, power-up and
// down per unit, relay settle, chamber ramps and soaks).
//
// Uncertainty. Predict gives each test's standard and expanded
// uncertainty of the coefficient near zero (the slope of a straight-line
// fit, GUM H.3, with the t factor of GUM G.3) from the meter's noise at
// the plan's NPLC, its low-frequency floor and the part's noise, and so
// the largest ratio in dB the plan resolves; Prediction.Warnings names the
// limits above it.
//
// Sizing. Size proposes levels, NPLC, readings and repeats that reach a
// target uncertainty in the least bench time within the part's safe
// levels.
//
// Check. WriteCheck prints check's output (check_plan.go): for each test
// and level the stimulus, the rails, the common mode and its distance to
// each rail and the highest terminal voltage, then the power sequence, the
// hazard assessment and the safety verdict (package safety), with this
// package's forecast beside it.
//
// Units: volts, seconds of bench time (plan.Bench.TimeScale), µV/V for
// coefficients and dB for ratios.
package estimate
