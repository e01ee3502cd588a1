package plan

import (
	"fmt"
	"math"
)

// acNeeds adds the roles the [[ac_test]] tables use.
func acNeeds(p *Plan, need func(role, why string)) {
	for i, t := range p.ACTests {
		k := acTestKey(i) + " (" + t.Kind + ")"
		need(RoleGenerator, k+" applies a sine from the generator")
		if !p.Bench.Roles.ACMeter.Bound() {
			need(RoleDigitizer, k+" digitizes the stimulus and the response (or bind ac_meter for magnitudes only)")
		}
		if t.Through == ThroughSwitch {
			need(RoleSwitch, k+` closes the through relay for the calibration (through = "switch")`)
		}
	}
}

// acKinds are the [[ac_test]] kinds a fixture can run.
func acKinds(fixture string) []string {
	switch fixture {
	case FixtureNullingLoop, FixtureNoiseGain:
		return []string{TestCMRR, TestPSRRPos, TestPSRRNeg}
	case FixtureBoard:
		return []string{TestBoardCMRR, TestBoardPSRRPos, TestBoardPSRRNeg}
	}
	return nil
}

// acTests checks every [[ac_test]] table.
func (c *planChecker) acTests() {
	p := c.p
	if len(p.ACTests) > 0 {
		if p.Generator.MaxPeakVolts <= 0 {
			c.add("generator.max_peak_volts", "give the largest amplitude (peak) the generator may ever be set to under [generator], e.g. 2",
				"the generator's amplitude limit is not given")
		}
		if p.Generator.MaxOffsetVolts < 0 {
			c.add("generator.max_offset_volts", "give the largest |offset| the generator may be set to, 0 or more",
				"offset limit %g V is negative", p.Generator.MaxOffsetVolts)
		}
	}
	if p.Part.GBWHz < 0 || p.Part.GBWTolerance < 0 || p.Part.GBWTolerance >= 1 {
		c.add("part.gbw_hz", "give the gain-bandwidth in Hz (≥ 0) and gbw_tolerance in [0, 1), e.g. 0.3",
			"gain-bandwidth %g Hz ± %g is not usable", p.Part.GBWHz, p.Part.GBWTolerance)
	}
	allowed := acKinds(p.Fixture.Kind)
	seen := map[string]int{}
	for i := range p.ACTests {
		t := &p.ACTests[i]
		k := acTestKey(i)
		if !planHas(allowed, t.Kind) {
			c.add(k+".kind", "use one of "+planQuoteList(allowed), "ac test kind %q is not available on a %q fixture", t.Kind, p.Fixture.Kind)
		}
		if j, dup := seen[t.Kind]; dup {
			c.add(k+".kind", "merge the frequency lists into one table", "ac test kind %q already measured by %s", t.Kind, acTestKey(j))
		} else {
			seen[t.Kind] = i
		}
		c.acFrequencies(k, t)
		if !(t.PeakVolts > 0) {
			c.add(k+".peak_volts", "give the stimulus amplitude at the part (peak volts), e.g. 0.5", "peak %g V must be positive", t.PeakVolts)
		}
		if t.isPSRR() {
			if t.OffsetVolts != 0 {
				c.add(k+".offset_volts", "remove it: the rail's DC level is its nominal", "offset %g V on a psrr test", t.OffsetVolts)
			}
			switch t.Injection {
			case InjectSeries, InjectModulation:
			default:
				c.add(k+".injection", fmt.Sprintf("use %q or %q", InjectSeries, InjectModulation), "unknown injection network %q", t.Injection)
			}
			if !(t.CouplingGain > 0) || t.CouplingGain > 100 {
				c.add(k+".coupling_gain", "give the network's nominal rail ripple per volt at the generator, e.g. 1 (1:1 injector) or 0.1",
					"coupling gain %g is out of range (0, 100]", t.CouplingGain)
			}
		} else {
			if t.Injection != "" {
				c.add(k+".injection", "remove it: a cmrr test drives the common-mode node directly", "injection on a %s test", t.Kind)
			}
			if p.Fixture.CommonMode == CMBySupplyShift && t.Kind == TestCMRR {
				c.add(k+".kind", `set fixture.common_mode = "input_drive": a sine common mode is applied to the inputs, not by moving both rails`,
					"ac cmrr needs an input-driven common mode")
			}
		}
		if p.Generator.MaxPeakVolts > 0 && t.GeneratorPeakVolts() > p.Generator.MaxPeakVolts {
			c.add(k+".peak_volts", fmt.Sprintf("lower it to %g V or less (peak_volts/coupling_gain ≤ generator.max_peak_volts)", p.Generator.MaxPeakVolts*t.couplingOr1()),
				"the generator would be set to %g V peak, beyond generator.max_peak_volts = %g V", t.GeneratorPeakVolts(), p.Generator.MaxPeakVolts)
		}
		if math.Abs(t.OffsetVolts) > p.Generator.MaxOffsetVolts && !t.isPSRR() {
			c.add(k+".offset_volts", "keep |offset_volts| ≤ generator.max_offset_volts", "offset %g V is beyond generator.max_offset_volts = %g V",
				t.OffsetVolts, p.Generator.MaxOffsetVolts)
		}
		switch t.Through {
		case ThroughSwitch:
			if t.ThroughChannel == "" {
				c.add(k+".through_channel", `give the switch channel of the through relay, e.g. "190"`, `through = "switch" without a channel`)
			}
		case ThroughManual:
		default:
			c.add(k+".through", fmt.Sprintf("use %q or %q", ThroughSwitch, ThroughManual), "unknown through calibration %q", t.Through)
		}
		if t.MinCycles < 1 || t.MinCycles > 10000 {
			c.add(k+".min_cycles", "give 1 to 10000 cycles per record, e.g. 8", "min_cycles %d is out of range", t.MinCycles)
		}
		if t.MinSamples < 16 || t.MaxSamples < t.MinSamples || t.MaxSamples > 10_000_000 {
			c.add(k+".min_samples", "give 16 ≤ min_samples ≤ max_samples ≤ 1e7", "record of %d … %d samples is not usable", t.MinSamples, t.MaxSamples)
		}
		if !(t.MaxRateHz > 0) {
			c.add(k+".max_rate_hz", "give the digitizer's highest sample rate, e.g. 1e6", "max rate %g Sa/s must be positive", t.MaxRateHz)
		}
		if t.Records < 1 || t.Records > 1000 {
			c.add(k+".records", "give 1 to 1000 records per point", "records %d is out of range", t.Records)
		}
		if !(t.StimulusRangeVolts > 0) || !(t.ResponseRangeVolts > 0) {
			c.add(k+".stimulus_range_volts", "give both digitizer ranges (peak volts), e.g. 1", "ranges %g V, %g V must be positive",
				t.StimulusRangeVolts, t.ResponseRangeVolts)
		} else if t.PeakVolts > t.StimulusRangeVolts {
			c.add(k+".stimulus_range_volts", fmt.Sprintf("give a range of at least %g V", t.PeakVolts),
				"the stimulus peak %g V overloads the %g V range", t.PeakVolts, t.StimulusRangeVolts)
		} else if t.PeakVolts > t.ResponseRangeVolts {
			// The through calibration puts the stimulus on channel 2, on
			// the same range as the measurement (a range change between
			// them would undo the calibration).
			c.add(k+".response_range_volts", fmt.Sprintf("give a range of at least %g V: the through calibration puts the stimulus on channel 2", t.PeakVolts),
				"the stimulus peak %g V overloads channel 2's %g V range during the through calibration", t.PeakVolts, t.ResponseRangeVolts)
		}
		if t.SettleCycles < 0 || t.DwellSeconds < 0 {
			c.add(k+".settle_cycles", "give waits ≥ 0", "settle_cycles %d, dwell_s %g: negative wait", t.SettleCycles, t.DwellSeconds)
		}
	}
}

