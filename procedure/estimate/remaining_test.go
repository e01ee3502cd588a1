package estimate

import (
	"testing"
	"time"

	"nullbench/procedure/plan"
)

// TestETACorrectedByMeasurement: ten points predicted at 1 s each (the
// campaign 10 s); the bench takes 2 s per point, so after three points
// the 7 s the model still predicts are stretched to 14 s (worked by hand).
func TestETACorrectedByMeasurement(t *testing.T) {
	var tl Timeline
	for i := range 10 {
		tl.Points = append(tl.Points, TimedPoint{Key: plan.WorkKey{Unit: "U", Step: i}, Seconds: 1, EndsAt: float64(i + 1)})
	}
	tl.TotalSeconds = 10
	e := NewRemaining(tl)
	var left time.Duration
	for i := range 3 {
		k := plan.WorkKey{Unit: "U", Step: i}
		e.Begin(k, time.Duration(2*i)*time.Second)
		left = e.Point(k, time.Duration(2*(i+1))*time.Second, 10-(i+1))
	}
	if left != 14*time.Second {
		t.Errorf("left %v, want 14s", left)
	}
	// An unknown point falls back to the time per point measured.
	if got := e.Point(plan.WorkKey{Unit: "X"}, 8*time.Second, 6); got != 12*time.Second {
		t.Errorf("fallback left %v, want 12s (8 s over 4 points × 6)", got)
	}
}
