// Package trend turns stored results (plain rows: part, lot, unit, test,
// temperature, bench, value, decision, date) into the lot-to-lot statistics
// of the trend workbook: a Shewhart X̄–S chart of lot means and within-lot
// spread per part × test × temperature, each lot's yield and one-sided
// tolerance bound, and each bench's repeatability from units measured more
// than once. The statistics are fit's (fit.XbarS, fit.OneSidedTolerance,
// fit.PooledSD); the result is a report.Trend for
// report.WriteTrendWorkbook. It imports fit and report only, so the
// archive (or anything else holding results) can call it.
package trend

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"time"

	"nullbench/fit"
	"nullbench/report"
)

// Value units a Row may carry.
const (
	UnitDB     = "dB"   // a rejection ratio, input-referred, 20·log10
	UnitUVPerV = "µV/V" // an input-referred coefficient
)

// Row is one stored result.
type Row struct {
	Part, Lot string
	// Unit identifies the measured unit across campaigns and benches: its
	// serial number when known, else its id within the lot. Results of the
	// same Part, Lot and Unit are repeats of one unit.
	Unit         string
	Test         string
	TemperatureC float64
	FrequencyHz  float64 // 0: DC
	Bench        string
	// Value is in ValueUnit: UnitDB (the ratio) or UnitUVPerV (the
	// input-referred coefficient; its magnitude is used, the quantity a
	// limit applies to).
	Value     float64
	ValueUnit string
	// BoundOnly marks a result that was not resolved (its expanded
	// uncertainty reaches zero coefficient): in dB Value is only a lower
	// bound of the ratio, in µV/V the coefficient is not distinguished from
	// zero. Such a result is not a value: Build leaves it out of every mean,
	// SD, limit and tolerance bound and counts it.
	BoundOnly bool
	// Decision is the stored verdict ("pass", "conditional pass",
	// "conditional fail", "fail", "not judged", "no result").
	Decision string
	// Limit is the specification limit in ValueUnit (NaN: none).
	Limit float64
	Date  time.Time
}

// Options tune Build. The zero value gives 3σ limits from the pooled SD,
// the run rules, and 95 % / 95 % tolerance bounds.
type Options struct {
	Title, Generator, Selection string
	Generated                   time.Time
	Sigmas                      float64 // 0: 3
	Estimator                   fit.SigmaEstimator
	NoRunRules                  bool
	Coverage, Confidence        float64 // 0: 0.95
}

const runRulesText = "Western Electric rules on the X̄ chart (Western Electric Statistical Quality Control Handbook, 1956; Montgomery §5.3.6): 1 a point beyond a limit; 2 two of three successive beyond 2σ on one side; 3 four of five beyond 1σ on one side; 4 eight successive on one side of the centre line (σ = σ̂/√n of each lot)"

type chartKey struct {
	part, test string
	tempC100   int64 // °C × 100, rounded
	freqHz     float64
	unit       string
}

type unitKey struct{ lot, unit string }

type unitAcc struct {
	values         []float64 // resolved values only
	bounds         int       // results that are bounds only
	judged, failed bool
	benches        []string
	first, last    time.Time
}

