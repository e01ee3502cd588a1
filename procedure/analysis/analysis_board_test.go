package analysis

import (
	"math"
	"strings"
	"testing"

	"nullbench/fit"
	"nullbench/procedure/estimate"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// TestResistorCMRR checks the worst-case design limits against worked
// examples of the difference amplifier (1+G)/(4t) (Sedra & Smith,
// Microelectronic Circuits, difference-amplifier problem (K+1)/(4ε)) and
// the worst-case combination with the op-amp 1/CMRR_tot = 1/CMRR_R +
// 1/CMRR_OA (Franco, Design with Operational Amplifiers and Analog
// Integrated Circuits; from memory, unverified). dB values to one or two
// decimals.
func TestResistorCMRR(t *testing.T) {
	for _, tc := range []struct {
		gain, tol       float64
		want, wantDB    float64
		tolRatio, tolDB float64
	}{
		{1, 0.001, 500, 54.0, 1e-9, 0.05},
		{10, 0.001, 2750, 68.8, 1e-9, 0.05},
		{100, 0.01, 2525, 68.0, 1e-9, 0.05},
	} {
		got, err := ResistorCMRR(tc.gain, tc.tol)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got-tc.want) > tc.tolRatio*tc.want || math.Abs(fit.DBFromRatio(got)-tc.wantDB) > tc.tolDB {
			t.Errorf("G = %g, t = %g: %g (%.2f dB), want %g (%.1f dB)", tc.gain, tc.tol, got, fit.DBFromRatio(got), tc.want, tc.wantDB)
		}
	}
	// Franco's rule: CMRR_R = 2750 with CMRR_OA = 100 dB → 2676 (68.55 dB).
	c := CombinedCMRR(2750, fit.RatioFromDB(100))
	if math.Abs(c-2676) > 0.5 || math.Abs(fit.DBFromRatio(c)-68.55) > 0.005 {
		t.Errorf("combined %g (%.3f dB), want 2676 (68.55 dB)", c, fit.DBFromRatio(c))
	}
	for _, bad := range [][2]float64{{0, 0.001}, {10, 0}, {-1, 0.01}, {math.Inf(1), 0.01}} {
		if _, err := ResistorCMRR(bad[0], bad[1]); err == nil {
			t.Errorf("ResistorCMRR(%g, %g) accepted", bad[0], bad[1])
		}
	}
}

// azBoard is an amplifier board: differential gain, common-mode gain,
// input-referred supply coefficients per volt of V+ and of V− itself, and
// an output offset (package instrument/sim, "Physics": the board fixture).
type azBoard struct {
	gain, acm, kpb, knb, offV float64
}

func (b azBoard) meter(p *plan.Plan, s plan.BenchState) float64 {
	return b.gain*s.DiffVolts + b.acm*s.CMVolts +
		b.gain*(b.kpb*(s.PosVolts-p.Part.NominalPosVolts)+b.knb*(s.NegVolts-p.Part.NominalNegVolts)) + b.offV
}

func azBoardPlan(kinds ...string) *plan.Plan {
	p := &plan.Plan{
		Campaign: plan.Campaign{Name: "HB-220 acceptance", Lot: "HGT-B-0915"},
		Fixture:  plan.Fixture{Kind: plan.FixtureBoard, BoardGain: 10, ResistorTolerance: 0.001, OpAmpCMRRdB: 100},
		Part: plan.Part{Number: "HB-220", NominalPosVolts: 15, NominalNegVolts: -15, MaxSupplySpanVolts: 36,
			CMHeadroomPosVolts: 2, CMHeadroomNegVolts: 2, CurrentLimitAmps: 0.05},
		Decision: plan.Decision{Rule: plan.RuleGuarded},
		Units:    []plan.Unit{{ID: "B1", Channel: "201"}},
	}
	for _, k := range kinds {
		t := plan.Test{Kind: k, Levels: []float64{-2, -1, 0, 1, 2}, DriftTerm: true}
		if k == plan.TestBoardCMRR {
			t.Levels = []float64{-10, -5, 0, 5, 10}
			t.DiffLevels = []float64{-0.5, -0.25, 0, 0.25, 0.5}
		}
		p.Tests = append(p.Tests, t)
	}
	p.ApplyDefaults()
	return p
}

