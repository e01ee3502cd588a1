package instrument

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"sync"
	"time"
)

// SessionOptions configure a Session. The zero value is usable; a profile
// supplies its own through Profile.SessionOptions.
type SessionOptions struct {
	// Terminator is appended to every program message ("\n" by default;
	// IEEE 488.2 program message terminator NL; any string
	// CheckTerminator accepts).
	Terminator string
	// Timeout bounds each exchange (one message out and, for a query, its
	// reply in) unless ctx has an earlier deadline; default 5 s. A
	// caller can raise it for one call with WithCallTimeout.
	Timeout time.Duration
	// CheckErrors makes every Write read the error queue (SYSTem:ERRor?)
	// until it is empty and return its first entry as *InstrumentError.
	CheckErrors bool
	// MaxQueue caps how many entries one drain of the error queue reads
	// (default 64); an instrument that never answers 0 is then an error.
	MaxQueue int
	// Wait is a wall-clock pause after every message sent, for an
	// instrument that loses a message arriving too soon after the last.
	Wait time.Duration
	// OPCAfterSet makes every Write send *OPC? and wait for its "1"
	// (IEEE 488.2 §12.5.3: the reply comes once every earlier command
	// has completed) before the error queue is read, for an instrument
	// that is not ready for the next message until a set is done.
	OPCAfterSet bool
	// MaxBlockBytes caps the length an arbitrary block may announce
	// (default 64 MiB), so a garbled header cannot exhaust memory.
	MaxBlockBytes int
}

func (o SessionOptions) withDefaults() SessionOptions {
	if o.Terminator == "" {
		o.Terminator = "\n"
	}
	if o.Timeout <= 0 {
		o.Timeout = 5 * time.Second
	}
	if o.MaxQueue <= 0 {
		o.MaxQueue = 64
	}
	if o.MaxBlockBytes <= 0 {
		o.MaxBlockBytes = 64 << 20
	}
	return o
}

// ErrOutOfSync is wrapped when a session could not re-synchronise with its
// instrument after an exchange was interrupted: replies may belong to
// earlier commands, so nothing is sent until a re-sync succeeds.
var ErrOutOfSync = errors.New("session out of step with the instrument")

// OpError is a failed exchange: which instrument, which command, what went
// wrong, and what the recovery found.
type OpError struct {
	Instrument string
	// Where is the driver's part of the instrument ("supply channel 1"),
	// set by the driver that made the call; "" on a bare session.
	Where   string
	Command string
	// After is the command sent just before in the same call, whose
	// outcome Command was checking ("VOLT 24" before "SYST:ERR?").
	After string
	Err   error
	// Recovery is set when the re-sync after a time-out failed too.
	Recovery error
	// Queue holds the error-queue entries read after a time-out (with
	// CheckErrors), which often say why the instrument did not answer.
	Queue []QueueEntry
}

func (e *OpError) Error() string {
	var sb strings.Builder
	sb.WriteString(instrumentLabel(e.Instrument, e.Where))
	if e.Command != "" && e.After != "" {
		fmt.Fprintf(&sb, ": %q (after %q): %v", e.Command, e.After, e.Err)
	} else if e.Command != "" {
		fmt.Fprintf(&sb, ": %q: %v", e.Command, e.Err)
	} else {
		fmt.Fprintf(&sb, ": %v", e.Err)
	}
	if len(e.Queue) > 0 {
		sb.WriteString("; the instrument's error queue then held:")
		for _, q := range e.Queue {
			fmt.Fprintf(&sb, " %s (%s);", q, describeCode(q.Code))
		}
	}
	if e.Recovery != nil {
		fmt.Fprintf(&sb, "; re-sync failed (%v): check the instrument and reconnect", e.Recovery)
	}
	return sb.String()
}

func (e *OpError) Unwrap() error { return e.Err }

// Timeout reports whether the exchange timed out.
func (e *OpError) Timeout() bool { return errors.Is(e.Err, ErrTimeout) }

