package fit_test

import (
	"fmt"
	"math"

	"nullbench/fit"
)

// A 1 kHz sine, 0.5 V peak, 30° phase, 0.1 V offset, sampled coherently,
// fitted at the known frequency (IEEE Std 1057-2017 §4.1.3.1).
func ExampleSine3Param() {
	plan, _ := fit.CoherentSampling(1000, 100e3, 1000, 2000)
	t := make([]float64, plan.Samples)
	y := make([]float64, plan.Samples)
	for i := range t {
		t[i] = float64(i) / plan.RateHz
		y[i] = 0.5*math.Cos(2*math.Pi*1000*t[i]+math.Pi/6) + 0.1
	}
	s, err := fit.Sine3Param(t, y, 1000)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("plan: %d samples, %d cycles, %.0f Sa/s\n", plan.Samples, plan.Cycles, plan.RateHz)
	fmt.Printf("amplitude %.6f V, phase %.4f°, offset %.6f V\n", s.AmplitudeV, s.PhaseRad*180/math.Pi, s.OffsetV)
	// Output:
	// plan: 1000 samples, 11 cycles, 90909 Sa/s
	// amplitude 0.500000 V, phase 30.0000°, offset 0.100000 V
}

// The ratio of a response sine to its stimulus: 1 mV against 1 V is −60 dB.
func ExampleRatioOfSines() {
	resp := fit.SineFit{AmplitudeV: 1e-3, UAmplitudeV: 1e-6, PhaseRad: 0.2, UPhaseRad: 1e-3, DOF: 997}
	stim := fit.SineFit{AmplitudeV: 1, UAmplitudeV: 1e-4, PhaseRad: 0.1, UPhaseRad: 1e-4, DOF: 997}
	r := fit.RatioOfSines(resp, stim)
	fmt.Printf("%.2f dB ± %.4f dB, phase %.3f rad\n", r.DB, r.UDB, r.PhaseRad)
	// Output:
	// -60.00 dB ± 0.0087 dB, phase 0.100 rad
}

// A single-pole fit: 100 dB at DC with a 300 Hz corner, each point ± 0.2 dB.
// The uncertainties were checked independently by inverting the 2×2 matrix
// JᵀWJ by hand in Python (u(R_dc) = 0.1153 dB, u(f_p) = 5.302 Hz).
func ExampleFitPole() {
	f := []float64{10, 30, 100, 300, 1000, 3000, 10000, 30000, 100000}
	y := make([]float64, len(f))
	u := make([]float64, len(f))
	for i := range f {
		y[i] = 100 - 10*math.Log10(1+(f[i]/300)*(f[i]/300))
		u[i] = 0.2
	}
	p, err := fit.FitPole(f, y, u)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("R_dc %.2f dB ± %.2f, pole %.1f Hz ± %.1f, resolved %v\n", p.RatioDCDB, p.URatioDCDB, p.PoleHz, p.UPoleHz, p.Resolved)
	// Output:
	// R_dc 100.00 dB ± 0.12, pole 300.0 Hz ± 5.3, resolved true
}
