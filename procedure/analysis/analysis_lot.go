package analysis

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"nullbench/fit"
	"nullbench/procedure/plan"
)

// LotResult summarises one result name at one temperature over the lot
// (fit.Lot: mean, SD, median, range, Cpl, one-sided normal tolerance bound,
// yield, generalized-ESD outliers). Values are the units' dB figures; an
// unresolved unit enters with its lower bound (conservative) and is counted
// in LowerBounds. Without a limit for the name HasLimit is false and the
// limit-dependent fields of Stats (LowerLimit, Cpl, CplDefined, PassCount,
// Yield) are zero.
type LotResult struct {
	Name         string  `json:"name"`
	Condition    int     `json:"condition"`
	TempIndex    int     `json:"temp_index"`
	TemperatureC float64 `json:"temperature_c"`
	// Units and ValuesDB in the same order (plan unit order).
	Units        []string      `json:"units"`
	ValuesDB     []float64     `json:"values_db"`
	LowerBounds  int           `json:"lower_bounds"`
	HasLimit     bool          `json:"has_limit"`
	LimitDB      float64       `json:"limit_db"`
	Stats        fit.LotStats  `json:"stats"`
	OutlierUnits []string      `json:"outlier_units,omitempty"`
	Verdicts     VerdictCounts `json:"verdicts"`
}

// TemperatureResult is the temperature coefficient of one result name in
// dB/°C. Fit (when HasLotFit) is fit.LotTempSlope: one common slope for the
// lot with an intercept per unit, and each unit's own straight line
// (Fitted false for a unit with fewer than 3 temperatures). TwoPoint gives
// the slope of each unit measured at exactly two temperatures, which a
// line with an uncertainty cannot. Only resolved results enter (a lower
// bound has no slope); SkippedUnresolved counts those left out. The
// temperature of each point is the measured mean of its sweep.
type TemperatureResult struct {
	Name              string          `json:"name"`
	HasLotFit         bool            `json:"has_lot_fit"`
	Fit               fit.LotTempFit  `json:"fit"`
	TwoPoint          []TwoPointSlope `json:"two_point,omitempty"`
	Points            int             `json:"points"`
	SkippedUnresolved int             `json:"skipped_unresolved"`
}

// TwoPointSlope is a unit's temperature coefficient from two results,
//
//	b = (dB₂ − dB₁)/(T₂ − T₁),  u(b) = √(u₁² + u₂²)/|T₂ − T₁|
//
// with u_i the results' standard uncertainties in dB (GUM 5.1.2, taken
// independent; shared Type B rows such as the noise-gain tolerance cancel
// in a difference, so this is conservative) and the temperatures taken as
// exact.
type TwoPointSlope struct {
	Unit              string  `json:"unit"`
	LowC              float64 `json:"low_c"`
	HighC             float64 `json:"high_c"`
	SlopeDBPerC       float64 `json:"slope_db_per_c"`
	SlopeStdUncDBPerC float64 `json:"slope_std_unc_db_per_c"`
}

// RepeatabilityResult is the pooled standard deviation of the per-repeat
// results of one name at one temperature over the units (fit.PooledSD, GUM
// 4.2.8 / H.3.6: s_p² = Σ(n_i − 1)s_i²/Σ(n_i − 1)): of the coefficient in
// µV/V, and of the ratio in dB over the units whose every repeat has a
// ratio (HasRatioDB).
type RepeatabilityResult struct {
	Name              string     `json:"name"`
	Condition         int        `json:"condition"`
	TempIndex         int        `json:"temp_index"`
	TemperatureC      float64    `json:"temperature_c"`
	CoefficientUVPerV fit.Pooled `json:"coefficient_uv_per_v"`
	HasRatioDB        bool       `json:"has_ratio_db"`
	RatioDB           fit.Pooled `json:"ratio_db"`
}

// VerdictCounts counts results (or units) by decision state.
type VerdictCounts struct {
	Pass            int `json:"pass"`
	ConditionalPass int `json:"conditional_pass"`
	ConditionalFail int `json:"conditional_fail"`
	Fail            int `json:"fail"`
	NotJudged       int `json:"not_judged"`
}

func (c *VerdictCounts) add(judged bool, s fit.State) {
	if !judged {
		c.NotJudged++
		return
	}
	switch s {
	case fit.StatePass:
		c.Pass++
	case fit.StateConditionalPass:
		c.ConditionalPass++
	case fit.StateConditionalFail:
		c.ConditionalFail++
	case fit.StateFail:
		c.Fail++
	default:
		c.NotJudged++
	}
}

// Total is the number counted.
func (c VerdictCounts) Total() int {
	return c.Pass + c.ConditionalPass + c.ConditionalFail + c.Fail + c.NotJudged
}

// severity orders decision states from pass (0) to fail (3).
func severity(s fit.State) int {
	switch s {
	case fit.StatePass:
		return 0
	case fit.StateConditionalPass:
		return 1
	case fit.StateConditionalFail:
		return 2
	case fit.StateFail:
		return 3
	}
	return -1
}

