package sim

import (
	"context"
	"fmt"
	"strings"
	"sync"
	"time"
)

// command is one entry of an instrument's command tree.
type command struct {
	pattern   string
	query     bool
	minParams int
	maxParams int
	fn        func(c *call) (string, error)
	nodes     []patternNode
}

// call is what a command handler gets.
type call struct {
	ctx    context.Context
	suffix []int // per pattern node, −1 if not sent
	params []string
	header string
}

// suffixAt returns the numeric suffix sent on pattern node i, or −1.
func (c *call) suffixAt(i int) int {
	if i < len(c.suffix) {
		return c.suffix[i]
	}
	return -1
}

// device is what an instrument adds to the IEEE 488.2 core.
type device interface {
	commands() []command
	reset()                                // *RST: known state (error queue untouched)
	waitPending(ctx context.Context) error // *OPC?, *WAI: wait for pending operations
}

// busTriggered is a device that answers *TRG (IEEE 488.2 §10.37).
type busTriggered interface {
	busTrigger(ctx context.Context) error
}

// instrument is one SCPI server's state: the IEEE 488.2 status model, the
// error queue and the device behind them. Messages are executed one at a
// time (mu), whichever connection sends them, like a real instrument.
type instrument struct {
	name    string // "dmm"
	role    string // "meter"
	profile string // "dmm"
	idn     string
	dev     device
	cmds    []command

	mu       sync.Mutex
	errq     errorQueue
	esr      byte // Standard Event Status Register
	ese, sre byte

	faults faultSet

	// term ends messages in and out ("\n" unless a dialect says
	// otherwise; with "\n" a CR before it is dropped; any other string
	// ends a message exactly where it appears). busyFor is how
	// long the instrument is deaf after a message without a reply
	// (psu_slow): a message then is lost, except *OPC?, which waits.
	term      string
	busyFor   time.Duration
	busyUntil time.Time // wall clock; guarded by mu

	// record, when set (Start), notes each message executed in the
	// bench's history (history.go).
	record func(name, line string)
}

func newInstrument(name, role, profile, idn string, dev device) *instrument {
	in := &instrument{name: name, role: role, profile: profile, idn: idn, dev: dev, esr: 128 /* PON */, term: "\n"}
	in.errq.limit = 10
	for _, c := range dev.commands() {
		c.nodes = compilePattern(c.pattern)
		in.cmds = append(in.cmds, c)
	}
	return in
}

// pushError queues an error and sets its ESR bit. Callers hold in.mu.
func (in *instrument) pushError(e *scpiError) {
	in.errq.push(e)
	in.esr |= esrBit(e.code)
}

// stb is the status byte: bit 2 error queue not empty, bit 5 ESB, bit 6 MSS
// (IEEE 488.2 §11.2; SCPI-99).
func (in *instrument) stb() byte {
	var s byte
	if len(in.errq.entries) > 0 {
		s |= 4
	}
	if in.esr&in.ese != 0 {
		s |= 32
	}
	if s&in.sre&^64 != 0 {
		s |= 64
	}
	return s
}

// execute runs one program message (one line without its terminator) and
// returns the response line (without terminator) and whether there is one.
func (in *instrument) execute(ctx context.Context, line string) (reply string, has bool) {
	in.mu.Lock()
	defer in.mu.Unlock()
	if in.busyFor > 0 {
		if wait := time.Until(in.busyUntil); wait > 0 {
			if !strings.EqualFold(strings.TrimSpace(line), "*OPC?") {
				in.pushError(newErr(errInputOverrun, "message lost: the instrument was busy"))
				return "", false
			}
			if sleepWall(ctx, wait) != nil {
				return "", false
			}
		}
		defer func() {
			if !has {
				in.busyUntil = time.Now().Add(in.busyFor)
			}
		}()
	}
	units, err := splitTopLevel(line, ';')
	if err != nil {
		in.pushError(asSCPI(err))
		return "", false
	}
	var path []string
	var resp []string
	for _, raw := range units {
		if strings.TrimSpace(raw) == "" {
			continue
		}
		u, err := parseUnit(raw)
		if err != nil {
			in.pushError(asSCPI(err))
			break
		}
		if u.common != "" {
			r, err := in.common(ctx, u)
			if err != nil {
				e := asSCPI(err)
				in.pushError(e)
				if e.code <= -100 && e.code > -200 {
					break
				}
				continue
			}
			if u.query {
				resp = append(resp, r)
			}
			continue
		}
		toks := u.nodes
		if !u.root {
			toks = append(append([]string{}, path...), u.nodes...)
		}
		cmd, suffix, err := in.lookup(toks, u.query)
		if err != nil {
			in.pushError(asSCPI(err))
			break
		}
		path = toks[:len(toks)-1]
		if len(u.params) < cmd.minParams {
			in.pushError(newErr(errMissingParam, u.text))
			break
		}
		if len(u.params) > cmd.maxParams {
			in.pushError(newErr(errParamNotAllowed, u.text))
			break
		}
		r, err := cmd.fn(&call{ctx: ctx, suffix: suffix, params: u.params})
		if err != nil {
			e := asSCPI(err)
			in.pushError(e)
			if e.code <= -100 && e.code > -200 {
				break
			}
			continue
		}
		if u.query {
			resp = append(resp, r)
		}
	}
	if len(resp) == 0 {
		return "", false
	}
	return strings.Join(resp, ";"), true
}

