package report

import (
	"fmt"
	"math"
	"time"
)

// Test fixture: an invented campaign of the invented company "Harrowgate
// Analog Test" on the invented op-amp HX-4107. Every number below is made
// up for the test; readings follow a known model per unit so the residuals
// the report computes are known exactly (the deviation pattern devVolts).

var fixtureLevels = []float64{0, 5, -5, 10, -10} // zigzag, drift cancelling order

const (
	fixtureK       = 1000.0 // noise gain
	fixtureLimitDB = 110.0  // cmrr limit
	fixtureRepeats = 2
)

// fixtureRatios are each unit's cmrr at 25 °C and the verdict a guarded
// rule with U = 1 dB gives against 110 dB (ILAC-G8:09/2019 §4.2 zones, as
// worked in JCGM 100:2008 (GUM)): 118 pass, 110.5 conditional pass, 109.5
// conditional fail, 105 fail; U07 is unresolved (lower bound 140 dB).
var fixtureRatios = []struct {
	db       float64
	verdict  string
	resolved bool
}{
	{125, VerdictPass, true},
	{118, VerdictPass, true},
	{111.5, VerdictPass, true},
	{110.5, VerdictConditionalPass, true},
	{109.5, VerdictConditionalFail, true},
	{105, VerdictFail, true},
	{140, VerdictPass, false},
	{130, VerdictPass, true},
}

var defaultUnits = []string{"U01", "U02", "U03", "U04", "U05", "U06", "U07", "U08"}

// hostileUnits replace U05..U08 with ids a spreadsheet would take for
// formulas.
var hostileTexts = []string{"=1+2", "@SUM(A1)", "+x", "-y"}

func hostileUnits() []string {
	return append(append([]string{}, defaultUnits[:4]...), hostileTexts...)
}

// devVolts is the known deviation of reading i from the fit model.
func devVolts(i int) float64 { return 2e-7 * float64(i%3-1) }

// fixtureTemperatureShift is how each unit's ratio moves with temperature
// (dB per °C away from 25 °C), so the temperature charts have a shape.
const fixtureTemperatureShift = -0.02

var fixtureStart = time.Date(2026, 3, 2, 8, 30, 0, 0, time.UTC)

