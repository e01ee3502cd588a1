package journal

import (
	"path/filepath"
	"strings"
	"testing"

	"nullbench/procedure/plan"
)

// A journal with a second reading for a recorded point, or a reading for
// a unit the plan does not list, is refused at resume with its line.
func TestResumeRefusesDuplicateAndForeignReadings(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	unit := p.Units[0].ID
	cases := []struct {
		name     string
		readings []Reading
		want     []string
	}{
		{"second reading for a point", []Reading{
			testReading(unit, plan.TestCMRR, 0, 0, 0, ""),
			testReading(unit, plan.TestCMRR, 0, 0, 1, ""),
			testReading(unit, plan.TestCMRR, 0, 0, 0, ""),
		}, []string{"line 5:", "a second reading", "first on line 3"}},
		{"unit not in the plan", []Reading{
			testReading(unit, plan.TestCMRR, 0, 0, 0, ""),
			testReading("U99", plan.TestCMRR, 0, 0, 1, ""),
		}, []string{"line 4:", `unit "U99"`, "does not list"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "j.jsonl")
			w, err := Open(path, testHeader(p))
			if err != nil {
				t.Fatal(err)
			}
			w.Event(Event{Type: EventPowerUp})
			for _, r := range tc.readings {
				if err := w.Reading(r); err != nil {
					t.Fatal(err)
				}
			}
			w.Close()
			_, _, err = Resume(path, p, testHeader(p))
			for _, s := range tc.want {
				if err == nil || !strings.Contains(err.Error(), s) {
					t.Errorf("want %q in %v", s, err)
				}
			}
		})
	}
	// A clean journal still resumes.
	path, _ := writeTestJournal(t, p)
	if w, _, err := Resume(path, p, testHeader(p)); err != nil {
		t.Errorf("clean journal refused: %v", err)
	} else {
		w.Close()
	}
}
