package procedure

import (
	"time"
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
	// model (estimate.Remaining). LeftWall is the same in wall-clock time (Left
	// divided by the plan's time scale).
	Left, LeftWall time.Duration
}

// NopProgress discards progress.
type NopProgress struct{}

func (NopProgress) Begin(total, done int) {}
func (NopProgress) Point(PointInfo)       {}
func (NopProgress) Note(string)           {}
func (NopProgress) End()                  {}
