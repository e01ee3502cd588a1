package instrument

import (
	"math"
	"sort"
)

// ACFigures are the accuracy and flatness figures of a frequency-response
// instrument (generator, digitizer, AC voltmeter), from the profile's
// [figures] table, for the uncertainty budget of a frequency-response
// result. Every figure is a ± limit (a rectangular distribution unless the
// budget says otherwise, GUM JCGM 100:2008 §4.3.7). A figure the profile
// does not give is NaN (or a nil table): the budget must then say it is
// missing rather than count it as zero. Keys:
//
//	amplitude_accuracy_pct  ± % of setting (generator) or of reading
//	                        (digitizer, AC voltmeter), at the reference
//	                        frequency (the first of ac_hz)
//	clock_ppm               ± frequency error of the generator's or the
//	                        digitizer's sample clock, ppm
//	ac_hz                   frequencies the tables below are given at,
//	                        ascending
//	flatness_db             ± amplitude flatness relative to the reference
//	                        frequency, dB, at each ac_hz
//	gain_mismatch_db        digitizer: ± gain difference between channels,
//	                        dB, at each ac_hz
//	phase_mismatch_deg      digitizer: ± phase difference between
//	                        channels, degrees, at each ac_hz
//	ac_noise_rel_of_range   digitizer: rms noise of one sample relative to
//	                        the channel's range
type ACFigures struct {
	AmplitudeAccuracyPct float64
	ClockPPM             float64
	Hz                   []float64
	FlatnessDB           []float64
	GainMismatchDB       []float64
	PhaseMismatchDeg     []float64
	NoiseRelOfRange      float64
}

// Given reports whether the profile gave any AC figure.
func (a ACFigures) Given() bool {
	return !math.IsNaN(a.AmplitudeAccuracyPct) || !math.IsNaN(a.ClockPPM) || len(a.Hz) > 0 || !math.IsNaN(a.NoiseRelOfRange)
}

// FlatnessDBAt, GainMismatchDBAt and PhaseMismatchDegAt interpolate their
// table at f, linearly in log10 f between the ac_hz points and constant
// beyond the ends; ok is false when the profile has no such table.
func (a ACFigures) FlatnessDBAt(f float64) (float64, bool) { return logInterp(a.Hz, a.FlatnessDB, f) }

// GainMismatchDBAt: see FlatnessDBAt.
func (a ACFigures) GainMismatchDBAt(f float64) (float64, bool) {
	return logInterp(a.Hz, a.GainMismatchDB, f)
}

// PhaseMismatchDegAt: see FlatnessDBAt.
func (a ACFigures) PhaseMismatchDegAt(f float64) (float64, bool) {
	return logInterp(a.Hz, a.PhaseMismatchDeg, f)
}

func logInterp(xs, ys []float64, x float64) (float64, bool) {
	if len(ys) == 0 || len(xs) != len(ys) || !(x > 0) {
		return math.NaN(), false
	}
	if x <= xs[0] {
		return ys[0], true
	}
	if x >= xs[len(xs)-1] {
		return ys[len(ys)-1], true
	}
	i := sort.SearchFloat64s(xs, x) // xs[i-1] < x <= xs[i]
	l0, l1 := math.Log10(xs[i-1]), math.Log10(xs[i])
	w := (math.Log10(x) - l0) / (l1 - l0)
	return ys[i-1] + w*(ys[i]-ys[i-1]), true
}

type acFiguresDoc struct {
	AmplitudeAccuracyPct *float64  `toml:"amplitude_accuracy_pct"`
	ClockPPM             *float64  `toml:"clock_ppm"`
	ACHz                 []float64 `toml:"ac_hz"`
	FlatnessDB           []float64 `toml:"flatness_db"`
	GainMismatchDB       []float64 `toml:"gain_mismatch_db"`
	PhaseMismatchDeg     []float64 `toml:"phase_mismatch_deg"`
	ACNoiseRelOfRange    *float64  `toml:"ac_noise_rel_of_range"`
}

func (pr *problems) acFigures(d *acFiguresDoc) ACFigures {
	a := ACFigures{AmplitudeAccuracyPct: math.NaN(), ClockPPM: math.NaN(), NoiseRelOfRange: math.NaN()}
	if d == nil {
		return a
	}
	num := func(key string, v *float64, dst *float64) {
		if v == nil {
			return
		}
		if math.IsNaN(*v) || math.IsInf(*v, 0) || *v < 0 {
			pr.add("figures."+key, "%v: want a finite number ≥ 0", *v)
			return
		}
		*dst = *v
	}
	num("amplitude_accuracy_pct", d.AmplitudeAccuracyPct, &a.AmplitudeAccuracyPct)
	num("clock_ppm", d.ClockPPM, &a.ClockPPM)
	num("ac_noise_rel_of_range", d.ACNoiseRelOfRange, &a.NoiseRelOfRange)
	if len(d.ACHz) > 0 {
		for i, f := range d.ACHz {
			if !(f > 0) || math.IsInf(f, 0) || (i > 0 && !(f > d.ACHz[i-1])) {
				pr.add("figures.ac_hz", "%v: want positive frequencies in ascending order", d.ACHz)
				return a
			}
		}
		a.Hz = append([]float64(nil), d.ACHz...)
	}
	table := func(key string, v []float64, dst *[]float64) {
		if v == nil {
			return
		}
		if len(v) != len(a.Hz) {
			pr.add("figures."+key, "%d values for %d frequencies in ac_hz: want one per frequency", len(v), len(a.Hz))
			return
		}
		for _, x := range v {
			if math.IsNaN(x) || math.IsInf(x, 0) || x < 0 {
				pr.add("figures."+key, "%v: want finite numbers ≥ 0 (± limits)", v)
				return
			}
		}
		*dst = append([]float64(nil), v...)
	}
	table("flatness_db", d.FlatnessDB, &a.FlatnessDB)
	table("gain_mismatch_db", d.GainMismatchDB, &a.GainMismatchDB)
	table("phase_mismatch_deg", d.PhaseMismatchDeg, &a.PhaseMismatchDeg)
	return a
}
