package journal

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sync"
	"time"

	"nullbench/procedure/plan"
)

// Journal record kinds. A journal is JSON lines, one record per line:
//
//	start      first line: plan hash and path, tool version, time scale
//	resume     a later run continues this journal (same header fields)
//	identity   an instrument's name, roles and *IDN? answer
//	reading    one averaged point (Reading); it marks the point done
//	event      safe state, abort, unit swap, soak done, temperature set...
//	pass-done  one repeat of one test finished for a unit at a temperature
//	test-done  every repeat of one test finished for a unit at a temperature
//	end        the run stopped: complete, aborted or interrupted
const (
	RecordStart    = "start"
	RecordResume   = "resume"
	RecordIdentity = "identity"
	RecordReading  = "reading"
	RecordEvent    = "event"
	RecordPassDone = "pass-done"
	RecordTestDone = "test-done"
	RecordEnd      = "end"
	// RecordACReading is one record of a frequency-response test
	// (ACReading, ac.go); it marks its point done like a reading.
	RecordACReading = "ac-reading"
)

// Event types (Event.Type). Others may be written; readers keep them.
const (
	EventSafeState      = "safe-state"      // every output at its safe state
	EventAbort          = "abort"           // the run stops; Reason says why
	EventUnitSwap       = "unit-swap"       // the next unit is connected (switch or by hand)
	EventSoakDone       = "soak-done"       // the temperature settled within tolerance
	EventSoakTimeout    = "soak-timeout"    // it did not, within soak_timeout_s
	EventTemperatureSet = "temperature-set" // a chamber set point was sent
	EventPowerUp        = "power-up"        // the power-up sequence finished
	EventPowerDown      = "power-down"      // the power-down sequence finished
	EventBenchOff       = "bench-off"       // every output switched off before the first unit
)

// End statuses (End.Status).
const (
	EndComplete    = "complete"    // every point measured
	EndAborted     = "aborted"     // stopped on a fault or refusal; resumable
	EndInterrupted = "interrupted" // stopped by the operator; resumable
)

// Header is the payload of the start and resume records.
type Header struct {
	PlanHash    string    `json:"plan_hash"` // Plan.Hash: SHA-256 of the plan file, hex
	PlanPath    string    `json:"plan_path"`
	ToolVersion string    `json:"tool_version"`
	Started     time.Time `json:"started"`
	TimeScale   float64   `json:"time_scale"`
}

// Identity records which instrument served which roles.
type Identity struct {
	Instrument string   `json:"instrument"` // name under [bench.instrument]
	Roles      []string `json:"roles"`
	Address    string   `json:"address,omitempty"`
	IDN        string   `json:"idn"` // the *IDN? answer
}

// Event is something that happened between readings.
type Event struct {
	Type         string  `json:"type"` // EventSafeState, EventAbort, ...
	Reason       string  `json:"reason,omitempty"`
	Unit         string  `json:"unit,omitempty"`
	TempIndex    int     `json:"temp_index"`
	TemperatureC float64 `json:"temperature_c,omitempty"`
	Detail       string  `json:"detail,omitempty"`
}

// End is the payload of the end record.
type End struct {
	Status string `json:"status"` // EndComplete, EndAborted, EndInterrupted
	Reason string `json:"reason,omitempty"`
}

// Record is one line of the journal: Kind and Time, and the one
// payload that goes with the kind.
type Record struct {
	Kind     string        `json:"kind"`
	Time     time.Time     `json:"time"`
	Header   *Header       `json:"header,omitempty"` // start, resume
	Identity *Identity     `json:"identity,omitempty"`
	Reading  *Reading      `json:"reading,omitempty"`
	Event    *Event        `json:"event,omitempty"`
	Work     *plan.WorkKey `json:"work,omitempty"` // pass-done, test-done
	End      *End          `json:"end,omitempty"`
	AC       *ACReading    `json:"ac,omitempty"` // ac-reading
	// Chain is the running hash of this record and every one before it
	// (chain.go); Write sets it.
	Chain string `json:"chain,omitempty"`
}