// Identity is a parsed *IDN? reply (IEEE 488.2 §10): maker, model,
// serial number and firmware level; "0" marks a field the instrument does
// not report.
type Identity struct {
	Maker, Model, Serial, Firmware string
	Raw                            string // the reply as received
}

func (id Identity) String() string { return id.Raw }

// ParseIdentity splits an *IDN? reply into its four fields. Commas beyond
// the third belong to the firmware field. A reply with fewer than four
// fields is returned as far as it goes, with an error.
func ParseIdentity(raw string) (Identity, error) {
	id := Identity{Raw: raw}
	f := strings.SplitN(raw, ",", 4)
	for i := range f {
		f[i] = strings.TrimSpace(f[i])
	}
	fields := []*string{&id.Maker, &id.Model, &id.Serial, &id.Firmware}
	for i := range f {
		*fields[i] = f[i]
	}
	if len(f) < 4 || id.Maker == "" || id.Model == "" {
		return id, fmt.Errorf("%w: *IDN? reply %q: want maker,model,serial,firmware (IEEE 488.2 §10)", ErrBadResponse, clipString(raw))
	}
	return id, nil
}

type callTimeoutKey struct{}

// WithCallTimeout returns a context under which each exchange of a Session
// may take up to d instead of the session's default, for commands known to
// take long (a READ? of many readings at a long integration time). An
// earlier deadline of ctx still wins.
func WithCallTimeout(ctx context.Context, d time.Duration) context.Context {
	return context.WithValue(ctx, callTimeoutKey{}, d)
}

// Session speaks IEEE 488.2 / SCPI to one instrument over a Conn: program
// messages out, response messages in, the error queue, identification,
// and recovery after a time-out. All methods are safe for concurrent use;
// Do groups several exchanges so that no other caller's command comes
// between them.
//
// After a time-out a late reply may still be on its way, and would be taken
// as the answer to the next query. So the session then drains its input and
// re-synchronises with *OPC? (IEEE 488.2 §10: the reply "1" comes after
// every earlier command completed), reading past stale replies until the
// "1". If that fails, every later call tries again first and, failing,
// returns an error wrapping ErrOutOfSync.
type Session struct {
	name string
	conn Conn
	opts SessionOptions
	term string
	sem  chan struct{} // holds one token while a caller owns the connection

	resync bool                                // guarded by sem: a stale reply may be pending
	lost   *OpError                            // guarded by sem: the exchange that found the connection closed (until Redial)
	redial func(context.Context) (Conn, error) // redial.go; nil: cannot

	idMu sync.Mutex
	id   *Identity
}

// NewSession wraps c. name identifies the instrument in every error (the
// plan's instrument name, such as "dmm").
func NewSession(name string, c Conn, opts SessionOptions) *Session {
	opts = opts.withDefaults()
	return &Session{name: name, conn: c, opts: opts, term: opts.Terminator, sem: make(chan struct{}, 1)}
}

// Name is the instrument name given to NewSession.
func (s *Session) Name() string { return s.name }

// Timeout is the default per-exchange time-out.
func (s *Session) Timeout() time.Duration { return s.opts.Timeout }

// Close closes the underlying Conn.
func (s *Session) Close() error { return s.conn.Close() }

// Identity returns the identity read by the last successful Identify.
func (s *Session) Identity() (Identity, bool) {
	s.idMu.Lock()
	defer s.idMu.Unlock()
	if s.id == nil {
		return Identity{}, false
	}
	return *s.id, true
}

// Tx is a Session owned by one caller inside Do. Its methods are those of
// Session without the locking; it must not be used after Do returns, nor
// from several goroutines.
type Tx struct {
	s    *Session
	done bool
}

// Do runs fn with exclusive use of the session, so that a sequence such as
// "INST:NSEL 2" then "VOLT 5" reaches the instrument without another
// caller's command in between. fn must use tx, not the Session (which would
// wait for itself). Waiting for the session ends with ctx.
func (s *Session) Do(ctx context.Context, fn func(tx *Tx) error) error {
	if ctx.Err() != nil {
		return &OpError{Instrument: s.name, Command: "", Err: ctxError(ctx, "waiting for the session")}
	}
	select {
	case s.sem <- struct{}{}:
	case <-ctx.Done():
		return &OpError{Instrument: s.name, Command: "", Err: ctxError(ctx, "waiting for the session")}
	}
	defer func() { <-s.sem }()
	tx := &Tx{s: s}
	defer func() { tx.done = true }()
	return fn(tx)
}