func (t *ACTest) couplingOr1() float64 {
	if t.isPSRR() && t.CouplingGain > 0 {
		return t.CouplingGain
	}
	return 1
}

// acFrequencies checks the frequency list and the per-frequency limits.
func (c *planChecker) acFrequencies(k string, t *ACTest) {
	named := len(t.FrequenciesHz) > 0
	swept := t.StartHz != 0 || t.StopHz != 0 || t.Points != 0
	switch {
	case named && swept:
		c.add(k+".frequencies_hz", "give either frequencies_hz or start_hz/stop_hz/points, not both", "two frequency lists")
	case !named && !swept:
		c.add(k+".frequencies_hz", "give frequencies_hz = [50, 60, 100, 120] or start_hz, stop_hz and points", "no frequencies")
	case swept:
		if !(t.StartHz > 0) || !(t.StopHz > t.StartHz) || t.Points < 2 || t.Points > 1000 {
			c.add(k+".start_hz", "give 0 < start_hz < stop_hz and 2 to 1000 points", "sweep %g … %g Hz in %d points is not usable",
				t.StartHz, t.StopHz, t.Points)
			return // the list is not built: points may be any size
		}
	}
	seen := map[float64]bool{}
	for i, f := range t.FrequenciesHz {
		if !(f > 0) || f > 100e6 {
			c.addElem(k+".frequencies_hz", i, "give frequencies in (0, 100 MHz]", "frequency %g Hz is out of range", f)
		}
		if seen[f] {
			c.addElem(k+".frequencies_hz", i, "remove the repeat", "frequency %g Hz is listed twice", f)
		}
		seen[f] = true
	}
	fs := t.Frequencies()
	for _, f := range fs {
		if t.MaxRateHz > 0 && f >= t.MaxRateHz/2 {
			c.add(k+".max_rate_hz", "lower the frequency or give a faster digitizer",
				"%g Hz is not below half the digitizer's %g Sa/s (Nyquist)", f, t.MaxRateHz)
			break
		}
	}
	if n := len(t.LimitsDB); n > 1 && n != len(fs) {
		c.add(k+".limits_db", fmt.Sprintf("give one limit per frequency (%d) or a single limit", len(fs)),
			"%d limits for %d frequencies", n, len(fs))
	}
	for i, l := range t.LimitsDB {
		if l <= 0 || l > 300 {
			c.addElem(k+".limits_db", i, "give the minimum acceptable ratio in dB, e.g. 80", "limit %g dB is out of range (0, 300]", l)
		}
	}
}
