package procedure

import (
	"strings"

	"nullbench/procedure/journal"
)

// initSkips takes the skips already in the resumed journal and the ones
// asked for in the options.
func (r *runner) initSkips() {
	r.skipped, r.pending = map[string]string{}, map[string]string{}
	if r.opt.Resume != nil {
		for u, why := range r.opt.Resume.Skipped() {
			r.skipped[u] = why
		}
	}
	for u, why := range r.opt.Skip {
		if _, done := r.skipped[u]; done {
			continue
		}
		if strings.TrimSpace(why) == "" {
			why = "skipped by the operator"
		}
		// Counted out of the total at once; journalled when reached.
		r.skipped[u], r.pending[u] = why, why
	}
}

// skipNow journals a skip asked for in the options when the run reaches
// the unit, and reports whether the unit is skipped.
func (r *runner) skipNow(ti int, unit string) bool {
	why, ok := r.pending[unit]
	if !ok {
		_, skipped := r.skipped[unit]
		return skipped
	}
	delete(r.pending, unit)
	r.skipUnit(ti, unit, why)
	return true
}

// skipUnit journals unit as skipped and takes its remaining points out of
// the progress total.
func (r *runner) skipUnit(ti int, unit, reason string) {
	r.event(journal.Event{Type: journal.EventUnitSkipped, Unit: unit, TempIndex: ti, TemperatureC: r.tempC, Reason: reason})
	r.note("unit %s skipped: %s", unit, reason)
	r.skipped[unit] = reason
}
