package analysis

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"nullbench/fit"
	"nullbench/procedure/estimate"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// The readings in these tests are generated from known signed coefficients
// through the level semantics of plan.StateAt (plan/state.go) and the op-amp error
// model of the simulated bench (package instrument/sim, "Physics"; derived
// from kc + kp + kn + ko = 0, no published source):
//
//	V_IO = Vos + kc·(Vcm − V−) + kp·(V+ − V−) + ko·(Vout − V−),  kn = −(kc + kp + ko)
//
// nulling loop: Vout held at source_ref, meter = E0 − Vcm = K·V_IO;
// noise-gain stage: Vout = Vcm + K·V_IO (solved exactly), meter = K·V_IO.
// So the tests check the analysis' sign conventions against the physics,
// not against the analysis' own formulas.

// azOpAmp is one op-amp's true coefficients (V/V) and offset (V).
type azOpAmp struct {
	vos, kc, kp, ko float64
}

func (o azOpAmp) kn() float64 { return -(o.kc + o.kp + o.ko) }

// vio returns the input offset at a bench state for a fixture.
func (o azOpAmp) meter(p *plan.Plan, s plan.BenchState) float64 {
	K := p.Fixture.NoiseGain
	base := o.vos + o.kc*(s.CMVolts-s.NegVolts) + o.kp*(s.PosVolts-s.NegVolts)
	var vio float64
	if p.Fixture.Kind == plan.FixtureNullingLoop {
		vio = base + o.ko*(s.RefVolts-s.NegVolts)
	} else {
		// Vout = Vcm + K·Vio: Vio = base + ko·(Vcm + K·Vio − V−).
		vio = (base + o.ko*(s.CMVolts-s.NegVolts)) / (1 - o.ko*K)
	}
	return K * vio
}

// azBench generates readings the way the runner journals them.
type azBench struct {
	p          *plan.Plan
	rng        *rand.Rand
	noiseV     float64 // meter noise, V rms per averaged point
	driftVPerS float64 // meter drift, V/s
	stepS      float64 // bench seconds per point
	clock      float64
	// readBackGain, when not 0, makes the stimulus actually applied
	// (1+readBackGain)·set and reports it as read back.
	readBackGain float64
}

func azNewBench(p *plan.Plan, seed uint64, noiseV float64) *azBench {
	return &azBench{p: p, rng: rand.New(rand.NewPCG(seed, 7)), noiseV: noiseV, stepS: 3}
}

// run appends the readings of test kind for one unit at one temperature,
// with meterAt giving the noiseless meter volts at a bench state; repeat r
// may use a different meter function (repeatMeter) when not nil.
func (b *azBench) run(out []journal.Reading, unit, kind string, tempIndex int, tempC float64,
	meterAt func(r int, s plan.BenchState) float64) []journal.Reading {
	var t *plan.Test
	for i := range b.p.Tests {
		if b.p.Tests[i].Kind == kind {
			t = &b.p.Tests[i]
		}
	}
	for rep := 0; rep < t.Repeats; rep++ {
		step := 0
		for _, sw := range plan.Sweeps(t) {
			for _, lvl := range sw.Levels {
				applied := lvl
				if b.readBackGain != 0 {
					applied = lvl * (1 + b.readBackGain)
				}
				s := plan.StateAt(b.p, t, sw.Part, applied)
				b.clock += b.stepS
				m := meterAt(rep, s) + b.noiseV*b.rng.NormFloat64() + b.driftVPerS*b.clock
				r := journal.Reading{BenchSeconds: b.clock, Unit: unit, Test: kind, Part: sw.Part,
					TemperatureC: tempC, TempIndex: tempIndex, Repeat: rep, Step: step,
					SetVolts: lvl, ReadVolts: lvl, MeterVolts: m, N: 5}
				if b.readBackGain != 0 {
					r.ReadVolts, r.ReadBack = applied, true
				}
				out = append(out, r)
				step++
			}
		}
	}
	return out
}

// opAmpReadings runs every test of the plan on one unit.
func (b *azBench) opAmpReadings(out []journal.Reading, unit string, tempIndex int, tempC float64, o azOpAmp) []journal.Reading {
	for _, t := range b.p.Tests {
		out = b.run(out, unit, t.Kind, tempIndex, tempC, func(_ int, s plan.BenchState) float64 { return o.meter(b.p, s) })
	}
	return out
}

func azOpAmpPlan(fixture, cm string, kinds ...string) *plan.Plan {
	p := &plan.Plan{
		Campaign: plan.Campaign{Name: "HX-4107 qualification", Lot: "HGT-2407A", Operator: "bench 3"},
		Fixture:  plan.Fixture{Kind: fixture, NoiseGain: 1000, NoiseGainTolerance: 0.001, CommonMode: cm},
		Part: plan.Part{Number: "HX-4107", NominalPosVolts: 15, NominalNegVolts: -15, MaxSupplySpanVolts: 36,
			CMHeadroomPosVolts: 1.5, CMHeadroomNegVolts: 1.5, CurrentLimitAmps: 0.02},
		Decision: plan.Decision{Rule: plan.RuleGuarded},
		Limits:   plan.Limits{},
		Units:    []plan.Unit{{ID: "U1", Channel: "101"}},
	}
	levels := map[string][]float64{
		plan.TestCMRR:    {-10, -5, 0, 5, 10},
		plan.TestPSRRPos: {-3, -1.5, 0, 1.5, 3},
		plan.TestPSRRNeg: {-3, -1.5, 0, 1.5, 3},
		plan.TestPSRRSym: {-4, -2, 0, 2, 4},
		plan.TestAOL:     {-5, -2.5, 0, 2.5, 5},
	}
	for _, k := range kinds {
		p.Tests = append(p.Tests, plan.Test{Kind: k, Levels: levels[k], DriftTerm: true})
	}
	p.ApplyDefaults()
	return p
}

// A worked example (invented numbers, derived from kc + kp + kn + ko = 0;
// no published source): kc = +10, kp = +4,
// ko = +0.01 µV/V, so kn = −14.01 µV/V.
var azWorked = azOpAmp{vos: 120e-6, kc: 10e-6, kp: 4e-6, ko: 0.01e-6}

func azAnalyze(t *testing.T, p *plan.Plan, rs []journal.Reading, acc Inputs) *Results {
	t.Helper()
	res, err := Analyze(p, rs, acc)
	if err != nil {
		t.Fatalf("Analyze: %v", err)
	}
	for _, pr := range res.Problems {
		t.Logf("problem: %+v", pr)
	}
	if _, err := json.Marshal(res); err != nil {
		t.Fatalf("results do not marshal to JSON: %v", err)
	}
	return res
}

func azRatio(t *testing.T, res *Results, unit, name string, cond int) *RatioResult {
	t.Helper()
	for i := range res.Ratios {
		r := &res.Ratios[i]
		if r.Unit == unit && r.Name == name && r.Condition == cond {
			return r
		}
	}
	t.Fatalf("no %s result for %s at condition %d", name, unit, cond)
	return nil
}

