package procedure

import (
	"nullbench/procedure/journal"
)

// journalIdentities writes the rig's instrument identities at the start of
// the run (also on a resume: the instruments may have changed).
func (r *runner) journalIdentities() error {
	if r.jw == nil {
		return nil
	}
	for _, id := range r.rig.Identities {
		if err := r.jw.Identity(id); err != nil {
			return err
		}
	}
	return nil
}

// event journals an event. A failed write is logged; the journal then
// refuses every later record, so the next reading stops the run.
func (r *runner) event(e journal.Event) {
	if r.jw == nil {
		return
	}
	if e.TempIndex < 0 {
		e.TempIndex = 0
	}
	if err := r.jw.Event(e); err != nil {
		r.logf("journal: %v", err)
	}
}

// journalEnd writes the end record.
func (r *runner) journalEnd(e journal.End) {
	if r.jw == nil {
		return
	}
	if err := r.jw.End(e); err != nil {
		r.logf("journal: %v", err)
	}
}
