package estimate

import (
	"time"

	"nullbench/procedure/plan"
)

// Remaining estimates the bench time left in a run from the duration
// model (Figures.Timeline: the predicted bench time at which each point
// ends and the campaign's total), corrected by what this run has measured:
//
//	left = (T_total − T_end(point)) × (measured since the first point began) / (predicted for the same stretch)
//
// so a bench that runs 10 % slower than predicted sees its remaining time
// stretched by 10 %. Recovered points cost nothing and do not count.
// Without a prediction for the point it falls back to the bench time spent
// per point measured times the points left.
type Remaining struct {
	start     time.Duration // bench time of the first point's start
	predStart float64       // predicted bench seconds at that start
	started   bool
	measured  int
	ends      map[plan.WorkKey]TimedPoint
	total     float64
}

// NewRemaining starts the estimate from the run's predicted timeline; the
// runner calls Begin and Point as points are measured.
func NewRemaining(tl Timeline) *Remaining {
	e := &Remaining{ends: make(map[plan.WorkKey]TimedPoint, len(tl.Points)), total: tl.TotalSeconds}
	for _, tp := range tl.Points {
		e.ends[tp.Key] = tp
	}
	return e
}

// Point records one measured point, key, that ended at now (bench time)
// and returns the estimate for left points still to do.
func (e *Remaining) Point(key plan.WorkKey, now time.Duration, left int) time.Duration {
	e.measured++
	if left <= 0 {
		return 0
	}
	if tp, ok := e.ends[key]; ok {
		pred := tp.EndsAt - e.predStart
		meas := (now - e.start).Seconds()
		if pred > 0 && meas > 0 {
			rest := (e.total - tp.EndsAt) * meas / pred
			return time.Duration(rest * float64(time.Second))
		}
	}
	per := (now - e.start) / time.Duration(e.measured)
	return per * time.Duration(left)
}

// Begin marks the bench time at which measuring started, at point key.
func (e *Remaining) Begin(key plan.WorkKey, now time.Duration) {
	if !e.started {
		e.start, e.started = now, true
		if tp, ok := e.ends[key]; ok {
			e.predStart = tp.EndsAt - tp.Seconds
		}
	}
}