func asSCPI(err error) *scpiError {
	if e, ok := err.(*scpiError); ok {
		return e
	}
	if err == context.Canceled || err == context.DeadlineExceeded {
		return newErr(errExecution, "aborted")
	}
	return newErr(errDevice, err.Error())
}

// lookup resolves header tokens to a command.
func (in *instrument) lookup(toks []string, query bool) (*command, []int, error) {
	for i := range in.cmds {
		c := &in.cmds[i]
		if c.query != query {
			continue
		}
		suffix := make([]int, len(c.nodes))
		if matchPattern(toks, c.nodes, suffix) {
			return c, suffix, nil
		}
	}
	h := strings.Join(toks, ":")
	if query {
		h += "?"
	}
	return nil, nil, newErr(errUndefHeader, h)
}

// common executes the IEEE 488.2 common commands (IEEE 488.2 §10).
func (in *instrument) common(ctx context.Context, u messageUnit) (string, error) {
	noParams := func() error {
		if len(u.params) > 0 {
			return newErr(errParamNotAllowed, u.text)
		}
		return nil
	}
	byteParam := func() (byte, error) {
		if len(u.params) != 1 {
			if len(u.params) == 0 {
				return 0, newErr(errMissingParam, u.text)
			}
			return 0, newErr(errParamNotAllowed, u.text)
		}
		v, err := numericParam(u.params[0], 0, 255, 0)
		if err != nil {
			return 0, err
		}
		return byte(int(v + 0.5)), nil
	}
	switch u.common {
	case "*IDN?":
		return in.idn, noParams()
	case "*RST":
		if err := noParams(); err != nil {
			return "", err
		}
		in.dev.reset()
		return "", nil
	case "*CLS":
		if err := noParams(); err != nil {
			return "", err
		}
		in.errq.clear()
		in.esr = 0
		return "", nil
	case "*OPC":
		if err := noParams(); err != nil {
			return "", err
		}
		if err := in.dev.waitPending(ctx); err != nil {
			return "", err
		}
		in.esr |= 1
		return "", nil
	case "*OPC?":
		if err := noParams(); err != nil {
			return "", err
		}
		if err := in.dev.waitPending(ctx); err != nil {
			return "", err
		}
		return "1", nil
	case "*TRG":
		if err := noParams(); err != nil {
			return "", err
		}
		if t, ok := in.dev.(busTriggered); ok {
			return "", t.busTrigger(ctx)
		}
		return "", newErr(errUndefHeader, u.common)
	case "*WAI":
		if err := noParams(); err != nil {
			return "", err
		}
		return "", in.dev.waitPending(ctx)
	case "*ESR?":
		if err := noParams(); err != nil {
			return "", err
		}
		v := in.esr
		in.esr = 0
		return nr1(int(v)), nil
	case "*ESE":
		v, err := byteParam()
		if err != nil {
			return "", err
		}
		in.ese = v
		return "", nil
	case "*ESE?":
		return nr1(int(in.ese)), noParams()
	case "*SRE":
		v, err := byteParam()
		if err != nil {
			return "", err
		}
		in.sre = v &^ 64
		return "", nil
	case "*SRE?":
		return nr1(int(in.sre)), noParams()
	case "*STB?":
		return nr1(int(in.stb())), noParams()
	case "*TST?":
		return "0", noParams()
	}
	return "", newErr(errUndefHeader, u.common)
}

// systemCommands are shared by every instrument.
func (in *instrument) systemCommands() []command {
	return []command{
		{pattern: "SYSTem:ERRor[:NEXT]", query: true, fn: func(*call) (string, error) {
			return in.errq.pop(), nil
		}},
		{pattern: "SYSTem:ERRor:COUNt", query: true, fn: func(*call) (string, error) {
			return nr1(len(in.errq.entries)), nil
		}},
		{pattern: "SYSTem:VERSion", query: true, fn: func(*call) (string, error) {
			return "1999.0", nil
		}},
	}
}

// withSystem compiles the system commands into an instrument.
func (in *instrument) withSystem() *instrument {
	for _, c := range in.systemCommands() {
		c.nodes = compilePattern(c.pattern)
		in.cmds = append(in.cmds, c)
	}
	return in
}

// one-parameter helpers for handlers.

func (c *call) param(i int) string {
	if i < len(c.params) {
		return c.params[i]
	}
	return ""
}

func errf(code int, format string, args ...any) error {
	return newErr(code, fmt.Sprintf(format, args...))
}
