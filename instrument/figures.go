package instrument

import (
	"math"
	"sort"
)

// ProfileFigures is a profile's [figures] table: what the instrument costs
// in time and adds in noise, for the predictions nullbench makes before a
// run (the duration and the uncertainty `check` prints, the plans `size`
// proposes). The drivers never read it. Every key is optional; a missing
// figure takes the default below, which is typical of the kind of
// instrument (common practice, no published source) unless a comment says
// otherwise. Keys:
//
//	exchange_s          what one command or query costs a run, in
//	                    wall-clock seconds: the round trip and the
//	                    work around it (default 0.005: a few ms for
//	                    LAN/GPIB instruments, common practice; the
//	                    built-in profiles carry the simulated bench's
//	                    figure, measured by BenchmarkSimExchange)
//	reading_overhead    a meter reading lasts NPLC/line_hz × this
//	                    (default 1.5: auto-zero and conversion, common
//	                    practice; 1 for a converter that only integrates)
//	trigger_s           fixed cost of one meter trigger beyond the readings
//	                    (default 0)
//	line_hz             mains frequency that sets a power-line cycle (default 50)
//	noise_nplc          NPLC settings the noise figures are given at
//	noise_rel_of_range  rms noise of one reading relative to the range at
//	                    each of those NPLC (6½-digit DMM resolution against
//	                    NPLC, published DMM manuals: 0.02: 1e-4, 0.2: 1e-5,
//	                    1: 3e-6, 10: 1e-6, 100: 3e-7)
//	floor_rel_of_range  rms of the meter's low-frequency (1/f) floor
//	                    relative to the range: averaging stops helping
//	                    there (default 1.5e-7, common practice)
//	air_tau_s           chamber: first-order time constant of the air
//	                    following the set point (default 240 s, common
//	                    practice for bench chambers)
type ProfileFigures struct {
	ExchangeSeconds float64
	ReadingOverhead float64
	TriggerSeconds  float64
	LineHz          float64
	NoiseNPLC       []float64 // ascending
	NoiseRelOfRange []float64 // same length as NoiseNPLC
	FloorRelOfRange float64
	AirTauSeconds   float64
	// AC holds the frequency-response figures (figures_ac.go).
	AC ACFigures
}

// Defaults of ProfileFigures (see its doc comment for their basis).
const (
	DefaultExchangeSeconds = 0.005
	DefaultReadingOverhead = 1.5
	DefaultLineHz          = 50.0
	DefaultFloorRelOfRange = 1.5e-7
	DefaultAirTauSeconds   = 240.0
)

// defaultNoise is the 6½-digit DMM resolution against NPLC (× range) of
// published DMM manuals: rms noise is about this size.
var (
	defaultNoiseNPLC = []float64{0.02, 0.2, 1, 10, 100}
	defaultNoiseRel  = []float64{1e-4, 1e-5, 3e-6, 1e-6, 3e-7}
)

// NoiseRelAt returns the rms noise of one reading relative to the range at
// nplc: the figure of the nearest NPLC setting at or above nplc (meters
// round an integration time up to a setting they offer), the last one
// beyond the table.
func (f ProfileFigures) NoiseRelAt(nplc float64) float64 {
	for i, n := range f.NoiseNPLC {
		if n >= nplc*(1-1e-9) {
			return f.NoiseRelOfRange[i]
		}
	}
	if len(f.NoiseRelOfRange) == 0 {
		return math.NaN()
	}
	return f.NoiseRelOfRange[len(f.NoiseRelOfRange)-1]
}

// NPLCSettings lists the NPLC settings the noise table covers.
func (f ProfileFigures) NPLCSettings() []float64 { return append([]float64(nil), f.NoiseNPLC...) }

func (pr *problems) figures(d *figuresDoc) ProfileFigures {
	f := ProfileFigures{
		ExchangeSeconds: DefaultExchangeSeconds,
		ReadingOverhead: DefaultReadingOverhead,
		LineHz:          DefaultLineHz,
		NoiseNPLC:       append([]float64(nil), defaultNoiseNPLC...),
		NoiseRelOfRange: append([]float64(nil), defaultNoiseRel...),
		FloorRelOfRange: DefaultFloorRelOfRange,
		AirTauSeconds:   DefaultAirTauSeconds,
	}
	if d == nil {
		f.AC = pr.acFigures(nil)
		return f
	}
	f.AC = pr.acFigures(&d.acFiguresDoc)
	num := func(key string, v *float64, dst *float64, positive bool) {
		if v == nil {
			return
		}
		if math.IsNaN(*v) || math.IsInf(*v, 0) || *v < 0 || (positive && *v == 0) {
			pr.add("figures."+key, "%v: want a finite number ≥ 0 (> 0 here)", *v)
			return
		}
		*dst = *v
	}
	num("exchange_s", d.ExchangeSeconds, &f.ExchangeSeconds, false)
	num("reading_overhead", d.ReadingOverhead, &f.ReadingOverhead, true)
	num("trigger_s", d.TriggerSeconds, &f.TriggerSeconds, false)
	num("line_hz", d.LineHz, &f.LineHz, true)
	num("floor_rel_of_range", d.FloorRelOfRange, &f.FloorRelOfRange, false)
	num("air_tau_s", d.AirTauSeconds, &f.AirTauSeconds, false)
	if d.NoiseNPLC != nil || d.NoiseRelOfRange != nil {
		if len(d.NoiseNPLC) == 0 || len(d.NoiseNPLC) != len(d.NoiseRelOfRange) {
			pr.add("figures.noise_rel_of_range", "%d noise figures for %d NPLC settings: want one per setting", len(d.NoiseRelOfRange), len(d.NoiseNPLC))
			return f
		}
		if !sort.Float64sAreSorted(d.NoiseNPLC) {
			pr.add("figures.noise_nplc", "%v: want the settings in ascending order", d.NoiseNPLC)
			return f
		}
		for i := range d.NoiseNPLC {
			if !(d.NoiseNPLC[i] > 0) || !(d.NoiseRelOfRange[i] > 0) || math.IsInf(d.NoiseRelOfRange[i], 0) {
				pr.add("figures.noise_rel_of_range", "setting %d: NPLC %v, noise %v: want positive finite numbers", i+1, d.NoiseNPLC[i], d.NoiseRelOfRange[i])
				return f
			}
		}
		f.NoiseNPLC = append([]float64(nil), d.NoiseNPLC...)
		f.NoiseRelOfRange = append([]float64(nil), d.NoiseRelOfRange...)
	}
	return f
}