// Write sends a program message (a command, or several joined with ';').
func (s *Session) Write(ctx context.Context, cmd string) error {
	return s.Do(ctx, func(tx *Tx) error { return tx.Write(ctx, cmd) })
}

// Query sends a query and returns its reply without the terminator.
func (s *Session) Query(ctx context.Context, cmd string) (string, error) {
	var out string
	err := s.Do(ctx, func(tx *Tx) (err error) { out, err = tx.Query(ctx, cmd); return })
	return out, err
}

// QueryFloat sends a query and parses its reply with ParseNumber (so
// 9.9E37 comes back as +Inf).
func (s *Session) QueryFloat(ctx context.Context, cmd string) (float64, error) {
	var out float64
	err := s.Do(ctx, func(tx *Tx) (err error) { out, err = tx.QueryFloat(ctx, cmd); return })
	return out, err
}

// QueryFloats sends a query and parses its comma-separated reply.
func (s *Session) QueryFloats(ctx context.Context, cmd string) ([]float64, error) {
	var out []float64
	err := s.Do(ctx, func(tx *Tx) (err error) { out, err = tx.QueryFloats(ctx, cmd); return })
	return out, err
}

// QueryBlock sends a query whose reply is an arbitrary block and returns
// the block's data.
func (s *Session) QueryBlock(ctx context.Context, cmd string) ([]byte, error) {
	var out []byte
	err := s.Do(ctx, func(tx *Tx) (err error) { out, err = tx.QueryBlock(ctx, cmd); return })
	return out, err
}

// Identify sends *IDN? and parses the reply; the result is kept for
// Identity. A malformed reply is returned (Raw set) with an error.
func (s *Session) Identify(ctx context.Context) (Identity, error) {
	var out Identity
	err := s.Do(ctx, func(tx *Tx) (err error) { out, err = tx.Identify(ctx); return })
	return out, err
}

// Reset sends *RST (IEEE 488.2 §10) and waits for it to complete with
// *OPC?.
func (s *Session) Reset(ctx context.Context) error {
	return s.Do(ctx, func(tx *Tx) error {
		if err := tx.Write(ctx, "*RST"); err != nil {
			return err
		}
		return tx.WaitComplete(ctx)
	})
}

// Clear sends *CLS (IEEE 488.2 §10): clears the status registers and the
// error queue.
func (s *Session) Clear(ctx context.Context) error {
	return s.Do(ctx, func(tx *Tx) error { return tx.Write(ctx, "*CLS") })
}

// WaitComplete sends *OPC? and expects "1" (IEEE 488.2 §10).
func (s *Session) WaitComplete(ctx context.Context) error {
	return s.Do(ctx, func(tx *Tx) error { return tx.WaitComplete(ctx) })
}

// Errors reads the error queue until it answers 0 (at most
// SessionOptions.MaxQueue entries) and returns the entries, oldest first.
func (s *Session) Errors(ctx context.Context) ([]QueueEntry, error) {
	var out []QueueEntry
	err := s.Do(ctx, func(tx *Tx) (err error) { out, err = tx.Errors(ctx); return })
	return out, err
}

func (t *Tx) begin(ctx context.Context, cmd string) error {
	if t.done {
		return &OpError{Instrument: t.s.name, Command: cmd, Err: errors.New("transaction used after Do returned")}
	}
	if cmd == "" || strings.ContainsAny(cmd, "\r\n") {
		return &OpError{Instrument: t.s.name, Command: cmd, Err: errors.New("a command must be one non-empty line")}
	}
	if strings.Contains(cmd, t.s.term) {
		return &OpError{Instrument: t.s.name, Command: cmd, Err: fmt.Errorf("the command holds the terminator %q", t.s.term)}
	}
	return t.s.sync(ctx, cmd)
}

