package instrument

import (
	"context"
	"errors"
	"fmt"
	"strings"
)

// FaultKind sorts the ways an instrument call fails, for messages.
type FaultKind int

// Fault kinds.
const (
	FaultOther     FaultKind = iota // any other failed exchange
	FaultRefused                    // the error queue held an entry after the command
	FaultNoAnswer                   // no (complete) reply in time
	FaultLost                       // the connection closed during this exchange
	FaultNotSent                    // not sent: the connection was lost at an earlier exchange
	FaultOutOfStep                  // not sent: the re-sync after an interrupted exchange failed
	FaultBadReply                   // a reply that is not what the command returns
)

// Fault is a failed instrument call taken apart, so that a message can
// state the cause first and once: which instrument (and which part of it),
// which command, what happened, and the error-queue entries.
type Fault struct {
	Kind       FaultKind
	Instrument string // the session's name ("psu")
	Where      string // the driver's part ("supply channel 1"), may be ""
	// Context replaces Where in the instrument's label when the caller
	// knows more (the plan's role, channel and address: "supply_pos,
	// channel 1, tcp://127.0.0.1:5025").
	Context string
	Command string // the program message that failed
	After   string // the command just before, whose outcome Command checked
	// Code and Message are the error-queue entry of a refused command;
	// Queue holds further entries (refused) or those read after a
	// time-out (no answer).
	Code    int
	Message string
	Queue   []QueueEntry
	// LostAt is, for FaultNotSent, the command at which the connection was
	// lost.
	LostAt string
	// Cause is the innermost error of the exchange (the transport's);
	// Recovery the failed re-sync after a time-out.
	Cause, Recovery error
	// Err is the instrument-level error found (*OpError or
	// *InstrumentError); its text is a suffix of the whole error's.
	Err error
}

// FaultOf finds the instrument-level error in err's chain (the outermost
// *InstrumentError or *OpError) and takes it apart.
func FaultOf(err error) (Fault, bool) {
	var ie *InstrumentError
	var op *OpError
	switch {
	case errors.As(err, &ie):
		return Fault{Kind: FaultRefused, Instrument: ie.Instrument, Where: ie.Where, Command: ie.Command,
			Code: ie.Code, Message: ie.Message, Queue: ie.More, Err: ie}, true
	case errors.As(err, &op):
		f := Fault{Instrument: op.Instrument, Where: op.Where, Command: op.Command, After: op.After,
			Queue: op.Queue, Cause: op.Err, Recovery: op.Recovery, Err: op}
		var le *LostEarlierError
		switch {
		case errors.As(op.Err, &le):
			f.Kind, f.LostAt, f.Cause = FaultNotSent, le.At, le.Cause
		case errors.Is(op.Err, ErrOutOfSync):
			f.Kind = FaultOutOfStep
		case errors.Is(op.Err, ErrClosed):
			f.Kind = FaultLost
		case errors.Is(op.Err, context.Canceled):
			f.Kind = FaultOther
		case errors.Is(op.Err, ErrTimeout):
			f.Kind = FaultNoAnswer
		case errors.Is(op.Err, ErrBadResponse):
			f.Kind = FaultBadReply
		}
		return f, true
	}
	return Fault{}, false
}

// Label names the instrument: "psu (supply_pos, channel 1,
// tcp://...)" with a Context, else "psu (supply channel 1)".
func (f Fault) Label() string {
	switch {
	case f.Context != "":
		return f.Instrument + " (" + f.Context + ")"
	case f.Where != "":
		return f.Instrument + " (" + f.Where + ")"
	}
	return f.Instrument
}

// command quotes the command, with the one before it when there is one.
func (f Fault) command() string {
	if f.After != "" {
		return fmt.Sprintf("%q (checking %q)", f.Command, f.After)
	}
	return fmt.Sprintf("%q", f.Command)
}

// Sentence states the fault, cause first and once: "psu (supply channel
// 1) refused "VOLT 40": error -222 "Data out of range" (SCPI-99: ...)".
func (f Fault) Sentence() string {
	var b strings.Builder
	switch f.Kind {
	case FaultRefused:
		fmt.Fprintf(&b, "%s refused %s: error %d %q (%s)", f.Label(), f.command(), f.Code, f.Message, describeCode(f.Code))
		f.queue(&b, "; also in its error queue:")
	case FaultNoAnswer:
		fmt.Fprintf(&b, "%s did not answer %s in time", f.Label(), f.command())
		f.queue(&b, "; its error queue then held:")
		if f.Recovery != nil {
			fmt.Fprintf(&b, "; it did not answer *OPC? either (%v): check the instrument and its cable", rootCause(f.Recovery))
		}
	case FaultLost:
		fmt.Fprintf(&b, "the connection to %s was lost at %s: %v", f.Label(), f.command(), rootCause(f.Cause))
	case FaultNotSent:
		fmt.Fprintf(&b, "%s: %s not sent: the connection was lost earlier, at %q", f.Label(), f.command(), f.LostAt)
	case FaultOutOfStep:
		fmt.Fprintf(&b, "%s: %s not sent: out of step with the instrument after an interrupted exchange (re-sync failed: %v)", f.Label(), f.command(), rootCause(f.Cause))
	case FaultBadReply:
		fmt.Fprintf(&b, "%s gave a malformed reply to %s: %v", f.Label(), f.command(), f.Cause)
	default:
		if f.Command != "" {
			fmt.Fprintf(&b, "%s: %s: %v", f.Label(), f.command(), f.Cause)
		} else {
			fmt.Fprintf(&b, "%s: %v", f.Label(), f.Cause)
		}
	}
	return b.String()
}

func (f Fault) queue(b *strings.Builder, intro string) {
	if len(f.Queue) == 0 {
		return
	}
	b.WriteString(intro)
	for i, q := range f.Queue {
		if i > 0 {
			b.WriteString(",")
		}
		fmt.Fprintf(b, " %d %q (%s)", q.Code, q.Message, describeCode(q.Code))
	}
}

// rootCause is the last link of a chain of wrapped errors that still says
// something: the transport's own words ("read tcp://...: connection
// closed (EOF)"), not the layers of re-sync above them.
func rootCause(err error) error {
	for {
		var next error
		switch u := err.(type) {
		case interface{ Unwrap() error }:
			next = u.Unwrap()
		default:
			return err
		}
		if next == nil || next == ErrClosed || next == ErrTimeout || next == ErrOutOfSync {
			return err
		}
		if _, ok := next.(*OpError); ok {
			return err
		}
		err = next
	}
}

// OpenError is a failure to open an instrument after it was dialed:
// identification, the identity check or the first error-queue read. Its
// message states the fault once, with the address in the instrument's
// label ("src (tcp://...) did not answer "*IDN?" in time; ...").
type OpenError struct {
	Name, Address string
	Err           error
}

func (e *OpenError) Error() string {
	if f, ok := FaultOf(e.Err); ok && f.Instrument == e.Name && doingSuffix(e.Err, f.Err) {
		f.Context = e.Address
		return "open failed: " + f.Sentence()
	}
	return fmt.Sprintf("instrument %s at %s: %v", e.Name, e.Address, e.Err)
}

func (e *OpenError) Unwrap() error { return e.Err }

// doingSuffix reports whether inner's text is all of err's (nothing was
// wrapped around it that the sentence would lose).
func doingSuffix(err, inner error) bool { return err.Error() == inner.Error() }