// Writer appends records to a journal file. Each record goes out in
// one write followed by an fsync (File.Sync) before the call returns, so a
// run killed at any moment, even by SIGKILL or a power cut, loses at most
// the record being written; Read recognises and skips that torn
// last line. It is safe for concurrent use.
type Writer struct {
	mu     sync.Mutex
	f      *os.File
	path   string
	err    error // the first write failure; later writes refuse
	closed bool
	// chain is the last record's chain value; unchained continues a
	// journal written before records carried one.
	chain     string
	unchained bool
	// Now stamps records whose Time is zero; time.Now by default. Set it
	// before the first write (tests use a fixed clock).
	Now func() time.Time
}

// Open creates a new journal at path and writes its start record.
// It refuses to overwrite an existing file (use Resume to continue
// one).
func Open(path string, h Header) (*Writer, error) {
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_EXCL|os.O_APPEND, 0o644)
	if err != nil {
		if errors.Is(err, os.ErrExist) {
			return nil, fmt.Errorf("journal %s already exists; resume it, or choose a new journal path", path)
		}
		return nil, fmt.Errorf("create journal: %w", err)
	}
	syncDir(path)
	w := &Writer{f: f, path: path, Now: time.Now}
	if err := w.Write(Record{Kind: RecordStart, Header: &h}); err != nil {
		f.Close()
		return nil, err
	}
	return w, nil
}

// Resume reopens the journal at path for plan p: it reads it,
// refuses a journal of another plan (CheckPlanMatch) or of a run that
// ended complete, cuts off a torn last line, and appends a resume record
// with h. The contents tell the runner what is already done.
func Resume(path string, p *plan.Plan, h Header) (*Writer, *Contents, error) {
	f, err := os.OpenFile(path, os.O_RDWR, 0)
	if err != nil {
		return nil, nil, fmt.Errorf("open journal to resume: %w", err)
	}
	c, err := Read(f)
	if err != nil {
		f.Close()
		return nil, nil, fmt.Errorf("journal %s: %w", path, err)
	}
	if err := CheckPlanMatch(p, c); err != nil {
		f.Close()
		return nil, nil, fmt.Errorf("journal %s: %w", path, err)
	}
	if err := c.CheckIntegrity(Seal{}); err != nil {
		f.Close()
		return nil, nil, fmt.Errorf("journal %s: %w; it cannot be continued (start a new journal)", path, err)
	}
	if c.End != nil && c.End.Status == EndComplete {
		f.Close()
		return nil, nil, fmt.Errorf("journal %s: the run already ended complete; nothing to resume. If the workbook is missing or damaged (a kill while it was written), run `nullbench report %s` to write it again; start a new journal to measure again", path, path)
	}
	if c.Truncated {
		if err := f.Truncate(c.ValidBytes); err != nil {
			f.Close()
			return nil, nil, fmt.Errorf("journal %s: cut off the torn last line: %w", path, err)
		}
	}
	if _, err := f.Seek(c.ValidBytes, io.SeekStart); err != nil {
		f.Close()
		return nil, nil, fmt.Errorf("journal %s: %w", path, err)
	}
	w := &Writer{f: f, path: path, Now: time.Now, chain: c.LastChain, unchained: !c.Chained}
	if err := w.Write(Record{Kind: RecordResume, Header: &h}); err != nil {
		f.Close()
		return nil, nil, err
	}
	return w, c, nil
}

// syncDir fsyncs the directory holding path so that a new file's entry
// survives a crash (best effort: not every platform allows it).
func syncDir(path string) {
	if d, err := os.Open(filepath.Dir(path)); err == nil {
		_ = d.Sync()
		d.Close()
	}
}

// Path is the journal's file path.
func (w *Writer) Path() string { return w.path }