// Write sends a program message; with CheckErrors it then drains the error
// queue and returns its first entry as *InstrumentError.
func (t *Tx) Write(ctx context.Context, cmd string) error {
	if err := t.begin(ctx, cmd); err != nil {
		return err
	}
	if _, err := t.s.exchange(ctx, cmd, false); err != nil {
		return t.s.fail(ctx, cmd, err)
	}
	if t.s.opts.OPCAfterSet {
		reply, err := t.s.exchange(ctx, "*OPC?", true)
		if err != nil {
			return t.s.fail(ctx, cmd+" then *OPC?", err)
		}
		if !isOne(string(reply)) {
			t.s.resync = true
			return &OpError{Instrument: t.s.name, Command: cmd + " then *OPC?", Err: fmt.Errorf("%w: reply %q, want 1", ErrBadResponse, clip(reply))}
		}
	}
	if !t.s.opts.CheckErrors {
		return nil
	}
	q, err := t.s.readQueue(ctx)
	if err != nil {
		var op *OpError
		if errors.As(err, &op) && op.After == "" {
			op.After = cmd
		}
		return err
	}
	if len(q) > 0 {
		return &InstrumentError{Instrument: t.s.name, Command: cmd, Code: q[0].Code, Message: q[0].Message, More: q[1:]}
	}
	return nil
}

// Query sends a query and returns its reply without the terminator.
func (t *Tx) Query(ctx context.Context, cmd string) (string, error) {
	if err := t.begin(ctx, cmd); err != nil {
		return "", err
	}
	line, err := t.s.exchange(ctx, cmd, true)
	if err != nil {
		return "", t.s.fail(ctx, cmd, err)
	}
	return string(line), nil
}

// QueryFloat sends a query and parses one number (see ParseNumber).
func (t *Tx) QueryFloat(ctx context.Context, cmd string) (float64, error) {
	reply, err := t.Query(ctx, cmd)
	if err != nil {
		return 0, err
	}
	v, err := ParseNumber(reply)
	if err != nil {
		return 0, &OpError{Instrument: t.s.name, Command: cmd, Err: err}
	}
	return v, nil
}

// QueryFloats sends a query and parses a comma-separated list of numbers.
func (t *Tx) QueryFloats(ctx context.Context, cmd string) ([]float64, error) {
	reply, err := t.Query(ctx, cmd)
	if err != nil {
		return nil, err
	}
	v, err := ParseNumbers(reply)
	if err != nil {
		return nil, &OpError{Instrument: t.s.name, Command: cmd, Err: err}
	}
	return v, nil
}

// QueryBlock sends a query and reads an arbitrary block reply (IEEE 488.2
// §8.7.9-10). Over a Conn without RawReader the block is rebuilt from
// lines, which loses a CR that precedes an LF inside binary data. The
// block may announce up to SessionOptions.MaxBlockBytes.
func (t *Tx) QueryBlock(ctx context.Context, cmd string) ([]byte, error) {
	return t.QueryBlockMax(ctx, cmd, t.s.opts.MaxBlockBytes)
}

// QueryBlockMax is QueryBlock for a caller that knows how much data to
// expect: a header announcing more than maxBytes (or more than
// SessionOptions.MaxBlockBytes) is refused before anything is allocated
// for it, and the session re-synchronises before its next exchange.
func (t *Tx) QueryBlockMax(ctx context.Context, cmd string, maxBytes int) ([]byte, error) {
	if maxBytes <= 0 || maxBytes > t.s.opts.MaxBlockBytes {
		maxBytes = t.s.opts.MaxBlockBytes
	}
	if err := t.begin(ctx, cmd); err != nil {
		return nil, err
	}
	s := t.s
	ectx, cancel := s.exchangeCtx(ctx)
	defer cancel()
	if err := s.send(ectx, cmd); err != nil {
		return nil, s.fail(ctx, cmd, err)
	}
	var data []byte
	var err error
	if rr, ok := s.conn.(RawReader); ok {
		data, err = s.readBlockRaw(ectx, rr, maxBytes)
	} else {
		data, err = s.readBlockLines(ectx, maxBytes)
	}
	if err != nil {
		if errors.Is(err, ErrBadResponse) {
			s.resync = true // the rest of the block may still be coming
			return nil, &OpError{Instrument: s.name, Command: cmd, Err: err}
		}
		return nil, s.fail(ctx, cmd, err)
	}
	return data, nil
}

