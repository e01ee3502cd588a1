package main

import (
	"fmt"
	"io"

	"nullbench/fit"
	"nullbench/instrument"
	"nullbench/procedure/analysis/freq"
	"nullbench/procedure/plan"
	"nullbench/report"
)

// freqInputs takes the digitizer's and AC voltmeter's frequency-response
// figures from the profiles the plan names (or a run folder's copies),
// without contacting them.
func freqInputs(p *plan.Plan, resolve profileResolver) (freq.FreqInputs, error) {
	var in freq.FreqInputs
	if resolve == nil {
		resolve = planProfiles(p)
	}
	figs := func(role string, rb plan.RoleBinding) (*freq.ACFigures, error) {
		if !rb.Bound() {
			return nil, nil
		}
		spec, ok := p.Bench.Instruments[rb.Instrument]
		if !ok {
			return nil, nil // validation reports it
		}
		prof, err := resolve(rb.Instrument, spec.Profile)
		if err != nil {
			return nil, fmt.Errorf("plan %s, [bench.instrument.%s] profile: %w", p.Source, rb.Instrument, err)
		}
		return acFigures(prof.Figures.AC), nil
	}
	var err error
	if in.Digitizer, err = figs(plan.RoleDigitizer, p.Bench.Roles.Digitizer); err != nil {
		return in, err
	}
	if in.ACMeter, err = figs(plan.RoleACMeter, p.Bench.Roles.ACMeter); err != nil {
		return in, err
	}
	return in, nil
}

// acFigures maps a profile's AC figures to the analysis's.
func acFigures(a instrument.ACFigures) *freq.ACFigures {
	return &freq.ACFigures{AmplitudeAccuracyPct: a.AmplitudeAccuracyPct, Hz: a.Hz, FlatnessDB: a.FlatnessDB,
		GainMismatchDB: a.GainMismatchDB, PhaseMismatchDeg: a.PhaseMismatchDeg}
}

// analyseFreq analyses a record's frequency-response records, with its DC
// results for the low-frequency check.
func analyseFreq(rec *campaignRecord, resolve profileResolver) error {
	if len(rec.ACReadings) == 0 {
		return nil
	}
	in, err := freqInputs(rec.Plan, resolve)
	if err != nil {
		return withCode(exitUsage, err)
	}
	in.DC = rec.Results
	in.Coverage = freqCoverage(rec)
	fr, probs, err := freq.AnalyzeFreq(rec.Plan, rec.ACReadings, in)
	if err != nil {
		return withCode(exitFailure, fmt.Errorf("analyse %s (frequency response): %w", rec.Plan.Source, err))
	}
	rec.Freq, rec.FreqProblems = fr, probs
	return nil
}

// freqCoverage is the coverage probability of a record's frequency
// results: the one its DC analysis used, or fit.DefaultCoverage.
func freqCoverage(rec *campaignRecord) float64 {
	if rec.Results != nil && rec.Results.CoverageProbability > 0 {
		return rec.Results.CoverageProbability
	}
	return fit.DefaultCoverage
}

// printFreqSummary writes the frequency-response results in words: per
// unit and test, the ratio at each frequency with U (or its lower bound),
// the phase, the decision, and the single-pole fit with its DC check.
func printFreqSummary(w io.Writer, rec campaignRecord) {
	if len(rec.Freq) == 0 && len(rec.FreqProblems) == 0 {
		return
	}
	cov := freqCoverage(&rec)
	pct := report.FormatSig(100*cov, 4)
	fmt.Fprintf(w, "\nFrequency response (%s):\n", rec.Plan.Source)
	fmt.Fprintf(w, "  ratio in dB referred to the input, ± expanded uncertainty at %s %% coverage; phase of the input-referred coefficient k(f) in degrees\n", pct)
	for _, r := range rec.Freq {
		fmt.Fprintf(w, "  %s %s (%s, %.1f °C)\n", r.Unit, r.Quantity, r.Test, r.TemperatureC)
		for _, pt := range r.Points {
			v, lb := pt.ValueDB()
			val := fmt.Sprintf("%7.2f ± %.2f dB", v, pt.Rejection.ExpandedUDB)
			if lb {
				val = fmt.Sprintf("≥ %6.2f dB (floor)", v)
			}
			ph := "      —"
			if pt.HasPhase {
				ph = fmt.Sprintf("%6.1f°", pt.PhaseDeg)
			}
			verdict := ""
			if pt.Judged {
				verdict = fmt.Sprintf("  %s (limit %g dB)", pt.Decision.State, pt.Decision.LimitDB)
			}
			fmt.Fprintf(w, "    %10s Hz  %s  %s%s\n", report.FormatHz(pt.FrequencyHz), val, ph, verdict)
		}
		switch {
		case r.Pole == nil:
			fmt.Fprintf(w, "    single pole: %s\n", r.PoleNote)
		case r.Pole.Resolved:
			k := poleCoverageK(r.Pole, cov)
			// GUM 7.2.6: U to two significant digits, f_c to match.
			fc, uFc := report.FormatWithU(r.Pole.PoleHz, k*r.Pole.UPoleHz)
			fmt.Fprintf(w, "    single pole: low-frequency %.2f ± %.2f dB, corner %s ± %s Hz (k = %.2f, %s %%)\n",
				r.Pole.RatioDCDB, k*r.Pole.URatioDCDB, fc, uFc, k, pct)
		default:
			k := poleCoverageK(r.Pole, cov)
			fmt.Fprintf(w, "    single pole: low-frequency %.2f ± %.2f dB (k = %.2f, %s %%), corner above %s Hz (not resolved)\n",
				r.Pole.RatioDCDB, k*r.Pole.URatioDCDB, k, pct, report.FormatSig(r.Pole.PoleLowerBoundHz, 4))
		}
		if !r.DCChecked && r.DCNote != "" && r.Pole != nil {
			fmt.Fprintf(w, "    DC check: %s\n", r.DCNote)
		}
		if r.DCChecked {
			ok := "agrees with"
			if !r.DCConsistent {
				ok = "DISAGREES with"
			}
			fmt.Fprintf(w, "    %s the DC result %.2f ± %.2f dB (difference %.2f ± %.2f dB)\n", ok, r.DCRatioDB, r.DCExpandedDB, r.DCDiffDB, r.DCDiffUDB)
		}
	}
	for _, p := range rec.FreqProblems {
		fmt.Fprintf(w, "  problem: %s %s: %s\n", p.Unit, p.Test, p.Problem)
	}
}
