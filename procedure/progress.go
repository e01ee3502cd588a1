package procedure

import (
	"time"

	"nullbench/procedure/estimate"
	"nullbench/procedure/plan"
)

// Progress receives the run's progress for display. Calls come from the
// run's goroutine, in order: Begin once, then Point and Note any number of
// times, then End once (also after a failure).
type Progress interface {
	// Begin announces the number of points of the whole campaign and how
	// many of them a resumed journal already holds.
	Begin(total, done int)
	// Point is called when a point has been measured (or recovered).
	Point(PointInfo)
	// Note reports an event in words: power up, soak, unit swap, abort.
	Note(msg string)
	// End is called when the run stops, for whatever reason.
	End()
}

// PointInfo locates a point in the campaign and estimates the time left.
type PointInfo struct {
	Unit         string
	Test         string // test kind
	TestIndex    int    // index of the test in the plan, from 0
	Part         string // "cm" or "diff" for board_cmrr, else ""
	TemperatureC float64
	Repeat       int     // pass through the levels, from 0
	Step, Steps  int     // index of the point in its sweep (from 0) and the sweep's length
	LevelVolts   float64 // the stimulus level
	Done, Total  int     // points measured so far (including recovered ones) and in all
	// Left estimates the bench time still needed: the duration model's
	// remaining time, scaled by how the run so far compares with the
	// model (etaEstimator). LeftWall is the same in wall-clock time (Left
	// divided by the plan's time scale).
	Left, LeftWall time.Duration
}

// NopProgress discards progress.
type NopProgress struct{}

func (NopProgress) Begin(total, done int) {}
func (NopProgress) Point(PointInfo)       {}
func (NopProgress) Note(string)           {}
func (NopProgress) End()                  {}

// etaEstimator estimates the bench time left from the duration model
// (estimate.Figures.Timeline: the predicted bench time at which each point
// ends and the campaign's total), corrected by what this run has measured:
//
//	left = (T_total − T_end(point)) × (measured since the first point began) / (predicted for the same stretch)
//
// so a bench that runs 10 % slower than predicted sees its remaining time
// stretched by 10 %. Recovered points cost nothing and do not count.
// Without a prediction for the point it falls back to the bench time spent
// per point measured times the points left.
type etaEstimator struct {
	start     time.Duration // bench time of the first point's start
	predStart float64       // predicted bench seconds at that start
	started   bool
	measured  int
	ends      map[plan.WorkKey]estimate.TimedPoint
	total     float64
}

func newETA(tl estimate.Timeline) etaEstimator {
	e := etaEstimator{ends: make(map[plan.WorkKey]estimate.TimedPoint, len(tl.Points)), total: tl.TotalSeconds}
	for _, tp := range tl.Points {
		e.ends[tp.Key] = tp
	}
	return e
}

// point records one measured point, key, that ended at now (bench time)
// and returns the estimate for left points still to do.
func (e *etaEstimator) point(key plan.WorkKey, now time.Duration, left int) time.Duration {
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

// begin marks the bench time at which measuring started, at point key.
func (e *etaEstimator) begin(key plan.WorkKey, now time.Duration) {
	if !e.started {
		e.start, e.started = now, true
		if tp, ok := e.ends[key]; ok {
			e.predStart = tp.EndsAt - tp.Seconds
		}
	}
}