func (s *Session) readBlockRaw(ctx context.Context, rr RawReader, maxBytes int) ([]byte, error) {
	hdr := make([]byte, 2)
	if err := rr.ReadFull(ctx, hdr); err != nil {
		return nil, err
	}
	if hdr[0] != '#' || hdr[1] < '0' || hdr[1] > '9' {
		return nil, fmt.Errorf("%w: reply starts %q, not an arbitrary block header #<digit>", ErrBadResponse, hdr)
	}
	n := int(hdr[1] - '0')
	if n == 0 { // indefinite: up to NL^END
		return s.conn.ReadLine(ctx)
	}
	digits := make([]byte, n)
	if err := rr.ReadFull(ctx, digits); err != nil {
		return nil, err
	}
	length, err := strconv.Atoi(string(digits))
	if err != nil || digits[0] == '+' || digits[0] == '-' {
		return nil, fmt.Errorf("%w: block length %q is not all digits", ErrBadResponse, digits)
	}
	if length > maxBytes {
		return nil, fmt.Errorf("%w: block announces %d bytes, more than the %d allowed", ErrBadResponse, length, maxBytes)
	}
	data := make([]byte, length)
	if err := rr.ReadFull(ctx, data); err != nil {
		return nil, err
	}
	tail, err := s.conn.ReadLine(ctx)
	if err != nil {
		return nil, err
	}
	if len(tail) != 0 {
		return nil, fmt.Errorf("%w: %d unexpected bytes after the block: %q", ErrBadResponse, len(tail), clip(tail))
	}
	return data, nil
}

func (s *Session) readBlockLines(ctx context.Context, maxBytes int) ([]byte, error) {
	buf, err := s.conn.ReadLine(ctx)
	if err != nil {
		return nil, err
	}
	if len(buf) >= 2 && buf[0] == '#' && buf[1] == '0' {
		return buf[2:], nil
	}
	if len(buf) < 2 || buf[0] != '#' || buf[1] < '1' || buf[1] > '9' {
		return nil, fmt.Errorf("%w: reply %q is not an arbitrary block (#<digit>...)", ErrBadResponse, clip(buf))
	}
	n := int(buf[1] - '0')
	for len(buf) < 2+n {
		more, err := s.conn.ReadLine(ctx)
		if err != nil {
			return nil, err
		}
		buf = append(append(buf, '\n'), more...)
	}
	length, err := strconv.Atoi(string(buf[2 : 2+n]))
	if err != nil || length < 0 || buf[2] == '+' {
		return nil, fmt.Errorf("%w: block length %q is not all digits", ErrBadResponse, buf[2:2+n])
	}
	if length > maxBytes {
		return nil, fmt.Errorf("%w: block announces %d bytes, more than the %d allowed", ErrBadResponse, length, maxBytes)
	}
	for len(buf) < 2+n+length {
		more, err := s.conn.ReadLine(ctx)
		if err != nil {
			return nil, err
		}
		buf = append(append(buf, '\n'), more...)
	}
	data, rest, err := ParseBlock(buf)
	if err != nil {
		return nil, err
	}
	if len(rest) != 0 {
		return nil, fmt.Errorf("%w: %d unexpected bytes after the block: %q", ErrBadResponse, len(rest), clip(rest))
	}
	return data, nil
}

// Identify sends *IDN? and parses the reply.
func (t *Tx) Identify(ctx context.Context) (Identity, error) {
	raw, err := t.Query(ctx, "*IDN?")
	if err != nil {
		return Identity{}, err
	}
	id, err := ParseIdentity(raw)
	if err != nil {
		return id, &OpError{Instrument: t.s.name, Command: "*IDN?", Err: err}
	}
	t.s.idMu.Lock()
	t.s.id = &id
	t.s.idMu.Unlock()
	return id, nil
}

