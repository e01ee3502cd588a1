package report

import (
	"fmt"
	"math"
	"strings"
)

// UnitVerdict is one row of the per-unit verdict table: the unit's most
// severe result verdict (ILAC-G8:09/2019 §4.2 zones, fail worst), the
// result that set it, and why in words. A skipped unit, one with points
// not measured and one with tests not judged say so: none of them is a
// plain "pass".
type UnitVerdict struct {
	Unit, Serial string
	Worst        string // the deciding result, e.g. "cmrr at 25 °C: 88.21 dB (limit 90 dB)"
	Verdict      string // a Verdict* string or UnitSkipped, UnitIncomplete, UnitNoResults
	Reason       string
}

// UnitVerdicts derives the per-unit verdicts of c, in the order of
// c.Units (then any unit only seen in the results). Results named in
// skipTests (e.g. an uncorrected ratio kept for reference) do not decide.
func UnitVerdicts(c *Campaign, skipTests ...string) []UnitVerdict {
	skip := map[string]bool{}
	for _, t := range skipTests {
		skip[t] = true
	}
	var order []string
	info := map[string]UnitInfo{}
	for _, u := range c.Units {
		if _, ok := info[u.ID]; !ok {
			order = append(order, u.ID)
		}
		info[u.ID] = u
	}
	byUnit := map[string][]Result{}
	for _, r := range c.Results {
		if _, ok := info[r.Unit]; !ok {
			info[r.Unit] = UnitInfo{ID: r.Unit}
			order = append(order, r.Unit)
		}
		if !skip[r.Test] {
			byUnit[r.Unit] = append(byUnit[r.Unit], r)
		}
	}
	// Frequency-response results decide as DC results do; each is named
	// by its test and frequency.
	for _, fr := range c.FreqResults {
		r := fr.Result
		if _, ok := info[r.Unit]; !ok {
			info[r.Unit] = UnitInfo{ID: r.Unit}
			order = append(order, r.Unit)
		}
		if skip[r.Test] {
			continue
		}
		if !math.IsNaN(fr.FrequencyHz) {
			r.Test = fmt.Sprintf("%s at %g Hz", r.Test, fr.FrequencyHz)
		}
		byUnit[r.Unit] = append(byUnit[r.Unit], r)
	}
	out := make([]UnitVerdict, 0, len(order))
	for _, id := range order {
		u := info[id]
		v := UnitVerdict{Unit: id, Serial: u.Serial}
		rs := byUnit[id]
		if u.Skipped != "" {
			v.Verdict, v.Reason = UnitSkipped, "skipped: "+u.Skipped
			out = append(out, v)
			continue
		}
		worst, judged, unjudged := -1, 0, 0
		worstKind := KindPass
		var errs []string
		for i, r := range rs {
			if r.Verdict == VerdictNoResult {
				errs = append(errs, fmt.Sprintf("%s at %g °C: %s", r.Test, r.TemperatureC, strings.Join(r.Flags, "; ")))
				continue
			}
			k := VerdictClass(r.Verdict)
			if k == KindNotJudged || k == KindOther {
				unjudged++
				continue
			}
			judged++
			if worst < 0 || k > worstKind || (k == worstKind && margin(r) < margin(rs[worst])) {
				worst, worstKind = i, k
			}
		}
		var why []string
		switch {
		case len(rs) == 0 && u.MissingPoints > 0:
			v.Verdict = UnitIncomplete
			why = append(why, "nothing measured")
		case len(rs) == 0:
			v.Verdict = UnitNoResults
			why = append(why, "no results")
		case judged == 0 && unjudged == 0:
			v.Verdict = VerdictNoResult
		case judged == 0:
			v.Verdict = VerdictNotJudged
			why = append(why, "no test has a limit")
		default:
			r := rs[worst]
			v.Worst = describeResult(r)
			v.Verdict = r.Verdict
			if worstKind == KindPass || worstKind == KindConditionalPass {
				why = append(why, fmt.Sprintf("all %d judged results inside their limits", judged))
			} else {
				n := 0
				for _, r := range rs {
					if k := VerdictClass(r.Verdict); k == KindFail || k == KindConditionalFail {
						n++
					}
				}
				why = append(why, fmt.Sprintf("%d of %d judged results outside their limits", n, judged))
			}
		}
		if len(errs) > 0 {
			why = append(why, fmt.Sprintf("%d results not formed: %s", len(errs), strings.Join(errs, "; ")))
			if worstKind == KindPass || worstKind == KindConditionalPass || judged == 0 {
				v.Verdict = VerdictNoResult
			}
		}
		if unjudged > 0 && judged > 0 {
			why = append(why, fmt.Sprintf("%d results not judged (no limit)", unjudged))
		}
		if u.MissingPoints > 0 {
			why = append(why, fmt.Sprintf("%d points not measured", u.MissingPoints))
			if worstKind == KindPass || worstKind == KindConditionalPass || judged == 0 {
				v.Verdict = UnitIncomplete
			}
		}
		v.Reason = strings.Join(why, "; ")
		out = append(out, v)
	}
	return out
}

func margin(r Result) float64 {
	if math.IsNaN(r.LimitDB) {
		return math.Inf(1)
	}
	return r.ReportedDB() - r.LimitDB
}

func describeResult(r Result) string {
	s := fmt.Sprintf("%s at %g °C: ", r.Test, r.TemperatureC)
	if !r.Resolved {
		s += "≥ "
	}
	s += fmt.Sprintf("%.2f dB", r.ReportedDB())
	if !math.IsNaN(r.LimitDB) {
		s += fmt.Sprintf(" (limit %.2f dB)", r.LimitDB)
	}
	return s
}
