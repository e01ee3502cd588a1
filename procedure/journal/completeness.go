package journal

import (
	"nullbench/procedure/plan"
)

// EventUnitSkipped marks a unit left out of the campaign (socket empty,
// part cracked): its points are not measured and are not missing. Reason
// says why. A skip holds for every later temperature too.
const EventUnitSkipped = "unit-skipped"

// Skipped returns the units skipped in the journal, with the reason given
// (the first skip of each unit counts).
func (c *Contents) Skipped() map[string]string {
	out := map[string]string{}
	for _, e := range c.Events {
		if e.Type != EventUnitSkipped || e.Unit == "" {
			continue
		}
		if _, ok := out[e.Unit]; !ok {
			out[e.Unit] = e.Reason
		}
	}
	return out
}

// Completeness is how much of a plan a journal holds.
type Completeness struct {
	Planned  int // points the plan asks for, skipped units left out
	Measured int // of those, points with a reading
	Missing  int // Planned − Measured
	// MissingByUnit counts the missing points of each unit (units with
	// none are absent).
	MissingByUnit map[string]int
	Skipped       map[string]string // unit → reason
}

// Complete reports whether every planned point was measured.
func (k Completeness) Complete() bool { return k.Missing == 0 }

// CompletenessOf counts the points plan p asks for — every temperature ×
// unit × test × repeat × step of its step table (plan.TestSteps), and every
// temperature × unit × [[ac_test]] frequency × record (floor, through,
// stimulus) × records per point — and how
// many of them the journal holds a reading for. Units skipped in the
// journal are left out of the count.
func CompletenessOf(p *plan.Plan, c *Contents) Completeness {
	k := Completeness{MissingByUnit: map[string]int{}, Skipped: c.Skipped()}
	done := c.Done()
	temps := len(p.TemperaturePoints())
	for i := range p.Tests {
		steps := plan.TestSteps(p, i)
		for ti := 0; ti < temps; ti++ {
			for _, u := range p.Units {
				if _, skip := k.Skipped[u.ID]; skip {
					continue
				}
				for rep := 0; rep < p.Tests[i].Repeats; rep++ {
					for _, st := range steps {
						k.Planned++
						if done.Has(st.Key(ti, u.ID, rep)) {
							k.Measured++
						} else {
							k.MissingByUnit[u.ID]++
						}
					}
				}
			}
		}
	}
	for _, t := range p.ACTests {
		for ti := 0; ti < temps; ti++ {
			for _, u := range p.Units {
				if _, skip := k.Skipped[u.ID]; skip {
					continue
				}
				for fi := range t.Frequencies() {
					for _, rec := range ACRecords() {
						for rep := 0; rep < t.Records; rep++ {
							k.Planned++
							key := ACKeyOf(ACReading{TempIndex: ti, Unit: u.ID, Test: t.Kind, Record: rec, FreqIndex: fi, Repeat: rep})
							if done.Has(key) {
								k.Measured++
							} else {
								k.MissingByUnit[u.ID]++
							}
						}
					}
				}
			}
		}
	}
	k.Missing = k.Planned - k.Measured
	return k
}