// WorstResult is one of the lowest results of a name.
type WorstResult struct {
	Unit         string    `json:"unit"`
	Condition    int       `json:"condition"`
	TemperatureC float64   `json:"temperature_c"`
	ValueDB      float64   `json:"value_db"`
	LowerBound   bool      `json:"lower_bound"`
	Judged       bool      `json:"judged"`
	State        fit.State `json:"state"`
}

// TestSummary counts one result name's verdicts and lists its worst units.
type TestSummary struct {
	Name   string        `json:"name"`
	Counts VerdictCounts `json:"counts"`
	Worst  []WorstResult `json:"worst"`
}

// UnitVerdict is a unit's overall verdict: the most severe state of its
// judged results (cmrr_uncorrected excluded when a corrected cmrr exists,
// as it is superseded). NotPassing lists "name @ T °C: state" for each
// result that did not pass.
type UnitVerdict struct {
	Unit       string    `json:"unit"`
	Judged     bool      `json:"judged"`
	State      fit.State `json:"state"`
	NotPassing []string  `json:"not_passing,omitempty"`
}

// Summary gathers the verdicts.
type Summary struct {
	// Results counts every result but cmrr_uncorrected.
	Results VerdictCounts `json:"results"`
	// Units counts units by their overall verdict.
	Units   VerdictCounts `json:"units"`
	PerTest []TestSummary `json:"per_test"`
	PerUnit []UnitVerdict `json:"per_unit"`
	// ClosureMismatches and SymmetricMismatches count failed consistency
	// checks; Problems the groups that gave no result.
	ClosureMismatches   int `json:"closure_mismatches"`
	SymmetricMismatches int `json:"symmetric_mismatches"`
	Problems            int `json:"problems"`
}

// namesPresent returns the result names that occur, in ResultNames order.
func (a *analyzer) namesPresent() []string {
	have := map[string]bool{}
	for _, r := range a.res.Ratios {
		have[r.Name] = true
	}
	var out []string
	for _, n := range ResultNames() {
		if have[n] {
			out = append(out, n)
		}
	}
	return out
}

// lotStatistics forms a LotResult per name × condition with two or more
// units.
func (a *analyzer) lotStatistics() {
	for _, name := range a.namesPresent() {
		for ci, c := range a.res.Conditions {
			lr := LotResult{Name: name, Condition: ci, TempIndex: c.TempIndex, TemperatureC: c.TemperatureC}
			for i := range a.res.Ratios {
				r := &a.res.Ratios[i]
				if r.Name != name || r.Condition != ci {
					continue
				}
				v, lb := r.ValueDB()
				if !finite(v) {
					continue
				}
				lr.Units = append(lr.Units, r.Unit)
				lr.ValuesDB = append(lr.ValuesDB, v)
				if lb {
					lr.LowerBounds++
				}
				lr.Verdicts.add(r.Judged, r.Decision.State)
			}
			if len(lr.ValuesDB) < 2 {
				continue
			}
			lim, _, ok := a.p.LimitAt(limitName(name), c.SetPointC)
			lr.HasLimit, lr.LimitDB = ok, lim
			ref := lim
			if !ok {
				ref = lr.ValuesDB[0]
			}
			st, err := fit.Lot(lr.ValuesDB, ref, fit.LotOptions{Unit: "dB"})
			if err != nil {
				a.problem("", name, "", c, "no lot statistics: "+err.Error())
				continue
			}
			if !ok {
				st.LowerLimit, st.Cpl, st.CplDefined, st.PassCount, st.Yield = 0, 0, false, 0, 0
			}
			lr.Stats = st
			for _, i := range st.Outliers {
				lr.OutlierUnits = append(lr.OutlierUnits, lr.Units[i])
			}
			a.res.Lot = append(a.res.Lot, lr)
		}
	}
}

// temperatureCoefficients fits dB against temperature per name when some
// unit was measured at two or more temperatures.
func (a *analyzer) temperatureCoefficients() {
	for _, name := range a.namesPresent() {
		tr := TemperatureResult{Name: name}
		var units []fit.UnitTemps
		multi := false
		for _, u := range a.units {
			ut := fit.UnitTemps{Unit: u}
			var uDB []float64
			for i := range a.res.Ratios {
				r := &a.res.Ratios[i]
				if r.Unit != u || r.Name != name {
					continue
				}
				if !r.Rejection.Resolved {
					tr.SkippedUnresolved++
					continue
				}
				ut.TempC = append(ut.TempC, r.MeanTemperatureC)
				ut.RatioDB = append(ut.RatioDB, r.Rejection.RatioDB)
				uDB = append(uDB, r.Rejection.StdUncDB)
			}
			if len(ut.TempC) == 0 {
				continue
			}
			for _, t := range ut.TempC[1:] {
				if t != ut.TempC[0] {
					multi = true
				}
			}
			if len(ut.TempC) == 2 && ut.TempC[0] != ut.TempC[1] {
				lo, hi := 0, 1
				if ut.TempC[1] < ut.TempC[0] {
					lo, hi = 1, 0
				}
				dt := ut.TempC[hi] - ut.TempC[lo]
				tr.TwoPoint = append(tr.TwoPoint, TwoPointSlope{Unit: u, LowC: ut.TempC[lo], HighC: ut.TempC[hi],
					SlopeDBPerC:       (ut.RatioDB[hi] - ut.RatioDB[lo]) / dt,
					SlopeStdUncDBPerC: math.Hypot(uDB[0], uDB[1]) / dt})
			}
			tr.Points += len(ut.TempC)
			units = append(units, ut)
		}
		if !multi {
			continue
		}
		f, err := fit.LotTempSlope(units)
		switch {
		case err == nil:
			tr.HasLotFit, tr.Fit = true, f
		case errors.Is(err, fit.ErrTooFewPoints) || errors.Is(err, fit.ErrZeroSpan):
		default:
			a.problem("", name, "", Condition{TempIndex: -1}, "no temperature coefficient: "+err.Error())
		}
		if tr.HasLotFit || len(tr.TwoPoint) > 0 {
			a.res.Temperature = append(a.res.Temperature, tr)
		}
	}
}

