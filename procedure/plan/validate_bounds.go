package plan

import (
	"fmt"
	"strings"
)

// Upper bounds on a plan's sizes and times: larger values are mistakes (a
// typo of a few zeros), and refusing them keeps every duration and every
// allocation bounded. Common practice, no published source.
const (
	// MaxPlanSeconds bounds any dwell, settle time-out, soak or soak
	// time-out: one week.
	MaxPlanSeconds = 7 * 24 * 3600.0
	// MaxLevels bounds the levels (and diff_levels) of one test.
	MaxLevels = 1000
)

// bounds refuses durations beyond a week and level lists beyond MaxLevels,
// naming the key (and its line through add).
func (c *planChecker) bounds() {
	p := c.p
	long := func(key string, s float64) {
		if s > MaxPlanSeconds {
			c.add(key, fmt.Sprintf("give at most %g s (one week)", MaxPlanSeconds), "%g s is longer than a week", s)
		}
	}
	for i := range p.Tests {
		t := &p.Tests[i]
		k := testKey(i)
		long(k+".dwell_s", t.DwellSeconds)
		long(k+".settle_timeout_s", t.SettleTimeoutSeconds)
		for _, l := range []struct {
			key string
			n   int
		}{{k + ".levels", len(t.Levels)}, {k + ".diff_levels", len(t.DiffLevels)}} {
			if l.n > MaxLevels {
				c.add(l.key, fmt.Sprintf("give at most %d levels", MaxLevels), "%d levels", l.n)
			}
		}
	}
	if p.Temperature.Mode != "" && p.Temperature.Mode != TempNone {
		long("temperature.soak_s", p.Temperature.SoakSeconds)
		long("temperature.soak_timeout_s", p.Temperature.SoakTimeoutSeconds)
	}
}

// SameChannel says whether two switch channel names address the same
// relay as an instrument reads them: SCPI channel lists are numbers, so
// leading zeros do not count ("0101" and "101" are one relay). Names that
// are not all digits compare as written (case-insensitive).
func SameChannel(a, b string) bool { return CanonicalChannel(a) == CanonicalChannel(b) }

// CanonicalChannel is the form SameChannel compares.
func CanonicalChannel(ch string) string {
	ch = strings.TrimSpace(ch)
	digits := ch != ""
	for _, r := range ch {
		if r < '0' || r > '9' {
			digits = false
			break
		}
	}
	if !digits {
		return strings.ToUpper(ch)
	}
	t := strings.TrimLeft(ch, "0")
	if t == "" {
		return "0"
	}
	return t
}