// Build computes the trend of rows. Rows whose value is not a finite number
// or whose decision is "no result" are left out (counted in a note); rows
// marked BoundOnly count towards yields and the lot's "bounds only" units
// but never enter a mean, SD, control limit or tolerance bound (counted in
// a note); a row with a value unit other than dB or µV/V is an error
// naming it.
func Build(rows []Row, opt Options) (*report.Trend, error) {
	L := opt.Sigmas
	if L == 0 {
		L = 3
	}
	cov, conf := opt.Coverage, opt.Confidence
	if cov == 0 {
		cov = 0.95
	}
	if conf == 0 {
		conf = 0.95
	}
	tr := &report.Trend{
		Title: opt.Title, Generated: opt.Generated, Generator: opt.Generator, Selection: opt.Selection,
		Method: fit.ControlChartMethod, SigmaEstimator: opt.Estimator.String() + " (" + opt.Estimator.Source() + ")", Sigmas: L,
		Coverage: cov, Confidence: conf,
	}
	if !opt.NoRunRules {
		tr.RunRules = runRulesText
	} else {
		tr.RunRules = "rule 1 only: a point beyond a limit"
	}
	charts := map[chartKey]map[unitKey]*unitAcc{}
	limits := map[chartKey][]float64{}
	skipped, bounds := 0, 0
	for i, r := range rows {
		if r.ValueUnit != UnitDB && r.ValueUnit != UnitUVPerV {
			return nil, fmt.Errorf("trend: row %d (%s lot %s unit %s %s): value unit %q is neither %s nor %s",
				i, r.Part, r.Lot, r.Unit, r.Test, r.ValueUnit, UnitDB, UnitUVPerV)
		}
		if math.IsNaN(r.Value) || math.IsInf(r.Value, 0) || isNoResult(r.Decision) {
			skipped++
			continue
		}
		k := chartKey{r.Part, r.Test, int64(math.Round(r.TemperatureC * 100)), r.FrequencyHz, r.ValueUnit}
		if charts[k] == nil {
			charts[k] = map[unitKey]*unitAcc{}
		}
		uk := unitKey{r.Lot, r.Unit}
		u := charts[k][uk]
		if u == nil {
			u = &unitAcc{first: r.Date, last: r.Date}
			charts[k][uk] = u
		}
		v := r.Value
		if r.ValueUnit == UnitUVPerV {
			v = math.Abs(v)
		}
		if r.BoundOnly {
			u.bounds++
			bounds++
		} else {
			u.values = append(u.values, v)
		}
		switch report.VerdictClass(r.Decision) {
		case report.KindPass, report.KindConditionalPass:
			u.judged = true
		case report.KindFail, report.KindConditionalFail:
			u.judged, u.failed = true, true
		}
		if r.Bench != "" && !slices.Contains(u.benches, r.Bench) {
			u.benches = append(u.benches, r.Bench)
		}
		if !r.Date.IsZero() && (u.first.IsZero() || r.Date.Before(u.first)) {
			u.first = r.Date
		}
		if r.Date.After(u.last) {
			u.last = r.Date
		}
		if !math.IsNaN(r.Limit) && !slices.Contains(limits[k], r.Limit) {
			limits[k] = append(limits[k], r.Limit)
		}
	}
	if skipped > 0 {
		tr.Notes = append(tr.Notes, fmt.Sprintf("%d results without a value (no result, or not a finite number) left out", skipped))
	}
	if bounds > 0 {
		tr.Notes = append(tr.Notes, fmt.Sprintf("%d results not resolved (a ratio known only by its lower bound) left out of means, SDs, control limits and tolerance bounds; units with no resolved result are counted per lot under 'Bounds only'", bounds))
	}
	keys := make([]chartKey, 0, len(charts))
	for k := range charts {
		keys = append(keys, k)
	}
	slices.SortFunc(keys, func(a, b chartKey) int {
		return cmp.Or(cmp.Compare(a.part, b.part), cmp.Compare(a.test, b.test), cmp.Compare(a.tempC100, b.tempC100),
			cmp.Compare(a.freqHz, b.freqHz), cmp.Compare(a.unit, b.unit))
	})
	for _, k := range keys {
		c, err := buildChart(k, charts[k], limits[k], L, cov, conf, opt)
		if err != nil {
			return nil, err
		}
		tr.Charts = append(tr.Charts, c)
	}
	rep, err := repeatability(rows)
	if err != nil {
		return nil, err
	}
	tr.Repeatability = rep
	return tr, nil
}

// quantity names a chart's values and states their convention per test
// (JEDEC JESD99B symbols from memory: k_CMR = ΔV_IC/ΔV_IO, k_SVR =
// ΔV_S/ΔV_IO and its reciprocal k_SVS, the supply-voltage sensitivity).
func quantity(k chartKey) (name, convention string) {
	db := k.unit == UnitDB
	t := strings.ToLower(k.test)
	switch {
	case t == "aol":
		if db {
			return "A_OL", "open-loop gain 20·log10|ΔV_O/ΔV_IO| (a gain, not a rejection ratio)"
		}
		return "A_OL coefficient", "magnitude of the input-referred coefficient |ΔV_IO/ΔV_O| in µV/V, the reciprocal of the open-loop gain"
	case t == "board_cmrr":
		if db {
			return "board CMRR", "board common-mode rejection 20·log10(A_d/|A_cm|), the common-mode gain referred to the input by the differential gain"
		}
		return "board CMRR coefficient", "magnitude of |A_cm|/A_d in µV/V, the common-mode gain referred to the input"
	case strings.HasPrefix(t, "board_psrr"):
		if db {
			return "board " + psrrName(strings.TrimPrefix(t, "board_")), "board supply rejection in dB, the supply-to-output gain referred to the input by the differential gain"
		}
		return "board " + psrrName(strings.TrimPrefix(t, "board_")) + " coefficient", "magnitude of the supply-to-output gain referred to the input, in µV/V"
	case t == "cmrr_uncorrected":
		if db {
			return "CMRR uncorrected", "20·log10(1/|k_c + k_o|): the common-mode coefficient as measured with the output moving, not corrected for the open-loop gain term k_o = ΔV_IO/ΔV_O"
		}
		return "CMRR uncorrected coefficient", "magnitude of k_c + k_o in µV/V: the common-mode coefficient as measured, not corrected for the open-loop gain term"
	case t == "cmrr":
		if db {
			return "CMRR", "input-referred common-mode rejection ratio 20·log10|ΔV_IC/ΔV_IO| (JEDEC JESD99B k_CMR)"
		}
		return "CMRR coefficient", "magnitude of the input-referred common-mode coefficient |ΔV_IO/ΔV_IC| in µV/V (the reciprocal of JESD99B's k_CMR)"
	case strings.HasPrefix(t, "psrr"):
		if db {
			return psrrName(t), "input-referred supply voltage rejection ratio 20·log10|ΔV_S/ΔV_IO| (JEDEC JESD99B k_SVR)"
		}
		return psrrName(t) + " coefficient", "magnitude of the supply voltage sensitivity |ΔV_IO/ΔV_S| in µV/V (JEDEC JESD99B k_SVS)"
	}
	if db {
		return strings.ToUpper(t) + " ratio", "ratio in dB as reported"
	}
	return strings.ToUpper(t) + " coefficient", "magnitude of the input-referred coefficient in µV/V"
}

