package fit_test

import (
	"fmt"

	"nullbench/fit"
)

// A common-mode sweep read through a nulling loop with noise gain 1000.
// (Values checked by an exact rational least-squares solve.)
func ExampleLine() {
	vcm := []float64{0, 5, -5, 10, -10, 0}
	e0 := []float64{0.00212, 0.00189, 0.00231, 0.00171, 0.00252, 0.00208} // meter volts
	f, err := fit.Line(vcm, e0, fit.LineOptions{})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("slope %.3g V/V ± %.2g, residual SD %.2g V, %d dof\n", f.Slope.Value, f.Slope.StdErr, f.ResidualSD, f.DOF)
	k, _ := fit.InputReferred(f.Slope.Value, 1000)
	fmt.Printf("k = %.2f µV/V\n", k*1e6)
	// Output:
	// slope -4.08e-05 V/V ± 1.1e-06, residual SD 1.7e-05 V, 4 dof
	// k = -0.04 µV/V
}

// JEDEC JESD99B: a 20 V common-mode step moving the offset by 20 µV.
func ExampleRatioFromSteps() {
	r, err := fit.RatioFromSteps(20, 20e-6)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%.1f µV/V, CMRR %.1f dB\n", r.CoefficientUVPerV, r.RatioDB)
	// An inverting stage has no common-mode stimulus at all.
	_, err = fit.RatioFromSteps(0, 1e-6)
	fmt.Println(err)
	// Output:
	// 1.0 µV/V, CMRR 120.0 dB
	// fit: the stimulus did not change: stimulus span is zero
}

// ILAC-G8 guarded acceptance against CMRR ≥ 85 dB with U = 1.5 dB.
func ExampleDecide() {
	for _, v := range []float64{87, 86, 84, 83} {
		d, _ := fit.Decide(v, 1.5, 85, fit.RuleGuarded)
		fmt.Printf("%.0f dB: %s (AL %.1f dB)\n", v, d.State, d.AcceptanceLimitDB)
	}
	// Output:
	// 87 dB: pass (AL 86.5 dB)
	// 86 dB: conditional pass (AL 86.5 dB)
	// 84 dB: conditional fail (AL 86.5 dB)
	// 83 dB: fail (AL 86.5 dB)
}

// JCGM 100:2008 (GUM): ΔV_CM = 20 V, ΔV_OS = 0.3 µV with u = 0.5 µV (k = 2) cannot be
// told from zero, so only a lower bound is stated.
func ExampleRejectionFromBudget() {
	rows := []fit.BudgetRow{{Name: "offset step", Kind: "A", Distribution: fit.DistNormal,
		Value: 0.3, StdUncertainty: 0.5, Unit: "µV", Sensitivity: 1.0 / 20, DOF: fit.InfDOF}}
	b, _ := fit.Combine("k", "µV/V", 0.3/20, rows, 0.9545)
	r, _ := fit.RejectionFromBudget(b)
	fmt.Printf("resolved %v, CMRR ≥ %.1f dB (k = %.2f)\n", r.Resolved, r.LowerBoundDB, r.CoverageK)
	// Output:
	// resolved false, CMRR ≥ 143.7 dB (k = 2.00)
}

// Three lots of unequal size on a Shewhart X̄–S chart with limits from the
// pooled SD (hand-computed: ν = 6, s_p = 2, σ̂ = s_p/c4(7) = 2.085; lot 3
// has n = 4, so its X̄ limits are 4 ± 3·2.085/2 and its s chart UCL
// B6(4)·σ̂ = 2.088·2.085 = 4.35, B6 from the published table).
func ExampleXbarS() {
	cc, err := fit.XbarS([][]float64{{1, 2, 3}, {2, 4}, {3, 5, 7, 9}}, fit.ControlOptions{})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("x̿ = %.3f, s_p = %.3f (ν = %d), σ̂ = %.3f\n", cc.GrandMean, cc.PooledSD, cc.PooledDOF, cc.SigmaHat)
	p := cc.Points[2]
	fmt.Printf("lot 3: X̄ %.3f … %.3f, s chart %.3f … %.3f\n", p.MeanLCL, p.MeanUCL, p.SDLCL, p.SDUCL)
	// Output:
	// x̿ = 4.000, s_p = 2.000 (ν = 6), σ̂ = 2.085
	// lot 3: X̄ 0.873 … 7.127, s chart 0.000 … 4.352
}
