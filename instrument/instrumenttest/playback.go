package instrumenttest

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"strings"
	"sync"
	"testing"

	"nullbench/instrument"
)

// Exchange is one program message and the instrument's answer.
type Exchange struct {
	Comment string // what the step is for: "identify", "set range"
	Send    string // the program message, without its terminator
	Reply   string // the response message, without its terminator; "" when none
	// Timeout makes the instrument stay silent after Send: reads fail at
	// once with an error wrapping instrument.ErrTimeout (no real waiting).
	// If Reply is set too, it arrives late: it becomes readable when the
	// next command is sent, ahead of that command's own reply, as a slow
	// instrument's answer does after the caller gave up on it.
	Timeout bool
	// Drop closes the connection after Send: reads and writes then fail
	// with an error wrapping instrument.ErrClosed.
	Drop bool
}

func (e Exchange) String() string {
	s := fmt.Sprintf("%q", e.Send)
	if e.Comment != "" {
		s = e.Comment + ": " + s
	}
	if e.Reply != "" {
		s += fmt.Sprintf(" -> %q", e.Reply)
	}
	if e.Timeout {
		s += " (times out)"
	}
	if e.Drop {
		s += " (connection drops)"
	}
	return s
}

// Playback is an instrument.Conn that follows a script of exchanges. It is
// safe for concurrent use.
type Playback struct {
	t      testing.TB
	mu     sync.Mutex
	script []Exchange
	next   int
	log    []string // what happened, for failure messages

	pending []byte // replies ready to read
	late    []byte // a late reply, released at the next write
	silent  bool   // the last command timed out
	dropped bool
	closed  bool
	failed  bool
	checked bool
}

var (
	_ instrument.Conn      = (*Playback)(nil)
	_ instrument.RawReader = (*Playback)(nil)
)

// NewPlayback returns a Conn that plays script. The terminator is "\n"
// (an optional "\r" before it is accepted on writes). Unused exchanges fail
// the test at Close or at cleanup.
func NewPlayback(t testing.TB, script []Exchange) *Playback {
	t.Helper()
	p := &Playback{t: t, script: append([]Exchange(nil), script...)}
	t.Cleanup(p.check)
	return p
}

// Remaining returns the exchanges not yet played.
func (p *Playback) Remaining() []Exchange {
	p.mu.Lock()
	defer p.mu.Unlock()
	return append([]Exchange(nil), p.script[p.next:]...)
}

func (p *Playback) failf(format string, args ...any) error {
	p.failed = true
	msg := fmt.Sprintf(format, args...)
	if len(p.log) > 0 {
		msg += "\nplayed so far:\n  " + strings.Join(p.log, "\n  ")
	}
	p.t.Errorf("playback: %s", msg)
	return fmt.Errorf("playback: %s", strings.SplitN(msg, "\n", 2)[0])
}

// Write checks each line of b against the next exchange.
func (p *Playback) Write(ctx context.Context, b []byte) error {
	p.mu.Lock()
	defer p.mu.Unlock()
	if err := p.usable(ctx); err != nil {
		return err
	}
	if !bytes.HasSuffix(b, []byte("\n")) {
		return p.failf("program message %q does not end with the terminator \\n", b)
	}
	for _, line := range strings.Split(strings.TrimSuffix(string(b), "\n"), "\n") {
		line = strings.TrimSuffix(line, "\r")
		if err := p.play(line); err != nil {
			return err
		}
	}
	return nil
}

func (p *Playback) play(line string) error {
	if p.failed {
		return errors.New("playback: script already failed")
	}
	if p.next >= len(p.script) {
		return p.failf("unexpected command %q after the script ended", line)
	}
	e := p.script[p.next]
	if line != e.Send {
		return p.failf("exchange %d (%s): sent %q, script expects %q", p.next+1, e.Comment, line, e.Send)
	}
	p.next++
	p.log = append(p.log, fmt.Sprintf("%d. %s", p.next, e))
	p.pending = append(p.pending, p.late...)
	p.late = nil
	p.silent = e.Timeout
	switch {
	case e.Drop:
		p.dropped = true
	case e.Timeout && e.Reply != "":
		p.late = []byte(e.Reply + "\n")
	case e.Reply != "":
		p.pending = append(p.pending, e.Reply+"\n"...)
	}
	return nil
}

func (p *Playback) usable(ctx context.Context) error {
	switch {
	case p.closed:
		return fmt.Errorf("playback: %w (Close was called)", instrument.ErrClosed)
	case p.dropped:
		return fmt.Errorf("playback: %w (the script dropped the connection)", instrument.ErrClosed)
	case ctx.Err() != nil:
		if errors.Is(ctx.Err(), context.DeadlineExceeded) {
			return fmt.Errorf("playback: %w", instrument.ErrTimeout)
		}
		return ctx.Err()
	}
	return nil
}

// noReply is the error of a read with nothing to read.
func (p *Playback) noReply() error {
	if p.silent {
		return fmt.Errorf("playback: no reply: %w", instrument.ErrTimeout)
	}
	last := "(nothing sent yet)"
	if p.next > 0 {
		last = p.script[p.next-1].String()
	}
	return p.failf("read with no reply pending; last exchange: %s", last)
}

// ReadLine returns the next pending reply line.
func (p *Playback) ReadLine(ctx context.Context) ([]byte, error) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if err := p.usable(ctx); err != nil {
		return nil, err
	}
	i := bytes.IndexByte(p.pending, '\n')
	if i < 0 {
		return nil, p.noReply()
	}
	line := append([]byte(nil), bytes.TrimSuffix(p.pending[:i], []byte("\r"))...)
	p.pending = p.pending[i+1:]
	return line, nil
}

// ReadFull reads exactly len(b) pending bytes (for block replies).
func (p *Playback) ReadFull(ctx context.Context, b []byte) error {
	p.mu.Lock()
	defer p.mu.Unlock()
	if err := p.usable(ctx); err != nil {
		return err
	}
	if len(p.pending) < len(b) {
		return p.noReply()
	}
	copy(b, p.pending)
	p.pending = p.pending[len(b):]
	return nil
}

// Drain discards pending replies (a late reply is still to come).
func (p *Playback) Drain(ctx context.Context) error {
	p.mu.Lock()
	defer p.mu.Unlock()
	if err := p.usable(ctx); err != nil {
		return err
	}
	p.pending = nil
	return nil
}

// Close ends the playback and fails the test if exchanges are left.
func (p *Playback) Close() error {
	p.mu.Lock()
	p.closed = true
	p.mu.Unlock()
	p.check()
	return nil
}

func (p *Playback) check() {
	p.t.Helper()
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.checked || p.failed {
		return
	}
	p.checked = true
	if p.next < len(p.script) {
		var left []string
		for i, e := range p.script[p.next:] {
			left = append(left, fmt.Sprintf("%d. %s", p.next+i+1, e))
		}
		p.t.Errorf("playback: %d of %d exchanges not played:\n  %s", len(p.script)-p.next, len(p.script), strings.Join(left, "\n  "))
	}
}
