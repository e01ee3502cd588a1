package sim

import (
	"bufio"
	"context"
	"errors"
	"io"
	"math/rand/v2"
	"net"
	"strings"
	"sync"
	"time"
)

// FaultKind is a transport or instrument misbehaviour to rehearse against.
type FaultKind int

// Fault kinds.
const (
	// FaultDrop closes the connection when a matching line arrives, without
	// executing it. On a pseudo-terminal (which has no connection) the line
	// is discarded instead.
	FaultDrop FaultKind = iota + 1
	// FaultDelay holds a matching line for Fault.Delay of wall-clock time
	// before executing it (a slow instrument; the tool's I/O timeouts are
	// wall-clock).
	FaultDelay
	// FaultNoReply executes a matching line but sends no response (fires
	// only on lines that have one).
	FaultNoReply
	// FaultQueueError executes a matching line, then pushes Code/Message into
	// the instrument's error queue.
	FaultQueueError
	// FaultGarble executes a matching line and replaces the response's bytes
	// with noise (the terminator is kept so the client reads one bad line;
	// fires only on lines that have a response).
	FaultGarble
)

func (k FaultKind) String() string {
	switch k {
	case FaultDrop:
		return "drop"
	case FaultDelay:
		return "delay"
	case FaultNoReply:
		return "no-reply"
	case FaultQueueError:
		return "queue-error"
	case FaultGarble:
		return "garble"
	}
	return "unknown"
}

// Fault is one injected fault. A fault fires on the next line received
// (containing Match, case-insensitive, if Match is set); it is then removed
// unless Persistent.
type Fault struct {
	Kind       FaultKind
	Match      string
	Persistent bool
	Delay      time.Duration // FaultDelay, wall clock
	Code       int           // FaultQueueError: e.g. −300 or a positive device code
	Message    string        // FaultQueueError
}

type faultSet struct {
	mu   sync.Mutex
	list []Fault
}

func (fs *faultSet) add(f Fault) {
	fs.mu.Lock()
	fs.list = append(fs.list, f)
	fs.mu.Unlock()
}

func (fs *faultSet) clear() {
	fs.mu.Lock()
	fs.list = nil
	fs.mu.Unlock()
}

// take returns the faults of the given kinds that fire on line, removing
// the one-shot ones; hasResponse gates kinds that need a response.
func (fs *faultSet) take(line string, kinds ...FaultKind) []Fault {
	fs.mu.Lock()
	defer fs.mu.Unlock()
	up := strings.ToUpper(line)
	var fired []Fault
	keep := fs.list[:0]
	for _, f := range fs.list {
		want := false
		for _, k := range kinds {
			if f.Kind == k {
				want = true
			}
		}
		if want && (f.Match == "" || strings.Contains(up, strings.ToUpper(f.Match))) {
			fired = append(fired, f)
			if !f.Persistent {
				continue
			}
		}
		keep = append(keep, f)
	}
	fs.list = keep
	return fired
}

// maxLineBytes bounds one program message.
const maxLineBytes = 64 << 10

// readLine reads one line ending in term, strips it (and, when term is
// "\n", an optional CR before it), and bounds its length (the excess is
// discarded up to the terminator).
func readLine(r *bufio.Reader, term string) (string, bool, error) {
	last := term[len(term)-1]
	var buf []byte
	tooLong := false
	for {
		chunk, err := r.ReadSlice(last)
		if len(buf)+len(chunk) > maxLineBytes {
			tooLong = true
			// Keep the tail, where the rest of a long terminator is.
			buf = append(buf[:0], buf[max(0, len(buf)-len(term)):]...)
		}
		buf = append(buf, chunk...)
		if err == bufio.ErrBufferFull {
			continue
		}
		if err != nil {
			return "", tooLong, err
		}
		if strings.HasSuffix(string(buf), term) {
			break
		}
	}
	s := strings.TrimSuffix(string(buf), term)
	if term == "\n" {
		s = strings.TrimSuffix(s, "\r")
	}
	return s, tooLong, nil
}

// serveStream runs one connection (or the pseudo-terminal): read a line,
// apply faults, execute, reply. It returns when the stream ends, ctx ends,
// or a drop fault closes it. dropCloses tells whether a drop can close the
// stream (TCP) or only discards (serial).
func (in *instrument) serveStream(ctx context.Context, rw io.ReadWriter, dropCloses bool, garbleRng *rand.Rand, garbleMu *sync.Mutex) {
	r := bufio.NewReaderSize(rw, 4096)
	for {
		line, tooLong, err := readLine(r, in.term)
		if err != nil {
			return
		}
		if ctx.Err() != nil {
			return
		}
		if tooLong {
			in.mu.Lock()
			in.pushError(newErr(errCommand, "program message longer than 64 KiB"))
			in.mu.Unlock()
			continue
		}
		if len(in.faults.take(line, FaultDrop)) > 0 {
			if dropCloses {
				return
			}
			// Serial: there is no connection to close; the line is lost.
			continue
		}
		for _, f := range in.faults.take(line, FaultDelay) {
			if sleepWall(ctx, f.Delay) != nil {
				return
			}
		}
		resp, has := in.execute(ctx, line)
		if in.record != nil {
			in.record(in.name, line)
		}
		for _, f := range in.faults.take(line, FaultQueueError) {
			in.mu.Lock()
			msg := f.Message
			if msg == "" {
				msg = "Injected fault"
			}
			in.pushError(&scpiError{code: f.Code, msg: cleanInfo(msg)})
			in.mu.Unlock()
		}
		if !has {
			continue
		}
		if len(in.faults.take(line, FaultNoReply)) > 0 {
			continue
		}
		out := []byte(resp)
		if len(in.faults.take(line, FaultGarble)) > 0 {
			garbleMu.Lock()
			for i := range out {
				b := byte(0x80 + garbleRng.IntN(0x7f))
				out[i] = b
			}
			if len(out) == 0 {
				out = []byte{0xff}
			}
			garbleMu.Unlock()
		}
		out = append(out, in.term...)
		if _, err := rw.Write(out); err != nil {
			return
		}
	}
}

// tcpServer serves one instrument on one listener.
type tcpServer struct {
	in   *instrument
	ln   net.Listener
	mu   sync.Mutex
	conn map[net.Conn]struct{}
}

func (s *tcpServer) run(ctx context.Context, wg *sync.WaitGroup, rng *rand.Rand, rngMu *sync.Mutex) {
	defer wg.Done()
	for {
		c, err := s.ln.Accept()
		if err != nil {
			if errors.Is(err, net.ErrClosed) || ctx.Err() != nil {
				return
			}
			// Temporary accept failure: back off briefly.
			if sleepWall(ctx, 10*time.Millisecond) != nil {
				return
			}
			continue
		}
		s.mu.Lock()
		if s.conn == nil {
			s.mu.Unlock()
			_ = c.Close()
			return
		}
		s.conn[c] = struct{}{}
		s.mu.Unlock()
		wg.Add(1)
		go func() {
			defer wg.Done()
			defer func() {
				s.mu.Lock()
				if s.conn != nil {
					delete(s.conn, c)
				}
				s.mu.Unlock()
				_ = c.Close()
			}()
			s.in.serveStream(ctx, c, true, rng, rngMu)
		}()
	}
}

// close stops accepting and closes every open connection.
func (s *tcpServer) close() {
	_ = s.ln.Close()
	s.mu.Lock()
	conns := s.conn
	s.conn = nil
	s.mu.Unlock()
	for c := range conns {
		_ = c.Close()
	}
}
