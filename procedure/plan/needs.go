package plan

import (
	"fmt"
	"strings"
)

// TemplateNeed is a command template the plan needs from the profile bound
// to a role, and what for. Any one of Keys will do (a switch opens a
// relay with open or open_all).
type TemplateNeed struct {
	Role  string
	Table string   // the profile table: "supply", "meter", ...
	Keys  []string // template keys within Table
	Why   string   // "the plan's psrr_pos test needs it to step V+"
}

// roleTables is the profile table each role is served by.
var roleTables = map[string]string{
	RoleMeter: "meter", RoleSupplyPos: "supply", RoleSupplyNeg: "supply",
	RoleSourceCM: "source", RoleSourceDiff: "source", RoleSourceRef: "source",
	RoleSwitch: "switch", RoleChamber: "chamber", RoleThermometer: "thermometer",
}

// roleWhat names what a role's output is, for messages.
var roleWhat = map[string]string{
	RoleSupplyPos: "V+", RoleSupplyNeg: "V−", RoleSourceCM: "the common-mode voltage",
	RoleSourceDiff: "the differential drive", RoleSourceRef: "the auxiliary reference",
}

// stepsRole reports whether a test of kind steps the role's output.
func stepsRole(kind, role string) bool {
	switch role {
	case RoleSourceCM:
		return kind == TestCMRR || kind == TestBoardCMRR
	case RoleSourceDiff:
		return kind == TestBoardCMRR
	case RoleSupplyPos:
		return kind == TestPSRRPos || kind == TestPSRRSym || kind == TestBoardPSRRPos
	case RoleSupplyNeg:
		return kind == TestPSRRNeg || kind == TestPSRRSym || kind == TestBoardPSRRNeg
	case RoleSourceRef:
		return kind == TestAOL
	}
	return false
}

// TemplateNeeds lists the templates the plan needs of each bound role's
// profile, each with the reason, in role order.
func TemplateNeeds(p *Plan) []TemplateNeed {
	var out []TemplateNeed
	need := func(role string, why string, keys ...string) {
		out = append(out, TemplateNeed{Role: role, Table: roleTables[role], Keys: keys, Why: why})
	}
	for _, role := range RoleNames() {
		if !p.Bench.Roles.Get(role).Bound() {
			continue
		}
		switch role {
		case RoleMeter:
			need(role, "the plan needs it to select DC volts and the range", "configure")
			need(role, "the plan needs it to set the integration time (nplc)", "nplc")
			// read, or init … fetch; without a count template the meter
			// takes the readings one trigger each (profile_meter.go).
			need(role, "the plan needs it to take readings", "read", "fetch")
		case RoleSupplyPos, RoleSupplyNeg, RoleSourceCM, RoleSourceDiff, RoleSourceRef:
			what := roleWhat[role]
			stepped := ""
			for _, t := range p.Tests {
				if stepsRole(t.Kind, role) {
					stepped = t.Kind
					break
				}
			}
			if stepped != "" {
				need(role, fmt.Sprintf("the plan's %s test needs it to step %s", stepped, what), "set_volts")
			} else {
				need(role, "the plan needs it to program "+what, "set_volts")
			}
			need(role, "the plan needs it to switch "+what+" on and off", "set_output")
			need(role, "the plan needs it to read "+what+" back", "read_volts")
			if roleTables[role] == "supply" {
				need(role, "part.current_limit_amps needs it to limit the supply current", "set_current_limit")
				need(role, "the plan needs it to read the supply current at power-up", "read_amps")
			}
		case RoleSwitch:
			need(role, "the plan needs it to connect each unit", "close")
			need(role, "the plan needs it to disconnect each unit", "open", "open_all")
		case RoleChamber:
			if len(p.Temperature.PointsCelsius) > 0 {
				need(role, "the plan's temperature points need it to set the chamber", "set_point")
			}
			need(role, "the plan needs it to read the chamber temperature", "read_celsius")
		case RoleThermometer:
			need(role, "the plan needs it to read the part's temperature", "read_celsius")
		}
	}
	return out
}

// checkTemplates adds a problem for every need the bound profiles leave
// unmet: a role bound to a profile without the role's table (written for
// another role), or a table without a template the plan needs.
func checkRoleTemplates(p *Plan, profiles map[string]BenchProfile, add func(key, problem, fix string)) {
	tableDone := map[string]bool{}
	for _, n := range TemplateNeeds(p) {
		b := p.Bench.Roles.Get(n.Role)
		bp, ok := profiles[b.Instrument]
		if !ok {
			continue
		}
		key := "bench.roles." + n.Role + ".instrument"
		file := p.Bench.Instruments[b.Instrument].Profile // as the plan names it
		if !isProfilePath(file) {
			file = fmt.Sprintf("built-in profile %q", file)
		}
		if !bp.Roles[n.Table] {
			if !tableDone[n.Role] {
				tableDone[n.Role] = true
				add(key, fmt.Sprintf("%s: no [%s] table (it is written for %s); the plan binds instrument %s to the %s role",
					file, n.Table, writtenFor(bp), b.Instrument, n.Role),
					"bind the role to an instrument whose profile has a ["+n.Table+"] table")
			}
			continue
		}
		if bp.Templates == nil || tableDone[n.Role] {
			continue
		}
		found := false
		for _, k := range n.Keys {
			found = found || bp.Templates[n.Table+"."+k]
		}
		if !found {
			add(key, fmt.Sprintf("%s: no %s template in [%s]; %s", file, quoteKeys(n.Keys), n.Table, n.Why),
				fmt.Sprintf("add %s to the profile's [%s] table", quoteKeys(n.Keys), n.Table))
		}
	}
}

func writtenFor(bp BenchProfile) string {
	var rs []string
	for _, r := range []string{"meter", "supply", "source", "switch", "chamber", "thermometer", "generator", "digitizer", "ac_meter"} {
		if bp.Roles[r] {
			rs = append(rs, r)
		}
	}
	if len(rs) == 0 {
		return "no role"
	}
	return strings.Join(rs, ", ")
}

func quoteKeys(keys []string) string {
	q := make([]string, len(keys))
	for i, k := range keys {
		q[i] = fmt.Sprintf("%q", k)
	}
	return strings.Join(q, " or ")
}