func azHasNote(r *RatioResult, sub string) bool {
	for _, n := range r.Notes {
		if strings.Contains(n, sub) {
			return true
		}
	}
	return false
}

func azHasRatio(res *Results, unit, name string) bool {
	for _, r := range res.Ratios {
		if r.Unit == unit && r.Name == name {
			return true
		}
	}
	return false
}

// azCheckCoef asserts a recovered coefficient (µV/V) and its dB
// figure: within tol of the truth, and the truth inside the expanded
// uncertainty interval.
func azCheckCoef(t *testing.T, r *RatioResult, wantUV, tolUV float64) {
	t.Helper()
	got := r.Rejection.CoefficientUVPerV
	if math.Abs(got-wantUV) > tolUV {
		t.Errorf("%s: coefficient %.6f µV/V, want %.6f ± %.6f", r.Name, got, wantUV, tolUV)
	}
	if math.Abs(got-wantUV) > r.Rejection.ExpandedUUVPerV {
		t.Errorf("%s: truth %.6f µV/V outside %.6f ± U = %.6f", r.Name, wantUV, got, r.Rejection.ExpandedUUVPerV)
	}
	if !r.Rejection.Resolved {
		t.Errorf("%s: not resolved (k = %g, U = %g)", r.Name, got, r.Rejection.ExpandedUUVPerV)
		return
	}
	wantDB := fit.DBFromUVPerV(wantUV)
	if wantDB < r.Rejection.LowerDB || wantDB > r.Rejection.UpperDB {
		t.Errorf("%s: true %.3f dB outside [%.3f, %.3f]", r.Name, wantDB, r.Rejection.LowerDB, r.Rejection.UpperDB)
	}
}

// TestAnalyzeNullingLoopWorked recovers the worked example azWorked
// from a nulling loop with supply-shift common mode: every coefficient with
// its sign, the ratios in dB (dB = 20·log10(10⁶/|k µV/V|), JEDEC JESD99B;
// CMRR 100.00 dB,
// PSRR+ 107.96 dB, PSRR− 97.07 dB, A_OL 160 dB, supply shift 99.99 dB,
// symmetric 9.005 µV/V), the A_OL correction, closure and psrr_worst.
func TestAnalyzeNullingLoopWorked(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMBySupplyShift, plan.TestCMRR, plan.TestPSRRPos, plan.TestPSRRNeg, plan.TestPSRRSym, plan.TestAOL)
	sim := azNewBench(p, 1, 1e-6)
	sim.driftVPerS = 0.2e-6 // a thermal-EMF-like wander, removed by the drift term
	rs := sim.opAmpReadings(nil, "U1", 0, 25, azWorked)
	res := azAnalyze(t, p, rs, Inputs{Meter: estimate.Accuracy{GainPPM: 20}, Stimulus: estimate.Accuracy{GainPPM: 300, OffsetVolts: 1e-3}})

	tests := []struct {
		name          string
		wantUV, tolUV float64
		wantDB, tolDB float64 // the worked example's values, as rounded
	}{
		{plan.TestCMRR, 10.00, 0.002, 100.00, 0.005},
		{ResultCMRRUncorrected, 10.01, 0.002, 99.99, 0.005},
		{plan.TestPSRRPos, 4, 0.002, 107.96, 0.005},
		{plan.TestPSRRNeg, -14.01, 0.002, 97.07, 0.005},
		{plan.PsrrWorst, -14.01, 0.002, 97.07, 0.005},
		{plan.TestPSRRSym, 9.005, 0.002, 100.91, 0.005}, // 20·log10(10⁶/9.005), derived
		{plan.TestAOL, 0.01, 0.001, 160, 0.5},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r := azRatio(t, res, "U1", tc.name, 0)
			t.Logf("%-16s k = %+.5f µV/V, U = %.5f (k = %.2f, ν_eff = %.0f); %.3f dB, U = %.4f dB",
				tc.name, r.Rejection.CoefficientUVPerV, r.Rejection.ExpandedUUVPerV, r.Rejection.CoverageK,
				float64(r.Rejection.EffectiveDOF), r.Rejection.RatioDB, r.Rejection.ExpandedUDB)
			azCheckCoef(t, r, tc.wantUV, tc.tolUV)
			if math.Abs(r.Rejection.RatioDB-tc.wantDB) > tc.tolDB {
				t.Errorf("%s: %.4f dB, want %.2f ± %.3f", tc.name, r.Rejection.RatioDB, tc.wantDB, tc.tolDB)
			}
			if !r.DriftFitted {
				t.Errorf("%s: drift term not fitted", tc.name)
			}
		})
	}

	// The corrected and uncorrected results differ by exactly k_o.
	c, u, o := azRatio(t, res, "U1", plan.TestCMRR, 0), azRatio(t, res, "U1", ResultCMRRUncorrected, 0), azRatio(t, res, "U1", plan.TestAOL, 0)
	if !c.AOLCorrected || u.AOLCorrected {
		t.Errorf("AOLCorrected: cmrr %v, cmrr_uncorrected %v; want true, false", c.AOLCorrected, u.AOLCorrected)
	}
	if d := u.Rejection.CoefficientUVPerV - c.Rejection.CoefficientUVPerV - o.Rejection.CoefficientUVPerV; math.Abs(d) > 1e-12 {
		t.Errorf("uncorrected − corrected − k_o = %g, want 0", d)
	}
	if math.Abs(c.AOLTermUVPerV+o.Rejection.CoefficientUVPerV) > 1e-15 {
		t.Errorf("AOLTermUVPerV %g, want −k_o = %g", c.AOLTermUVPerV, -o.Rejection.CoefficientUVPerV)
	}
	// Cross-check against fit.CorrectShift, which takes k_shift per volt of
	// both rails moved up (= −k of the cmrr sweep).
	q := func(r *RatioResult) fit.Quantity {
		b := r.Rejection.Budget
		return fit.Quantity{Value: b.Value, StdUnc: b.CombinedStdUnc, DOF: b.EffectiveDOF}
	}
	shift := q(u)
	shift.Value = -shift.Value
	sc, err := fit.CorrectShift(shift, q(o), 0)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(sc.Corrected.CoefficientUVPerV-c.Rejection.CoefficientUVPerV) > 1e-12 {
		t.Errorf("corrected k_c %g, fit.CorrectShift %g", c.Rejection.CoefficientUVPerV, sc.Corrected.CoefficientUVPerV)
	}
	// Merging the shared noise-gain and meter rows makes the corrected U no
	// larger than fit.CorrectShift's independent sum.
	if c.Rejection.ExpandedUUVPerV > sc.Corrected.ExpandedUUVPerV*(1+1e-9) {
		t.Errorf("corrected U %g > independent-sum U %g", c.Rejection.ExpandedUUVPerV, sc.Corrected.ExpandedUUVPerV)
	}

	// psrr_worst is psrr_neg here (97.07 < 107.96 dB).
	if w := azRatio(t, res, "U1", plan.PsrrWorst, 0); len(w.DerivedFrom) != 1 || w.DerivedFrom[0] != plan.TestPSRRNeg {
		t.Errorf("psrr_worst derived from %v, want [psrr_neg]", w.DerivedFrom)
	}

	// Closure holds: k_shift = −10.01 = k_p + k_n = 4 − 14.01.
	if len(res.Closures) != 1 {
		t.Fatalf("%d closures, want 1", len(res.Closures))
	}
	cl := res.Closures[0]
	if !cl.Formed || cl.Closure.Mismatch {
		t.Errorf("closure formed %v mismatch %v (%.5f ± %.5f µV/V), want formed and consistent",
			cl.Formed, cl.Closure.Mismatch, cl.Closure.ClosureUVPerV, cl.Closure.ExpandedUUVPerV)
	}
	if math.Abs(cl.Closure.ShiftUVPerV-(-10.01)) > 0.002 || math.Abs(cl.Closure.SumUVPerV-(-10.01)) > 0.002 {
		t.Errorf("closure shift %.4f sum %.4f, want −10.01 both", cl.Closure.ShiftUVPerV, cl.Closure.SumUVPerV)
	}
	if !cl.HasKc || !cl.HasKo || math.Abs(cl.KcUVPerV-10) > 0.002 || math.Abs(cl.KnUVPerV+14.01) > 0.002 {
		t.Errorf("four coefficients kc %.4f kp %.4f kn %.4f ko %.4f", cl.KcUVPerV, cl.KpUVPerV, cl.KnUVPerV, cl.KoUVPerV)
	}
	if sum := cl.KcUVPerV + cl.KpUVPerV + cl.KnUVPerV + cl.KoUVPerV; math.Abs(sum) > 0.003 {
		t.Errorf("kc + kp + kn + ko = %.5f, want 0 (no ground pin)", sum)
	}
	// Cross-check the closure value against fit.CheckClosure.
	fc, err := fit.CheckClosure(fit.Quantity{Value: cl.Closure.ShiftUVPerV, StdUnc: 1, DOF: fit.InfDOF},
		q(azRatio(t, res, "U1", plan.TestPSRRPos, 0)), q(azRatio(t, res, "U1", plan.TestPSRRNeg, 0)), 0)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(fc.ClosureUVPerV-cl.Closure.ClosureUVPerV) > 1e-12 {
		t.Errorf("closure %g, fit.CheckClosure %g", cl.Closure.ClosureUVPerV, fc.ClosureUVPerV)
	}
	// Symmetric supply: (kp − kn)/2 = 9.005 µV/V (derived).
	if !cl.Symmetric.Checked || cl.Symmetric.Mismatch || math.Abs(cl.Symmetric.PredictedUVPerV-9.005) > 0.002 {
		t.Errorf("symmetric check %+v", cl.Symmetric)
	}
}

