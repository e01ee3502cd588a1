package procedure

import (
	"fmt"
	"strings"

	"nullbench/instrument"
	"nullbench/procedure/estimate"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// Rig is the bench as the sequencer sees it: one value per role, already
// connected. cmd opens the connections, builds the Rig from the plan's
// [bench] section and closes the connections after the run; procedures
// only use the roles. A nil role is not on this bench.
type Rig struct {
	Meter       instrument.Meter
	SupplyPos   instrument.Supply // V+ rail
	SupplyNeg   instrument.Supply // V- rail (its driver reports the real, negative voltage)
	SourceCM    instrument.Source // common-mode node of the fixture
	SourceDiff  instrument.Source // differential drive (boards)
	SourceRef   instrument.Source // reference of the nulling loop's auxiliary amplifier
	Switch      instrument.Switch
	Chamber     instrument.Chamber
	Thermometer instrument.Thermometer
	// Frequency response ([[ac_test]]): the generator's outputs by channel
	// name (the generator role's channel and any generator_channel a test
	// names), the two-channel digitizer (1 stimulus, 2 response) or,
	// instead of it, the AC voltmeter's two inputs.
	Generators map[string]instrument.Generator
	Digitizer  instrument.Digitizer
	ACMeters   []instrument.ACVoltmeter

	// Identities of the instruments behind the roles (name, roles,
	// address, *IDN? answer): Run journals them at its start.
	Identities []journal.Identity

	// MeterAccuracy, StimulusAccuracy and StimulusByRole are the
	// instruments' specified accuracies, for the uncertainty budget (Type
	// B, GUM 4.3; analysis.Inputs takes them as they are). StimulusByRole
	// holds the read-back accuracy of each supply and source role (the fit
	// uses read-back values); StimulusAccuracy stands for any role not in
	// it.
	MeterAccuracy, StimulusAccuracy estimate.Accuracy
	StimulusByRole                  map[string]estimate.Accuracy
}

// check reports the roles the plan needs that the rig lacks, naming each
// role as in the plan's [bench.roles] table and why it is needed.
func (r *Rig) check(p *plan.Plan) error {
	if r == nil {
		return fmt.Errorf("no bench: the rig is nil")
	}
	var missing []string
	seen := map[string]bool{}
	for _, need := range plan.NeededRoles(p) {
		seen[need.Role] = true
		if !r.has(need.Role) {
			missing = append(missing, fmt.Sprintf("%s (%s)", need.Role, need.Why))
		}
	}
	// The power sequences drive every bound supply and source (safety.PowerUpOrder
	// switches a bound source off at 0 V even when no test uses it).
	for _, role := range []string{plan.RoleSupplyPos, plan.RoleSupplyNeg, plan.RoleSourceCM, plan.RoleSourceDiff, plan.RoleSourceRef} {
		if !seen[role] && p.Bench.Roles.Get(role).Bound() && !r.has(role) {
			missing = append(missing, fmt.Sprintf("%s (bound under [bench.roles], so the power sequences drive it)", role))
		}
	}
	if len(p.ACTests) > 0 && r.Digitizer == nil && len(r.ACMeters) < 2 {
		missing = append(missing, "digitizer (the [[ac_test]] tables need a two-channel digitizer, or an ac_meter with two inputs)")
	}
	if len(missing) > 0 {
		return fmt.Errorf("the bench lacks role(s) the plan needs: %s; bind them under [bench.roles]",
			strings.Join(missing, "; "))
	}
	return nil
}

func (r *Rig) has(role string) bool {
	switch role {
	case plan.RoleMeter:
		return r.Meter != nil
	case plan.RoleSupplyPos:
		return r.SupplyPos != nil
	case plan.RoleSupplyNeg:
		return r.SupplyNeg != nil
	case plan.RoleSourceCM:
		return r.SourceCM != nil
	case plan.RoleSourceDiff:
		return r.SourceDiff != nil
	case plan.RoleSourceRef:
		return r.SourceRef != nil
	case plan.RoleSwitch:
		return r.Switch != nil
	case plan.RoleChamber:
		return r.Chamber != nil
	case plan.RoleThermometer:
		return r.Thermometer != nil || r.Chamber != nil
	case plan.RoleGenerator:
		return len(r.Generators) > 0
	case plan.RoleDigitizer:
		return r.Digitizer != nil
	case plan.RoleACMeter:
		return len(r.ACMeters) >= 2
	}
	return false
}

// thermometer returns the thermometer to read: the thermometer role, else
// the chamber's own sensor, else nil.
func (r *Rig) thermometer() instrument.Thermometer {
	if r.Thermometer != nil {
		return r.Thermometer
	}
	if r.Chamber != nil {
		return r.Chamber
	}
	return nil
}
