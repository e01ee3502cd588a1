package safety

import (
	"fmt"

	"nullbench/procedure/plan"
)

// checkACSafety applies every safety condition of CheckSafetyWith to the
// sine of each [[ac_test]] at both of its peaks, DC level plus peak
// amplitude: a condition affine in the state holds over the whole cycle
// when it holds at both peaks. The common-mode range (with cm_margin), the
// input-beyond-rail, span and polarity rules and the fixture's maximum
// stimulus are all checked this way; the hazardous-voltage gate
// (AssessHazard) counts the same peak states.
func checkACSafety(p *plan.Plan, limits []safetyLimit, nominalBad map[string]bool,
	refuse func(key string, line int, fix, format string, args ...any)) {
	for i := range p.ACTests {
		t := &p.ACTests[i]
		key := plan.ACTestKey(i) + ".peak_volts"
		peaks := plan.ACPeakStates(p, t)
		for _, l := range limits {
			if nominalBad[l.id] {
				continue
			}
			for j, s := range peaks {
				if l.slack(s) < -slackTolerance {
					refuse(key, 0, fmt.Sprintf("lower peak_volts (or move offset_volts) so that DC level ± peak stays inside; the largest safe peak here is %s",
						plan.FormatMag(maxSafePeak(p, t, limits))),
						"%s sine %s peak (%s %s %s): %s", t.Kind, [2]string{"positive", "negative"}[j],
						plan.FormatVolts(t.OffsetVolts), [2]string{"+", "−"}[j], plan.FormatMag(t.PeakVolts), l.problem(s))
					break
				}
			}
		}
	}
}

// maxSafePeak is the largest peak amplitude for which both peaks of the
// test's sine satisfy every limit (0 when even the DC level fails), found
// by bisection on the affine slacks.
func maxSafePeak(p *plan.Plan, t *plan.ACTest, limits []safetyLimit) float64 {
	ok := func(a float64) bool {
		for _, v := range []float64{a, -a} {
			s := plan.ACStateAt(p, t, v)
			for _, l := range limits {
				if l.slack(s) < -slackTolerance {
					return false
				}
			}
		}
		return true
	}
	if !ok(0) {
		return 0
	}
	lo, hi := 0.0, 1.0
	for ok(hi) && hi < 1e6 {
		lo, hi = hi, 2*hi
	}
	for k := 0; k < 60; k++ {
		m := (lo + hi) / 2
		if ok(m) {
			lo = m
		} else {
			hi = m
		}
	}
	return lo
}