// TestAnalyzeSignConventions runs the same three rail experiments on parts
// whose coefficients have every sign combination, on both op-amp fixtures
// and both common-mode methods, and checks each signed coefficient against
// the physical one it should report.
func TestAnalyzeSignConventions(t *testing.T) {
	truths := []azOpAmp{
		{vos: -40e-6, kc: -5e-6, kp: 3e-6, ko: 0},        // kn = +2
		{vos: 10e-6, kc: 2e-6, kp: -30e-6, ko: -0.5e-6},  // kn = +28.5
		{vos: 0, kc: 0.3e-6, kp: 1e-6, ko: 0.02e-6},      // kn = −1.32
		{vos: 300e-6, kc: -60e-6, kp: -2e-6, ko: 0.1e-6}, // kn = +61.9
	}
	cases := []struct {
		fixture, cm string
		kinds       []string
		// expected "cmrr" coefficient and whether it was corrected
		cmrr      func(o azOpAmp) float64
		corrected bool
	}{
		{plan.FixtureNullingLoop, plan.CMBySupplyShift, []string{plan.TestCMRR, plan.TestPSRRPos, plan.TestPSRRNeg, plan.TestAOL},
			func(o azOpAmp) float64 { return o.kc }, true},
		{plan.FixtureNullingLoop, plan.CMBySupplyShift, []string{plan.TestCMRR, plan.TestPSRRPos, plan.TestPSRRNeg},
			func(o azOpAmp) float64 { return o.kc + o.ko }, false},
		{plan.FixtureNullingLoop, plan.CMByInputDrive, []string{plan.TestCMRR, plan.TestPSRRPos, plan.TestPSRRNeg, plan.TestAOL},
			func(o azOpAmp) float64 { return o.kc }, false},
		{plan.FixtureNoiseGain, plan.CMByInputDrive, []string{plan.TestCMRR, plan.TestPSRRPos, plan.TestPSRRNeg, plan.TestPSRRSym},
			func(o azOpAmp) float64 { return o.kc + o.ko }, false},
		{plan.FixtureNoiseGain, plan.CMBySupplyShift, []string{plan.TestCMRR, plan.TestPSRRPos, plan.TestPSRRNeg},
			func(o azOpAmp) float64 { return o.kc + o.ko }, false},
	}
	for _, tc := range cases {
		for i, o := range truths {
			name := tc.fixture + "/" + tc.cm + "/" + strings.Join(tc.kinds, "+") + "/part" + string(rune('A'+i))
			t.Run(name, func(t *testing.T) {
				p := azOpAmpPlan(tc.fixture, tc.cm, tc.kinds...)
				rs := azNewBench(p, uint64(10+i), 0.5e-6).opAmpReadings(nil, "U1", 0, 25, o)
				res := azAnalyze(t, p, rs, Inputs{})
				// The noise-gain stage's implicit output term scales every
				// coefficient by 1/(1 − ko·K): allow for it.
				tol := func(want float64) float64 { return 0.002 + math.Abs(want)*math.Abs(o.ko)*1000 }
				want := tc.cmrr(o) * 1e6
				// Where the output moves with the common mode and no aol
				// test corrects it, the figure is k_c + k_o: it is only
				// ever called cmrr_uncorrected, never cmrr.
				onlyUncorrected := !tc.corrected && !(tc.fixture == plan.FixtureNullingLoop && tc.cm == plan.CMByInputDrive)
				name := plan.TestCMRR
				if onlyUncorrected {
					name = ResultCMRRUncorrected
					if azHasRatio(res, "U1", plan.TestCMRR) {
						t.Errorf("k_c + k_o reported as cmrr")
					}
				}
				c := azRatio(t, res, "U1", name, 0)
				azCheckCoef(t, c, want, tol(want))
				if c.AOLCorrected != tc.corrected || azHasRatio(res, "U1", ResultCMRRUncorrected) != (tc.corrected || onlyUncorrected) {
					t.Errorf("corrected %v, cmrr_uncorrected present %v; want %v", c.AOLCorrected, azHasRatio(res, "U1", ResultCMRRUncorrected), tc.corrected)
				}
				if onlyUncorrected && !azHasNote(c, "k_c + k_o, not CMRR") {
					t.Errorf("notes %q do not say what the figure contains", c.Notes)
				}
				azCheckCoef(t, azRatio(t, res, "U1", plan.TestPSRRPos, 0), o.kp*1e6, tol(o.kp*1e6))
				azCheckCoef(t, azRatio(t, res, "U1", plan.TestPSRRNeg, 0), o.kn()*1e6, tol(o.kn()*1e6))
				if azHasRatio(res, "U1", plan.TestPSRRSym) {
					w := (o.kp - o.kn()) / 2 * 1e6
					sym := azRatio(t, res, "U1", plan.TestPSRRSym, 0)
					azCheckCoef(t, sym, w, tol(w))
					// Per volt of span; per volt of one rail 20·log10(2) =
					// 6.02 dB lower (derived).
					if !azHasNote(sym, "per volt of total supply span") || !azHasNote(sym, "6.02 dB lower") {
						t.Errorf("psrr_sym notes %q do not state the convention", sym.Notes)
					}
				}
				if azHasRatio(res, "U1", plan.TestAOL) && o.ko != 0 {
					azCheckCoef(t, azRatio(t, res, "U1", plan.TestAOL, 0), o.ko*1e6, 0.002)
				}
				// Closure: formed whenever the shift can be built, and
				// consistent on consistent data.
				wantClosure := tc.cm == plan.CMBySupplyShift || tc.fixture == plan.FixtureNoiseGain || azHasRatio(res, "U1", plan.TestAOL)
				formed := len(res.Closures) == 1 && res.Closures[0].Formed
				if formed != wantClosure {
					t.Fatalf("closure formed %v, want %v", formed, wantClosure)
				}
				if formed && res.Closures[0].Closure.Mismatch {
					cl := res.Closures[0].Closure
					t.Errorf("consistent data flagged: closure %.5f ± %.5f µV/V", cl.ClosureUVPerV, cl.ExpandedUUVPerV)
				}
				// psrr_worst is the lower-dB one of the two.
				pp, pn := azRatio(t, res, "U1", plan.TestPSRRPos, 0), azRatio(t, res, "U1", plan.TestPSRRNeg, 0)
				w := azRatio(t, res, "U1", plan.PsrrWorst, 0)
				wantFrom := plan.TestPSRRPos
				if math.Abs(o.kn()) > math.Abs(o.kp) {
					wantFrom = plan.TestPSRRNeg
				}
				if w.DerivedFrom[0] != wantFrom || w.Rejection.RatioDB != math.Min(pp.Rejection.RatioDB, pn.Rejection.RatioDB) {
					t.Errorf("psrr_worst from %v at %.2f dB; psrr_pos %.2f, psrr_neg %.2f", w.DerivedFrom, w.Rejection.RatioDB, pp.Rejection.RatioDB, pn.Rejection.RatioDB)
				}
			})
		}
	}
}