// psrrName names a supply test: psrr_pos "PSRR+", psrr_neg "PSRR−",
// psrr_sym "PSRR (both rails)".
func psrrName(test string) string {
	switch test {
	case "psrr_pos":
		return "PSRR+"
	case "psrr_neg":
		return "PSRR−"
	case "psrr_sym":
		return "PSRR (both rails)"
	}
	return strings.ToUpper(test)
}

type lotAcc struct {
	name  string
	units []*unitAcc
	first time.Time
}

func buildChart(k chartKey, units map[unitKey]*unitAcc, lims []float64, L, cov, conf float64, opt Options) (report.TrendChart, error) {
	q, conv := quantity(k)
	c := report.TrendChart{
		Part: k.part, Test: k.test, TemperatureC: float64(k.tempC100) / 100, FrequencyHz: k.freqHz,
		Quantity: q, ValueUnit: k.unit, Convention: conv, LimitValue: math.NaN(),
		BoundSide: fit.Lower.String(), GrandMean: math.NaN(), PooledSD: math.NaN(), SigmaHat: math.NaN(),
	}
	side := fit.Lower
	if k.unit == UnitUVPerV {
		side = fit.Upper
		c.BoundSide = fit.Upper.String()
	}
	if len(lims) == 1 {
		c.LimitValue = lims[0]
	} else if len(lims) > 1 {
		c.Convention += fmt.Sprintf("; the results carry %d different limits, none shown", len(lims))
	}
	// lots in time order of their first measurement
	byLot := map[string]*lotAcc{}
	var lots []*lotAcc
	ukeys := make([]unitKey, 0, len(units))
	for uk := range units {
		ukeys = append(ukeys, uk)
	}
	slices.SortFunc(ukeys, func(a, b unitKey) int { return cmp.Or(cmp.Compare(a.lot, b.lot), cmp.Compare(a.unit, b.unit)) })
	for _, uk := range ukeys {
		u := units[uk]
		l := byLot[uk.lot]
		if l == nil {
			l = &lotAcc{name: uk.lot, first: u.first}
			byLot[uk.lot] = l
			lots = append(lots, l)
		}
		l.units = append(l.units, u)
		if !u.first.IsZero() && (l.first.IsZero() || u.first.Before(l.first)) {
			l.first = u.first
		}
	}
	slices.SortStableFunc(lots, func(a, b *lotAcc) int {
		return cmp.Or(a.first.Compare(b.first), cmp.Compare(a.name, b.name))
	})
	groups := make([][]float64, len(lots))
	for i, l := range lots {
		tl := report.TrendLot{
			Lot: l.name, First: l.first, SD: math.NaN(),
			MeanLCL: math.NaN(), MeanUCL: math.NaN(), SDCenter: math.NaN(), SDLCL: math.NaN(), SDUCL: math.NaN(),
			Yield: math.NaN(), ToleranceK: math.NaN(), ToleranceBound: math.NaN(),
		}
		for _, u := range l.units {
			if len(u.values) == 0 {
				tl.BoundsOnly++ // no resolved result: not a value
			} else {
				groups[i] = append(groups[i], mean(u.values))
			}
			if u.judged {
				tl.Judged++
				if !u.failed {
					tl.Passed++
				}
			}
			for _, b := range u.benches {
				if !slices.Contains(tl.Benches, b) {
					tl.Benches = append(tl.Benches, b)
				}
			}
			if u.last.After(tl.Last) {
				tl.Last = u.last
			}
		}
		slices.Sort(tl.Benches)
		tl.N = len(groups[i])
		tl.Mean = math.NaN()
		if tl.N > 0 {
			tl.Mean = mean(groups[i])
		}
		if tl.N >= 2 {
			tl.SD = sd(groups[i], tl.Mean)
			tb, err := fit.OneSidedTolerance(tl.Mean, tl.SD, tl.N, side, cov, conf)
			if err != nil {
				return c, fmt.Errorf("trend: %s %s lot %s: %w", k.part, k.test, l.name, err)
			}
			tl.ToleranceK, tl.ToleranceBound = tb.K, tb.Bound
		}
		if tl.Judged > 0 {
			tl.Yield = float64(tl.Passed) / float64(tl.Judged)
		}
		c.Lots = append(c.Lots, tl)
	}
	// lots with no resolved value stay listed but are not chart points
	var charted [][]float64
	var at []int
	for i, g := range groups {
		if len(g) > 0 {
			charted = append(charted, g)
			at = append(at, i)
		}
	}
	cc, err := fit.XbarS(charted, fit.ControlOptions{Sigmas: L, Estimator: opt.Estimator, NoRunRules: opt.NoRunRules})
	switch {
	case errors.Is(err, fit.ErrTooFewPoints):
		c.ChartError = "no control limits: " + err.Error()
		return c, nil
	case err != nil:
		return c, fmt.Errorf("trend: %s %s at %g °C: %w", k.part, k.test, c.TemperatureC, err)
	}
	c.GrandMean, c.PooledSD, c.PooledDOF, c.SigmaHat = cc.GrandMean, cc.PooledSD, cc.PooledDOF, cc.SigmaHat
	for i, p := range cc.Points {
		tl := &c.Lots[at[i]]
		tl.MeanLCL, tl.MeanUCL, tl.MeanOut = p.MeanLCL, p.MeanUCL, p.MeanOut
		if p.HasSD {
			tl.SDCenter, tl.SDLCL, tl.SDUCL, tl.SDOut = p.SDCenter, p.SDLCL, p.SDUCL, p.SDOut
		}
		tl.Signals = p.Signals
	}
	return c, nil
}

