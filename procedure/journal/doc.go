// Package journal is the record of a run: the Reading (one averaged point
// and the conditions it was taken under, the unit the analysis consumes)
// and the JSON-lines journal that holds the readings and the events
// between them, written so that a run can be resumed.
//
// Open writes JSON lines, each record in one write followed by fsync, so a
// run killed at any point loses at most the record in flight. Read skips
// (and reports) a torn last line and refuses garbage anywhere else with its
// line number; Contents.Done gives the finished work keys (plan.WorkKey) so
// that Resume and the runner skip what is done, and CheckPlanMatch refuses
// a journal of another plan.
//
// It imports package plan and nothing else of ours; the runner (package
// procedure) writes it, the analysis and the report read its readings.
package journal