// TestAnalyzeClosureFlagsInconsistency breaks superposition on purpose:
// the psrr_pos sweep sees a k_p 0.5 µV/V larger than the part has during
// the supply-shift sweep (as a thermal tail or a fixture fault would), and
// the closure must say so; with consistent data it must not.
func TestAnalyzeClosureFlagsInconsistency(t *testing.T) {
	for _, tc := range []struct {
		name     string
		injectUV float64
		mismatch bool
	}{
		{"consistent", 0, false},
		{"kp off by 0.5 µV/V", 0.5, true},
		{"kp off by -0.2 µV/V", -0.2, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMBySupplyShift, plan.TestCMRR, plan.TestPSRRPos, plan.TestPSRRNeg)
			sim := azNewBench(p, 42, 1e-6)
			o := azWorked
			bad := o
			bad.kp += tc.injectUV * 1e-6
			bad.kc -= tc.injectUV * 1e-6 // keeps kn of the bad part equal to the real one
			var rs []journal.Reading
			rs = sim.run(rs, "U1", plan.TestCMRR, 0, 25, func(_ int, s plan.BenchState) float64 { return o.meter(p, s) })
			rs = sim.run(rs, "U1", plan.TestPSRRPos, 0, 25, func(_ int, s plan.BenchState) float64 { return bad.meter(p, s) })
			rs = sim.run(rs, "U1", plan.TestPSRRNeg, 0, 25, func(_ int, s plan.BenchState) float64 { return o.meter(p, s) })
			res := azAnalyze(t, p, rs, Inputs{Meter: estimate.Accuracy{GainPPM: 20}, Stimulus: estimate.Accuracy{GainPPM: 300}})
			if len(res.Closures) != 1 || !res.Closures[0].Formed {
				t.Fatalf("closures %+v", res.Closures)
			}
			cl := res.Closures[0].Closure
			if cl.Mismatch != tc.mismatch {
				t.Errorf("mismatch %v, want %v (closure %.4f ± %.4f µV/V)", cl.Mismatch, tc.mismatch, cl.ClosureUVPerV, cl.ExpandedUUVPerV)
			}
			if math.Abs(cl.ClosureUVPerV-(-tc.injectUV)) > 0.01 {
				t.Errorf("closure %.4f µV/V, want %.4f", cl.ClosureUVPerV, -tc.injectUV)
			}
			if got := res.Summary.ClosureMismatches; (got == 1) != tc.mismatch {
				t.Errorf("summary counts %d closure mismatches", got)
			}
			// The noise gain K is one input to all three coefficients: its
			// tolerance scales them alike, so it enters the closure only in
			// proportion to the closure itself. A 5 % tolerance (which
			// would add 1.96·5 %/√3·|k| ≈ 1.1 µV/V per coefficient if taken
			// independently) must leave U nearly unchanged.
			q := *p
			q.Fixture.NoiseGainTolerance = 0.05
			wide := azAnalyze(t, &q, rs, Inputs{Meter: estimate.Accuracy{GainPPM: 20}, Stimulus: estimate.Accuracy{GainPPM: 300}})
			cw := wide.Closures[0].Closure
			extra := 2 * math.Abs(cl.ClosureUVPerV) * 0.05 / math.Sqrt(3) // ≤ k·|closure|·u_rel
			if cw.ExpandedUUVPerV > cl.ExpandedUUVPerV+extra+1e-6 {
				t.Errorf("closure U %.4f µV/V with a 5 %% K tolerance, %.4f without", cw.ExpandedUUVPerV, cl.ExpandedUUVPerV)
			}
		})
	}
}

