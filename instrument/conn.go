package instrument

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"time"
)

// Conn is a message transport to one instrument: a raw TCP socket or a
// serial line. It knows where a reply ends (the terminator) and nothing of
// SCPI. A Conn is used by one goroutine at a time (Session serialises its
// callers); Close may be called from another goroutine to abort a blocked
// call.
//
// Every call honours ctx: its deadline bounds the call (expiry gives an
// error matching ErrTimeout) and its cancellation interrupts a blocked read
// (giving ctx.Err()).
type Conn interface {
	// Write sends p as given; the caller appends the program message
	// terminator.
	Write(ctx context.Context, p []byte) error
	// ReadLine returns the next response message up to and excluding its
	// terminator; with a "\n" terminator an optional "\r" before it is
	// stripped too.
	ReadLine(ctx context.Context) ([]byte, error)
	// Drain discards input already received and any that arrives within
	// a short quiet time (DialOptions.DrainQuiet).
	Drain(ctx context.Context) error
	// Close releases the transport.
	Close() error
}

// RawReader is an optional ability of a Conn: reading an exact number of
// bytes, needed for definite-length arbitrary blocks whose data may contain
// the terminator byte (IEEE 488.2 §8.7.9). Both built-in transports have it;
// Session falls back to joining lines when a Conn lacks it.
type RawReader interface {
	ReadFull(ctx context.Context, p []byte) error
}

// Transport errors. Errors returned by a Conn wrap one of these where they
// apply, so callers can test with errors.Is.
var (
	// ErrTimeout: no (complete) reply before the deadline.
	ErrTimeout = errors.New("timed out")
	// ErrClosed: the connection was closed, by the instrument or by us.
	ErrClosed = errors.New("connection closed")
)

// DialOptions configure a transport.
type DialOptions struct {
	// Terminator ends each response message: "\n" (the default), "\r\n"
	// or "\r". Raw sockets carry no END signal, so LF ends a message
	// (IEEE 488.2 response terminator NL^END).
	Terminator string
	// ConnectTimeout bounds Dial when ctx has no deadline (default 5 s).
	ConnectTimeout time.Duration
	// DrainQuiet is how long Drain waits for more input before it
	// decides the line is quiet (default 20 ms).
	DrainQuiet time.Duration
	// MaxMessageBytes bounds one response message (default 64 MiB); a
	// longer one is an error rather than unbounded memory.
	MaxMessageBytes int
}

func (o DialOptions) withDefaults() DialOptions {
	if o.Terminator == "" {
		o.Terminator = "\n"
	}
	if o.ConnectTimeout <= 0 {
		o.ConnectTimeout = 5 * time.Second
	}
	if o.DrainQuiet <= 0 {
		o.DrainQuiet = 20 * time.Millisecond
	}
	if o.MaxMessageBytes <= 0 {
		o.MaxMessageBytes = 64 << 20
	}
	return o
}

func checkTerminator(t string) error {
	switch t {
	case "\n", "\r\n", "\r":
		return nil
	}
	return fmt.Errorf("terminator %q: use \"\\n\", \"\\r\\n\" or \"\\r\"", t)
}

// Dial opens a transport to addr. Only cmd (the application) dials and
// closes; procedures receive roles.
func Dial(ctx context.Context, addr Address, opts DialOptions) (Conn, error) {
	opts = opts.withDefaults()
	if err := checkTerminator(opts.Terminator); err != nil {
		return nil, fmt.Errorf("dial %s: %w", addr, err)
	}
	switch addr.Scheme {
	case SchemeTCP:
		return dialTCP(ctx, addr, opts)
	case SchemeSerial:
		return openSerial(ctx, addr, opts)
	}
	return nil, &AddressError{Address: addr.String(), Reason: fmt.Sprintf("unknown scheme %q", addr.Scheme)}
}

// fillFunc reads at least one byte into p, or fails. It returns (0, err)
// with err wrapping ErrTimeout, ErrClosed or a context error.
type fillFunc func(ctx context.Context, p []byte) (int, error)

// lineBuffer splits a byte stream into terminated messages. It is shared by
// the TCP and serial transports.
type lineBuffer struct {
	pending []byte
	scratch []byte
	last    byte // last byte of the terminator: the split point
	lf      bool // terminator ends in LF: strip an optional CR too
	max     int
}

func newLineBuffer(opts DialOptions) *lineBuffer {
	t := opts.Terminator
	return &lineBuffer{
		scratch: make([]byte, 64<<10),
		last:    t[len(t)-1],
		lf:      t[len(t)-1] == '\n',
		max:     opts.MaxMessageBytes,
	}
}

func (b *lineBuffer) readLine(ctx context.Context, fill fillFunc) ([]byte, error) {
	searched := 0
	for {
		if i := bytes.IndexByte(b.pending[searched:], b.last); i >= 0 {
			i += searched
			line := b.pending[:i]
			if b.lf && len(line) > 0 && line[len(line)-1] == '\r' {
				line = line[:len(line)-1]
			}
			out := append([]byte(nil), line...)
			b.consume(i + 1)
			return out, nil
		}
		searched = len(b.pending)
		if len(b.pending) > b.max {
			n := len(b.pending)
			b.pending = b.pending[:0]
			return nil, fmt.Errorf("reply longer than %d bytes without a terminator (%d bytes discarded)", b.max, n)
		}
		if err := b.more(ctx, fill); err != nil {
			if len(b.pending) > 0 && errors.Is(err, ErrClosed) {
				return nil, fmt.Errorf("%w in the middle of a reply (got %q)", err, clip(b.pending))
			}
			return nil, err
		}
	}
}

func (b *lineBuffer) readFull(ctx context.Context, p []byte, fill fillFunc) error {
	for len(b.pending) < len(p) {
		if err := b.more(ctx, fill); err != nil {
			return err
		}
	}
	copy(p, b.pending)
	b.consume(len(p))
	return nil
}

func (b *lineBuffer) more(ctx context.Context, fill fillFunc) error {
	n, err := fill(ctx, b.scratch)
	b.pending = append(b.pending, b.scratch[:n]...)
	if n > 0 {
		return nil
	}
	return err
}

func (b *lineBuffer) consume(n int) {
	b.pending = b.pending[n:]
	if len(b.pending) == 0 {
		b.pending = nil
	}
}

// drain discards buffered input, then reads and discards until nothing has
// arrived for quiet (or ctx ends). A device that never stops talking makes
// drain return ctx's error.
func (b *lineBuffer) drain(ctx context.Context, quiet time.Duration, fill fillFunc) error {
	b.pending = nil
	for {
		if err := ctx.Err(); err != nil {
			return err
		}
		qctx, cancel := context.WithTimeout(ctx, quiet)
		n, err := fill(qctx, b.scratch)
		cancel()
		if n > 0 {
			continue
		}
		if errors.Is(err, ErrTimeout) && ctx.Err() == nil {
			return nil // quiet
		}
		return err
	}
}

// clip shortens a byte slice for an error message.
func clip(p []byte) []byte {
	if len(p) > 80 {
		return append(append([]byte(nil), p[:80]...), "..."...)
	}
	return p
}

// ctxError is the error for a transport wait that ended on ctx or on a
// deadline taken from ctx: cancellation gives ctx.Err(); anything else (the
// deadline, possibly noticed by the transport a moment before ctx itself)
// gives a wrapped ErrTimeout.
func ctxError(ctx context.Context, what string) error {
	if err := ctx.Err(); err != nil && !errors.Is(err, context.DeadlineExceeded) {
		return err
	}
	return fmt.Errorf("%s: %w", what, ErrTimeout)
}