// WaitComplete sends *OPC? and expects "1".
func (t *Tx) WaitComplete(ctx context.Context) error {
	reply, err := t.Query(ctx, "*OPC?")
	if err != nil {
		return err
	}
	if !isOne(reply) {
		t.s.resync = true // a stale reply came first: realign before the next call
		return &OpError{Instrument: t.s.name, Command: "*OPC?", Err: fmt.Errorf("%w: reply %q, want 1", ErrBadResponse, clipString(reply))}
	}
	return nil
}

// Errors drains the error queue; see Session.Errors.
func (t *Tx) Errors(ctx context.Context) ([]QueueEntry, error) {
	if err := t.begin(ctx, "SYST:ERR?"); err != nil {
		return nil, err
	}
	return t.s.readQueue(ctx)
}

func isOne(reply string) bool {
	r := strings.TrimSpace(reply)
	return r == "1" || r == "+1"
}

// exchangeCtx bounds one exchange by the session's (or the call's) time-out.
func (s *Session) exchangeCtx(ctx context.Context) (context.Context, context.CancelFunc) {
	d := s.opts.Timeout
	if v, ok := ctx.Value(callTimeoutKey{}).(time.Duration); ok && v > 0 {
		d = v
	}
	return context.WithTimeout(ctx, d)
}

func (s *Session) send(ctx context.Context, cmd string) error {
	msg := make([]byte, 0, len(cmd)+len(s.term))
	msg = append(append(msg, cmd...), s.term...)
	if err := s.conn.Write(ctx, msg); err != nil {
		return err
	}
	return s.pause(ctx)
}

// pause waits SessionOptions.Wait of wall-clock time after a message.
func (s *Session) pause(ctx context.Context) error {
	if s.opts.Wait <= 0 {
		return nil
	}
	t := time.NewTimer(s.opts.Wait)
	defer t.Stop()
	select {
	case <-t.C:
		return nil
	case <-ctx.Done():
		if errors.Is(ctx.Err(), context.DeadlineExceeded) {
			return fmt.Errorf("%w: pausing after the message", ErrTimeout)
		}
		return ctx.Err()
	}
}

// exchange sends cmd and, if reply is set, reads one response message,
// under one exchange time-out. Errors are the transport's, unwrapped.
func (s *Session) exchange(ctx context.Context, cmd string, reply bool) ([]byte, error) {
	ectx, cancel := s.exchangeCtx(ctx)
	defer cancel()
	if err := s.send(ectx, cmd); err != nil {
		return nil, err
	}
	if !reply {
		return nil, nil
	}
	return s.conn.ReadLine(ectx)
}

// fail wraps a transport error of cmd. After a time-out (not a
// cancellation) it re-synchronises at once, with a fresh time-out, and with
// CheckErrors reads the error queue, which usually says why no reply came
// (for example -113 Undefined header). Otherwise the next call re-syncs.
func (s *Session) fail(ctx context.Context, cmd string, err error) error {
	s.resync = true
	op := &OpError{Instrument: s.name, Command: cmd, Err: err}
	if s.markLost(op) {
		return op
	}
	if !errors.Is(err, ErrTimeout) || errors.Is(ctx.Err(), context.Canceled) {
		return op
	}
	rctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), s.opts.Timeout)
	defer cancel()
	if rerr := s.recover(rctx); rerr != nil {
		op.Recovery = rerr
		return op
	}
	if s.opts.CheckErrors {
		op.Queue, _ = s.readQueue(rctx)
	}
	return op
}

