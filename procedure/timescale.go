package procedure

import (
	"fmt"
	"strings"

	"nullbench/procedure/plan"
)

// simulatedMaker is the manufacturer field (IEEE 488.2 10.14: the first
// field of the *IDN? answer) of the simulated bench's instruments.
const simulatedMaker = "NULLBENCH-SIM"

// checkTimeScale refuses a plan whose bench.time_scale is not 1 unless
// every instrument of the rig identifies as simulated: on a real bench a
// scaled clock would shorten every ramp dwell, settle wait and soak by
// that factor.
func checkTimeScale(p *plan.Plan, rig *Rig) error {
	if p.Bench.TimeScale == 1 {
		return nil
	}
	var real []string
	for _, id := range rig.Identities {
		maker, _, _ := strings.Cut(id.IDN, ",")
		if !strings.EqualFold(strings.TrimSpace(maker), simulatedMaker) {
			real = append(real, fmt.Sprintf("%s (%q)", id.Instrument, id.IDN))
		}
	}
	if len(real) > 0 {
		return fmt.Errorf("bench.time_scale %g: refused, because %s do not identify as simulated; on a real bench a scaled clock shortens every ramp dwell and soak: use time_scale = 1",
			p.Bench.TimeScale, strings.Join(real, ", "))
	}
	return nil
}