// Write appends one record: one write of its JSON line, then fsync.
func (w *Writer) Write(rec Record) error {
	if err := checkRecord(&rec); err != nil {
		return fmt.Errorf("journal %s: %w", w.path, err)
	}
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.closed {
		return fmt.Errorf("journal %s is closed", w.path)
	}
	if w.err != nil {
		return fmt.Errorf("journal %s: an earlier write failed (%v); the run must stop", w.path, w.err)
	}
	if rec.Time.IsZero() {
		now := w.Now
		if now == nil {
			now = time.Now
		}
		rec.Time = now().UTC()
	}
	var (
		line  []byte
		chain string
		err   error
	)
	if w.unchained {
		rec.Chain = ""
		line, err = json.Marshal(rec)
	} else {
		line, chain, err = encodeChained(rec, w.chain)
	}
	if err != nil {
		return fmt.Errorf("journal %s: encode %s record: %w", w.path, rec.Kind, err)
	}
	line = append(line, '\n')
	if _, err := w.f.Write(line); err != nil {
		w.err = err
		return fmt.Errorf("journal %s: write: %w; check the disk", w.path, err)
	}
	if err := w.f.Sync(); err != nil {
		w.err = err
		return fmt.Errorf("journal %s: fsync: %w; check the disk", w.path, err)
	}
	w.chain = chain
	return nil
}

// Identity records an instrument's identity.
func (w *Writer) Identity(id Identity) error {
	return w.Write(Record{Kind: RecordIdentity, Identity: &id})
}

// Reading records one point; it also marks the point done.
func (w *Writer) Reading(r Reading) error {
	return w.Write(Record{Kind: RecordReading, Reading: &r})
}

// Event records an event.
func (w *Writer) Event(e Event) error {
	return w.Write(Record{Kind: RecordEvent, Event: &e})
}

// PassDone marks one repeat of a test finished (k.Part and k.Step are
// ignored).
func (w *Writer) PassDone(k plan.WorkKey) error {
	k.Part, k.Step = "", 0
	return w.Write(Record{Kind: RecordPassDone, Work: &k})
}

// TestDone marks every repeat of a test finished (k.Repeat, k.Part and
// k.Step are ignored).
func (w *Writer) TestDone(k plan.WorkKey) error {
	k.Repeat, k.Part, k.Step = 0, "", 0
	return w.Write(Record{Kind: RecordTestDone, Work: &k})
}

// End writes the end record.
func (w *Writer) End(e End) error {
	return w.Write(Record{Kind: RecordEnd, End: &e})
}

// Close closes the file. It writes no record: call End first when the run
// stops in an orderly way.
func (w *Writer) Close() error {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.closed {
		return nil
	}
	w.closed = true
	return w.f.Close()
}

// checkRecord verifies that a record carries exactly the payload of its
// kind (used when writing and when reading).
func checkRecord(r *Record) error {
	want := ""
	switch r.Kind {
	case RecordStart, RecordResume:
		want = "header"
	case RecordIdentity:
		want = "identity"
	case RecordReading:
		want = "reading"
	case RecordEvent:
		want = "event"
	case RecordPassDone, RecordTestDone:
		want = "work"
	case RecordEnd:
		want = "end"
	case RecordACReading:
		want = "ac"
	case "":
		return errors.New("record without kind")
	default:
		return fmt.Errorf("unknown record kind %q", r.Kind)
	}
	have := []struct {
		name string
		ok   bool
	}{
		{"header", r.Header != nil}, {"identity", r.Identity != nil}, {"reading", r.Reading != nil},
		{"event", r.Event != nil}, {"work", r.Work != nil}, {"end", r.End != nil}, {"ac", r.AC != nil},
	}
	for _, h := range have {
		if h.ok != (h.name == want) {
			if h.ok {
				return fmt.Errorf("%s record carries a %s payload", r.Kind, h.name)
			}
			return fmt.Errorf("%s record without its %s payload", r.Kind, h.name)
		}
	}
	switch r.Kind {
	case RecordStart, RecordResume:
		if r.Header.PlanHash == "" {
			return fmt.Errorf("%s record without plan hash", r.Kind)
		}
	case RecordEvent:
		if r.Event.Type == "" {
			return errors.New("event record without type")
		}
	case RecordEnd:
		if r.End.Status == "" {
			return errors.New("end record without status")
		}
	case RecordReading:
		if r.Reading.Unit == "" || r.Reading.Test == "" {
			return errors.New("reading record without unit or test")
		}
	case RecordACReading:
		return checkACReading(r.AC)
	case RecordPassDone, RecordTestDone:
		if r.Work.Unit == "" || r.Work.Test == "" {
			return fmt.Errorf("%s record without unit or test", r.Kind)
		}
	}
	return nil
}