// TestAnalyzeDecisions checks that each result is judged against its own
// limit by the plan's rule, with the zones of ILAC-G8:09/2019 §4.2 placed
// relative to the result's U (e.g. TL = 85, U = 1.5: 87 pass, 86
// conditional pass, 84 conditional fail, 83 fail — here scaled to the
// result's own U): the limit is put at value − 2U, value − U/2, value + U/2
// and value + 2U.
func TestAnalyzeDecisions(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR, plan.TestPSRRPos, plan.TestPSRRNeg)
	p.Fixture.NoiseGainTolerance = 0.02 // a wide U, so the zones are far apart
	rs := azNewBench(p, 5, 1e-6).opAmpReadings(nil, "U1", 0, 25, azWorked)
	first := azAnalyze(t, p, rs, Inputs{})
	base := azRatio(t, first, "U1", plan.PsrrWorst, 0)
	if base.Judged {
		t.Fatal("judged without a limit")
	}
	v, U := base.Rejection.RatioDB, base.Rejection.ExpandedUDB
	for _, tc := range []struct {
		rule    string
		offsetU float64
		want    fit.State
	}{
		{plan.RuleGuarded, -2, fit.StatePass},
		{plan.RuleGuarded, -0.5, fit.StateConditionalPass},
		{plan.RuleGuarded, 0.5, fit.StateConditionalFail},
		{plan.RuleGuarded, 2, fit.StateFail},
		{plan.RuleSimple, -2, fit.StatePass},
		{plan.RuleSimple, -0.5, fit.StatePass},
		{plan.RuleSimple, 0.5, fit.StateFail},
		{plan.RuleSimple, 2, fit.StateFail},
	} {
		q := *p
		q.Decision.Rule = tc.rule
		q.Limits = plan.Limits{plan.PsrrWorst: v + tc.offsetU*U, plan.TestPSRRPos: 200}
		res := azAnalyze(t, &q, rs, Inputs{})
		w := azRatio(t, res, "U1", plan.PsrrWorst, 0)
		if !w.Judged || w.Decision.State != tc.want {
			t.Errorf("%s, limit value%+gU: judged %v state %q, want %q", tc.rule, tc.offsetU, w.Judged, w.Decision.State, tc.want)
		}
		wantRule := fit.RuleGuarded
		if tc.rule == plan.RuleSimple {
			wantRule = fit.RuleSimple
		}
		if w.Decision.Rule != wantRule || res.DecisionRule != wantRule {
			t.Errorf("rule %q / %q, want %q", w.Decision.Rule, res.DecisionRule, wantRule)
		}
		// psrr_pos has its own limit (200 dB: fails); psrr_neg and cmrr none.
		if pp := azRatio(t, res, "U1", plan.TestPSRRPos, 0); !pp.Judged || pp.Decision.LimitDB != 200 || pp.Decision.State != fit.StateFail {
			t.Errorf("psrr_pos judged %v limit %g state %q", pp.Judged, pp.Decision.LimitDB, pp.Decision.State)
		}
		if azRatio(t, res, "U1", plan.TestPSRRNeg, 0).Judged || azRatio(t, res, "U1", plan.TestCMRR, 0).Judged {
			t.Error("results without a limit were judged")
		}
		// Unit verdict: psrr_pos fails, so the unit fails.
		if u := res.Summary.PerUnit[0]; !u.Judged || u.State != fit.StateFail {
			t.Errorf("unit verdict %+v", u)
		}
	}
}

// TestAnalyzeUnresolved: a part whose common-mode coefficient is zero
// cannot be told from zero; the result is a one-sided lower bound
// (common practice, after EURACHEM/CITAC CG4 Appendix F on results near
// the detection limit). Under simple acceptance (ILAC-G8:09/2019 §4.2.1,
// w = 0) it is judged on the measured value; under guarded acceptance on
// the bound.
func TestAnalyzeUnresolved(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	p.Limits = plan.Limits{plan.TestCMRR: 120}
	p.Decision.Rule = plan.RuleSimple
	rs := azNewBench(p, 9, 5e-6).opAmpReadings(nil, "U1", 0, 25, azOpAmp{kc: 0, kp: 1e-6})
	res := azAnalyze(t, p, rs, Inputs{})
	c := azRatio(t, res, "U1", plan.TestCMRR, 0)
	if c.Rejection.Resolved {
		t.Fatalf("resolved: k = %g ± %g µV/V", c.Rejection.CoefficientUVPerV, c.Rejection.ExpandedUUVPerV)
	}
	db, lb := c.ValueDB()
	if !lb || db != c.Rejection.LowerBoundDB || db < 120 {
		t.Errorf("value %.1f dB lower bound %v", db, lb)
	}
	if c.Decision.JudgedOnLowerBound || c.Decision.State != fit.StatePass || c.Decision.JudgedDB < db {
		t.Errorf("decision %+v", c.Decision)
	}
	p.Decision.Rule = plan.RuleGuarded
	res = azAnalyze(t, p, rs, Inputs{})
	c = azRatio(t, res, "U1", plan.TestCMRR, 0)
	if !c.Decision.JudgedOnLowerBound || c.Decision.State != fit.StatePass {
		t.Errorf("guarded decision %+v", c.Decision)
	}
}

// TestAnalyzeReadingHandling: overloads are left out, settle timeouts are
// kept and counted, the read-back stimulus is used when read back, an
// unknown test becomes a problem, and a stimulus that did not move gives a
// problem rather than an error.
func TestAnalyzeReadingHandling(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR, plan.TestPSRRPos)
	sim := azNewBench(p, 3, 1e-6)
	// The source delivers 0.2 % more than programmed and reads it back.
	sim.readBackGain = 0.002
	rs := sim.opAmpReadings(nil, "U1", 0, 25, azWorked)
	rs[2].Flags = []string{journal.FlagOverload}
	rs[2].MeterVolts = 9.9e37
	rs[3].Flags = []string{journal.FlagSettleTimeout}
	rs = append(rs, journal.Reading{Unit: "U1", Test: plan.TestAOL, TemperatureC: 25, MeterVolts: 1})
	// U2's psrr_pos never moved.
	for i := 0; i < 4; i++ {
		rs = append(rs, journal.Reading{Unit: "U2", Test: plan.TestPSRRPos, TemperatureC: 25, SetVolts: 1, ReadVolts: 1, MeterVolts: float64(i) * 1e-6, Step: i})
	}
	res := azAnalyze(t, p, rs, Inputs{})
	c := azRatio(t, res, "U1", plan.TestCMRR, 0)
	n := len(plan.OrderLevels(p.Tests[0].Levels, p.Tests[0].Order)) // points of one pass
	if c.ExcludedPoints != 1 || c.FlaggedPoints != 1 || c.Points != n-1 || c.ReadBackPoints != n-1 {
		t.Errorf("points %d excluded %d flagged %d read back %d; want %d, 1, 1, %d", c.Points, c.ExcludedPoints, c.FlaggedPoints, c.ReadBackPoints, n-1, n-1)
	}
	// With the read-back stimulus the coefficient is exact; with the
	// programmed one it would be 0.2 % high (10.02 instead of 10.00).
	azCheckCoef(t, c, 10, 0.003)
	azCheckCoef(t, azRatio(t, res, "U1", plan.TestPSRRPos, 0), 4, 0.003)
	var unknown, still bool
	for _, pr := range res.Problems {
		if pr.Test == plan.TestAOL && strings.Contains(pr.Problem, "does not have") {
			unknown = true
		}
		if pr.Unit == "U2" && pr.Test == plan.TestPSRRPos && strings.Contains(pr.Problem, "shows no variation") {
			still = true
		}
	}
	if !unknown || !still || res.Summary.Problems != len(res.Problems) {
		t.Errorf("problems %+v", res.Problems)
	}
}