// sync re-synchronises if an earlier exchange was interrupted. After a
// lost connection it sends nothing: cmd fails at once with an error that
// says the connection was lost earlier (LostEarlierError), not with the
// chain of a re-sync that cannot work.
func (s *Session) sync(ctx context.Context, cmd string) error {
	if s.lost != nil {
		return &OpError{Instrument: s.name, Command: cmd, Err: &LostEarlierError{At: s.lost.Command, After: s.lost.After, Cause: s.lost.Err}}
	}
	if !s.resync {
		return nil
	}
	rctx, cancel := s.exchangeCtx(ctx)
	defer cancel()
	if err := s.recover(rctx); err != nil {
		if errors.Is(ctx.Err(), context.Canceled) {
			return &OpError{Instrument: s.name, Command: cmd, Err: ctx.Err()}
		}
		if errors.Is(err, ErrClosed) {
			s.lost = &OpError{Instrument: s.name, Command: "*OPC?", Err: err}
			return &OpError{Instrument: s.name, Command: cmd, Err: &LostEarlierError{At: "*OPC?", Cause: err}}
		}
		return &OpError{Instrument: s.name, Command: cmd, Err: fmt.Errorf("%w: not sent: the re-sync (*OPC?) after an interrupted exchange failed: %v", ErrOutOfSync, err)}
	}
	return nil
}

// markLost records op as the exchange that found the connection closed
// (the first one only) and reports whether it did.
func (s *Session) markLost(op *OpError) bool {
	if !errors.Is(op.Err, ErrClosed) {
		return false
	}
	if s.lost == nil {
		s.lost = op
	}
	return true
}

// LostEarlierError is the error of a command not sent because the
// connection had been lost at an earlier exchange (At, after After);
// Cause is that exchange's error (wrapping ErrClosed, so errors.Is(err,
// ErrClosed) holds for it too).
type LostEarlierError struct {
	At, After string
	Cause     error
}

func (e *LostEarlierError) Error() string {
	return fmt.Sprintf("not sent: the connection was lost earlier, at %q", e.At)
}

func (e *LostEarlierError) Unwrap() error { return e.Cause }

// maxStaleReplies bounds how many stale reply lines a re-sync reads past.
const maxStaleReplies = 64

// recover drains input, sends *OPC? and reads until its "1". A late "1"
// from an earlier query could be taken for it, so input is drained once
// more afterwards to swallow the real one if it follows at once.
func (s *Session) recover(ctx context.Context) error {
	if err := s.conn.Drain(ctx); err != nil {
		return fmt.Errorf("drain input: %w", err)
	}
	if err := s.send(ctx, "*OPC?"); err != nil {
		return fmt.Errorf("send *OPC?: %w", err)
	}
	for range maxStaleReplies {
		line, err := s.conn.ReadLine(ctx)
		if err != nil {
			return fmt.Errorf("no answer to *OPC?: %w", err)
		}
		if isOne(string(line)) {
			if err := s.conn.Drain(ctx); err != nil {
				return fmt.Errorf("drain input: %w", err)
			}
			s.resync = false
			return nil
		}
	}
	return fmt.Errorf("*OPC? got %d replies none of which was 1", maxStaleReplies)
}

// readQueue reads SYST:ERR? until code 0. It never re-syncs (it is used by
// the recovery itself); a failure leaves the session marked for re-sync.
func (s *Session) readQueue(ctx context.Context) ([]QueueEntry, error) {
	const cmd = "SYST:ERR?"
	var q []QueueEntry
	for range s.opts.MaxQueue {
		line, err := s.exchange(ctx, cmd, true)
		if err != nil {
			s.resync = true
			op := &OpError{Instrument: s.name, Command: cmd, Err: err}
			s.markLost(op)
			return q, op
		}
		code, msg, err := ParseErrorResponse(string(line))
		if err != nil {
			return q, &OpError{Instrument: s.name, Command: cmd, Err: err}
		}
		if code == 0 {
			return q, nil
		}
		q = append(q, QueueEntry{Code: code, Message: msg})
	}
	return q, &OpError{Instrument: s.name, Command: cmd,
		Err: fmt.Errorf("the error queue did not answer 0 within %d reads (last %v)", s.opts.MaxQueue, q[len(q)-1])}
}

// instrumentLabel names an instrument in an error: "psu" or
// "psu (supply channel 1)".
func instrumentLabel(name, where string) string {
	if where == "" {
		return name
	}
	return name + " (" + where + ")"
}
