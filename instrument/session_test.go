package instrument_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"sync"
	"testing"
	"time"

	"nullbench/instrument"
)

// dialFake opens a Session to a fake instrument over real loopback TCP.
func dialFake(t testing.TB, f *fakeInstrument, opts instrument.SessionOptions) *instrument.Session {
	t.Helper()
	addr, err := instrument.ParseAddress(f.Addr)
	if err != nil {
		t.Fatal(err)
	}
	c, err := instrument.Dial(context.Background(), addr, instrument.DialOptions{})
	if err != nil {
		t.Fatal(err)
	}
	s := instrument.NewSession("loop", c, opts)
	t.Cleanup(func() { s.Close() })
	return s
}

func TestSessionQueries(t *testing.T) {
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{CheckErrors: true})
	ctx := context.Background()

	id, err := s.Identify(ctx)
	if err != nil {
		t.Fatal(err)
	}
	want := instrument.Identity{Maker: "HARROWGATE-FAKE", Model: "LOOP-1", Serial: "0001", Firmware: "0.1",
		Raw: "HARROWGATE-FAKE,LOOP-1,0001,0.1"}
	if id != want {
		t.Errorf("Identify = %+v, want %+v", id, want)
	}
	if got, ok := s.Identity(); !ok || got != want {
		t.Errorf("Identity() = %+v, %v", got, ok)
	}

	tests := []struct {
		name, cmd, want string
	}{
		{"CR before LF is stripped (common practice)", "CRLF?", "7"},
		{"reply split across two TCP writes", "SPLIT?", "1234"},
		{"*OPC? answers 1 (IEEE 488.2 §10)", "*OPC?", "1"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := s.Query(ctx, tc.cmd)
			if err != nil || got != tc.want {
				t.Errorf("Query(%q) = %q, %v; want %q", tc.cmd, got, err, tc.want)
			}
		})
	}

	if err := s.Write(ctx, "VOLT 12.5"); err != nil {
		t.Fatal(err)
	}
	v, err := s.QueryFloat(ctx, "VOLT?")
	if err != nil || v != 12.5 {
		t.Errorf("QueryFloat(VOLT?) = %v, %v; want 12.5", v, err)
	}
	if err := s.WaitComplete(ctx); err != nil {
		t.Error(err)
	}
	if err := s.Reset(ctx); err != nil {
		t.Error(err)
	}
	if err := s.Clear(ctx); err != nil {
		t.Error(err)
	}
}

func TestSessionBlocks(t *testing.T) {
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{})
	ctx := context.Background()
	// Definite block whose data holds LF and CR LF (IEEE 488.2 §8.7.9):
	// the bytes must come back exactly, CR included.
	got, err := s.QueryBlock(ctx, "BLOCK?")
	if err != nil || string(got) != "ab\ncd\r\nef" {
		t.Errorf("QueryBlock(BLOCK?) = %q, %v", got, err)
	}
	got, err = s.QueryBlock(ctx, "BLOCK0?")
	if err != nil || string(got) != "raw bytes" {
		t.Errorf("QueryBlock(BLOCK0?) = %q, %v", got, err)
	}
	// A reply that is no block is an error, and the session stays usable.
	if _, err := s.QueryBlock(ctx, "VOLT?"); !errors.Is(err, instrument.ErrBadResponse) {
		t.Errorf("QueryBlock(VOLT?) error = %v, want ErrBadResponse", err)
	}
	if v, err := s.Query(ctx, "CRLF?"); err != nil || v != "7" {
		t.Errorf("after a bad block: Query = %q, %v", v, err)
	}
}