// TestAnalyzeDriftTerm: a steady meter drift of 20 µV/s with 3 s per
// point. In ascending order time tracks the level, so the drift term cannot
// be fitted: it is dropped with a note and the slope carries the drift
// (20e-6·3/5 V/V at the meter per 5 V step, /K = 0.012 µV/V at the input).
// In the plan's zigzag order the drift term separates it.
func TestAnalyzeDriftTerm(t *testing.T) {
	const driftVPerS, stepS, K = 20e-6, 3.0, 1000.0
	truth := azOpAmp{kc: 1e-6}

	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	p.Tests[0].Order = plan.OrderAscending
	sim := azNewBench(p, 4, 0.2e-6)
	sim.driftVPerS, sim.stepS = driftVPerS, stepS
	c := azRatio(t, azAnalyze(t, p, sim.opAmpReadings(nil, "U1", 0, 25, truth), Inputs{}), "U1", plan.TestCMRR, 0)
	if c.DriftFitted || !strings.Contains(strings.Join(c.Notes, ";"), "drift term dropped") {
		t.Errorf("ascending: drift fitted %v, notes %v", c.DriftFitted, c.Notes)
	}
	bias := driftVPerS * stepS / 5 / K * 1e6
	if got := c.Rejection.CoefficientUVPerV; math.Abs(got-(1+bias)) > 0.001 {
		t.Errorf("ascending: %.5f µV/V, want the drift-biased %.5f", got, 1+bias)
	}

	p = azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	p.Tests[0].Repeats = 2
	sim = azNewBench(p, 4, 0.2e-6)
	sim.driftVPerS, sim.stepS = driftVPerS, stepS
	c = azRatio(t, azAnalyze(t, p, sim.opAmpReadings(nil, "U1", 0, 25, truth), Inputs{}), "U1", plan.TestCMRR, 0)
	if !c.DriftFitted || math.Abs(c.Line.Drift.Value-driftVPerS) > 0.01*driftVPerS {
		t.Errorf("zigzag: drift fitted %v: %g V/s, want %g", c.DriftFitted, c.Line.Drift.Value, driftVPerS)
	}
	azCheckCoef(t, c, 1, 0.001)
	if len(c.Repeats) != 2 {
		t.Errorf("%d repeat values, want 2", len(c.Repeats))
	}
}

// TestAnalyzeDriftNearlyCollinear: ascending levels whose settle times
// vary a little make time and level nearly, not exactly, collinear; the
// fit then succeeds, but the drift term's variance inflation 1/(1 − r²)
// (Marquardt 1970) is large and the result says so.
func TestAnalyzeDriftNearlyCollinear(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	p.Tests[0].Order = plan.OrderAscending
	sim := azNewBench(p, 4, 0.2e-6)
	rs := sim.opAmpReadings(nil, "U1", 0, 25, azOpAmp{kc: 1e-6})
	for i := range rs {
		rs[i].BenchSeconds += 0.3 * math.Sin(7*float64(i)) // settle times vary by ±0.3 s
	}
	c := azRatio(t, azAnalyze(t, p, rs, Inputs{}), "U1", plan.TestCMRR, 0)
	if !c.DriftFitted || !azHasNote(c, "nearly collinear") {
		t.Errorf("drift fitted %v, notes %q", c.DriftFitted, c.Notes)
	}
	// The zigzag order of the same plan is not noted.
	p.Tests[0].Order = plan.OrderZigzag
	c = azRatio(t, azAnalyze(t, p, azNewBench(p, 4, 0.2e-6).opAmpReadings(nil, "U1", 0, 25, azOpAmp{kc: 1e-6}), Inputs{}), "U1", plan.TestCMRR, 0)
	if !c.DriftFitted || azHasNote(c, "nearly collinear") {
		t.Errorf("zigzag: drift fitted %v, notes %q", c.DriftFitted, c.Notes)
	}
}

// TestAnalyzeTemperatureConditions: readings are grouped by temperature
// index, with small measured wander kept together, and split where an
// index holds readings far apart in temperature.
func TestAnalyzeTemperatureConditions(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	p.Temperature.Mode = plan.TempChamber
	p.Temperature.PointsCelsius = []float64{-40, 25, 85}
	sim := azNewBench(p, 6, 1e-6)
	var rs []journal.Reading
	for ti, tc := range p.Temperature.PointsCelsius {
		before := len(rs)
		rs = sim.opAmpReadings(rs, "U1", ti, tc, azWorked)
		for i := before; i < len(rs); i++ {
			rs[i].TemperatureC += 0.3 * math.Sin(float64(i)) // chamber wander ±0.3 °C
		}
	}
	res := azAnalyze(t, p, rs, Inputs{})
	if len(res.Conditions) != 3 {
		t.Fatalf("%d conditions, want 3: %+v", len(res.Conditions), res.Conditions)
	}
	for i, c := range res.Conditions {
		if c.SetPointC != p.Temperature.PointsCelsius[i] || math.Abs(c.TemperatureC-c.SetPointC) > 0.3 {
			t.Errorf("condition %d: %+v", i, c)
		}
	}
	// Readings that lost their index (all 0) still split by temperature.
	for i := range rs {
		rs[i].TempIndex = 0
	}
	res = azAnalyze(t, p, rs, Inputs{})
	if len(res.Conditions) != 3 || len(res.Ratios) != 3 {
		t.Errorf("%d conditions, %d ratios; want 3 and 3", len(res.Conditions), len(res.Ratios))
	}
}

func TestAnalyzeRefusesBadPlans(t *testing.T) {
	good := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	for _, tc := range []struct {
		name string
		edit func(p *plan.Plan)
		want string
	}{
		{"no noise gain", func(p *plan.Plan) { p.Fixture.NoiseGain = 0 }, "noise_gain"},
		{"unknown fixture", func(p *plan.Plan) { p.Fixture.Kind = "bridge" }, "fixture.kind"},
		{"unknown rule", func(p *plan.Plan) { p.Decision.Rule = "lenient" }, "decision.rule"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := *good
			tc.edit(&p)
			_, err := Analyze(&p, nil, Inputs{})
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one naming %s", err, tc.want)
			}
		})
	}
	if _, err := Analyze(nil, nil, Inputs{}); err == nil {
		t.Error("nil plan accepted")
	}
	res, err := Analyze(good, nil, Inputs{})
	if err != nil || len(res.Ratios) != 0 {
		t.Errorf("no readings: %v, %d ratios", err, len(res.Ratios))
	}
}

