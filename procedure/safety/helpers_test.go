package safety

import (
	"path/filepath"
	"strings"
	"testing"

	"nullbench/procedure/plan"
)

// examplePlanDir holds the cross-package example plans.
const examplePlanDir = "../../testdata/plans"

// loadExamplePlan loads testdata/plans/<name>.toml and fails the test on
// any error.
func loadExamplePlan(t testing.TB, name string) *plan.Plan {
	t.Helper()
	p, err := plan.Load(filepath.Join(examplePlanDir, name+".toml"))
	if err != nil {
		t.Fatalf("load %s: %v", name, err)
	}
	return p
}

// lineContaining returns the 1-based line of the first line of text that
// contains sub (the n-th such line for n > 1), so expected line numbers
// come from the document, not from counting by hand.
func lineContaining(t testing.TB, text, sub string, n int) int {
	t.Helper()
	seen := 0
	for i, l := range strings.Split(text, "\n") {
		if strings.Contains(l, sub) {
			seen++
			if seen == n {
				return i + 1
			}
		}
	}
	t.Fatalf("no line %d containing %q", n, sub)
	return 0
}

// sweepParts lists the sweep parts of a test: cm and diff for board_cmrr,
// the single unnamed part otherwise.
func sweepParts(t *plan.Test) []string {
	if t.Kind == plan.TestBoardCMRR {
		return []string{plan.PartCM, plan.PartDiff}
	}
	return []string{""}
}