func TestSessionErrorQueue(t *testing.T) {
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{CheckErrors: true})
	ctx := context.Background()

	// A set command out of range: -222 is an execution error, ESR bit 4
	// EXE (SCPI-99 Vol 2 §21.8).
	err := s.Write(ctx, "VOLT 50")
	var ie *instrument.InstrumentError
	if !errors.As(err, &ie) {
		t.Fatalf("Write(VOLT 50) error = %v, want *InstrumentError", err)
	}
	if ie.Code != -222 || ie.Command != "VOLT 50" || ie.Instrument != "loop" || ie.Class() != instrument.ClassExecution {
		t.Errorf("got %+v", ie)
	}
	for _, want := range []string{"loop", "VOLT 50", "-222", "Data out of range", "execution error", "ESR bit 4 EXE"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error %q lacks %q", err, want)
		}
	}

	// Two queued errors: the first is returned, the second drained with it.
	err = s.Write(ctx, "TWOERR")
	if !errors.As(err, &ie) || ie.Code != -102 || len(ie.More) != 1 || ie.More[0].Code != -109 {
		t.Fatalf("Write(TWOERR) = %v (%+v)", err, ie)
	}
	if q, err := s.Errors(ctx); err != nil || len(q) != 0 {
		t.Errorf("queue after draining = %v, %v; want empty", q, err)
	}

	// Errors lists the queue in order without a command.
	s2 := dialFake(t, f, instrument.SessionOptions{})
	if err := s2.Write(ctx, "TWOERR"); err != nil {
		t.Fatal(err)
	}
	q, err := s2.Errors(ctx)
	want := []instrument.QueueEntry{{Code: -102, Message: "Syntax error"}, {Code: -109, Message: "Missing parameter"}}
	if err != nil || fmt.Sprint(q) != fmt.Sprint(want) {
		t.Errorf("Errors = %v, %v; want %v", q, err, want)
	}

	// An instrument whose queue never empties is reported, not looped on.
	if err := s2.Write(ctx, "FLOOD"); err != nil {
		t.Fatal(err)
	}
	q, err = s2.Errors(ctx)
	if err == nil || len(q) != 64 || !strings.Contains(err.Error(), "did not answer 0 within 64") {
		t.Errorf("flooded queue: %d entries, err %v", len(q), err)
	}
}

func TestSessionTimeoutThenRecovery(t *testing.T) {
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{Timeout: 200 * time.Millisecond})
	ctx := context.Background()

	// LATE? is answered only when the next command arrives: the query
	// times out, the session drains and sends *OPC?, reads past the late
	// "17" to the "1", and is back in step.
	_, err := s.Query(ctx, "LATE?")
	var op *instrument.OpError
	if !errors.Is(err, instrument.ErrTimeout) || !errors.As(err, &op) || !op.Timeout() {
		t.Fatalf("Query(LATE?) error = %v, want a timeout", err)
	}
	if op.Recovery != nil {
		t.Errorf("recovery failed: %v", op.Recovery)
	}
	if !strings.Contains(err.Error(), `"LATE?"`) || !strings.Contains(err.Error(), "loop") {
		t.Errorf("error %q does not name instrument and command", err)
	}
	if err := s.Write(ctx, "VOLT 3"); err != nil {
		t.Fatal(err)
	}
	if v, err := s.Query(ctx, "VOLT?"); err != nil || v != "3" {
		t.Errorf("after recovery VOLT? = %q, %v; want 3 (a stale 17 would show here)", v, err)
	}
	h := f.History()
	if !contains(h, "*OPC?") {
		t.Errorf("no *OPC? re-sync in %v", h)
	}
}

func TestSessionTimeoutReadsErrorQueue(t *testing.T) {
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{Timeout: 200 * time.Millisecond, CheckErrors: true})
	// An unknown query gets no answer; the error queue says why.
	_, err := s.Query(context.Background(), "BOGUS?")
	var op *instrument.OpError
	if !errors.As(err, &op) || !op.Timeout() {
		t.Fatalf("error = %v, want a timeout", err)
	}
	if len(op.Queue) != 1 || op.Queue[0].Code != -113 {
		t.Errorf("queue after timeout = %v, want -113", op.Queue)
	}
	if !strings.Contains(err.Error(), "Undefined header") {
		t.Errorf("error %q does not show the queue", err)
	}
}