// TestAnalyzeNonlinearity: a part whose offset also grows with the square
// of the common mode, ΔV_IO = kc·L + q·L² with q = 0.05 µV/V². On the
// symmetric levels −10 … 10 V the straight line misses the centre by
// q·(mean of L²) = 0.05·50 = 2.5 µV at L = 0 (input referred); the
// quadratic term is significant, so the quadratic term is fitted whether
// or not the plan asked for it, and the coefficient is the slope at the
// centre of the sweep (L = 0), i.e. kc. The straight line would leave the
// curvature in its residuals: its slope's standard error is larger than
// the fitted curve's.
func TestAnalyzeNonlinearity(t *testing.T) {
	for _, quad := range []bool{false, true} {
		p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
		p.Tests[0].QuadraticTerm = quad
		o := azWorked
		const q = 0.05e-6
		rs := azNewBench(p, 8, 0.5e-6).run(nil, "U1", plan.TestCMRR, 0, 25, func(_ int, s plan.BenchState) float64 {
			return o.meter(p, s) + p.Fixture.NoiseGain*q*s.CMVolts*s.CMVolts
		})
		c := azRatio(t, azAnalyze(t, p, rs, Inputs{}), "U1", plan.TestCMRR, 0)
		nl := c.Nonlinearity
		if !c.NonlinearityChecked || !nl.QuadSignificant || math.Abs(nl.MaxDeviationUV-2.5) > 0.01 || nl.AtStimulusVolts != 0 {
			t.Errorf("quadratic %v: nonlinearity %+v", quad, nl)
		}
		if !c.QuadFitted {
			t.Errorf("plan quadratic %v: quad not fitted", quad)
		}
		if want := map[bool]string{false: "significant curvature", true: "quadratic term fitted (plan)"}[quad]; !azHasNote(c, want) || !azHasNote(c, "slope at the centre of the sweep (0 V)") {
			t.Errorf("notes %q, want %q", c.Notes, want)
		}
		azCheckCoef(t, c, 10, 0.002) // symmetric levels: the line's slope is kc too
		x, y := make([]float64, len(rs)), make([]float64, len(rs))
		for i, r := range rs {
			x[i], y[i] = r.SetVolts, r.MeterVolts
		}
		lin, err := fit.Line(x, y, fit.LineOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if typeA := c.Rejection.Budget.Rows[0].StdUncertainty; !(typeA < lin.Slope.StdErr/2) {
			t.Errorf("Type A of the curve %g V/V not below half the straight line's %g V/V", typeA, lin.Slope.StdErr)
		}
	}
	// Levels 0 … 10 V: centre 5 V, slope there kc + 2q·5 V = 10.5 µV/V
	// (calculus).
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	p.Tests[0].Levels = []float64{0, 2.5, 5, 7.5, 10}
	rs := azNewBench(p, 8, 0.5e-6).run(nil, "U1", plan.TestCMRR, 0, 25, func(_ int, s plan.BenchState) float64 {
		return azWorked.meter(p, s) + p.Fixture.NoiseGain*0.05e-6*s.CMVolts*s.CMVolts
	})
	c := azRatio(t, azAnalyze(t, p, rs, Inputs{}), "U1", plan.TestCMRR, 0)
	if !c.QuadFitted || !azHasNote(c, "centre of the sweep (5 V)") {
		t.Errorf("0…10 V: quad %v notes %q", c.QuadFitted, c.Notes)
	}
	azCheckCoef(t, c, 10.5, 0.002)
}

// TestAnalyzeUncorrectedBoundByRatedAOL: a supply-shift common-mode result
// without an aol test is k_c + k_o (derived from k_c + k_p + k_n + k_o = 0,
// no published source); with the part's rated A_OL ≥ 100 dB, |k_o| ≤
// 10 µV/V, so a measured 25 µV/V brackets CMRR between
// 20·log10(10⁶/35) = 89.12 dB and 20·log10(10⁶/15) = 96.48 dB, and the
// true 20·log10(10⁶/20) = 93.98 dB lies inside.
func TestAnalyzeUncorrectedBoundByRatedAOL(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMBySupplyShift, plan.TestCMRR)
	p.Part.AOLMinDB = 100
	rs := azNewBench(p, 3, 1e-9).opAmpReadings(nil, "U1", 0, 25, azOpAmp{kc: 20e-6, kp: 1e-6, ko: 5e-6})
	res := azAnalyze(t, p, rs, Inputs{})
	c := azRatio(t, res, "U1", ResultCMRRUncorrected, 0)
	if azHasRatio(res, "U1", plan.TestCMRR) {
		t.Fatal("k_c + k_o reported as cmrr")
	}
	if !azHasNote(c, "|k_o| ≤ 10 µV/V against |k| = 25") || !azHasNote(c, "between 89.12 and 96.48 dB") {
		t.Errorf("notes %q", c.Notes)
	}
	p.Part.AOLMinDB = 0
	res = azAnalyze(t, p, rs, Inputs{})
	if c := azRatio(t, res, "U1", ResultCMRRUncorrected, 0); !azHasNote(c, "give part.aol_min_db") {
		t.Errorf("notes without a rated A_OL %q", c.Notes)
	}
}

// TestAnalyzeNoiseGainStageAOL: in a noise-gain stage of K = 1000 a part
// with A_OL = 100 dB (k_o = +10 µV/V) reads every coefficient
// 1/(1 − K·k_o) = 1/0.99 too large (derived, no published source): k_p =
// 20 µV/V reads 20.20 µV/V. Without the rated A_OL the budget does not see
// it (the truth is outside U, and the note says so); with
// part.aol_min_db = 100 a rectangular row of half-width K/A_OL = 1 %
// brings the truth inside U.
func TestAnalyzeNoiseGainStageAOL(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNoiseGain, plan.CMByInputDrive, plan.TestPSRRPos)
	o := azOpAmp{kc: 1e-6, kp: 20e-6, ko: 10e-6}
	rs := azNewBench(p, 5, 1e-9).opAmpReadings(nil, "U1", 0, 25, o)
	c := azRatio(t, azAnalyze(t, p, rs, Inputs{}), "U1", plan.TestPSRRPos, 0)
	if got := c.Rejection.CoefficientUVPerV; math.Abs(got-20/0.99) > 0.005 {
		t.Fatalf("measured %.4f µV/V, want 20/0.99 = %.4f", got, 20/0.99)
	}
	if math.Abs(c.Rejection.CoefficientUVPerV-20) <= c.Rejection.ExpandedUUVPerV || !azHasNote(c, "give part.aol_min_db") {
		t.Errorf("without the rated A_OL: %.4f ± %.4f µV/V, notes %q", c.Rejection.CoefficientUVPerV, c.Rejection.ExpandedUUVPerV, c.Notes)
	}
	p.Part.AOLMinDB = 100
	c = azRatio(t, azAnalyze(t, p, rs, Inputs{}), "U1", plan.TestPSRRPos, 0)
	if math.Abs(c.Rejection.CoefficientUVPerV-20) > c.Rejection.ExpandedUUVPerV || !azHasNote(c, "within ±1 %") {
		t.Errorf("with the rated A_OL: %.4f ± %.4f µV/V, notes %q", c.Rejection.CoefficientUVPerV, c.Rejection.ExpandedUUVPerV, c.Notes)
	}
	// The row: u = 1e-5/√3 V/V, sensitivity −K·k = −20.2e3 µV/V per V/V.
	var row *fit.BudgetRow
	for i := range c.Rejection.Budget.Rows {
		if strings.HasPrefix(c.Rejection.Budget.Rows[i].Name, "open-loop gain in the noise-gain stage") {
			row = &c.Rejection.Budget.Rows[i]
		}
	}
	if row == nil || math.Abs(row.StdUncertainty-1e-5/math.Sqrt(3)) > 1e-12 || math.Abs(row.Sensitivity+1000*c.Rejection.CoefficientUVPerV) > 1e-9 {
		t.Errorf("budget row %+v", row)
	}
}

