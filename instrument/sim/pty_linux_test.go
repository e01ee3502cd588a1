//go:build linux

package sim

import (
	"bufio"
	"context"
	"os"
	"runtime"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestSerialPTY serves the switch on a pseudo-terminal and talks to it as
// a serial port would be used: open the tty path with os.OpenFile, raw mode.
func TestSerialPTY(t *testing.T) {
	base := runtime.NumGoroutine()
	b, err := New(Config{Clock: NewManualClock()})
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		_ = b.Close()
		waitGoroutines(t, base)
	}()
	if err := b.Start(context.Background(), ServeOptions{SerialInstrument: NameSwitch}); err != nil {
		t.Fatal(err)
	}
	ep := endpoint(t, b, NameSwitch)
	path, ok := strings.CutPrefix(ep.Address, "serial://")
	if !ok || !strings.HasSuffix(path, "?baud=115200") || !strings.HasPrefix(path, "/dev/pts/") {
		t.Fatalf("address %q, want serial:///dev/pts/N?baud=115200", ep.Address)
	}
	path = strings.TrimSuffix(path, "?baud=115200")
	f, err := os.OpenFile(path, os.O_RDWR|syscall.O_NOCTTY, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if err := makeRaw(f); err != nil {
		t.Fatal(err)
	}
	r := bufio.NewReader(f)
	query := func(line string) string {
		t.Helper()
		if _, err := f.Write([]byte(line + "\r\n")); err != nil {
			t.Fatal(err)
		}
		got := make(chan string, 1)
		go func() {
			s, _ := r.ReadString('\n')
			got <- s
		}()
		select {
		case s := <-got:
			return s
		case <-time.After(ioGuard):
			t.Fatalf("no reply to %q", line)
			return ""
		}
	}
	// No echo and no CR/LF translation: the first line back is the
	// response itself, terminated by a bare LF.
	if got := query("*IDN?"); got != IDNSwitch+"\n" {
		t.Fatalf("reply %q, want %q", got, IDNSwitch+"\n")
	}
	if got := query("ROUT:CLOS (@103);CLOS? (@103)"); got != "1\n" {
		t.Fatalf("reply %q", got)
	}
	if s := b.Inspect(); len(s.Closed) != 1 || s.Closed[0] != 103 {
		t.Fatalf("closed %v", s.Closed)
	}
	// A drop on a serial line discards the line; the next one is served.
	if err := b.InjectFault(NameSwitch, Fault{Kind: FaultDrop, Match: "OPEN"}); err != nil {
		t.Fatal(err)
	}
	if _, err := f.Write([]byte("ROUT:OPEN (@103)\n")); err != nil {
		t.Fatal(err)
	}
	if got := query("ROUT:CLOS? (@103)"); got != "1\n" {
		t.Fatalf("after dropped OPEN: %q, want 1", got)
	}
	if got := query("SYST:ERR?"); got != "0,\"No error\"\n" {
		t.Fatalf("queue %q", got)
	}
}