func TestSessionResyncFailure(t *testing.T) {
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{Timeout: 150 * time.Millisecond})
	ctx := context.Background()
	// HANG? blocks the instrument: the query times out and so does the
	// *OPC? of the re-sync.
	_, err := s.Query(ctx, "HANG?")
	var op *instrument.OpError
	if !errors.As(err, &op) || !op.Timeout() || op.Recovery == nil {
		t.Fatalf("error = %v, want a timeout with a failed re-sync", err)
	}
	if !strings.Contains(err.Error(), "re-sync failed") {
		t.Errorf("error %q does not say the re-sync failed", err)
	}
	// Still hung: the next call tries to re-sync first and reports it.
	_, err = s.Query(ctx, "VOLT?")
	if !errors.Is(err, instrument.ErrOutOfSync) {
		t.Fatalf("second call error = %v, want ErrOutOfSync", err)
	}
	// The instrument recovers: "42" and the stale "1"s are read past.
	f.Release()
	if err := s.Write(ctx, "VOLT 4"); err != nil {
		t.Fatal(err)
	}
	if v, err := s.Query(ctx, "VOLT?"); err != nil || v != "4" {
		t.Errorf("after release VOLT? = %q, %v; want 4", v, err)
	}
}

func TestSessionContextDeadlineWins(t *testing.T) {
	f := newFakeInstrument(t)
	// The session's own time-out is long; the caller's deadline is short.
	s := dialFake(t, f, instrument.SessionOptions{Timeout: time.Minute})
	ctx, cancel := context.WithTimeout(context.Background(), 100*time.Millisecond)
	defer cancel()
	_, err := s.Query(ctx, "LATE?")
	if !errors.Is(err, instrument.ErrTimeout) {
		t.Fatalf("error = %v, want ErrTimeout from the caller's deadline", err)
	}
	if v, err := s.Query(context.Background(), "CRLF?"); err != nil || v != "7" {
		t.Errorf("after a slow reply: %q, %v", v, err)
	}
}

func TestSessionCancelInterruptsRead(t *testing.T) {
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{Timeout: time.Minute})
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() {
		_, err := s.Query(ctx, "HANG?")
		done <- err
	}()
	for cmd := range f.received { // wait until the instrument has the query
		if cmd == "HANG?" {
			break
		}
	}
	cancel()
	err := <-done
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("error = %v, want context.Canceled", err)
	}
	f.Release()
	if v, err := s.Query(context.Background(), "CRLF?"); err != nil || v != "7" {
		t.Errorf("after cancel: %q, %v; want 7 once re-synced", v, err)
	}
}

func TestSessionDroppedConnection(t *testing.T) {
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{})
	ctx := context.Background()
	if err := s.Write(ctx, "DROP"); err != nil {
		t.Fatal(err)
	}
	_, err := s.Query(ctx, "*IDN?")
	if !errors.Is(err, instrument.ErrClosed) {
		t.Errorf("after the instrument hung up: %v, want ErrClosed", err)
	}
}

func TestSessionGarbledReply(t *testing.T) {
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{})
	ctx := context.Background()
	_, err := s.QueryFloat(ctx, "GARBLE?")
	if !errors.Is(err, instrument.ErrBadResponse) || !strings.Contains(err.Error(), "GARBLE?") {
		t.Fatalf("error = %v, want ErrBadResponse naming the command", err)
	}
	// The garbage was one whole line: the session is still in step.
	if v, err := s.QueryFloat(ctx, "CRLF?"); err != nil || v != 7 {
		t.Errorf("after garbage: %v, %v", v, err)
	}
	if _, err := s.Query(ctx, "two\nlines"); err == nil {
		t.Error("a command with a line break was sent")
	}
}

