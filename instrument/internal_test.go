package instrument

import (
	"context"
	"errors"
	"io"
	"strings"
	"testing"
	"time"

	"go.bug.st/serial"
)

// trickle is a fill function that hands out its input a few bytes at a
// time, then reports the stream closed.
func trickle(s string, step int) fillFunc {
	return func(ctx context.Context, p []byte) (int, error) {
		if s == "" {
			return 0, ErrClosed
		}
		n := copy(p[:min(step, len(p))], s)
		s = s[n:]
		return n, nil
	}
}

func TestLineBuffer(t *testing.T) {
	tests := []struct {
		term  string
		in    string
		lines []string
	}{
		{"\n", "1\n+2.5E-3\r\nlast\n", []string{"1", "+2.5E-3", "last"}},
		{"\n", "\r\n\n", []string{"", ""}},
		{"\r\n", "a\r\nb\n", []string{"a", "b"}}, // split on LF, CR optional
		{"\r", "a\rb\r", []string{"a", "b"}},
		{"\r", "a\nb\r", []string{"a\nb"}}, // LF is data under a CR terminator
	}
	for _, tc := range tests {
		for _, step := range []int{1, 2, 7, 1000} {
			b := newLineBuffer(DialOptions{Terminator: tc.term}.withDefaults())
			fill := trickle(tc.in, step)
			var got []string
			for {
				line, err := b.readLine(context.Background(), fill)
				if err != nil {
					if !errors.Is(err, ErrClosed) {
						t.Errorf("%q step %d: %v", tc.in, step, err)
					}
					break
				}
				got = append(got, string(line))
			}
			if strings.Join(got, "|") != strings.Join(tc.lines, "|") {
				t.Errorf("term %q in %q step %d: %q, want %q", tc.term, tc.in, step, got, tc.lines)
			}
		}
	}

	// A stream that ends inside a message says what it got.
	b := newLineBuffer(DialOptions{}.withDefaults())
	_, err := b.readLine(context.Background(), trickle("+1.2E", 2))
	if !errors.Is(err, ErrClosed) || !strings.Contains(err.Error(), `"+1.2E"`) {
		t.Errorf("partial message: %v", err)
	}
	// An endless message is cut off, not buffered for ever.
	b = newLineBuffer(DialOptions{MaxMessageBytes: 100}.withDefaults())
	_, err = b.readLine(context.Background(), trickle(strings.Repeat("x", 500), 64))
	if err == nil || !strings.Contains(err.Error(), "longer than 100 bytes") {
		t.Errorf("endless message: %v", err)
	}
	// readFull and readLine share the buffer.
	b = newLineBuffer(DialOptions{}.withDefaults())
	fill := trickle("#15a\nb\r\nrest\n", 3)
	hdr := make([]byte, 3)
	data := make([]byte, 5)
	if err := b.readFull(context.Background(), hdr, fill); err != nil || string(hdr) != "#15" {
		t.Errorf("readFull hdr = %q, %v", hdr, err)
	}
	if err := b.readFull(context.Background(), data, fill); err != nil || string(data) != "a\nb\r\n" {
		t.Errorf("readFull data = %q, %v", data, err)
	}
	if line, err := b.readLine(context.Background(), fill); err != nil || string(line) != "rest" {
		t.Errorf("readLine after = %q, %v", line, err)
	}
}

func TestLineBufferDrain(t *testing.T) {
	// drain discards buffered input and reads until a quiet period.
	calls := 0
	fill := func(ctx context.Context, p []byte) (int, error) {
		calls++
		if calls <= 3 {
			return copy(p, "junk\n"), nil
		}
		<-ctx.Done()
		return 0, ctxError(ctx, "read")
	}
	b := newLineBuffer(DialOptions{}.withDefaults())
	b.pending = []byte("stale\n")
	if err := b.drain(context.Background(), time.Millisecond, fill); err != nil {
		t.Fatal(err)
	}
	if len(b.pending) != 0 || calls != 4 {
		t.Errorf("after drain: pending %q, %d reads", b.pending, calls)
	}
	// A cancelled drain reports the cancellation.
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if err := b.drain(ctx, time.Millisecond, fill); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled drain: %v", err)
	}
}

