package procedure

import (
	"fmt"
	"strings"

	"nullbench/instrument"
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

	// Identities of the instruments behind the roles (name, roles,
	// address, *IDN? answer): Run journals them at its start.
	Identities []JournalIdentity

	// MeterAccuracy, StimulusAccuracy and StimulusByRole are the
	// instruments' specified accuracies, for the uncertainty budget (Type
	// B, GUM 4.3; AnalysisInputs takes them as they are). StimulusByRole
	// holds the read-back accuracy of each supply and source role (the fit
	// uses read-back values); StimulusAccuracy stands for any role not in
	// it.
	MeterAccuracy, StimulusAccuracy Accuracy
	StimulusByRole                  map[string]Accuracy
}

// Accuracy is a DC accuracy specification: ±(GainPPM·10⁻⁶·|reading| +
// OffsetVolts), taken as the half-width of a rectangular distribution (GUM
// 4.3.7: u = a/√3).
type Accuracy struct {
	GainPPM     float64 `json:"gain_ppm"`
	OffsetVolts float64 `json:"offset_volts"`
}

// check reports the roles the plan needs that the rig lacks, naming each
// role as in the plan's [bench.roles] table and why it is needed.
func (r *Rig) check(p *Plan) error {
	if r == nil {
		return fmt.Errorf("no bench: the rig is nil")
	}
	var missing []string
	seen := map[string]bool{}
	for _, need := range NeededRoles(p) {
		seen[need.Role] = true
		if !r.has(need.Role) {
			missing = append(missing, fmt.Sprintf("%s (%s)", need.Role, need.Why))
		}
	}
	// The power sequences drive every bound supply and source (PowerUpOrder
	// switches a bound source off at 0 V even when no test uses it).
	for _, role := range []string{RoleSupplyPos, RoleSupplyNeg, RoleSourceCM, RoleSourceDiff, RoleSourceRef} {
		if !seen[role] && p.Bench.Roles.Get(role).Bound() && !r.has(role) {
			missing = append(missing, fmt.Sprintf("%s (bound under [bench.roles], so the power sequences drive it)", role))
		}
	}
	if len(missing) > 0 {
		return fmt.Errorf("the bench lacks role(s) the plan needs: %s; bind them under [bench.roles]",
			strings.Join(missing, "; "))
	}
	return nil
}

func (r *Rig) has(role string) bool {
	switch role {
	case RoleMeter:
		return r.Meter != nil
	case RoleSupplyPos:
		return r.SupplyPos != nil
	case RoleSupplyNeg:
		return r.SupplyNeg != nil
	case RoleSourceCM:
		return r.SourceCM != nil
	case RoleSourceDiff:
		return r.SourceDiff != nil
	case RoleSourceRef:
		return r.SourceRef != nil
	case RoleSwitch:
		return r.Switch != nil
	case RoleChamber:
		return r.Chamber != nil
	case RoleThermometer:
		return r.Thermometer != nil || r.Chamber != nil
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