// TestAnalyzeResumeOffsetStep: a sweep taken in ascending order is broken
// by a resume after its third point, and the restarted bench reads 3 mV
// higher at the meter (an offset step). One line puts the step into the
// slope (and, as misfit, into an inflated U); a separate offset per
// session (journal.Reading.Session) keeps the slope at the truth, within
// a U at the noise level, and the result says so.
func TestAnalyzeResumeOffsetStep(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	p.Tests[0].Order, p.Tests[0].DriftTerm = plan.OrderAscending, false
	rs := azNewBench(p, 9, 0.2e-6).opAmpReadings(nil, "U1", 0, 25, azOpAmp{kc: 1e-6})
	stepped := slices.Clone(rs)
	for i := range stepped {
		if i >= 3 {
			stepped[i].MeterVolts += 3e-3
		}
	}
	plain := azRatio(t, azAnalyze(t, p, stepped, Inputs{}), "U1", plan.TestCMRR, 0)
	ePlain := plain.Rejection.CoefficientUVPerV - 1
	for i := range stepped {
		if i >= 3 {
			stepped[i].Session = 1
		}
	}
	c := azRatio(t, azAnalyze(t, p, stepped, Inputs{}), "U1", plan.TestCMRR, 0)
	e := c.Rejection.CoefficientUVPerV - 1
	t.Logf("error without sessions %.4f µV/V (U %.4f), with %.4f µV/V (U %.4f)", ePlain, plain.Rejection.ExpandedUUVPerV, e, c.Rejection.ExpandedUUVPerV)
	if math.Abs(e) > c.Rejection.ExpandedUUVPerV || !(math.Abs(ePlain) > 10*math.Abs(e)) || !(plain.Rejection.ExpandedUUVPerV > 10*c.Rejection.ExpandedUUVPerV) {
		t.Errorf("with a session offset: error %.4f µV/V, U %.4f; without: error %.4f, U %.4f", e, c.Rejection.ExpandedUUVPerV, ePlain, plain.Rejection.ExpandedUUVPerV)
	}
	if !azHasNote(c, "spans a resume") || len(c.Line.Steps) != 1 || math.Abs(c.Line.Steps[0].Value-3e-3) > 3*c.Line.Steps[0].StdErr {
		t.Errorf("notes %q, steps %+v", c.Notes, c.Line.Steps)
	}
}

// TestMethodTextNamesWhatTheCodeDoes: the workbook's method statement
// names the result names, fit rules and conventions the analysis uses
// (each checked elsewhere against its source); a rename in the code that
// is not carried to the text fails here.
func TestMethodTextNamesWhatTheCodeDoes(t *testing.T) {
	text := strings.Join(MethodText(), "\n")
	for _, want := range []string{ResultCMRRUncorrected, plan.TestPSRRSym, plan.PsrrWorst, "aol_min_db",
		"6.02 dB", "variance inflation exceeds 10", "slope at the centre of the sweep", "each session",
		"97.5 %", "simple acceptance (w = 0) compares the measured value", "Welch–Satterthwaite", psrrSymNote[:28]} {
		if !strings.Contains(text, want) {
			t.Errorf("method text lacks %q", want)
		}
	}
	if maxDriftVIF != 10 {
		t.Errorf("the method text says 10, the code uses %g", float64(maxDriftVIF))
	}
}

// TestAnalyzeRailLeak: supply channels whose steps differ by
// g1 − g2 = 0.4 % move the span by −0.004·L in a supply shift of L, so the
// offset moves by the extra k_sym·Δspan, k_sym = (k_p − k_n)/2
// (superposition, derived, no published source). With both rails read
// back and psrr_pos, psrr_neg measured, the cmrr_uncorrected result is
// k_c + k_o again; with only the cmrr test the leak is noted, not
// corrected.
func TestAnalyzeRailLeak(t *testing.T) {
	o := azOpAmp{kc: 1e-6, kp: 40e-6, ko: 0.5e-6} // k_n = −41.5 µV/V, k_sym = 40.75 µV/V
	const g1, g2 = 2e-3, -2e-3
	leaky := func(p *plan.Plan) []journal.Reading {
		rs := azNewBench(p, 11, 0.2e-6).opAmpReadings(nil, "U1", 0, 25, o)
		ksym := (o.kp - o.kn()) / 2
		for i := range rs {
			if rs[i].Test != plan.TestCMRR {
				continue
			}
			L := rs[i].SetVolts
			rs[i].PosRailVolts, rs[i].NegRailVolts, rs[i].RailsReadBack = 15-L*(1+g1), -15-L*(1+g2), true
			rs[i].MeterVolts += p.Fixture.NoiseGain * ksym * (-(g1 - g2) * L)
		}
		return rs
	}
	want := (o.kc + o.ko) * 1e6
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMBySupplyShift, plan.TestCMRR, plan.TestPSRRPos, plan.TestPSRRNeg)
	c := azRatio(t, azAnalyze(t, p, leaky(p), Inputs{}), "U1", ResultCMRRUncorrected, 0)
	if !c.RailLeakCorrected || !azHasNote(c, "corrected for unequal rail steps") {
		t.Errorf("not corrected: notes %q", c.Notes)
	}
	azCheckCoef(t, c, want, 0.003)
	// The uncorrected fit read k_sym·∂span/∂L = −k_sym·(g1 − g2) =
	// −0.163 µV/V too low; the correction moves it up by as much.
	if math.Abs(c.RailLeakUVPerV-(o.kp-o.kn())/2*(g1-g2)*1e6) > 0.003 {
		t.Errorf("correction %.4f µV/V, want %.4f", c.RailLeakUVPerV, (o.kp-o.kn())/2*(g1-g2)*1e6)
	}
	p = azOpAmpPlan(plan.FixtureNullingLoop, plan.CMBySupplyShift, plan.TestCMRR)
	c = azRatio(t, azAnalyze(t, p, leaky(p), Inputs{}), "U1", ResultCMRRUncorrected, 0)
	if c.RailLeakCorrected || !azHasNote(c, "the rails did not step alike (read-back span change -0.004") {
		t.Errorf("cmrr alone: corrected %v, notes %q", c.RailLeakCorrected, c.Notes)
	}
}
