package fit

import (
	"fmt"
	"math"
)

// CoherentPlan is a coherent sampling plan: Samples samples at RateHz hold
// exactly Cycles periods of the stimulus, with Cycles and Samples coprime,
// so every sample falls on a distinct phase of the sine (IEEE Std 1241-2010
// §4.1.4.5, "coherent sampling"; IEEE Std 1057-2017 recommends a record of
// an integer number of cycles for the sine fits of §4.1.3).
type CoherentPlan struct {
	RateHz  float64 `json:"rate_hz"`
	Samples int     `json:"samples"`
	Cycles  int     `json:"cycles"`
}

// RecordS is the record length Samples/RateHz = Cycles/f in seconds.
func (p CoherentPlan) RecordS() float64 { return float64(p.Samples) / p.RateHz }

// CoherentSampling chooses a plan for a sine at freqHz with a digitizer
// whose rate may be set up to maxRateHz and whose record holds minSamples
// to maxSamples samples:
//
//	f_s = f·N/M,  M/N < 1/2 (Nyquist),  gcd(M, N) = 1,  f_s ≤ maxRateHz
//
// It takes the smallest N ≥ minSamples for which such an M exists, and for
// that N the smallest M (the fastest allowed rate, so the shortest record).
// No plan (frequency at or above maxRateHz/2 with the record sizes given,
// bad arguments) returns ErrBadInput.
func CoherentSampling(freqHz, maxRateHz float64, minSamples, maxSamples int) (CoherentPlan, error) {
	if !(freqHz > 0) || math.IsInf(freqHz, 0) || !(maxRateHz > 0) || math.IsInf(maxRateHz, 0) {
		return CoherentPlan{}, fmt.Errorf("fit: coherent sampling of %g Hz at up to %g Sa/s: %w", freqHz, maxRateHz, ErrBadInput)
	}
	if minSamples < 4 || maxSamples < minSamples {
		return CoherentPlan{}, fmt.Errorf("fit: coherent sampling record of %d..%d samples: %w", minSamples, maxSamples, ErrBadInput)
	}
	for n := minSamples; n <= maxSamples; n++ {
		// f·N/M ≤ maxRate  ⇔  M ≥ f·N/maxRate; allow for rounding.
		m := int(math.Ceil(freqHz*float64(n)/maxRateHz*(1-1e-12) - 1e-9))
		if m < 1 {
			m = 1
		}
		for ; 2*m < n; m++ {
			if gcd(m, n) == 1 {
				return CoherentPlan{RateHz: freqHz * float64(n) / float64(m), Samples: n, Cycles: m}, nil
			}
		}
	}
	return CoherentPlan{}, fmt.Errorf("fit: no coherent plan for %g Hz at up to %g Sa/s with %d..%d samples (the frequency must stay below half the rate): %w", freqHz, maxRateHz, minSamples, maxSamples, ErrBadInput)
}

func gcd(a, b int) int {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}
