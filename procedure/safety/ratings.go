package safety

import (
	"fmt"

	"nullbench/procedure/plan"
)

// Rating is what an instrument's profile says one bound output can do:
// the channel's voltage rating in magnitude (the profile's max_volts; 0
// when the profile does not state one) and where that figure comes from,
// for the message.
type Rating struct {
	MaxVolts float64
	From     string // e.g. `instrument psu, built-in profile "supply2"`
}

// CheckRatings refuses a plan that would program a supply or source role
// beyond its instrument's stated rating (|V| > max_volts), before any
// instrument contact: such a command is either refused by the
// instrument mid-run, with the part powered, or — on an instrument that
// clips silently — applied as a different level than the plan and the
// analysis assume. ratings maps a role (plan.RoleSupplyPos, …) to its
// output's rating; roles not in the map, or with MaxVolts 0, are not
// judged. It returns a *SafetyError listing every refusal, or nil.
// Keeping a margin to the rating is common practice, no published
// source; the refusal is only for exceeding it.
func CheckRatings(p *plan.Plan, ratings map[string]Rating) error {
	var rs plan.Errors
	for _, role := range []string{plan.RoleSupplyPos, plan.RoleSupplyNeg, plan.RoleSourceCM, plan.RoleSourceDiff, plan.RoleSourceRef} {
		r, ok := ratings[role]
		if !ok || !(r.MaxVolts > 0) || !p.Bench.Roles.Get(role).Bound() {
			continue
		}
		if m := MaxProgrammedVolts(p, role); m > r.MaxVolts {
			key := "bench.roles." + role
			rs = append(rs, &plan.Error{File: p.Source, Line: p.KeyLine(key), Key: key,
				Problem: fmt.Sprintf("the plan programs %s on %s, beyond the %s rating of its output (%s, max_volts)",
					plan.FormatMag(m), role, plan.FormatMag(r.MaxVolts), r.From),
				Fix: "bind " + role + " to an output rated for the plan's levels, or lower the levels"})
		}
	}
	if len(rs) == 0 {
		return nil
	}
	return &SafetyError{Refusals: rs}
}
