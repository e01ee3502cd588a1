package journal

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"time"

	"nullbench/procedure/plan"
)

// Contents is what a journal holds, record by record kind.
type Contents struct {
	Header     Header   // of the start record
	Resumes    []Header // one per resume record
	Identities []Identity
	Readings   []Reading
	// ReadingLines holds the journal line of each of Readings.
	ReadingLines []int
	Events       []Event
	// ACReadings are the frequency-response records (ac.go), with the
	// journal line of each in ACReadingLines.
	ACReadings     []ACReading
	ACReadingLines []int
	Passes         []plan.WorkKey // pass-done markers
	Tests          []plan.WorkKey // test-done markers
	End            *End           // the last end record, if no resume followed it
	Records        int            // complete records read

	// Chained says the records carry running hashes (chain.go); LastChain
	// is the last record's, ChainBreakLine the first line whose hash does
	// not verify (0: none), RecordLines the line number of the last record.
	Chained        bool
	LastChain      string
	ChainBreakLine int
	RecordLines    int
	LastTime       time.Time   // the last record's time
	EventTimes     []time.Time // the time of each of Events
	chains         []string    // chain value after each record

	// Truncated says the last line was incomplete (no newline: a run killed
	// while writing it) and was skipped; TruncatedLine is its line number.
	Truncated     bool
	TruncatedLine int
	// ValidBytes is the length of the complete lines; Resume cuts
	// the file there before appending.
	ValidBytes int64
}

// ReadFile reads the journal at path.
func ReadFile(path string) (*Contents, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("open journal: %w", err)
	}
	defer f.Close()
	c, err := Read(f)
	if err != nil {
		return nil, fmt.Errorf("journal %s: %w", path, err)
	}
	return c, nil
}

// Read reads a journal. A record counts once its terminating
// newline is there: a last line without one is the record a killed run was
// writing, so it is skipped and reported (Truncated). Anything else that
// is not a well-formed record — bad JSON, an unknown kind or field, a kind
// without its payload, a first record that is not start — is an error
// naming the line. Blank lines are ignored.
func Read(r io.Reader) (*Contents, error) {
	c := &Contents{}
	br := bufio.NewReader(r)
	line := 0
	for {
		raw, err := br.ReadBytes('\n')
		if len(raw) > 0 {
			line++
		}
		if err == io.EOF {
			if len(bytes.TrimSpace(raw)) > 0 {
				c.Truncated, c.TruncatedLine = true, line
			} else {
				c.ValidBytes += int64(len(raw))
			}
			break
		}
		if err != nil {
			return nil, fmt.Errorf("read line %d: %w", line, err)
		}
		c.ValidBytes += int64(len(raw))
		if len(bytes.TrimSpace(raw)) == 0 {
			continue
		}
		var rec Record
		dec := json.NewDecoder(bytes.NewReader(raw))
		dec.DisallowUnknownFields()
		if err := dec.Decode(&rec); err != nil {
			return nil, fmt.Errorf("line %d: not a journal record: %v", line, err)
		}
		if _, err := dec.Token(); err != io.EOF {
			return nil, fmt.Errorf("line %d: not a journal record: text after the record", line)
		}
		if err := checkRecord(&rec); err != nil {
			return nil, fmt.Errorf("line %d: %w", line, err)
		}
		if c.Records == 0 && rec.Kind != RecordStart {
			return nil, fmt.Errorf("line %d: a journal starts with a start record, not %q; is this a nullbench journal?", line, rec.Kind)
		}
		if c.Records > 0 && rec.Kind == RecordStart {
			return nil, fmt.Errorf("line %d: a second start record; journals of two runs were joined", line)
		}
		if c.End != nil && rec.Kind != RecordResume {
			return nil, fmt.Errorf("line %d: %s record after the end record", line, rec.Kind)
		}
		c.verifyChain(rec, line)
		c.Records++
		c.RecordLines = line
		c.chains = append(c.chains, rec.Chain)
		switch rec.Kind {
		case RecordStart:
			c.Header = *rec.Header
		case RecordResume:
			if rec.Header.PlanHash != c.Header.PlanHash {
				return nil, fmt.Errorf("line %d: resumed with another plan (sha256 %s, started with %s)", line, rec.Header.PlanHash, c.Header.PlanHash)
			}
			c.Resumes = append(c.Resumes, *rec.Header)
			c.End = nil
		case RecordIdentity:
			c.Identities = append(c.Identities, *rec.Identity)
		case RecordReading:
			c.Readings = append(c.Readings, *rec.Reading)
			c.ReadingLines = append(c.ReadingLines, line)
		case RecordACReading:
			c.ACReadings = append(c.ACReadings, *rec.AC)
			c.ACReadingLines = append(c.ACReadingLines, line)
		case RecordEvent:
			c.Events = append(c.Events, *rec.Event)
		case RecordPassDone:
			c.Passes = append(c.Passes, *rec.Work)
		case RecordTestDone:
			c.Tests = append(c.Tests, *rec.Work)
		case RecordEnd:
			c.End = rec.End
		}
	}
	if c.Records == 0 {
		if c.Truncated {
			return nil, errors.New("the journal holds no complete record (its only line is torn)")
		}
		return nil, errors.New("empty journal: no start record")
	}
	return c, nil
}

