package fit

import (
	"errors"
	"math"
	"testing"
)

// JCGM 100:2008 (GUM) / ILAC-G8:09/2019 §4.2: CMRR ≥ 85 dB with U = 1.5 dB:
// 87 → pass; 86 → conditional pass; 84 → conditional fail; 83 → fail.
func TestDecideILACG8(t *testing.T) {
	cases := []struct {
		v    float64
		rule Rule
		want State
	}{
		{87, RuleGuarded, StatePass},            // ILAC-G8 §4.2
		{86, RuleGuarded, StateConditionalPass}, // ILAC-G8 §4.2
		{84, RuleGuarded, StateConditionalFail}, // ILAC-G8 §4.2
		{83, RuleGuarded, StateFail},            // ILAC-G8 §4.2
		{86.5, RuleGuarded, StatePass},          // at AL = TL + w
		{85, RuleGuarded, StateConditionalPass}, // at TL
		{83.5, RuleGuarded, StateFail},          // at RL = TL − w
		{87, RuleSimple, StatePass},             // ILAC-G8 §4.2 simple acceptance
		{85, RuleSimple, StatePass},
		{84.99, RuleSimple, StateFail},
		{83, RuleSimple, StateFail},
	}
	for _, c := range cases {
		d, err := Decide(c.v, 1.5, 85, c.rule)
		if err != nil {
			t.Fatal(err)
		}
		if d.State != c.want {
			t.Errorf("%v dB under %s: %s, want %s", c.v, c.rule, d.State, c.want)
		}
		if d.Rule != c.rule || d.LimitDB != 85 || d.JudgedDB != c.v {
			t.Errorf("decision does not carry its rule: %+v", d)
		}
		if c.rule == RuleGuarded && (d.GuardBandDB != 1.5 || d.AcceptanceLimitDB != 86.5 || d.RejectionLimitDB != 83.5) {
			t.Errorf("guard band not carried: %+v", d)
		}
		if c.rule == RuleSimple && d.GuardBandDB != 0 {
			t.Errorf("simple rule with guard band: %+v", d)
		}
	}
	if _, err := Decide(90, 1, 85, Rule("coin toss")); !errors.Is(err, ErrBadInput) {
		t.Errorf("unknown rule: %v", err)
	}
	if _, err := Decide(90, -1, 85, RuleGuarded); !errors.Is(err, ErrBadInput) {
		t.Errorf("negative U: %v", err)
	}
}

func TestDecideRejection(t *testing.T) {
	// Resolved, asymmetric: the acceptance side uses RatioDB − LowerDB.
	r := Rejection{Resolved: true, RatioDB: 86, LowerDB: 84.9, UpperDB: 87.3, LowerBoundDB: 84.9, CoefficientVPerV: 5e-5}
	d, err := DecideRejection(r, 85, RuleGuarded)
	if err != nil {
		t.Fatal(err)
	}
	if d.State != StateConditionalPass || d.GuardBandDB < 1.09 || d.GuardBandDB > 1.11 || d.RejectGuardBandDB < 1.29 || d.RejectGuardBandDB > 1.31 {
		t.Errorf("%+v", d)
	}
	// Unresolved: judged by the lower bound.
	un := func(lb, kV float64) Rejection {
		return Rejection{Resolved: false, LowerBoundDB: lb, CoefficientVPerV: kV}
	}
	cases := []struct {
		r    Rejection
		rule Rule
		want State
	}{
		{un(130, 1e-8), RuleGuarded, StatePass},
		{un(80, 1e-8), RuleGuarded, StateConditionalPass}, // estimate 160 dB ≥ TL, bound below
		{un(80, 1e-4), RuleGuarded, StateConditionalFail}, // estimate 80 dB < TL
		{un(80, 0), RuleGuarded, StateConditionalPass},    // exactly zero estimate
	}
	for i, c := range cases {
		d, err := DecideRejection(c.r, 85, c.rule)
		if err != nil {
			t.Fatal(err)
		}
		if d.State != c.want || !d.JudgedOnLowerBound || d.JudgedDB != c.r.LowerBoundDB || d.Rule != c.rule {
			t.Errorf("case %d: %+v, want %s", i, d, c.want)
		}
	}
}

// TestDecideRejectionSimpleJudgesMeasuredValue: simple acceptance (w = 0,
// ILAC-G8:09/2019 §4.2.1) compares the measured value with the limit, also
// when the coefficient is not resolved. At a 120 dB limit (1 µV/V) a part
// at 0.80 µV/V with U = 0.90 µV/V (unresolved, bound 115.4 dB) is better
// than one at 0.86 µV/V with U = 0.80 µV/V (resolved, 121.3 dB): both pass,
// where judging the bound failed the better one.
func TestDecideRejectionSimpleJudgesMeasuredValue(t *testing.T) {
	rej := func(kUV, UUV float64) Rejection {
		b := Budget{Unit: "µV/V", Value: kUV, CombinedStdUnc: UUV / 2, ExpandedU: UUV, CoverageK: 2}
		r, err := RejectionFromBudget(b)
		if err != nil {
			t.Fatal(err)
		}
		return r
	}
	better, worse := rej(0.80, 0.90), rej(0.86, 0.80)
	if better.Resolved || !worse.Resolved {
		t.Fatalf("setup: resolved %v %v", better.Resolved, worse.Resolved)
	}
	for _, c := range []struct {
		name string
		r    Rejection
		lim  float64
		want State
		db   float64
	}{
		{"better, unresolved", better, 120, StatePass, 121.94}, // 20·log10(1/0.80e-6)
		{"worse, resolved", worse, 120, StatePass, 121.31},     // 20·log10(1/0.86e-6)
		{"better at 122 dB", better, 122, StateFail, 121.94},
		{"zero estimate", rej(0, 0.5), 200, StatePass, math.Inf(1)},
	} {
		d, err := DecideRejection(c.r, c.lim, RuleSimple)
		if err != nil {
			t.Fatal(err)
		}
		if d.State != c.want || d.JudgedOnLowerBound || !(math.Abs(d.JudgedDB-c.db) < 0.01 || d.JudgedDB == c.db) {
			t.Errorf("%s: %+v, want %s judged on %.2f dB", c.name, d, c.want, c.db)
		}
	}
}