// fixtureCampaign builds the campaign for the given unit ids (8 of them)
// and temperatures.
func fixtureCampaign(units []string, temps []float64) *Campaign {
	c := &Campaign{
		Name:      "HX-4107 lot qualification, spring",
		Part:      "HX-4107",
		Lot:       "L2609-A",
		Operator:  "bench operator 3",
		Notes:     "Harrowgate Analog Test, bench B.\nSecond line with <tags> & ampersands.",
		Started:   fixtureStart,
		PlanFile:  "plans/hx4107-qual.toml",
		PlanHash:  "sha256:4f1c0d9e2b7a",
		Generator: "nullbench test",
		Instruments: []InstrumentInfo{
			{Name: "rails", Roles: []string{"supply"}, Address: "tcp://127.0.0.1:5025", Identity: "HARROWGATE,HS-3300,HS0001,1.02"},
			{Name: "dmm", Roles: []string{"meter"}, Address: "tcp://127.0.0.1:5026", Identity: "HARROWGATE,HM-650,HM0042,2.10"},
		},
		Fixture: FixtureInfo{
			Kind: "nulling_loop", CommonMode: "supply_shift", Output: "nulling amplifier output E0",
			NoiseGain: fixtureK, NoiseGainTolerance: 0.001, MaxStimulusVolts: 15,
			BoardGain: math.NaN(), ResistorTolerance: math.NaN(), OpAmpCMRRdB: math.NaN(),
		},
		DecisionRule: "guarded acceptance, w = U (ILAC-G8:09/2019 §4.2)",
		SafetyNote:   "rails limited to 35 V to ground; current limit 20 mA per rail",
	}
	t := fixtureStart
	bench := 0.0
	for ti, temp := range temps {
		for ui, u := range units {
			if ti == 0 {
				c.Units = append(c.Units, UnitInfo{ID: u, Serial: fmt.Sprintf("SN-%04d", 1000+ui), Notes: "tray A"})
			}
			for _, test := range []string{"cmrr", "psrr_pos"} {
				fr := fixtureRatios[ui]
				db := fr.db + fixtureTemperatureShift*(temp-25)
				if test == "psrr_pos" {
					db -= 10
				}
				coef := 1e6 / math.Pow(10, db/20) // µV/V
				res := Result{
					Unit: u, Test: test, TemperatureC: temp,
					CoefficientUVPerV: coef, CoefficientStdUUVPerV: coef * 0.05,
					RatioDB: db, ExpandedUDB: 1, ExpandedUDBLow: math.NaN(), ExpandedUDBHigh: math.NaN(),
					CoverageK: 2, DOFEffective: 18, Resolved: fr.resolved, LowerBoundDB: math.NaN(),
					LimitDB: math.NaN(), Verdict: VerdictNotJudged, Rule: "guarded",
				}
				if test == "cmrr" {
					res.LimitDB = fixtureLimitDB
					res.Verdict = fr.verdict
				}
				if !fr.resolved {
					res.LowerBoundDB = db
					res.Flags = []string{"unresolved"}
				}
				c.Results = append(c.Results, res)
				for _, comp := range []struct {
					name, kind, dist string
					share            float64
				}{{"slope (Type A)", "A", "t", 0.8}, {"noise gain K", "B", "rectangular", 0.5}, {"meter gain", "B", "normal", 0.33}} {
					c.Budgets = append(c.Budgets, BudgetRow{
						Unit: u, Test: test, TemperatureC: temp, Component: comp.name, Kind: comp.kind,
						Distribution: comp.dist, Value: 1, ValueUnit: "1", StdUncertainty: 0.001,
						Sensitivity: coef, Contribution: coef * 0.05 * comp.share, DOF: math.Inf(1),
					})
				}
				// Fit model at the meter: slope = K·coef·1e-6 V/V; U03
				// has a quadratic term so its fitted curve bends.
				fit := FitRow{
					Unit: u, Test: test, TemperatureC: temp, N: len(fixtureLevels) * fixtureRepeats,
					Intercept: 1e-4 * float64(ui+1), SlopeVPerV: fixtureK * coef * 1e-6, SlopeU: fixtureK * coef * 5e-8,
					DriftVPerS: 3e-9, DriftOriginSeconds: bench + 45, ResidualSDVolts: 2e-7, DOF: 7,
					MaxDeviationUV: 0.2,
				}
				if ui == 2 {
					fit.Quadratic, fit.QuadraticU, fit.QuadraticSignificant = 2e-7, 1e-8, true
				}
				c.Fits = append(c.Fits, fit)
				i := 0
				for rep := 0; rep < fixtureRepeats; rep++ {
					for step, x := range fixtureLevels {
						read := x + 1e-4
						meter := fit.Intercept + fit.SlopeVPerV*read + fit.Quadratic*read*read +
							fit.DriftVPerS*(bench-fit.DriftOriginSeconds) + devVolts(i)
						rd := Reading{
							Time: t, BenchSeconds: bench, Unit: u, Test: test, TemperatureC: temp,
							MeasuredC: temp + 0.03, Repeat: rep, Step: step, SetVolts: x, ReadVolts: read,
							MeterVolts: meter, MeterSDVolts: 3e-7, N: 10, SettleSeconds: 1.5,
						}
						if i == 7 && ui == 5 {
							rd.Flags = []string{"settle-timeout"}
						}
						c.Readings = append(c.Readings, rd)
						t = t.Add(9*time.Second + 123*time.Millisecond)
						bench += 9.123
						i++
					}
				}
			}
		}
		for _, test := range []string{"cmrr", "psrr_pos"} {
			l := LotRow{Test: test, TemperatureC: temp, N: len(units), Unresolved: 1, Mean: 118, SD: 10,
				Min: 105, Median: 114.8 + fixtureTemperatureShift*(temp-25), Max: 140, LimitDB: math.NaN(),
				Cpl: math.NaN(), ToleranceBoundDB: 95, Coverage: 0.99, Confidence: 0.95, Yield: math.NaN()}
			if test == "cmrr" {
				l.LimitDB, l.Cpl, l.Yield = fixtureLimitDB, 0.27, 0.79
				l.Outliers = []string{units[6]}
			}
			c.LotStats = append(c.LotStats, l)
		}
		c.Closures = append(c.Closures, ClosureRow{Unit: units[0], TemperatureC: temp, ShiftUVPerV: 0.56,
			SumUVPerV: 0.55, ClosureUVPerV: 0.01, ClosureU: 0.02, CMRRUncorrectedDB: 125, CMRRCorrectedDB: 125.1})
	}
	if len(temps) > 1 {
		for _, u := range append(append([]string{}, units...), LotUnit) {
			for _, test := range []string{"cmrr", "psrr_pos"} {
				c.Temperature = append(c.Temperature, TempRow{Unit: u, Test: test, SlopeDBPerC: fixtureTemperatureShift, SlopeU: 0.002, RepeatabilityDB: 0.3})
			}
		}
	}
	c.Finished = t
	return c
}