type repKey struct {
	bench string
	chart chartKey
}

// repeatability pools, per bench and part × test × temperature, the SDs of
// units measured more than once on that bench (fit.PooledSD).
func repeatability(rows []Row) ([]report.Repeatability, error) {
	groups := map[repKey]map[unitKey][]float64{}
	for _, r := range rows {
		if math.IsNaN(r.Value) || math.IsInf(r.Value, 0) || isNoResult(r.Decision) || r.BoundOnly {
			continue // a bound is not a repeat of a value
		}
		k := repKey{r.Bench, chartKey{r.Part, r.Test, int64(math.Round(r.TemperatureC * 100)), r.FrequencyHz, r.ValueUnit}}
		if groups[k] == nil {
			groups[k] = map[unitKey][]float64{}
		}
		v := r.Value
		if r.ValueUnit == UnitUVPerV {
			v = math.Abs(v)
		}
		uk := unitKey{r.Lot, r.Unit}
		groups[k][uk] = append(groups[k][uk], v)
	}
	keys := make([]repKey, 0, len(groups))
	for k := range groups {
		keys = append(keys, k)
	}
	slices.SortFunc(keys, func(a, b repKey) int {
		return cmp.Or(cmp.Compare(a.bench, b.bench), cmp.Compare(a.chart.part, b.chart.part), cmp.Compare(a.chart.test, b.chart.test),
			cmp.Compare(a.chart.tempC100, b.chart.tempC100), cmp.Compare(a.chart.freqHz, b.chart.freqHz), cmp.Compare(a.chart.unit, b.chart.unit))
	})
	var out []report.Repeatability
	for _, k := range keys {
		var g [][]float64
		repeats := 0
		for _, v := range groups[k] {
			g = append(g, v)
			if len(v) >= 2 {
				repeats += len(v)
			}
		}
		p, err := fit.PooledSD(g)
		if errors.Is(err, fit.ErrTooFewPoints) {
			continue
		}
		if err != nil {
			return nil, fmt.Errorf("trend: repeatability on bench %q: %w", k.bench, err)
		}
		q, _ := quantity(k.chart)
		out = append(out, report.Repeatability{
			Bench: k.bench, Part: k.chart.part, Test: k.chart.test, TemperatureC: float64(k.chart.tempC100) / 100,
			FrequencyHz: k.chart.freqHz, Quantity: q, ValueUnit: k.chart.unit,
			SD: p.SD, DOF: p.DOF, Units: p.Groups, Repeats: repeats,
		})
	}
	return out, nil
}

func mean(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

func sd(v []float64, m float64) float64 {
	ss := 0.0
	for _, x := range v {
		ss += (x - m) * (x - m)
	}
	return math.Sqrt(ss / float64(len(v)-1))
}

func isNoResult(decision string) bool {
	return strings.EqualFold(strings.TrimSpace(decision), report.VerdictNoResult)
}
