package freq

import (
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"sort"
	"strconv"

	"nullbench/fit"
	"nullbench/procedure/analysis"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// This file turns the frequency-response records of the journal
// (journal.ACReading, one sine fit per digitizer channel per record) into
// the input-referred coefficient of the part at each frequency, with a GUM
// budget, a decision against the per-frequency limit, a lower bound where
// the response is below the noise floor, and a single-pole model across
// frequencies checked against the unit's DC result.
//
// At frequency f, with the three records of the runner:
//
//	H = R/S                        response over stimulus, each the complex
//	                               amplitude of an IEEE Std 1057-2017
//	                               §4.1.3.1 three-parameter sine fit
//	M = R_th/S_th                  the same with both channels on the
//	                               stimulus (through calibration): the
//	                               digitizer's channel mismatch
//	G = H/M                        fixture output per volt at the part
//	K(f) = K/(1 + j·f·K/GBW)       the fixture's gain at f: noise gain K
//	                               (board: its gain) with the single-pole
//	                               closed-loop response of an op-amp of
//	                               gain-bandwidth GBW (Sedra & Smith,
//	                               Microelectronic Circuits, frequency
//	                               response of the non-inverting amplifier)
//	k(f) = G/K(f)                  the input-referred coefficient
//	ratio_dB = −20·log10|k(f)|,    phase = arg k(f)
//
// (JESD99B's k_CMR and k_SVR as ratios of input change to input-referred
// offset change, at each frequency.)

// ACFigures are the accuracy figures of a frequency-response instrument as
// the budget needs them (cmd fills them from the profile's [figures]
// table; every value a ± half-width, rectangular, GUM 4.3.7). A missing
// table is nil or NaN: the budget then notes the row as missing.
type ACFigures struct {
	AmplitudeAccuracyPct float64
	Hz                   []float64
	FlatnessDB           []float64
	GainMismatchDB       []float64
	PhaseMismatchDeg     []float64
}

// at interpolates ys at f linearly in log10 f, constant beyond the ends;
// NaN without a table.
func (a *ACFigures) at(ys []float64, f float64) float64 {
	if a == nil || len(a.Hz) == 0 || len(ys) != len(a.Hz) || !(f > 0) {
		return math.NaN()
	}
	xs := a.Hz
	if f <= xs[0] {
		return ys[0]
	}
	for i := 1; i < len(xs); i++ {
		if f <= xs[i] {
			t := (math.Log10(f) - math.Log10(xs[i-1])) / (math.Log10(xs[i]) - math.Log10(xs[i-1]))
			return ys[i-1] + t*(ys[i]-ys[i-1])
		}
	}
	return ys[len(ys)-1]
}

// FreqInputs are the instrument figures and settings of AnalyzeFreq.
type FreqInputs struct {
	Digitizer *ACFigures
	ACMeter   *ACFigures
	// Coverage is the two-sided coverage probability (0 → 0.95).
	Coverage float64
	// DC holds the campaign's DC results, for the check of each pole
	// fit's low-frequency ratio against the unit's DC ratio (nil: none).
	DC *analysis.Results
}

// CalibrationResidualFraction is the part of the digitizer's specified
// channel gain and phase mismatch that a through calibration at the same
// frequency, ranges and minutes earlier is taken to leave (relay path,
// drift): a tenth, rectangular (common practice, no published source).
const CalibrationResidualFraction = 0.1

// FreqPoint is one unit's result at one frequency.
type FreqPoint struct {
	FrequencyHz float64 `json:"frequency_hz"`
	FreqIndex   int     `json:"freq_index"`
	// Instrument is "digitizer" or "ac_meter" (magnitude only).
	Instrument string `json:"instrument"`
	// Rejection holds |k(f)| (µV/V), the ratio in dB with its budget and
	// expanded uncertainty, the resolved flag and the lower bound.
	Rejection fit.Rejection `json:"rejection"`
	// PhaseDeg is arg k(f) in degrees with its expanded uncertainty
	// (HasPhase false for an AC voltmeter).
	PhaseDeg  float64 `json:"phase_deg"`
	UPhaseDeg float64 `json:"u_phase_deg"`
	HasPhase  bool    `json:"has_phase"`
	PhaseDOF  float64 `json:"phase_dof"`
	StimulusV float64 `json:"stimulus_peak_v"` // at the part (channel 1)
	ResponseV float64 `json:"response_peak_v"` // fixture output (channel 2)
	FloorV    float64 `json:"floor_peak_v"`    // channel 2 at f with the generator off
	Records   int     `json:"records"`
	Excluded  int     `json:"excluded"`
	// NoiseFloorDB is the largest ratio the setup resolves at f: the one
	// whose response would equal k = 2 standard uncertainties of the
	// response at the floor (as at DC, EURACHEM/CITAC CG4 Appendix F).
	NoiseFloorDB float64 `json:"noise_floor_db"`
	// The corrections applied: the fixture's gain at f and the channel
	// mismatch removed by the through calibration (channel 2/channel 1).
	FixtureGainDB    float64      `json:"fixture_gain_db"`
	FixturePhaseDeg  float64      `json:"fixture_phase_deg"`
	ThroughGainDB    float64      `json:"through_gain_db"`
	ThroughPhaseDeg  float64      `json:"through_phase_deg"`
	ThroughCorrected bool         `json:"through_corrected"`
	Judged           bool         `json:"judged"`
	Decision         fit.Decision `json:"decision"`
	Notes            []string     `json:"notes,omitempty"`
}

// ValueDB is the figure to report: the ratio, or its lower bound.
func (p *FreqPoint) ValueDB() (db float64, lowerBound bool) {
	if p.Rejection.Resolved {
		return p.Rejection.RatioDB, false
	}
	return p.Rejection.LowerBoundDB, true
}

// FreqResponse is one unit's frequency response for one [[ac_test]] at one
// temperature index.
type FreqResponse struct {
	Unit         string      `json:"unit"`
	Test         string      `json:"test"`     // the [[ac_test]] kind
	Quantity     string      `json:"quantity"` // "CMRR", "PSRR+", ...
	TempIndex    int         `json:"temp_index"`
	TemperatureC float64     `json:"temperature_c"`
	Fixture      string      `json:"fixture"`
	FixtureGain  float64     `json:"fixture_gain"` // K, or the board's gain
	GBWHz        float64     `json:"gbw_hz"`
	Points       []FreqPoint `json:"points"`
	// Pole is the single-pole model fitted to the resolved points
	// (fit.FitPole); PoleNote says why there is none.
	Pole     *fit.PoleFit `json:"pole,omitempty"`
	PoleNote string       `json:"pole_note,omitempty"`
	// The pole fit's low-frequency ratio against the unit's DC result of
	// the same kind and temperature: DiffDB = R_dc(pole) − R_DC, its
	// expanded uncertainty U_diff = √(U_DC² + (k·u_pole)²), Consistent when
	// |DiffDB| ≤ U_diff (an E_n ≤ 1 check, ISO/IEC 17043 B.4.1.1 d).
	DCChecked    bool    `json:"dc_checked"`
	DCRatioDB    float64 `json:"dc_ratio_db,omitempty"`
	DCExpandedDB float64 `json:"dc_expanded_u_db,omitempty"`
	DCDiffDB     float64 `json:"dc_diff_db,omitempty"`
	DCDiffUDB    float64 `json:"dc_diff_u_db,omitempty"`
	DCConsistent bool    `json:"dc_consistent"`
	DCNote       string  `json:"dc_note,omitempty"`
}

// AnalyzeFreq analyses every [[ac_test]] of plan p from the journal's AC
// records. Groups that cannot be analysed are returned as problems.
func AnalyzeFreq(p *plan.Plan, recs []journal.ACReading, in FreqInputs) ([]FreqResponse, []analysis.Problem, error) {
	if p == nil {
		return nil, nil, errors.New("analysis: no plan")
	}
	rule, err := analysis.DecisionRule(p.Decision.Rule)
	if err != nil {
		return nil, nil, err
	}
	cov := in.Coverage
	if cov == 0 {
		cov = fit.DefaultCoverage
	}
	type gkey struct {
		unit, test string
		ti         int
	}
	groups := map[gkey][]journal.ACReading{}
	var order []gkey
	for _, r := range recs {
		k := gkey{r.Unit, r.Test, r.TempIndex}
		if _, ok := groups[k]; !ok {
			order = append(order, k)
		}
		groups[k] = append(groups[k], r)
	}
	var out []FreqResponse
	var probs []analysis.Problem
	for _, k := range order {
		t := acTestOf(p, k.test)
		if t == nil {
			probs = append(probs, analysis.Problem{Unit: k.unit, Test: k.test, TempIndex: k.ti,
				Problem: fmt.Sprintf("ac records of kind %q, which the plan has no [[ac_test]] for; left out", k.test)})
			continue
		}
		fr := FreqResponse{Unit: k.unit, Test: k.test, Quantity: quantityOfAC(k.test), TempIndex: k.ti,
			Fixture: p.Fixture.Kind, GBWHz: p.Part.GBWHz}
		gain, gainTol := fixtureGain(p)
		fr.FixtureGain = gain
		byFreq := map[int][]journal.ACReading{}
		var temps []float64
		for _, r := range groups[k] {
			byFreq[r.FreqIndex] = append(byFreq[r.FreqIndex], r)
			temps = append(temps, r.TemperatureC)
		}
		fr.TemperatureC = roundTenth(mean(temps))
		idx := make([]int, 0, len(byFreq))
		for fi := range byFreq {
			idx = append(idx, fi)
		}
		sort.Ints(idx)
		for _, fi := range idx {
			pt, err := freqPoint(p, t, fi, byFreq[fi], gain, gainTol, in, cov)
			if err != nil {
				probs = append(probs, analysis.Problem{Unit: k.unit, Test: k.test, TempIndex: k.ti, TemperatureC: fr.TemperatureC,
					Problem: fmt.Sprintf("%s: %v", hzText(byFreq[fi][0].FrequencyHz), err)})
				continue
			}
			if lim, ok := t.LimitAtDB(fi); ok {
				d, err := fit.DecideRejection(pt.Rejection, lim, rule)
				if err == nil {
					pt.Judged, pt.Decision = true, d
				}
			}
			fr.Points = append(fr.Points, pt)
		}
		polePlusDC(&fr, in.DC, cov)
		out = append(out, fr)
	}
	return out, probs, nil
}

func acTestOf(p *plan.Plan, kind string) *plan.ACTest {
	for i := range p.ACTests {
		if p.ACTests[i].Kind == kind {
			return &p.ACTests[i]
		}
	}
	return nil
}

func quantityOfAC(kind string) string {
	switch kind {
	case plan.TestCMRR:
		return "CMRR"
	case plan.TestPSRRPos:
		return "PSRR+"
	case plan.TestPSRRNeg:
		return "PSRR−"
	case plan.TestBoardCMRR:
		return "board CMRR"
	case plan.TestBoardPSRRPos:
		return "board PSRR+"
	case plan.TestBoardPSRRNeg:
		return "board PSRR−"
	}
	return kind
}

// fixtureGain is the fixture's DC gain to its output and that gain's
// relative tolerance (half-width): K of a nulling loop or noise-gain
// stage, or a board's nominal gain 1 + R2/R1 whose two resistors each
// carry resistor_tolerance.
func fixtureGain(p *plan.Plan) (gain, tol float64) {
	if p.Fixture.Kind == plan.FixtureBoard {
		return p.Fixture.BoardGain, 2 * p.Fixture.ResistorTolerance
	}
	return p.Fixture.NoiseGain, p.Fixture.NoiseGainTolerance
}

// closedLoop is K/(1 + j·f·K/GBW) (1 without a GBW): the single-pole
// closed-loop gain of a non-inverting stage of noise gain K (Sedra &
// Smith, Microelectronic Circuits, frequency response of the
// non-inverting amplifier).
func closedLoop(f, k, gbw float64) complex128 {
	if !(gbw > 0) {
		return complex(k, 0)
	}
	return complex(k, 0) / complex(1, f*k/gbw)
}

// phasorOf is the complex amplitude A − jB of y = A·cos ωt + B·sin ωt
// (y = Re(P·e^{jωt})).
func phasorOf(c journal.ACChannelFit) complex128 { return complex(c.A, -c.B) }

// relVar returns the variances of the real (relative magnitude) and
// imaginary (phase, rad) parts of dP/P for P = A − jB with cov(A, B), by
// the law of propagation of uncertainty (JCGM 100:2008 §5.1.2; the
// bivariate form of JCGM 102:2011 §6.2): with 1/P = q_r + j·q_i,
// dP/P = (q_r·dA + q_i·dB) + j·(q_i·dA − q_r·dB).
func relVar(c journal.ACChannelFit) (vMag, vPh float64) {
	q := 1 / phasorOf(c)
	qr, qi := real(q), imag(q)
	vaa, vbb, vab := c.Cov[0][0], c.Cov[1][1], c.Cov[0][1]
	vMag = qr*qr*vaa + qi*qi*vbb + 2*qr*qi*vab
	vPh = qi*qi*vaa + qr*qr*vbb - 2*qi*qr*vab
	return math.Max(vMag, 0), math.Max(vPh, 0)
}

// ratioSet is the mean complex ratio channel 2/channel 1 of some records,
// with the variances of its relative magnitude and phase (the mean of the
// per-record fit variances over n, the records independent) and the
// degrees of freedom (Σ(N − 3)).
type ratioSet struct {
	h           complex128
	vMag, vPh   float64
	dof         float64
	s, r        float64 // mean channel 1 and channel 2 amplitudes
	vR          float64 // variance of the channel 2 amplitude
	n, excluded int
}

func ratioOf(recs []journal.ACReading) (ratioSet, error) {
	var rs ratioSet
	var logSum complex128
	for _, r := range recs {
		if len(r.Flags) > 0 || len(r.Channels) < 2 || r.Channels[0].N == 0 || r.Channels[1].N == 0 {
			rs.excluded++
			continue
		}
		s, x := phasorOf(r.Channels[0]), phasorOf(r.Channels[1])
		if s == 0 || x == 0 {
			rs.excluded++
			continue
		}
		logSum += cmplx.Log(x / s)
		m1, p1 := relVar(r.Channels[0])
		m2, p2 := relVar(r.Channels[1])
		rs.vMag += m1 + m2
		rs.vPh += p1 + p2
		rs.dof += float64(r.Channels[0].DOF + r.Channels[1].DOF)
		rs.s += cmplx.Abs(s)
		rs.r += cmplx.Abs(x)
		rs.vR += (m2) * cmplx.Abs(x) * cmplx.Abs(x)
		rs.n++
	}
	if rs.n == 0 {
		return rs, errors.New("no usable record (every one flagged or unfitted)")
	}
	n := float64(rs.n)
	// The geometric mean of the ratios: the mean of log magnitudes and of
	// the phases (records taken minutes apart share one phase origin).
	rs.h = cmplx.Exp(logSum / complex(n, 0))
	rs.vMag /= n * n
	rs.vPh /= n * n
	rs.vR /= n * n
	rs.s /= n
	rs.r /= n
	return rs, nil
}

// floorOf is the mean channel-2 amplitude at f with the generator off.
func floorOf(recs []journal.ACReading, digitizer bool) (float64, bool) {
	sum, n := 0.0, 0
	for _, r := range recs {
		if r.Record != journal.ACFloor || len(r.Flags) > 0 {
			continue
		}
		switch {
		case digitizer && len(r.Channels) >= 2:
			sum += cmplx.Abs(phasorOf(r.Channels[1]))
		case !digitizer && len(r.RMSVolts) >= 2:
			sum += r.RMSVolts[1] * math.Sqrt2
		default:
			continue
		}
		n++
	}
	if n == 0 {
		return 0, false
	}
	return sum / float64(n), true
}

func pick(recs []journal.ACReading, record string) []journal.ACReading {
	var out []journal.ACReading
	for _, r := range recs {
		if r.Record == record {
			out = append(out, r)
		}
	}
	return out
}

const dBPerNeper = 20 / math.Ln10 // 8.686 dB per unit relative change (first order)

func dbRow(name, kind string, uDB float64, dof fit.DOF) fit.BudgetRow {
	dist := fit.DistRectangular
	if kind == "A" {
		dist = fit.DistNormal
	}
	return fit.BudgetRow{Name: name, Kind: kind, Distribution: dist, StdUncertainty: uDB, Unit: "dB", Sensitivity: 1, DOF: dof}
}

// freqPoint analyses the records of one frequency.
func freqPoint(p *plan.Plan, t *plan.ACTest, fi int, recs []journal.ACReading, gain, gainTol float64, in FreqInputs, cov float64) (FreqPoint, error) {
	f := recs[0].FrequencyHz
	pt := FreqPoint{FrequencyHz: f, FreqIndex: fi}
	digitizer := false
	for _, r := range recs {
		if len(r.Channels) > 0 {
			digitizer = true
		}
	}
	kf := closedLoop(f, gain, p.Part.GBWHz)
	if p.Fixture.Kind == plan.FixtureBoard && p.Part.GBWHz > 0 {
		// A difference amplifier of gain G = R2/R1 has noise gain 1 + G:
		// G/(1 + j·f·(1 + G)/GBW) (Sedra & Smith, as above).
		kf = complex(gain, 0) / complex(1, f*(1+gain)/p.Part.GBWHz)
	}
	pt.FixtureGainDB = 20 * math.Log10(cmplx.Abs(kf))
	pt.FixturePhaseDeg = cmplx.Phase(kf) * 180 / math.Pi
	var rows []fit.BudgetRow
	var h, m complex128
	var stim ratioSet
	var phaseVar float64
	var phaseDOF float64
	floorV, haveFloor := floorOf(recs, digitizer)
	if digitizer {
		pt.Instrument, pt.HasPhase = "digitizer", true
		var err error
		stim, err = ratioOf(pick(recs, journal.ACStimulus))
		if err != nil {
			return pt, fmt.Errorf("stimulus records: %w", err)
		}
		pt.Records, pt.Excluded = stim.n, stim.excluded
		h = stim.h
		rows = append(rows, dbRow("sine fits of the stimulus records (IEEE 1057 three-parameter, Type A)", "A", dBPerNeper*math.Sqrt(stim.vMag), fit.DOF(stim.dof)))
		phaseVar, phaseDOF = stim.vPh, stim.dof
		th, err := ratioOf(pick(recs, journal.ACThrough))
		if err == nil {
			m = th.h
			pt.ThroughCorrected = true
			rows = append(rows, dbRow("sine fits of the through-calibration records (Type A)", "A", dBPerNeper*math.Sqrt(th.vMag), fit.DOF(th.dof)))
			phaseVar += th.vPh
			phaseDOF = welch2(stim.vPh, stim.dof, th.vPh, th.dof)
		} else {
			m = 1
			pt.Notes = append(pt.Notes, "no usable through-calibration record: the digitizer's channel mismatch is not removed, its specification is in the budget instead")
		}
		d := in.Digitizer
		gm, pm := d.at(d.gainMismatchTable(), f), d.at(d.phaseMismatchTable(), f)
		switch {
		case math.IsNaN(gm):
			pt.Notes = append(pt.Notes, "the digitizer profile gives no gain_mismatch_db: the calibration residual is not in the budget")
		case pt.ThroughCorrected:
			rows = append(rows, dbRow(fmt.Sprintf("through-calibration residual: %.0f %% of the channel gain mismatch ±%.3g dB (common practice, no published source)", 100*CalibrationResidualFraction, gm),
				"B", fit.RectangularStdUnc(CalibrationResidualFraction*gm), fit.InfDOF))
		default:
			rows = append(rows, dbRow(fmt.Sprintf("digitizer channel gain mismatch ±%.3g dB (profile), not calibrated", gm), "B", fit.RectangularStdUnc(gm), fit.InfDOF))
		}
		if !math.IsNaN(pm) {
			frac := 1.0
			if pt.ThroughCorrected {
				frac = CalibrationResidualFraction
			}
			u := fit.RectangularStdUnc(frac*pm) * math.Pi / 180
			phaseVar += u * u
		}
		if fl := d.at(d.flatnessTable(), f); !math.IsNaN(fl) {
			// Flatness common to both channels cancels in the ratio.
			r := dbRow(fmt.Sprintf("digitizer flatness ±%.3g dB (profile; common to both channels, cancels in the ratio)", fl), "B", fit.RectangularStdUnc(fl), fit.InfDOF)
			r.Sensitivity = 0
			rows = append(rows, r)
		}
		if acc := d.accuracyPct(); !math.IsNaN(acc) {
			// So does the gain accuracy: both channels' errors on their
			// ranges are in M as well as in H (same ranges, same f).
			r := dbRow(fmt.Sprintf("digitizer amplitude accuracy ±%.3g %% (profile; removed with the channel mismatch by the through calibration)", acc),
				"B", fit.RectangularStdUnc(dBPerNeper*acc/100), fit.InfDOF)
			if pt.ThroughCorrected {
				r.Sensitivity = 0
			}
			rows = append(rows, r)
		}
		pt.StimulusV, pt.ResponseV = stim.s, stim.r
	} else {
		pt.Instrument = "ac_meter"
		var err error
		h, pt.Records, pt.Excluded, err = rmsRatio(pick(recs, journal.ACStimulus), floorV)
		if err != nil {
			return pt, fmt.Errorf("stimulus readings: %w", err)
		}
		if mth, _, _, err := rmsRatio(pick(recs, journal.ACThrough), 0); err == nil {
			m = mth
			pt.ThroughCorrected = true
		} else {
			m = 1
		}
		st := pick(recs, journal.ACStimulus)
		pt.StimulusV, pt.ResponseV = meanRMS(st, 0)*math.Sqrt2, meanRMS(st, 1)*math.Sqrt2
		if sd, n := logScatter(st, floorV); n >= 2 {
			rows = append(rows, dbRow("scatter of the AC voltmeter's readings (Type A)", "A", dBPerNeper*sd/math.Sqrt(float64(n)), fit.DOF(n-1)))
		} else {
			pt.Notes = append(pt.Notes, "a single AC voltmeter record per point: no Type A estimate of the readings' scatter (records ≥ 2 gives one)")
		}
		a := in.ACMeter
		if acc := a.accuracyPct(); !math.IsNaN(acc) {
			// The two inputs read levels decades apart, on different
			// ranges: their accuracies do not cancel in the ratio.
			rows = append(rows, dbRow(fmt.Sprintf("AC voltmeter accuracy ±%.3g %% of reading, each of two inputs (profile)", acc), "B",
				math.Sqrt2*fit.RectangularStdUnc(dBPerNeper*acc/100), fit.InfDOF))
		} else {
			pt.Notes = append(pt.Notes, "the AC voltmeter profile gives no amplitude_accuracy_pct: not in the budget")
		}
		if fl := a.at(a.flatnessTable(), f); !math.IsNaN(fl) {
			rows = append(rows, dbRow(fmt.Sprintf("AC voltmeter flatness ±%.3g dB at %s, each of two inputs (profile)", fl, hzText(f)), "B",
				math.Sqrt2*fit.RectangularStdUnc(fl), fit.InfDOF))
		}
		pt.Notes = append(pt.Notes, "magnitude only (AC voltmeter): no phase")
	}
	pt.ThroughGainDB = 20 * math.Log10(cmplx.Abs(m))
	pt.ThroughPhaseDeg = cmplx.Phase(m) * 180 / math.Pi
	g := h / m
	k := g / kf
	absK := cmplx.Abs(k)
	if absK == 0 || math.IsNaN(absK) || math.IsInf(absK, 0) {
		return pt, fmt.Errorf("coefficient %v is not usable", k)
	}
	ratioDB := -20 * math.Log10(absK)
	// Fixture gain: K's tolerance, and the closed-loop roll-off's share of
	// the GBW tolerance: ∂(10·log10(1 + x²))/∂ln GBW = −(20/ln 10)·x²/(1 + x²), x = f·K/GBW.
	if gainTol > 0 {
		rows = append(rows, dbRow(fmt.Sprintf("fixture gain %g tolerance ±%.3g %%", gain, 100*gainTol), "B", fit.RectangularStdUnc(dBPerNeper*gainTol), fit.InfDOF))
	}
	if gbw := p.Part.GBWHz; gbw > 0 {
		x := f * gain / gbw
		s := x * x / (1 + x*x)
		tol := p.Part.GBWTolerance
		rows = append(rows, dbRow(fmt.Sprintf("fixture roll-off at %s: part gain-bandwidth %s ±%.0f %% (closed-loop %.3g dB)", hzText(f), hzText(gbw), 100*tol, pt.FixtureGainDB-20*math.Log10(gain)),
			"B", fit.RectangularStdUnc(dBPerNeper*s*tol), fit.InfDOF))
		phaseU := fit.RectangularStdUnc(x / (1 + x*x) * tol) // ∂atan(x)/∂ln GBW = −x/(1 + x²)
		phaseVar += phaseU * phaseU
	}
	if p.Fixture.Kind == plan.FixtureNoiseGain {
		if t.Kind == plan.TestCMRR {
			pt.Notes = append(pt.Notes, "noise-gain stage: the sine common mode moves the output against the rails too, so the coefficient is k_c + k_o, as the DC cmrr_uncorrected result")
		}
		if aol := p.Part.AOLMinDB; aol > 0 {
			ko := math.Pow(10, -aol/20)
			rows = append(rows, dbRow(fmt.Sprintf("open-loop gain in the noise-gain stage: scale 1/(1 − K·k_o), A_OL ≥ %.1f dB (rated, as at DC)", aol),
				"B", fit.RectangularStdUnc(dBPerNeper*gain*ko), fit.InfDOF))
		}
	}
	// Noise floor: pickup at f with the generator off adds to the
	// response; its share of the response, as a rectangular row.
	if haveFloor && pt.ResponseV > 0 {
		pt.FloorV = floorV
		rows = append(rows, dbRow(fmt.Sprintf("noise floor: %.3g V at %s with the generator off, against %.3g V of response", floorV, hzText(f), pt.ResponseV),
			"B", fit.RectangularStdUnc(dBPerNeper*math.Min(floorV/pt.ResponseV, 1)), fit.InfDOF))
	}
	b, err := fit.Combine(fmt.Sprintf("%s ratio at %s", quantityOfAC(t.Kind), hzText(f)), "dB", ratioDB, rows, cov)
	if err != nil {
		return pt, err
	}
	rej := fit.Rejection{CoefficientVPerV: absK, CoefficientUVPerV: 1e6 * absK, CoverageK: b.CoverageK, EffectiveDOF: b.EffectiveDOF,
		RatioDB: ratioDB, StdUncDB: b.CombinedStdUnc, ExpandedUDB: b.ExpandedU, LowerDB: ratioDB - b.ExpandedU, UpperDB: ratioDB + b.ExpandedU,
		RelativeExpandedU: b.ExpandedU / dBPerNeper, Budget: b, Resolved: true}
	rej.StdUncUVPerV = rej.CoefficientUVPerV * b.CombinedStdUnc / dBPerNeper
	rej.ExpandedUUVPerV = rej.CoefficientUVPerV * b.ExpandedU / dBPerNeper
	// Resolution: the response must stand clear of its own noise and the
	// floor by k standard uncertainties (EURACHEM/CITAC CG4 Appendix F, as
	// at DC): u_R = √(u_fit(R)² + floor²).
	uR := math.Hypot(math.Sqrt(stim.vR), floorV)
	sAbs := pt.StimulusV
	if sAbs > 0 && uR > 0 {
		scale := sAbs * cmplx.Abs(m) * cmplx.Abs(kf) // response volts per unit |k|
		pt.NoiseFloorDB = -20 * math.Log10(b.CoverageK*uR/scale)
		if pt.ResponseV < b.CoverageK*uR {
			rej.Resolved = false
			rej.LowerBoundDB = -20 * math.Log10((pt.ResponseV+b.CoverageK*uR)/scale)
			pt.Notes = append(pt.Notes, fmt.Sprintf("response %.3g V is within %.3g standard uncertainties of the noise floor: reported as a lower bound", pt.ResponseV, b.CoverageK))
		}
	}
	pt.Rejection = rej
	if pt.HasPhase {
		pt.PhaseDeg = cmplx.Phase(k) * 180 / math.Pi
		pt.PhaseDOF = phaseDOF
		kPh := fit.CoverageFactor(fit.DOF(math.Max(phaseDOF, 1)), cov)
		pt.UPhaseDeg = kPh * math.Sqrt(phaseVar) * 180 / math.Pi
	}
	return pt, nil
}

func (a *ACFigures) gainMismatchTable() []float64 {
	if a == nil {
		return nil
	}
	return a.GainMismatchDB
}
func (a *ACFigures) phaseMismatchTable() []float64 {
	if a == nil {
		return nil
	}
	return a.PhaseMismatchDeg
}
func (a *ACFigures) flatnessTable() []float64 {
	if a == nil {
		return nil
	}
	return a.FlatnessDB
}
func (a *ACFigures) accuracyPct() float64 {
	if a == nil {
		return math.NaN()
	}
	return a.AmplitudeAccuracyPct
}

// welch2 is the Welch–Satterthwaite ν_eff of two variances (GUM G.2b).
func welch2(v1, n1, v2, n2 float64) float64 {
	den := 0.0
	if n1 > 0 {
		den += v1 * v1 / n1
	}
	if n2 > 0 {
		den += v2 * v2 / n2
	}
	if den == 0 {
		return math.Inf(1)
	}
	return (v1 + v2) * (v1 + v2) / den
}

// rmsRatio is the mean ratio input 2/input 1 of AC voltmeter records,
// input 2 corrected for the floor in quadrature (an RMS reading adds
// uncorrelated noise power: V_sig = √(V² − V_floor²)).
func rmsRatio(recs []journal.ACReading, floorPeakV float64) (complex128, int, int, error) {
	sum, n, ex := 0.0, 0, 0
	fl := floorPeakV / math.Sqrt2
	for _, r := range recs {
		if len(r.Flags) > 0 || len(r.RMSVolts) < 2 || !(r.RMSVolts[0] > 0) {
			ex++
			continue
		}
		v2 := math.Sqrt(math.Max(r.RMSVolts[1]*r.RMSVolts[1]-fl*fl, 0))
		if v2 == 0 {
			v2 = r.RMSVolts[1] * 1e-3
		}
		sum += math.Log(v2 / r.RMSVolts[0])
		n++
	}
	if n == 0 {
		return 0, 0, ex, errors.New("no usable AC voltmeter record")
	}
	return complex(math.Exp(sum/float64(n)), 0), n, ex, nil
}

func meanRMS(recs []journal.ACReading, ch int) float64 {
	s, n := 0.0, 0
	for _, r := range recs {
		if len(r.Flags) == 0 && len(r.RMSVolts) > ch {
			s += r.RMSVolts[ch]
			n++
		}
	}
	if n == 0 {
		return 0
	}
	return s / float64(n)
}

// logScatter is the standard deviation of ln(V2/V1) over records.
func logScatter(recs []journal.ACReading, floorPeakV float64) (float64, int) {
	var xs []float64
	for _, r := range recs {
		if len(r.Flags) == 0 && len(r.RMSVolts) >= 2 && r.RMSVolts[0] > 0 && r.RMSVolts[1] > 0 {
			xs = append(xs, math.Log(r.RMSVolts[1]/r.RMSVolts[0]))
		}
	}
	if len(xs) < 2 {
		return 0, len(xs)
	}
	m := mean(xs)
	ss := 0.0
	for _, x := range xs {
		ss += (x - m) * (x - m)
	}
	return math.Sqrt(ss / float64(len(xs)-1)), len(xs)
}

func mean(xs []float64) float64 {
	if len(xs) == 0 {
		return 0
	}
	s := 0.0
	for _, x := range xs {
		s += x
	}
	return s / float64(len(xs))
}

func roundTenth(x float64) float64 { return math.Round(x*10) / 10 }

// polePlusDC fits the single-pole model to the resolved points and checks
// its low-frequency ratio against the unit's DC result.
func polePlusDC(fr *FreqResponse, dc *analysis.Results, cov float64) {
	var fs, dbs, us []float64
	for _, pt := range fr.Points {
		if pt.Rejection.Resolved && pt.Rejection.StdUncDB > 0 {
			fs = append(fs, pt.FrequencyHz)
			dbs = append(dbs, pt.Rejection.RatioDB)
			us = append(us, pt.Rejection.StdUncDB)
		}
	}
	if len(fs) < 3 {
		fr.PoleNote = fmt.Sprintf("%d resolved frequencies: a pole fit needs 3", len(fs))
		return
	}
	pf, err := fit.FitPole(fs, dbs, us)
	if err != nil {
		fr.PoleNote = fmt.Sprintf("no single-pole fit: %v", err)
		return
	}
	fr.Pole = &pf
	if dc == nil {
		fr.DCNote = "no DC result in this campaign to compare the low-frequency ratio with"
		return
	}
	// A noise-gain stage's DC cmrr without an aol test is reported as
	// cmrr_uncorrected (k_c + k_o, as the sine measures it too): it is
	// the one to compare with when there is no corrected cmrr.
	names := []string{fr.Test}
	if fr.Test == plan.TestCMRR {
		names = append(names, analysis.ResultCMRRUncorrected)
	}
	var match []analysis.RatioResult
	for _, name := range names {
		for _, r := range dc.Ratios {
			if r.Unit == fr.Unit && r.Name == name && r.TempIndex == fr.TempIndex {
				match = append(match, r)
			}
		}
	}
	for _, r := range match {
		if !r.Rejection.Resolved {
			fr.DCNote = "the DC result is a lower bound: not compared"
			return
		}
		fr.DCChecked = true
		fr.DCRatioDB, fr.DCExpandedDB = r.Rejection.RatioDB, r.Rejection.ExpandedUDB
		fr.DCDiffDB = pf.RatioDCDB - r.Rejection.RatioDB
		k := fit.CoverageFactor(fit.DOF(math.Max(float64(pf.DOF), 1)), cov)
		fr.DCDiffUDB = math.Hypot(r.Rejection.ExpandedUDB, k*pf.URatioDCDB)
		fr.DCConsistent = math.Abs(fr.DCDiffDB) <= fr.DCDiffUDB
		if !fr.DCConsistent {
			fr.DCNote = fmt.Sprintf("the pole fit's low-frequency ratio %.2f dB differs from the DC result %.2f dB by more than its expanded uncertainty %.2f dB",
				pf.RatioDCDB, r.Rejection.RatioDB, fr.DCDiffUDB)
		}
		return
	}
	fr.DCNote = "no DC result of this kind for the unit"
}

// FreqMethodText is the method statement of the frequency-response
// results ([[ac_test]]), one paragraph per entry, in the words of the code
// above; the workbook prints it after MethodText when a campaign has
// frequency-response tests.
func FreqMethodText() []string {
	return []string{
		"Frequency response: at each frequency a sine from the generator on the common-mode node or one rail; a two-channel digitizer records the stimulus at the part and the fixture output in a coherent record (a whole number of cycles, IEEE Std 1241-2010 §4.1.4.5), each channel reduced to an IEEE Std 1057-2017 three-parameter sine fit at the generator's frequency, with its covariance.",
		"Coefficient at f: k(f) = (R/S)/(R_th/S_th)/K(f): the response/stimulus ratio of the fits, divided by the through calibration (both channels on the stimulus: the digitizer's channel mismatch) and by the fixture's gain K(f) = K/(1 + j·f·K/GBW) with the part's gain-bandwidth (a board: G/(1 + j·f·(1 + G)/GBW)). Ratio = −20·log10|k(f)| dB, phase = arg k(f).",
		"Uncertainty per frequency (JCGM 100:2008): Type A from the sine fits of the stimulus and through records; Type B for the through-calibration residual (a tenth of the profile's channel mismatch, common practice), the fixture gain tolerance, the roll-off's share of the gain-bandwidth tolerance, the open-loop-gain scale of a noise-gain stage and the noise floor's share of the response; flatness and amplitude accuracy common to both channels cancel and are listed with zero sensitivity. An AC voltmeter gives magnitudes only, with its accuracy and flatness on both inputs.",
		"Noise floor: a record with the generator off at each frequency. When the response lies within k standard uncertainties of √(u_fit² + floor²) the result is the lower bound −20·log10((R + k·u)/(S·|M|·|K(f)|)), judged as at DC.",
		"Single pole: ratio_dB(f) = R_dc − 10·log10(1 + (f/f_p)²) fitted to the resolved frequencies (weighted least squares, Levenberg–Marquardt) gives the low-frequency ratio and the corner with their uncertainties; R_dc is compared with the unit's DC result (|difference| ≤ √(U_DC² + U_pole²)). On a noise-gain stage the sine cmrr is k_c + k_o, compared with cmrr_uncorrected.",
	}
}

// hzText gives a frequency to 4 significant figures in plain decimal
// ("37.28 Hz", "26830 Hz", not "37.275937203149404 Hz" or "2.683e+04 Hz"):
// a log-spaced list of points carries every binary digit of
// lo·(hi/lo)^(i/(n−1)), and a note or budget row needs only enough to
// tell the points apart (GUM 7.2.6: no excessive number of digits).
func hzText(f float64) string {
	if f == 0 || math.IsNaN(f) || math.IsInf(f, 0) {
		return fmt.Sprintf("%g Hz", f)
	}
	d := 3 - int(math.Floor(math.Log10(math.Abs(f)))) // decimals kept
	var r float64
	if d >= 0 {
		p := math.Pow10(d)
		r = math.Round(f*p) / p
	} else {
		p := math.Pow10(-d)
		r = math.Round(f/p) * p
	}
	return strconv.FormatFloat(r, 'f', -1, 64) + " Hz"
}
