package journal

import (
	"fmt"

	"nullbench/procedure/plan"
)

// CheckReadings refuses a journal whose readings do not fit its plan: a
// reading for a unit the plan does not list, or a second reading for a
// point (temperature, unit, test, sweep, pass, step) already recorded.
// Neither happens in a journal the runner wrote; either means an edited or
// joined file, and resume or report would otherwise fit a point twice or
// report a unit nobody planned. The error names the journal line.
func CheckReadings(p *plan.Plan, c *Contents) error {
	units := make(map[string]bool, len(p.Units))
	for _, u := range p.Units {
		units[u.ID] = true
	}
	seen := make(map[plan.WorkKey]int, len(c.Readings))
	for i, r := range c.Readings {
		line := 0
		if i < len(c.ReadingLines) {
			line = c.ReadingLines[i]
		}
		if !units[r.Unit] {
			return fmt.Errorf("line %d: a reading for unit %q, which the plan does not list; was the journal edited or joined with another?", line, r.Unit)
		}
		k := plan.WorkKey{TempIndex: r.TempIndex, Unit: r.Unit, Test: r.Test, Repeat: r.Repeat, Part: r.Part, Step: r.Step}
		if first, dup := seen[k]; dup {
			return fmt.Errorf("line %d: a second reading for unit %s %s%s pass %d step %d at temperature point %d (first on line %d); remove one of them",
				line, r.Unit, r.Test, plan.PartSuffix(r.Part), r.Repeat+1, r.Step+1, r.TempIndex+1, first)
		}
		seen[k] = line
	}
	for i, r := range c.ACReadings {
		line := 0
		if i < len(c.ACReadingLines) {
			line = c.ACReadingLines[i]
		}
		if !units[r.Unit] {
			return fmt.Errorf("line %d: an ac-reading for unit %q, which the plan does not list; was the journal edited or joined with another?", line, r.Unit)
		}
		k := ACKeyOf(r)
		if first, dup := seen[k]; dup {
			return fmt.Errorf("line %d: a second %s record for unit %s %s at %g Hz, record %d, temperature point %d (first on line %d); remove one of them",
				line, r.Record, r.Unit, r.Test, r.FrequencyHz, r.Repeat+1, r.TempIndex+1, first)
		}
		seen[k] = line
	}
	return nil
}