// TestAnalyzeBoard: a G = 10 difference amplifier whose resistors set
// CMRR = 2750 (A_cm = 10/2750, (1+G)/(4t) with t = 0.1 %: 68.8 dB), with
// PSRR of +5 µV/V per volt of V+ and −20 µV/V per volt of V− (input referred). The
// analysis must recover A_d, A_cm, the CMRR and the signed board PSRRs, and
// show the design limits beside them (2750, 68.79 dB; with a 100 dB op-amp
// 2676, 68.55 dB; resistor matching dominates).
func TestAnalyzeBoard(t *testing.T) {
	p := azBoardPlan(plan.TestBoardCMRR, plan.TestBoardPSRRPos, plan.TestBoardPSRRNeg)
	p.Limits = plan.Limits{plan.TestBoardCMRR: 66, plan.TestBoardPSRRNeg: 90}
	truth := azBoard{gain: 10, acm: 10.0 / 2750, kpb: 5e-6, knb: -20e-6, offV: 1.5e-3}
	sim := azNewBench(p, 21, 2e-6)
	var rs []journal.Reading
	for _, k := range []string{plan.TestBoardCMRR, plan.TestBoardPSRRPos, plan.TestBoardPSRRNeg} {
		rs = sim.run(rs, "B1", k, 0, 25, func(_ int, s plan.BenchState) float64 { return truth.meter(p, s) })
	}
	res := azAnalyze(t, p, rs, Inputs{Meter: estimate.Accuracy{GainPPM: 35}, Stimulus: estimate.Accuracy{GainPPM: 200, OffsetVolts: 0.2e-3}})
	if len(res.Boards) != 1 {
		t.Fatalf("%d boards", len(res.Boards))
	}
	b := res.Boards[0]
	if !b.HasDiffGain || !b.HasCMGain || !b.HasCMRR {
		t.Fatalf("board %+v", b)
	}
	if math.Abs(b.DiffGain.Value-10) > 2*b.DiffGain.StdUnc+1e-6 || math.Abs(b.CMGain.Value-truth.acm) > 3*b.CMGain.StdUnc {
		t.Errorf("A_d %g ± %g, A_cm %g ± %g", b.DiffGain.Value, b.DiffGain.StdUnc, b.CMGain.Value, b.CMGain.StdUnc)
	}
	if math.Abs(b.CMRRRatio-2750) > 2 || math.Abs(b.MeasuredDB-68.79) > 0.01 || b.MeasuredIsLowerBound {
		t.Errorf("CMRR %g = %.3f dB, want 2750 = 68.79 dB", b.CMRRRatio, b.MeasuredDB)
	}
	if !b.HasResistorLimit || b.ResistorLimitRatio != 2750 || math.Abs(b.CombinedLimitDB-68.55) > 0.005 || b.Dominant != "resistor matching" {
		t.Errorf("limits: resistor %g, combined %.3f dB, dominant %q", b.ResistorLimitRatio, b.CombinedLimitDB, b.Dominant)
	}
	if !strings.Contains(b.Comparison, "above the worst-case") {
		t.Errorf("comparison %q", b.Comparison)
	}
	cm := azRatio(t, res, "B1", plan.TestBoardCMRR, 0)
	azCheckCoef(t, cm, 1e6/2750, 0.5)
	if !cm.Judged || cm.Decision.State != fit.StatePass {
		t.Errorf("board_cmrr decision %+v", cm.Decision)
	}
	// The value is fit.BoardCMRR's; the meter gain is one input to A_d and
	// A_cm and cancels, so no meter row survives in the quotient's budget.
	bc, err := fit.BoardCMRR(b.DiffGain, b.CMGain, 0)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(bc.Rejection.CoefficientUVPerV-cm.Rejection.CoefficientUVPerV) > 1e-9 {
		t.Errorf("k %g, fit.BoardCMRR %g", cm.Rejection.CoefficientUVPerV, bc.Rejection.CoefficientUVPerV)
	}
	for _, row := range cm.Rejection.Budget.Rows {
		if row.Name == rowMeterGain && row.Contribution > 1e-12*math.Abs(cm.Rejection.CoefficientUVPerV) {
			t.Errorf("meter gain contributes %g to A_cm/A_d", row.Contribution)
		}
	}
	pp, pn := azRatio(t, res, "B1", plan.TestBoardPSRRPos, 0), azRatio(t, res, "B1", plan.TestBoardPSRRNeg, 0)
	// Meter noise 2 µV on a ±2 V sweep of 10 points: σ(k) = 2e-6/√20/G = 0.045 µV/V.
	azCheckCoef(t, pp, 5, 0.15)
	azCheckCoef(t, pn, -20, 0.15) // per volt of V− itself: the sign of knb
	if pp.DiffGainNominal || math.Abs(pp.NoiseGain-b.DiffGain.Value) > 1e-12 {
		t.Errorf("board PSRR referred by %g (nominal %v), want the measured A_d %g", pp.NoiseGain, pp.DiffGainNominal, b.DiffGain.Value)
	}
	// 20 µV/V = 93.98 dB ≥ 90: pass; board_psrr_pos has no limit.
	if !pn.Judged || pn.Decision.State != fit.StatePass || pp.Judged {
		t.Errorf("decisions: pos judged %v, neg %+v", pp.Judged, pn.Decision)
	}
}

