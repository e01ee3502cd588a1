//go:build unix

package instrument_test

import (
	"bufio"
	"context"
	"errors"
	"os"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/creack/pty"

	"nullbench/instrument"
)

// ptyInstrument serves a few SCPI commands on the master side of a
// pseudo-terminal; the serial transport opens the slave's path like a
// USB-serial port.
type ptyInstrument struct {
	master   *os.File
	path     string
	release  chan struct{}
	received chan string
	done     chan struct{}
}

func newPTYInstrument(t *testing.T) *ptyInstrument {
	t.Helper()
	master, tty, err := pty.Open()
	if err != nil {
		t.Skipf("no pseudo-terminal on this system: %v", err)
	}
	p := &ptyInstrument{master: master, path: tty.Name(), release: make(chan struct{}),
		received: make(chan string, 64), done: make(chan struct{})}
	var once sync.Once
	releaseAll := func() { once.Do(func() { close(p.release) }) }
	go p.serve()
	t.Cleanup(func() {
		releaseAll()
		tty.Close()
		master.Close()
		<-p.done
	})
	return p
}

func (p *ptyInstrument) serve() {
	defer close(p.done)
	r := bufio.NewReader(p.master)
	for {
		line, err := r.ReadString('\n')
		if err != nil {
			return
		}
		cmd := strings.TrimRight(line, "\r\n")
		select {
		case p.received <- cmd:
		default:
		}
		var reply string
		switch cmd {
		case "*IDN?":
			reply = "NULLBENCH-SIM,MUX-40,SIM0004,1.0\n"
		case "*OPC?":
			reply = "1\n"
		case "ROUT:CLOS? (@101)":
			reply = "1\r\n"
		case "DATA?":
			reply = "#16a\nb\r\nc\n"
		case "HANG?":
			<-p.release
			reply = "0\n"
		case "SILENT?":
		case "HANGUP": // the far end goes away, as a USB adapter pulled out
			p.master.Close()
			return
		}
		if reply != "" {
			if _, err := p.master.Write([]byte(reply)); err != nil {
				return
			}
		}
	}
}

func dialPTY(t *testing.T, p *ptyInstrument, opts instrument.SessionOptions) (*instrument.Session, instrument.Conn) {
	t.Helper()
	addr, err := instrument.ParseAddress("serial://" + p.path + "?baud=115200")
	if err != nil {
		t.Fatal(err)
	}
	c, err := instrument.Dial(context.Background(), addr, instrument.DialOptions{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return instrument.NewSession("mux", c, opts), c
}

func TestSerialOverPTY(t *testing.T) {
	p := newPTYInstrument(t)
	s, _ := dialPTY(t, p, instrument.SessionOptions{Timeout: 300 * time.Millisecond})
	ctx := context.Background()

	id, err := s.Identify(ctx)
	if err != nil || id.Model != "MUX-40" {
		t.Fatalf("Identify = %+v, %v", id, err)
	}
	if v, err := s.QueryFloat(ctx, "ROUT:CLOS? (@101)"); err != nil || v != 1 {
		t.Errorf("ROUT:CLOS? = %v, %v (CR before LF must be stripped)", v, err)
	}
	// A definite block with LF and CR LF inside, read byte-exact.
	if b, err := s.QueryBlock(ctx, "DATA?"); err != nil || string(b) != "a\nb\r\nc" {
		t.Errorf("QueryBlock = %q, %v", b, err)
	}

	// go.bug.st/serial returns (0, nil) on a read time-out; the transport
	// turns the end of the deadline into ErrTimeout, and the session
	// re-syncs with *OPC?.
	_, err = s.Query(ctx, "SILENT?")
	var op *instrument.OpError
	if !errors.Is(err, instrument.ErrTimeout) || !errors.As(err, &op) || op.Recovery != nil {
		t.Fatalf("silent query: %v", err)
	}
	if err := s.WaitComplete(ctx); err != nil {
		t.Errorf("after a time-out: %v", err)
	}
}

func TestSerialCancelInterruptsRead(t *testing.T) {
	p := newPTYInstrument(t)
	s, _ := dialPTY(t, p, instrument.SessionOptions{Timeout: time.Minute})
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() {
		_, err := s.Query(ctx, "HANG?")
		done <- err
	}()
	for cmd := range p.received {
		if cmd == "HANG?" {
			break
		}
	}
	cancel()
	if err := <-done; !errors.Is(err, context.Canceled) {
		t.Fatalf("error = %v, want context.Canceled", err)
	}
}

func TestSerialPeerGone(t *testing.T) {
	p := newPTYInstrument(t)
	_, c := dialPTY(t, p, instrument.SessionOptions{})
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	if err := c.Write(ctx, []byte("HANGUP\n")); err != nil {
		t.Fatal(err)
	}
	<-p.done // the master is closed by the goroutine that reads it
	_, err := c.ReadLine(ctx)
	if !errors.Is(err, instrument.ErrClosed) {
		t.Errorf("read after the far end closed: %v, want ErrClosed", err)
	}
}

func TestSerialOpenErrors(t *testing.T) {
	tests := []struct {
		addr, want string
	}{
		{"serial:///dev/nullbench-no-such-port", "no such port"},
		{"serial:///dev/null", "not a serial port"},
	}
	for _, tc := range tests {
		addr, err := instrument.ParseAddress(tc.addr)
		if err != nil {
			t.Fatal(err)
		}
		_, err = instrument.Dial(context.Background(), addr, instrument.DialOptions{})
		if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), addr.Device) {
			t.Errorf("Dial(%s) = %v; want an error naming the port and saying %q", tc.addr, err, tc.want)
		}
	}
}
