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
	// Terminator ends each response message: "\n" (the default; IEEE
	// 488.2 response terminator NL^END, raw sockets carrying no END
	// signal), "\r\n", "\r", or any other string CheckTerminator
	// accepts (an instrument that ends its messages with ETX, or with
	// CR LF EOT). Under "\n" and "\r\n" a message ends at LF and a CR
	// before it is dropped; under any other terminator a message ends
	// exactly where the whole terminator string appears.
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

// MaxTerminatorBytes is the longest message terminator CheckTerminator
// accepts.
const MaxTerminatorBytes = 8

// CheckTerminator says whether t can end SCPI messages: 1 to
// MaxTerminatorBytes bytes whose FIRST byte is an ASCII control character
// (0x00-0x1F or DEL). Response data other than blocks is printable ASCII
// (IEEE 488.2 §8.7: <NR1>…<NR3> numbers, strings and character data), so a
// terminator that starts with a control character can only match where
// the instrument put it; one that starts with a printable byte (";", "OK")
// would cut replies that contain it. The bytes after the first may be
// anything (a prompt such as "\r\n> " is allowed). Binary block data is
// read by its announced length, never searched for the terminator.
func CheckTerminator(t string) error {
	switch {
	case t == "":
		return errors.New(`terminator is empty: give "\n" (the default), "\r\n", "\r" or another string starting with a control character`)
	case len(t) > MaxTerminatorBytes:
		return fmt.Errorf("terminator %q is %d bytes; at most %d", t, len(t), MaxTerminatorBytes)
	case !isControl(t[0]):
		return fmt.Errorf("terminator %q starts with %q, a printable character that replies may contain: start it with a control character such as \"\\n\", \"\\r\" or \"\\u0003\" (ETX)", t, t[:1])
	}
	return nil
}

func checkTerminator(t string) error { return CheckTerminator(t) }

func isControl(b byte) bool { return b < 0x20 || b == 0x7f }

// lfTerminated reports the two terminators read leniently: a message ends
// at LF, with an optional CR before it dropped.
func lfTerminated(t string) bool { return t == "\n" || t == "\r\n" }

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
	term    []byte // the split point: LF for "\n" and "\r\n", else the whole terminator
	lf      bool   // "\n" or "\r\n": strip an optional CR too
	max     int
}

func newLineBuffer(opts DialOptions) *lineBuffer {
	t := opts.Terminator
	b := &lineBuffer{scratch: make([]byte, 64<<10), term: []byte(t), max: opts.MaxMessageBytes}
	if lfTerminated(t) {
		b.term, b.lf = []byte{'\n'}, true
	}
	return b
}

func (b *lineBuffer) readLine(ctx context.Context, fill fillFunc) ([]byte, error) {
	searched := 0
	for {
		if i := bytes.Index(b.pending[searched:], b.term); i >= 0 {
			i += searched
			line := b.pending[:i]
			if b.lf && len(line) > 0 && line[len(line)-1] == '\r' {
				line = line[:len(line)-1]
			}
			out := append([]byte(nil), line...)
			b.consume(i + len(b.term))
			return out, nil
		}
		// A terminator may straddle the next read: search again from
		// the last len(term)-1 bytes.
		searched = max(0, len(b.pending)-len(b.term)+1)
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
