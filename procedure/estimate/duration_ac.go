package estimate

import (
	"math"

	"nullbench/procedure/plan"
)

// acTestSeconds is the bench time of one [[ac_test]] for one unit, as the
// runner takes it (procedure/run_ac.go): per frequency, the digitizer
// configured (or each AC-voltmeter input), the generator's sine set (its
// limits once per test), then three records in turn, each after the
// generator settle max(settle_cycles/f, dwell_s):
//
//	floor     generator output off, settle, records × capture
//	through   through relay closed + relay settle, output on, settle, records × capture
//	stimulus  through relay opened + relay settle, output on, settle, records × capture
//
// and the generator output off at the end. A digitizer capture is the
// record, N/f_s seconds at the coherent plan (recordSeconds), plus the
// arm, the wait and one fetch per channel; an AC-voltmeter capture is one
// reading per input. A manual through calibration's operator prompt takes
// no time, as hand swaps do not.
func (f *Figures) acTestSeconds(p *plan.Plan, t *plan.ACTest, w SequencerWaits) float64 {
	role := func(r string) RoleFigures { return f.Roles[r] }
	setCost := func(r string) float64 { rf := role(r); return rf.SetSeconds + f.wait(rf.SettleSeconds) }
	query := func(r string) float64 { return role(r).QuerySeconds }
	digitizer := p.Bench.Roles.Digitizer.Bound() || !p.Bench.Roles.ACMeter.Bound()
	records := max(t.Records, 1)
	relay := 0.0
	if t.Through != plan.ThroughManual && p.Bench.Roles.Switch.Bound() {
		relay = setCost(plan.RoleSwitch) + f.wait(w.RelaySettleSeconds)
	}
	total := setCost(plan.RoleGenerator) // the generator's limits, once per output
	for _, fr := range t.Frequencies() {
		var configure, capture float64
		if digitizer {
			configure = setCost(plan.RoleDigitizer)
			capture = role(plan.RoleDigitizer).SetSeconds + 3*query(plan.RoleDigitizer) + f.wait(recordSeconds(t, fr))
		} else {
			configure = 2 * setCost(plan.RoleACMeter)
			capture = 2 * query(plan.RoleACMeter)
		}
		settle := f.wait(math.Max(float64(t.SettleCycles)/fr, t.DwellSeconds))
		gen := setCost(plan.RoleGenerator)
		total += configure + gen                                 // sine: frequency, amplitude, offset
		total += gen + settle + float64(records)*capture         // floor
		total += relay + gen + settle + float64(records)*capture // through
		total += relay + gen + settle + float64(records)*capture // stimulus
	}
	return total + setCost(plan.RoleGenerator) // output off
}

// recordSeconds is the length of one record at f: the runner's coherent
// plan (fit.CoherentSampling at the rate min(max_rate_hz,
// f·min_samples/min_cycles)) takes N = min_samples samples and the
// smallest M ≥ f·N/rate cycles with gcd(M, N) = 1, so M/f seconds (IEEE
// Std 1241-2010 §4.1.4.5). The same search, kept here because this
// package imports no fitting code; a test holds it to fit's.
func recordSeconds(t *plan.ACTest, f float64) float64 {
	n := max(t.MinSamples, 4)
	cycles := max(t.MinCycles, 1)
	if !(f > 0) {
		return 0
	}
	rate := float64(n) * f / float64(cycles)
	if t.MaxRateHz > 0 {
		rate = math.Min(rate, t.MaxRateHz)
	}
	m := max(int(math.Ceil(f*float64(n)/rate*(1-1e-12)-1e-9)), 1)
	for ; 2*m < n; m++ {
		if gcdInt(m, n) == 1 {
			return float64(m) / f
		}
	}
	return float64(n) / rate
}

func gcdInt(a, b int) int {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}
