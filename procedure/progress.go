package procedure

import "time"

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
	// Left estimates the bench time still needed: the bench time spent per
	// point measured in this run times the points left. LeftWall is the
	// same in wall-clock time (Left divided by the plan's time scale).
	Left, LeftWall time.Duration
}

// NopProgress discards progress.
type NopProgress struct{}

func (NopProgress) Begin(total, done int) {}
func (NopProgress) Point(PointInfo)       {}
func (NopProgress) Note(string)           {}
func (NopProgress) End()                  {}

// etaEstimator estimates the time left from the bench time spent per point
// measured in this run (recovered points cost nothing and do not count).
type etaEstimator struct {
	start    time.Duration // bench time of the first point's start
	started  bool
	measured int
}

// point records one measured point that ended at now (bench time) and
// returns the estimate for left points still to do.
func (e *etaEstimator) point(now time.Duration, left int) time.Duration {
	e.measured++
	if left <= 0 {
		return 0
	}
	per := (now - e.start) / time.Duration(e.measured)
	return per * time.Duration(left)
}

// begin marks the bench time at which measuring started.
func (e *etaEstimator) begin(now time.Duration) {
	if !e.started {
		e.start, e.started = now, true
	}
}