// WorkSet is the finished work of a journal.
type WorkSet struct {
	points map[plan.WorkKey]bool
	passes map[plan.WorkKey]bool
	tests  map[plan.WorkKey]bool
}

// Done returns the finished work: every point with a reading, and the
// pass-done and test-done markers.
//
// A resumed pass no longer cancels drift exactly (OrderLevels): the points
// before and after the break are hours apart. A runner that wants exact
// cancellation re-measures a pass unless PassDone says it finished.
func (c *Contents) Done() WorkSet {
	w := WorkSet{points: map[plan.WorkKey]bool{}, passes: map[plan.WorkKey]bool{}, tests: map[plan.WorkKey]bool{}}
	for _, r := range c.Readings {
		w.points[KeyOf(r)] = true
	}
	for _, r := range c.ACReadings {
		w.points[ACKeyOf(r)] = true
	}
	for _, k := range c.Passes {
		w.passes[passOnly(k)] = true
	}
	for _, k := range c.Tests {
		w.tests[testOnly(k)] = true
	}
	return w
}

func passOnly(k plan.WorkKey) plan.WorkKey {
	return plan.WorkKey{TempIndex: k.TempIndex, Unit: k.Unit, Test: k.Test, Repeat: k.Repeat}
}
func testOnly(k plan.WorkKey) plan.WorkKey {
	return plan.WorkKey{TempIndex: k.TempIndex, Unit: k.Unit, Test: k.Test}
}

// Has reports whether the point k was measured.
func (w WorkSet) Has(k plan.WorkKey) bool { return w.points[k] }

// PassDone reports whether repeat k.Repeat of test k.Test finished for unit
// k.Unit at temperature k.TempIndex (k.Part and k.Step are ignored).
func (w WorkSet) PassDone(k plan.WorkKey) bool { return w.passes[passOnly(k)] }

// TestDone reports whether every repeat of test k.Test finished for unit
// k.Unit at temperature k.TempIndex.
func (w WorkSet) TestDone(k plan.WorkKey) bool { return w.tests[testOnly(k)] }

// Points is the number of distinct points measured.
func (w WorkSet) Points() int { return len(w.points) }

// CheckPlanMatch refuses to resume with a plan other than the one the
// journal was started with (by the SHA-256 of the plan file: any edit
// counts, since a changed level or limit would mix two campaigns).
func CheckPlanMatch(p *plan.Plan, c *Contents) error {
	if p.Hash == c.Header.PlanHash {
		return CheckReadings(p, c)
	}
	return fmt.Errorf("this journal belongs to plan %s (sha256 %s), but the plan given is %s (sha256 %s): "+
		"resume with the plan the run started from, unchanged, or start a new journal",
		c.Header.PlanPath, shortHash(c.Header.PlanHash), p.Source, shortHash(p.Hash))
}

func shortHash(h string) string {
	if len(h) > 12 {
		return h[:12] + "…"
	}
	return h
}
