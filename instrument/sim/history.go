package sim

import "sync"

// Sent is one program message an instrument of the bench received and
// executed, with the programmed supply and source outputs right after it:
// what the tool commanded, step by step, for tests that check a sequence
// (a ramp, the order of a switch-off) rather than only where it ended.
type Sent struct {
	Instrument   string // "psu"
	Line         string // as received, without the terminator
	BenchSeconds float64
	// Supply holds channel 1 (V+) and channel 2 (V−, as a magnitude: the
	// rail is −ProgrammedVolts), Source channels 1 to 3 (common mode,
	// differential, reference).
	Supply [2]OutputState
	Source [3]OutputState
}

// OutputState is one output channel as programmed.
type OutputState struct {
	ProgrammedVolts float64
	On              bool
}

// maxHistory bounds the history kept; beyond it the oldest half is
// dropped (a long-running `nullbench sim` must not grow without end).
const maxHistory = 1 << 18

type history struct {
	mu   sync.Mutex
	sent []Sent
}

// record appends line, received by instrument name, with the outputs as
// programmed now.
func (b *Bench) record(name, line string) {
	b.mu.Lock()
	e := Sent{Instrument: name, Line: line, BenchSeconds: b.benchSeconds()}
	for i := 0; i < len(e.Supply) && i < len(b.m.supply); i++ {
		c := b.m.supply[i]
		e.Supply[i] = OutputState{ProgrammedVolts: c.progVolts, On: c.on}
	}
	for i := 0; i < len(e.Source) && i < len(b.m.source); i++ {
		c := b.m.source[i]
		e.Source[i] = OutputState{ProgrammedVolts: c.progVolts, On: c.on}
	}
	b.mu.Unlock()
	b.hist.mu.Lock()
	if len(b.hist.sent) >= maxHistory {
		b.hist.sent = append(b.hist.sent[:0], b.hist.sent[maxHistory/2:]...)
	}
	b.hist.sent = append(b.hist.sent, e)
	b.hist.mu.Unlock()
}

// History returns every program message the bench's instruments received
// and executed since New, in the order executed (at most the last 2^18),
// each with the programmed outputs right after it. Like Inspect, it is for
// tests and is not reachable over SCPI.
func (b *Bench) History() []Sent {
	b.hist.mu.Lock()
	defer b.hist.mu.Unlock()
	return append([]Sent(nil), b.hist.sent...)
}
