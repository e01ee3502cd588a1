package fit

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestCoverageMonteCarlo checks that the 95 % intervals k ± U from
// CoefficientBudget cover the true coefficient 93-97 % of the time on
// synthetic nulling-loop data: known k, white meter noise, a linear drift in
// time, zigzag-ordered levels and a drift term in the fit (seeded; the
// expected coverage is 95 %, the band allows for Monte Carlo scatter and for
// the approximate Welch–Satterthwaite ν_eff).
//
//   - Type A only: the bench has no systematic errors; the budget has the
//     fit's row alone (t with ν = n − 3).
//   - With Type B: each trial draws a new bench — noise gain, meter gain and
//     stimulus gain errors uniform within their stated half-widths — and the
//     budget carries the matching rectangular rows.
func TestCoverageMonteCarlo(t *testing.T) {
	trials := 2000
	if testing.Short() {
		trials = 500
	}
	const (
		K      = 1000.0
		kTrue  = -5e-6 // V/V input referred (106 dB)
		noiseV = 3e-4  // meter noise, V rms (input-referred 0.3 µV; u_rel ≈ 0.2 %)
		driftV = 2e-7  // V/s
	)
	x := zigzag(20, 10, 2) // 22 readings, 11 levels −10…+10 V
	tm := make([]float64, len(x))
	for i := range tm {
		tm[i] = 3 * float64(i)
	}
	cases := []struct {
		name                       string
		gainTol, meterPPM, stimPPM float64
		seed                       uint64
	}{
		{"Type A only", 0, 0, 0, 1},
		{"with Type B", 0.004, 2500, 2500, 2},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(c.seed, 99))
			uni := func(a float64) float64 { return a * (2*rng.Float64() - 1) }
			y := make([]float64, len(x))
			covered := 0
			var sumRelU float64
			for trial := 0; trial < trials; trial++ {
				kActual := K * (1 + uni(c.gainTol))
				gMeter := 1 + uni(c.meterPPM*1e-6)
				gStim := 1 + uni(c.stimPPM*1e-6)
				offset := 1e-3 * rng.NormFloat64()
				for i, v := range x {
					vio := kTrue * v * gStim // the stimulus really moved by gStim·v
					y[i] = gMeter*(kActual*vio+offset+driftV*tm[i]) + noiseV*rng.NormFloat64()
				}
				f, err := Line(x, y, LineOptions{Time: tm})
				if err != nil {
					t.Fatal(err)
				}
				b, err := CoefficientBudget(f, BudgetInputs{NoiseGain: K, NoiseGainTolRel: c.gainTol, MeterGainPPM: c.meterPPM, StimulusGainPPM: c.stimPPM})
				if err != nil {
					t.Fatal(err)
				}
				if math.Abs(b.Value-kTrue*1e6) <= b.ExpandedU {
					covered++
				}
				sumRelU += b.CombinedStdUnc / math.Abs(b.Value)
			}
			frac := float64(covered) / float64(trials)
			t.Logf("%s: %d trials, coverage %.3f, mean u_rel %.4f", c.name, trials, frac, sumRelU/float64(trials))
			if frac < 0.93 || frac > 0.97 {
				t.Errorf("coverage %.3f outside 0.93-0.97", frac)
			}
		})
	}
}
