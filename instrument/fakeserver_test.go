package instrument_test

import (
	"bufio"
	"fmt"
	"net"
	"strconv"
	"strings"
	"sync"
	"testing"
)

// fakeInstrument is a tiny SCPI server on 127.0.0.1:0 for Session and
// transport tests (not the simulated bench: it only knows the handful of
// commands these tests need, and some deliberately bad behaviours).
//
//	*IDN? *OPC? *CLS *RST SYST:ERR?      as IEEE 488.2 / SCPI
//	INST:NSEL <n>  VOLT <v>  VOLT?       per-channel level; VOLT > 30 queues -222
//	TWOERR                               queues -102 and -109
//	FLOOD                                SYST:ERR? answers -350 for ever after
//	LATE?                                answers "17", but only when the next command arrives
//	HANG?                                answers "42" once release is closed
//	GARBLE?                              answers bytes that are not a number
//	CRLF?                                answers "7\r\n"
//	SPLIT?                               answers "1234" in two TCP writes
//	BLOCK? / BLOCK0?                     definite block with CR/LF inside / indefinite block
//	DROP                                 closes the connection
//	anything else                        queues -113 Undefined header, no answer
type fakeInstrument struct {
	t        testing.TB
	ln       net.Listener
	Addr     string // tcp://127.0.0.1:PORT
	release  chan struct{}
	received chan string // every command, for tests that wait on one (buffered)

	mu      sync.Mutex
	errq    []string
	flood   bool
	volts   map[string]string
	sel     string
	late    string
	history []string
}

func newFakeInstrument(t testing.TB) *fakeInstrument {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatalf("listen: %v", err)
	}
	f := &fakeInstrument{
		t: t, ln: ln, Addr: "tcp://" + ln.Addr().String(),
		release:  make(chan struct{}),
		received: make(chan string, 1024),
		volts:    map[string]string{"1": "0", "2": "0", "3": "0"},
		sel:      "1",
	}
	var wg sync.WaitGroup
	var connsMu sync.Mutex
	var conns []net.Conn
	wg.Add(1)
	go func() {
		defer wg.Done()
		for {
			c, err := ln.Accept()
			if err != nil {
				return
			}
			connsMu.Lock()
			conns = append(conns, c)
			connsMu.Unlock()
			wg.Add(1)
			go func() {
				defer wg.Done()
				f.serve(c)
			}()
		}
	}()
	t.Cleanup(func() {
		ln.Close()
		f.Release()
		connsMu.Lock()
		for _, c := range conns {
			c.Close()
		}
		connsMu.Unlock()
		wg.Wait()
	})
	return f
}

// Release lets HANG? answer.
func (f *fakeInstrument) Release() {
	f.mu.Lock()
	defer f.mu.Unlock()
	select {
	case <-f.release:
	default:
		close(f.release)
	}
}

// History lists the commands received so far.
func (f *fakeInstrument) History() []string {
	f.mu.Lock()
	defer f.mu.Unlock()
	return append([]string(nil), f.history...)
}

func (f *fakeInstrument) pushErr(code int, text string) {
	f.errq = append(f.errq, fmt.Sprintf("%d,%q", code, text))
}

func (f *fakeInstrument) serve(c net.Conn) {
	defer c.Close()
	r := bufio.NewReader(c)
	for {
		line, err := r.ReadString('\n')
		if err != nil {
			return
		}
		cmd := strings.TrimRight(line, "\r\n")
		f.mu.Lock()
		f.history = append(f.history, cmd)
		late := f.late
		f.late = ""
		f.mu.Unlock()
		select {
		case f.received <- cmd:
		default:
		}
		if late != "" {
			if _, err := c.Write([]byte(late + "\n")); err != nil {
				return
			}
		}
		reply, drop := f.handle(cmd)
		if drop {
			return
		}
		if cmd == "SPLIT?" { // the reply in two TCP writes
			if _, err := c.Write([]byte(reply[:2])); err != nil {
				return
			}
			reply = reply[2:]
		}
		if reply != "" {
			if _, err := c.Write([]byte(reply)); err != nil {
				return
			}
		}
	}
}

// handle returns the raw reply bytes (with terminator) or "" for none.
func (f *fakeInstrument) handle(cmd string) (reply string, drop bool) {
	head, arg, _ := strings.Cut(cmd, " ")
	head = strings.ToUpper(head)
	f.mu.Lock()
	defer f.mu.Unlock()
	switch head {
	case "*IDN?":
		return "HARROWGATE-FAKE,LOOP-1,0001,0.1\n", false
	case "*OPC?":
		return "1\n", false
	case "*CLS":
		f.errq = nil
	case "*RST":
	case "SYST:ERR?":
		if f.flood {
			return "-350,\"Queue overflow\"\n", false
		}
		if len(f.errq) == 0 {
			return "0,\"No error\"\n", false
		}
		e := f.errq[0]
		f.errq = f.errq[1:]
		return e + "\n", false
	case "INST:NSEL":
		f.sel = arg
	case "VOLT":
		v, err := strconv.ParseFloat(arg, 64)
		switch {
		case err != nil:
			f.pushErr(-104, "Data type error")
		case v > 30:
			f.pushErr(-222, "Data out of range;VOLT max 30")
		default:
			f.volts[f.sel] = arg
		}
	case "VOLT?":
		return f.volts[f.sel] + "\n", false
	case "TWOERR":
		f.pushErr(-102, "Syntax error")
		f.pushErr(-109, "Missing parameter")
	case "FLOOD":
		f.flood = true
	case "LATE?":
		f.late = "17"
	case "HANG?":
		f.mu.Unlock()
		<-f.release
		f.mu.Lock()
		return "42\n", false
	case "GARBLE?":
		return "\x00\xffgarb\x01\n", false
	case "CRLF?":
		return "7\r\n", false
	case "SPLIT?":
		return "1234\n", false
	case "BLOCK?":
		data := "ab\ncd\r\nef"
		return fmt.Sprintf("#1%d%s\n", len(data), data), false
	case "BLOCK0?":
		return "#0raw bytes\n", false
	case "DROP":
		return "", true
	default:
		f.pushErr(-113, "Undefined header")
	}
	return "", false
}
