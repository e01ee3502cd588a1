package plan

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
)

// PartSuffix is "/"+part for a board sweep part ("/cm", "/diff") and "" for
// a test without parts, for naming a test in messages.
func PartSuffix(part string) string {
	if part == "" {
		return ""
	}
	return "/" + part
}

// FormatMag writes a distance or magnitude in volts without a sign ("2.5 V").
func FormatMag(v float64) string { return strings.TrimPrefix(FormatVolts(v), "+") }

// FormatVolts writes a voltage with its sign, rounded to the microvolt, as
// "+15 V", "-2.5 V" or "0 V"; infinities as "+inf V".
func FormatVolts(v float64) string {
	if math.IsInf(v, 0) {
		if v > 0 {
			return "+inf V"
		}
		return "-inf V"
	}
	r := math.Round(v*1e6) / 1e6
	if r == 0 {
		return "0 V"
	}
	s := strconv.FormatFloat(r, 'f', -1, 64)
	if r > 0 {
		s = "+" + s
	}
	return s + " V"
}

// FormatSeconds writes a duration in seconds as "1h02m03s", "2m05s" or
// "4.5s".
func FormatSeconds(sec float64) string {
	if sec < 60 {
		return fmt.Sprintf("%.1fs", sec)
	}
	d := time.Duration(math.Round(sec)) * time.Second
	h := d / time.Hour
	m := (d % time.Hour) / time.Minute
	s := (d % time.Minute) / time.Second
	if h > 0 {
		return fmt.Sprintf("%dh%02dm%02ds", h, m, s)
	}
	return fmt.Sprintf("%dm%02ds", m, s)
}