// TestAnalyzeBoardNominalGain: without a differential sweep a board PSRR is
// referred by the nominal board_gain, with its resistor tolerance (±2t
// rectangular) in the budget, and said so.
func TestAnalyzeBoardNominalGain(t *testing.T) {
	p := azBoardPlan(plan.TestBoardPSRRPos)
	p.Fixture.ResistorTolerance = 0.01
	truth := azBoard{gain: 10, kpb: 30e-6}
	rs := azNewBench(p, 22, 2e-6).run(nil, "B1", plan.TestBoardPSRRPos, 0, 25, func(_ int, s plan.BenchState) float64 { return truth.meter(p, s) })
	res := azAnalyze(t, p, rs, Inputs{})
	r := azRatio(t, res, "B1", plan.TestBoardPSRRPos, 0)
	azCheckCoef(t, r, 30, 0.05)
	if !r.DiffGainNominal || r.NoiseGain != 10 {
		t.Errorf("nominal %v, A_d %g", r.DiffGainNominal, r.NoiseGain)
	}
	// The gain row: u_rel = 2t/√3 = 1.155 %, ν = ∞, so U ≥ 1.96·1.155 % of
	// 30 µV/V (k = 1.96 at 95 %, ν = ∞: GUM Table G.2).
	if rel := r.Rejection.ExpandedUUVPerV / 30; rel < 1.96*0.02/math.Sqrt(3) {
		t.Errorf("relative U %.4f lacks the nominal-gain tolerance", rel)
	}
	if len(res.Boards) != 0 {
		t.Errorf("%d board results without a board_cmrr test", len(res.Boards))
	}
}

// TestAnalyzeBoardMeterGainCancels: A_d and A_cm (and the PSRR sweep) are
// read by the same meter, so its gain error is one input with zero net
// sensitivity in A_cm/A_d and ΔV_out/A_d (GUM 5.1.2 with the shared input
// merged): a 1 % meter gain spec must not change their uncertainty, while
// it does enter A_d itself.
func TestAnalyzeBoardMeterGainCancels(t *testing.T) {
	p := azBoardPlan(plan.TestBoardCMRR, plan.TestBoardPSRRNeg)
	truth := azBoard{gain: 10, acm: 10.0 / 2750, knb: -20e-6}
	var rs []journal.Reading
	sim := azNewBench(p, 23, 2e-6)
	for _, k := range []string{plan.TestBoardCMRR, plan.TestBoardPSRRNeg} {
		rs = sim.run(rs, "B1", k, 0, 25, func(_ int, s plan.BenchState) float64 { return truth.meter(p, s) })
	}
	plain := azAnalyze(t, p, rs, Inputs{})
	meter := azAnalyze(t, p, rs, Inputs{Meter: estimate.Accuracy{GainPPM: 10000}})
	for _, name := range []string{plan.TestBoardCMRR, plan.TestBoardPSRRNeg} {
		u0 := azRatio(t, plain, "B1", name, 0).Rejection.ExpandedUUVPerV
		u1 := azRatio(t, meter, "B1", name, 0).Rejection.ExpandedUUVPerV
		if math.Abs(u1-u0) > 1e-9*u0 {
			t.Errorf("%s: U %g without, %g with a 1 %% meter gain spec; want equal", name, u0, u1)
		}
	}
	// A_d alone carries it: u_rel ≥ 1 %/√3.
	if ad := meter.Boards[0].DiffGain; ad.StdUnc/ad.Value < 0.01/math.Sqrt(3) {
		t.Errorf("A_d u_rel %g lacks the meter gain", ad.StdUnc/ad.Value)
	}
}
