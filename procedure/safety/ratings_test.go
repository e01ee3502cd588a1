package safety

import (
	"errors"
	"strings"
	"testing"

	"nullbench/procedure/plan"
)

// A plan that programs an output beyond its instrument's rating is refused
// before any contact; a rating the profile does not state is not judged.
// The lot plan's largest programmed voltages (nominal ±15 V rails shifted
// by its psrr and common-mode levels) come from the plan itself, through
// MaxProgrammedVolts, so the cases bracket them.
func TestCheckRatings(t *testing.T) {
	p := loadExamplePlan(t, "lot")
	pos := MaxProgrammedVolts(p, plan.RoleSupplyPos)
	if !(pos > 0) {
		t.Fatalf("lot plan programs %g V on supply_pos", pos)
	}
	tests := []struct {
		name    string
		ratings map[string]Rating
		refused []string // roles named in the refusal
	}{
		{"rated above", map[string]Rating{plan.RoleSupplyPos: {MaxVolts: pos + 1, From: "psu"}}, nil},
		{"rated exactly", map[string]Rating{plan.RoleSupplyPos: {MaxVolts: pos, From: "psu"}}, nil},
		{"rated below", map[string]Rating{plan.RoleSupplyPos: {MaxVolts: pos - 0.5, From: "psu"}}, []string{plan.RoleSupplyPos}},
		{"not stated", map[string]Rating{plan.RoleSupplyPos: {MaxVolts: 0, From: "psu"}}, nil},
		{"both rails below", map[string]Rating{
			plan.RoleSupplyPos: {MaxVolts: 1, From: "psu"},
			plan.RoleSupplyNeg: {MaxVolts: 1, From: "psu"},
		}, []string{plan.RoleSupplyPos, plan.RoleSupplyNeg}},
		{"no ratings", nil, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := CheckRatings(p, tt.ratings)
			if len(tt.refused) == 0 {
				if err != nil {
					t.Fatalf("refused: %v", err)
				}
				return
			}
			var se *SafetyError
			if !errors.As(err, &se) {
				t.Fatalf("err %T %v, want a *SafetyError", err, err)
			}
			if len(se.Refusals) != len(tt.refused) {
				t.Errorf("%d refusals, want %d:\n%v", len(se.Refusals), len(tt.refused), err)
			}
			for _, role := range tt.refused {
				if !strings.Contains(err.Error(), "on "+role+", beyond the") || !strings.Contains(err.Error(), `key "bench.roles.`+role+`"`) {
					t.Errorf("refusal does not name %s and its key:\n%v", role, err)
				}
			}
		})
	}
}