// repeatability pools the per-repeat results of each name × condition.
func (a *analyzer) repeatability() {
	for _, name := range a.namesPresent() {
		for ci, c := range a.res.Conditions {
			var coef, db [][]float64
			for i := range a.res.Ratios {
				r := &a.res.Ratios[i]
				if r.Name != name || r.Condition != ci || len(r.Repeats) < 2 {
					continue
				}
				var ks, ds []float64
				allDB := true
				for _, rv := range r.Repeats {
					ks = append(ks, rv.CoefficientUVPerV)
					if rv.RatioDefined {
						ds = append(ds, rv.RatioDB)
					} else {
						allDB = false
					}
				}
				coef = append(coef, ks)
				if allDB {
					db = append(db, ds)
				}
			}
			if len(coef) == 0 {
				continue
			}
			pc, err := fit.PooledSD(coef)
			if err != nil {
				continue
			}
			rr := RepeatabilityResult{Name: name, Condition: ci, TempIndex: c.TempIndex, TemperatureC: c.TemperatureC, CoefficientUVPerV: pc}
			if pd, err := fit.PooledSD(db); err == nil {
				rr.HasRatioDB, rr.RatioDB = true, pd
			}
			a.res.Repeatability = append(a.res.Repeatability, rr)
		}
	}
}

// summarize counts verdicts per result, per name and per unit, and lists
// the worst units of each name.
func (a *analyzer) summarize() {
	worstN := a.acc.WorstUnits
	if worstN <= 0 {
		worstN = DefaultWorstUnits
	}
	s := &a.res.Summary
	corrected := map[[2]int]bool{} // (unit rank, condition) with an A_OL-corrected cmrr
	unitRank := map[string]int{}
	for i, u := range a.units {
		unitRank[u] = i
	}
	for _, r := range a.res.Ratios {
		if r.Name == plan.TestCMRR && r.AOLCorrected {
			corrected[[2]int{unitRank[r.Unit], r.Condition}] = true
		}
	}
	perUnit := map[string]*UnitVerdict{}
	for _, u := range a.units {
		perUnit[u] = &UnitVerdict{Unit: u}
	}
	for _, name := range a.namesPresent() {
		ts := TestSummary{Name: name}
		var all []WorstResult
		for _, r := range a.res.Ratios {
			if r.Name != name {
				continue
			}
			ts.Counts.add(r.Judged, r.Decision.State)
			v, lb := r.ValueDB()
			all = append(all, WorstResult{Unit: r.Unit, Condition: r.Condition, TemperatureC: r.TemperatureC,
				ValueDB: v, LowerBound: lb, Judged: r.Judged, State: r.Decision.State})
			if name == ResultCMRRUncorrected && corrected[[2]int{unitRank[r.Unit], r.Condition}] {
				continue
			}
			s.Results.add(r.Judged, r.Decision.State)
			uv := perUnit[r.Unit]
			if r.Judged {
				if !uv.Judged || severity(r.Decision.State) > severity(uv.State) {
					uv.State = r.Decision.State
				}
				uv.Judged = true
				if r.Decision.State != fit.StatePass {
					uv.NotPassing = append(uv.NotPassing, fmt.Sprintf("%s @ %.1f °C: %s", r.Name, r.TemperatureC, r.Decision.State))
				}
			}
		}
		sort.SliceStable(all, func(i, j int) bool { return all[i].ValueDB < all[j].ValueDB })
		if len(all) > worstN {
			all = all[:worstN]
		}
		ts.Worst = all
		s.PerTest = append(s.PerTest, ts)
	}
	for _, u := range a.units {
		uv := perUnit[u]
		s.Units.add(uv.Judged, uv.State)
		s.PerUnit = append(s.PerUnit, *uv)
	}
	for _, c := range a.res.Closures {
		if c.Formed && c.Closure.Mismatch {
			s.ClosureMismatches++
		}
		if c.Symmetric.Checked && c.Symmetric.Mismatch {
			s.SymmetricMismatches++
		}
	}
	s.Problems = len(a.res.Problems)
}
