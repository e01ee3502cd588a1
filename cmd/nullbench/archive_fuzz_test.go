package main

import (
	"math"
	"testing"
)

// FuzzArchiveFilter feeds the query flags' parser (numbers, dates,
// verdicts): it never panics, and what it accepts is a usable filter.
func FuzzArchiveFilter(f *testing.F) {
	f.Add("25", "0", "2026-01-01", "2026-12-31", "pass")
	f.Add("-40.5", "1e3", "2026-03-01T08:00:00Z", "", "conditional fail")
	f.Add("warm", "NaN", "yesterday", "2026-13-01", "passed")
	f.Add("Inf", "", "2026-02-30", "2026-01-01", "")
	f.Fuzz(func(t *testing.T, temp, freq, from, to, verdict string) {
		fl := archiveFilterFlags{Temperature: temp, Frequency: freq, From: from, To: to, Verdict: verdict}
		got, err := fl.filter()
		if err != nil {
			return
		}
		for _, p := range []*float64{got.TemperatureC, got.FrequencyHz} {
			if p != nil && (math.IsNaN(*p) || math.IsInf(*p, 0)) {
				t.Fatalf("accepted a non-finite number: %v", *p)
			}
		}
		if !got.From.IsZero() && !got.To.IsZero() && !got.From.Before(got.To) {
			t.Fatalf("accepted --from %q not before --to %q", from, to)
		}
		if (temp == "") != (got.TemperatureC == nil) || (from == "") != got.From.IsZero() {
			t.Fatalf("a flag given was dropped, or one not given was set: %+v", got)
		}
	})
}