func TestCtxError(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if err := ctxError(ctx, "read"); !errors.Is(err, context.Canceled) || errors.Is(err, ErrTimeout) {
		t.Errorf("cancelled: %v", err)
	}
	ctx, cancel = context.WithTimeout(context.Background(), -time.Second)
	defer cancel()
	if err := ctxError(ctx, "read"); !errors.Is(err, ErrTimeout) {
		t.Errorf("deadline: %v", err)
	}
	// The transport may see its deadline pass a moment before ctx does.
	if err := ctxError(context.Background(), "read"); !errors.Is(err, ErrTimeout) {
		t.Errorf("deadline seen first by the transport: %v", err)
	}
}

func TestSerialOpenErrorMessages(t *testing.T) {
	addr := Address{Scheme: SchemeSerial, Device: "/dev/ttyUSB7", Baud: 115200, DataBits: 8, Parity: "none", StopBits: "1"}
	// The zero PortError has code PortBusy (go.bug.st/serial v1.8.0).
	err := serialOpenError(addr, &serial.PortError{})
	if !strings.Contains(err.Error(), "in use by another program") || !strings.Contains(err.Error(), "/dev/ttyUSB7") {
		t.Errorf("busy: %v", err)
	}
	var pe *serial.PortError
	if !errors.As(err, &pe) {
		t.Error("the PortError is not wrapped")
	}
	err = serialOpenError(addr, io.ErrUnexpectedEOF)
	if !errors.Is(err, io.ErrUnexpectedEOF) || !strings.Contains(err.Error(), "/dev/ttyUSB7") {
		t.Errorf("other: %v", err)
	}
}

func TestTemplates(t *testing.T) {
	got, err := expandTemplate("SOUR{channel}:VOLT {value}{unit}", map[string]string{PhChannel: "2", PhValue: "1.5", PhUnit: "V"})
	if err != nil || got != "SOUR2:VOLT 1.5V" {
		t.Errorf("expand = %q, %v", got, err)
	}
	if _, err := expandTemplate("VOLT {value}", nil); err == nil {
		t.Error("expanded a template without its value")
	}
	for _, bad := range []string{"A}", "{x}", "{value", "{{value}}", "A\nB"} {
		if _, err := parseTemplate(bad, knownPlaceholders); err == nil {
			t.Errorf("parseTemplate(%q) accepted", bad)
		}
	}
	// Program data: shortest round-tripping form (IEEE 488.2 decimal
	// numeric program data accepts NR1, NR2 and NR3).
	for v, want := range map[float64]string{15: "15", -2.5: "-2.5", 0.05: "0.05", 1e-7: "1E-07", 0: "0", 1e21: "1E+21"} {
		if got := formatNumber(v); got != want {
			t.Errorf("formatNumber(%v) = %q, want %q", v, got, want)
		}
	}
}

func TestDurationStats(t *testing.T) {
	ms := time.Millisecond
	tests := []struct {
		in          []time.Duration
		lo, med, hi time.Duration
	}{
		{nil, 0, 0, 0},
		{[]time.Duration{3 * ms}, 3 * ms, 3 * ms, 3 * ms},
		{[]time.Duration{5 * ms, 1 * ms, 3 * ms}, 1 * ms, 3 * ms, 5 * ms},
		{[]time.Duration{4 * ms, 1 * ms, 2 * ms, 9 * ms}, 1 * ms, 3 * ms, 9 * ms}, // even count: mean of 2 and 4
	}
	for _, tc := range tests {
		lo, med, hi := durationStats(tc.in)
		if lo != tc.lo || med != tc.med || hi != tc.hi {
			t.Errorf("durationStats(%v) = %v %v %v", tc.in, lo, med, hi)
		}
	}
}