// TestSessionTransactions runs many goroutines that each select a channel
// and read it back; Do keeps each pair together.
func TestSessionTransactions(t *testing.T) {
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{})
	ctx := context.Background()
	for ch := 1; ch <= 3; ch++ {
		if err := s.Do(ctx, func(tx *instrument.Tx) error {
			if err := tx.Write(ctx, fmt.Sprintf("INST:NSEL %d", ch)); err != nil {
				return err
			}
			return tx.Write(ctx, fmt.Sprintf("VOLT %d", ch*10))
		}); err != nil {
			t.Fatal(err)
		}
	}
	var wg sync.WaitGroup
	errs := make(chan error, 60)
	for g := range 60 {
		wg.Go(func() {
			ch := g%3 + 1
			var got float64
			err := s.Do(ctx, func(tx *instrument.Tx) error {
				if err := tx.Write(ctx, fmt.Sprintf("INST:NSEL %d", ch)); err != nil {
					return err
				}
				var err error
				got, err = tx.QueryFloat(ctx, "VOLT?")
				return err
			})
			if err == nil && got != float64(ch*10) {
				err = fmt.Errorf("channel %d read %v, want %d", ch, got, ch*10)
			}
			if err != nil {
				errs <- err
			}
		})
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
	// Waiting for a busy session ends with the caller's context.
	hold, held := make(chan struct{}), make(chan struct{})
	go s.Do(ctx, func(*instrument.Tx) error { close(held); <-hold; return nil })
	<-held
	wctx, cancel := context.WithTimeout(ctx, 50*time.Millisecond)
	err := s.Write(wctx, "*CLS")
	cancel()
	close(hold)
	if !errors.Is(err, instrument.ErrTimeout) || !strings.Contains(err.Error(), "waiting for the session") {
		t.Errorf("busy session: %v", err)
	}
	// A Tx kept beyond Do is refused.
	var kept *instrument.Tx
	_ = s.Do(ctx, func(tx *instrument.Tx) error { kept = tx; return nil })
	if _, err := kept.Query(ctx, "*OPC?"); err == nil {
		t.Error("a Tx was usable after Do returned")
	}
}

func TestParseIdentity(t *testing.T) {
	// IEEE 488.2 §10 *IDN?: maker,model,serial,firmware; "0" for unknown.
	tests := []struct {
		raw     string
		want    instrument.Identity
		wantErr bool
	}{
		{"NULLBENCH-SIM,DMM-65,SIM0001,1.0", instrument.Identity{Maker: "NULLBENCH-SIM", Model: "DMM-65", Serial: "SIM0001", Firmware: "1.0"}, false},
		{"HARROWGATE, HX-1 ,0,2.1,build 7", instrument.Identity{Maker: "HARROWGATE", Model: "HX-1", Serial: "0", Firmware: "2.1,build 7"}, false},
		{"JUSTONE", instrument.Identity{Maker: "JUSTONE"}, true},
		{",,,", instrument.Identity{}, true},
	}
	for _, tc := range tests {
		got, err := instrument.ParseIdentity(tc.raw)
		tc.want.Raw = tc.raw
		if got != tc.want || (err != nil) != tc.wantErr {
			t.Errorf("ParseIdentity(%q) = %+v, %v", tc.raw, got, err)
		}
	}
}

func TestQueryFloatOverload(t *testing.T) {
	f := newFakeInstrument(t)
	s := dialFake(t, f, instrument.SessionOptions{})
	// VOLT stores the text as given, so VOLT? can return an SCPI
	// overload (9.9E37 = +INF, SCPI-99; IEEE 488.2).
	if err := s.Write(context.Background(), "VOLT -9.9E37"); err != nil {
		t.Fatal(err)
	}
	v, err := s.QueryFloat(context.Background(), "VOLT?")
	if err != nil || !math.IsInf(v, -1) {
		t.Errorf("QueryFloat = %v, %v; want -Inf", v, err)
	}
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}
