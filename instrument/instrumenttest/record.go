package instrumenttest

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"
	"sync"

	"nullbench/instrument"
)

// Recorder is an instrument.Conn that passes everything to another Conn
// and writes down each exchange, for turning a session with a real (or
// simulated) instrument into a playback script.
type Recorder struct {
	c       instrument.Conn
	mu      sync.Mutex
	ex      []Exchange
	comment string
}

var _ instrument.Conn = (*Recorder)(nil)

// NewRecorder wraps c.
func NewRecorder(c instrument.Conn) *Recorder { return &Recorder{c: c} }

// Note sets the comment of the next exchange recorded.
func (r *Recorder) Note(comment string) {
	r.mu.Lock()
	r.comment = comment
	r.mu.Unlock()
}

// Exchanges returns what was recorded so far.
func (r *Recorder) Exchanges() []Exchange {
	r.mu.Lock()
	defer r.mu.Unlock()
	return append([]Exchange(nil), r.ex...)
}

// Write passes b on and records one exchange per line.
func (r *Recorder) Write(ctx context.Context, b []byte) error {
	err := r.c.Write(ctx, b)
	r.mu.Lock()
	defer r.mu.Unlock()
	for _, line := range strings.Split(strings.TrimSuffix(string(b), "\n"), "\n") {
		r.ex = append(r.ex, Exchange{Comment: r.comment, Send: strings.TrimSuffix(line, "\r")})
		r.comment = ""
	}
	return err
}

// ReadLine passes the read on and records the reply (or the time-out)
// against the last exchange.
func (r *Recorder) ReadLine(ctx context.Context) ([]byte, error) {
	line, err := r.c.ReadLine(ctx)
	r.mu.Lock()
	defer r.mu.Unlock()
	if len(r.ex) > 0 {
		last := &r.ex[len(r.ex)-1]
		switch {
		case err == nil && last.Reply == "":
			last.Reply = string(line)
		case err == nil:
			last.Reply += "\n" + string(line)
		case errors.Is(err, instrument.ErrTimeout):
			last.Timeout = true
		case errors.Is(err, instrument.ErrClosed):
			last.Drop = true
		}
	}
	return line, err
}

// Drain passes on.
func (r *Recorder) Drain(ctx context.Context) error { return r.c.Drain(ctx) }

// Close passes on.
func (r *Recorder) Close() error { return r.c.Close() }

// WriteScript writes exchanges as a text script, one line per element:
//
//	# comment           comment of the next exchange
//	> *IDN?             program message sent
//	< A,B,C,D           reply received
//	! timeout           no reply came in time
//	! drop              the connection closed
//
// A message that is not plain printable text is written Go-quoted after
// ">=" or "<=" instead.
func WriteScript(w io.Writer, ex []Exchange) error {
	bw := bufio.NewWriter(w)
	for _, e := range ex {
		if e.Comment != "" {
			for _, c := range strings.Split(e.Comment, "\n") {
				fmt.Fprintf(bw, "# %s\n", c)
			}
		}
		writeMsg(bw, ">", e.Send)
		if e.Reply != "" {
			writeMsg(bw, "<", e.Reply)
		}
		if e.Timeout {
			fmt.Fprintln(bw, "! timeout")
		}
		if e.Drop {
			fmt.Fprintln(bw, "! drop")
		}
	}
	return bw.Flush()
}

func writeMsg(w io.Writer, dir, msg string) {
	q := strconv.Quote(msg)
	if q[1:len(q)-1] == msg && strings.TrimSpace(msg) == msg && msg != "" && !strings.HasPrefix(msg, "=") {
		fmt.Fprintf(w, "%s %s\n", dir, msg)
		return
	}
	fmt.Fprintf(w, "%s= %s\n", dir, q)
}

// ParseScript reads a script written by WriteScript (blank lines are
// ignored). Errors name the line.
func ParseScript(r io.Reader) ([]Exchange, error) {
	var ex []Exchange
	var comment []string
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 64<<10), 16<<20)
	n := 0
	for sc.Scan() {
		n++
		line := sc.Text()
		if strings.TrimSpace(line) == "" {
			continue
		}
		dir, rest, _ := strings.Cut(line, " ")
		bad := func(format string, args ...any) ([]Exchange, error) {
			return nil, fmt.Errorf("script line %d: %s", n, fmt.Sprintf(format, args...))
		}
		var msg string
		switch dir {
		case "#":
			comment = append(comment, rest)
			continue
		case ">", "<":
			msg = rest
		case ">=", "<=":
			s, err := strconv.Unquote(rest)
			if err != nil {
				return bad("%q is not a Go-quoted string", rest)
			}
			msg = s
		case "!":
			if len(ex) == 0 {
				return bad("%q before any message", line)
			}
			switch rest {
			case "timeout":
				ex[len(ex)-1].Timeout = true
			case "drop":
				ex[len(ex)-1].Drop = true
			default:
				return bad("unknown event %q (timeout or drop)", rest)
			}
			continue
		default:
			return bad("line must start with #, >, <, >=, <= or !, got %q", line)
		}
		if dir[0] == '>' {
			ex = append(ex, Exchange{Comment: strings.Join(comment, "\n"), Send: msg})
			comment = nil
			continue
		}
		if len(ex) == 0 {
			return bad("reply before any message")
		}
		last := &ex[len(ex)-1]
		if last.Reply != "" {
			last.Reply += "\n" + msg
		} else {
			last.Reply = msg
		}
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("script line %d: %w", n+1, err)
	}
	if len(comment) > 0 {
		return nil, fmt.Errorf("script ends with a comment and no message")
	}
	return ex, nil
}
