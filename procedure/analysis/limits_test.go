package analysis

import (
	"testing"

	"nullbench/fit"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// Limits as data sheets state them: a CMRR of 100 dB (k_c = 10 µV/V)
// fails a 101 dB limit at 25 °C and passes a 95 dB limit over the full
// temperature range at 85 °C.
func TestAnalyzeLimitsAt25CAndFullRange(t *testing.T) {
	p := azOpAmpPlan(plan.FixtureNullingLoop, plan.CMByInputDrive, plan.TestCMRR)
	p.Temperature.PointsCelsius = []float64{25, 85}
	p.Limits = plan.Limits{plan.TestCMRR: 101}
	p.LimitsFullRange = plan.Limits{plan.TestCMRR: 95}
	sim := azNewBench(p, 3, 1e-7)
	var rs []journal.Reading
	rs = sim.opAmpReadings(rs, "U1", 0, 25, azWorked)
	rs = sim.opAmpReadings(rs, "U1", 1, 85, azWorked)
	res := azAnalyze(t, p, rs, Inputs{})
	tests := []struct {
		cond   int
		limit  float64
		scope  string
		states []fit.State
	}{
		{0, 101, plan.LimitScopeRoom, []fit.State{fit.StateFail, fit.StateConditionalFail}},
		{1, 95, plan.LimitScopeFullRange, []fit.State{fit.StatePass, fit.StateConditionalPass}},
	}
	for _, tt := range tests {
		r := azRatio(t, res, "U1", plan.TestCMRR, tt.cond)
		if !r.Judged || r.Decision.LimitDB != tt.limit || r.LimitScope != tt.scope {
			t.Errorf("condition %d: judged %v against %g dB (%s), want %g dB (%s)", tt.cond, r.Judged, r.Decision.LimitDB, r.LimitScope, tt.limit, tt.scope)
		}
		ok := false
		for _, s := range tt.states {
			ok = ok || r.Decision.State == s
		}
		if !ok {
			t.Errorf("condition %d: %s at %.2f dB against %g dB", tt.cond, r.Decision.State, r.Rejection.RatioDB, tt.limit)
		}
	}
}

func TestLimitAt(t *testing.T) {
	p := &plan.Plan{Limits: plan.Limits{"cmrr": 90, "aol": 110}, LimitsFullRange: plan.Limits{"cmrr": 86, "psrr_pos": 80}}
	tests := []struct {
		name  string
		c     float64
		want  float64
		scope string
		ok    bool
	}{
		{"cmrr", 25, 90, plan.LimitScopeRoom, true},
		{"cmrr", 25.8, 90, plan.LimitScopeRoom, true},
		{"cmrr", -40, 86, plan.LimitScopeFullRange, true},
		{"aol", 85, 110, plan.LimitScopeRoom, true},          // no full-range limit: the 25 °C one, as before
		{"psrr_pos", 25, 80, plan.LimitScopeFullRange, true}, // the full range includes 25 °C
		{"psrr_neg", 25, 0, "", false},
	}
	for _, tt := range tests {
		got, scope, ok := p.LimitAt(tt.name, tt.c)
		if got != tt.want || scope != tt.scope || ok != tt.ok {
			t.Errorf("LimitAt(%s, %g) = %g, %q, %v; want %g, %q, %v", tt.name, tt.c, got, scope, ok, tt.want, tt.scope, tt.ok)
		}
	}
}
