package sim

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// This file is the instruments' own server-side SCPI parser (SCPI-99 Vol 1
// §6, IEEE 488.2 §7–8). It is deliberately
// independent of the tool's client code so that each checks the other.
//
// A program message is one line (LF-terminated, an optional CR stripped).
// Message units are separated by ';'. A header that does not start with ':'
// or '*' is resolved relative to the path of the previous unit in the same
// message (the "path" is the previous header without its last node); ";:"
// goes back to the root. Common commands (*XXX) do not change the path.
// Queries in one message are answered in one response line, separated by
// ';'. A command error (−1xx) discards the rest of the message.

// scpiError is an entry of the error queue.
type scpiError struct {
	code int
	msg  string
	info string
}

func (e *scpiError) Error() string {
	if e.info == "" {
		return fmt.Sprintf("%d,%q", e.code, e.msg)
	}
	return fmt.Sprintf("%d,\"%s;%s\"", e.code, e.msg, e.info)
}

// Standard codes (SCPI-99 Vol 2 §21.8).
const (
	errCommand         = -100
	errSyntax          = -102
	errDataType        = -104
	errParamNotAllowed = -108
	errMissingParam    = -109
	errUndefHeader     = -113
	errSuffixRange     = -114
	errNumericData     = -120
	errInvalidSuffix   = -131
	errInvalidExpr     = -171
	errExecution       = -200
	errTriggerIgnored  = -211
	errInitIgnored     = -213
	errSettings        = -221
	errOutOfRange      = -222
	errIllegalValue    = -224
	errDataStale       = -230
	errDevice          = -300
	errQueueOverflow   = -350
	errInputOverrun    = -363
)

var errText = map[int]string{
	errCommand:         "Command error",
	errSyntax:          "Syntax error",
	errDataType:        "Data type error",
	errParamNotAllowed: "Parameter not allowed",
	errMissingParam:    "Missing parameter",
	errUndefHeader:     "Undefined header",
	errSuffixRange:     "Header suffix out of range",
	errNumericData:     "Numeric data error",
	errInvalidSuffix:   "Invalid suffix",
	errInvalidExpr:     "Invalid expression",
	errExecution:       "Execution error",
	errTriggerIgnored:  "Trigger ignored",
	errInitIgnored:     "Init ignored",
	errSettings:        "Settings conflict",
	errOutOfRange:      "Data out of range",
	errIllegalValue:    "Illegal parameter value",
	errDataStale:       "Data corrupt or stale",
	errDevice:          "Device-specific error",
	errQueueOverflow:   "Queue overflow",
	errInputOverrun:    "Input buffer overrun",
}

// newErr builds a queue entry with its standard text and extra info.
func newErr(code int, info string) *scpiError {
	msg, ok := errText[code]
	if !ok {
		msg = "Error"
	}
	return &scpiError{code: code, msg: msg, info: cleanInfo(info)}
}

// cleanInfo keeps the info part printable, short and free of quotes so the
// response stays one well-formed SCPI string.
func cleanInfo(s string) string {
	var b strings.Builder
	for _, r := range s {
		switch {
		case r == '"':
			b.WriteByte('\'')
		case r < 0x20 || r > 0x7e:
			b.WriteByte('?')
		default:
			b.WriteRune(r)
		}
		if b.Len() >= 60 {
			b.WriteString("...")
			break
		}
	}
	return b.String()
}

// esrBit returns the Standard Event Status Register bit an error sets
// (IEEE 488.2): −1xx CME 32, −2xx EXE 16, −3xx and device DDE 8,
// −4xx QYE 4.
func esrBit(code int) byte {
	switch {
	case code <= -100 && code > -200:
		return 32
	case code <= -200 && code > -300:
		return 16
	case code <= -400 && code > -500:
		return 4
	default:
		return 8
	}
}

// errorQueue is the FIFO error queue; on overflow the newest entry becomes
// −350 Queue overflow (SCPI-99).
type errorQueue struct {
	entries []*scpiError
	limit   int
}

func (q *errorQueue) push(e *scpiError) {
	if q.limit <= 0 {
		q.limit = 10
	}
	switch {
	case len(q.entries) < q.limit-1:
		q.entries = append(q.entries, e)
	case len(q.entries) == q.limit-1:
		q.entries = append(q.entries, newErr(errQueueOverflow, ""))
	default:
		// Full, the last entry is already −350: the new error is lost.
	}
}

func (q *errorQueue) pop() string {
	if len(q.entries) == 0 {
		return `0,"No error"`
	}
	e := q.entries[0]
	q.entries = q.entries[1:]
	return e.Error()
}

func (q *errorQueue) clear() { q.entries = nil }

// messageUnit is one parsed unit of a program message.
type messageUnit struct {
	root   bool     // header began with ':'
	common string   // upper-cased common command ("*IDN?"), or ""
	nodes  []string // header mnemonics as sent (upper-cased), without '?'
	query  bool
	params []string // raw parameter texts, trimmed
	text   string   // the unit as sent (for error info)
}

// splitTopLevel splits s at sep outside quotes and parentheses.
func splitTopLevel(s string, sep byte) ([]string, error) {
	var parts []string
	depth := 0
	var quote byte
	start := 0
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case quote != 0:
			if c == quote {
				quote = 0
			}
		case c == '"' || c == '\'':
			quote = c
		case c == '(':
			depth++
		case c == ')':
			depth--
			if depth < 0 {
				return nil, newErr(errSyntax, "unbalanced ')'")
			}
		case c == sep && depth == 0:
			parts = append(parts, s[start:i])
			start = i + 1
		}
	}
	if quote != 0 {
		return nil, newErr(errSyntax, "unterminated string")
	}
	if depth != 0 {
		return nil, newErr(errSyntax, "unbalanced '('")
	}
	return append(parts, s[start:]), nil
}

// parseUnit parses one message unit (already split at ';').
func parseUnit(s string) (messageUnit, error) {
	u := messageUnit{text: strings.TrimSpace(s)}
	s = strings.TrimLeft(s, " \t")
	head := s
	rest := ""
	if i := strings.IndexAny(s, " \t"); i >= 0 {
		head, rest = s[:i], strings.TrimSpace(s[i+1:])
	}
	if head == "" {
		return u, newErr(errSyntax, "empty header")
	}
	if strings.HasSuffix(head, "?") {
		u.query = true
		head = head[:len(head)-1]
	}
	if rest != "" {
		ps, err := splitTopLevel(rest, ',')
		if err != nil {
			return u, err
		}
		for i, p := range ps {
			p = strings.TrimSpace(p)
			if p == "" {
				return u, newErr(errSyntax, fmt.Sprintf("empty parameter %d", i+1))
			}
			u.params = append(u.params, p)
		}
	}
	if strings.HasPrefix(head, "*") {
		name := strings.ToUpper(head[1:])
		if name == "" || !isAlpha(name) {
			return u, newErr(errSyntax, head)
		}
		u.common = "*" + name
		if u.query {
			u.common += "?"
		}
		return u, nil
	}
	if strings.HasPrefix(head, ":") {
		u.root = true
		head = head[1:]
	}
	for _, n := range strings.Split(head, ":") {
		if n == "" || !isAlnum(n) || !isLetter(n[0]) {
			return u, newErr(errSyntax, "bad header "+head)
		}
		u.nodes = append(u.nodes, strings.ToUpper(n))
	}
	return u, nil
}

func isLetter(c byte) bool { return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') }

func isAlpha(s string) bool {
	for i := 0; i < len(s); i++ {
		if !isLetter(s[i]) {
			return false
		}
	}
	return true
}

func isAlnum(s string) bool {
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !isLetter(c) && !(c >= '0' && c <= '9') && c != '_' {
			return false
		}
	}
	return true
}

// patternNode is one node of a command pattern such as
// "[SOURce#:]VOLTage[:LEVel]": a mnemonic with its short form in capitals,
// optional if bracketed, accepting a numeric suffix if marked '#'.
type patternNode struct {
	short, long string
	optional    bool
	suffix      bool
}

// compilePattern turns "[SENSe:]VOLTage[:DC]:NPLCycles" into nodes.
// It panics on a malformed pattern (a programmer error).
func compilePattern(p string) []patternNode {
	var nodes []patternNode
	i := 0
	for i < len(p) {
		opt := false
		var tok string
		switch p[i] {
		case '[':
			j := strings.IndexByte(p[i:], ']')
			if j < 0 {
				panic("sim: bad pattern " + p)
			}
			tok = strings.Trim(p[i+1:i+j], ":")
			opt = true
			i += j + 1
		case ':':
			i++
			continue
		default:
			j := strings.IndexAny(p[i:], ":[")
			if j < 0 {
				j = len(p) - i
			}
			tok = p[i : i+j]
			i += j
		}
		n := patternNode{optional: opt}
		if strings.HasSuffix(tok, "#") {
			n.suffix = true
			tok = strings.TrimSuffix(tok, "#")
		}
		var short strings.Builder
		for k := 0; k < len(tok); k++ {
			if tok[k] >= 'A' && tok[k] <= 'Z' || tok[k] >= '0' && tok[k] <= '9' {
				short.WriteByte(tok[k])
			}
		}
		n.short = short.String()
		n.long = strings.ToUpper(tok)
		if n.short == "" {
			panic("sim: bad pattern " + p)
		}
		nodes = append(nodes, n)
	}
	return nodes
}

// matchNode matches one sent mnemonic against a pattern node, returning the
// numeric suffix (−1 if none was sent).
func matchNode(tok string, n patternNode) (int, bool) {
	if tok == n.short || tok == n.long {
		return -1, true
	}
	if !n.suffix {
		return 0, false
	}
	j := len(tok)
	for j > 0 && tok[j-1] >= '0' && tok[j-1] <= '9' {
		j--
	}
	if j == len(tok) || j == 0 {
		return 0, false
	}
	base := tok[:j]
	if base != n.short && base != n.long {
		return 0, false
	}
	v, err := strconv.Atoi(tok[j:])
	if err != nil || v > 1<<20 {
		return 0, false
	}
	return v, true
}

// matchPattern matches header tokens against pattern nodes (optional nodes
// may be skipped). suffixes receives one value per pattern node.
func matchPattern(toks []string, nodes []patternNode, suffixes []int) bool {
	var rec func(i, j int) bool
	rec = func(i, j int) bool {
		if j == len(nodes) {
			return i == len(toks)
		}
		if i < len(toks) {
			if v, ok := matchNode(toks[i], nodes[j]); ok {
				suffixes[j] = v
				if rec(i+1, j+1) {
					return true
				}
			}
		}
		if nodes[j].optional {
			suffixes[j] = -1
			return rec(i, j+1)
		}
		return false
	}
	return rec(0, 0)
}

// number parsing ---------------------------------------------------------

// charParam returns the upper-cased character data of p, or "" if p is not
// character program data.
func charParam(p string) string {
	if p == "" || !isLetter(p[0]) || !isAlnum(p) {
		return ""
	}
	return strings.ToUpper(p)
}

// unitMultipliers are the accepted suffix units (SCPI-99 Vol 1 §7.2.3),
// limited to those the bench needs.
var unitMultipliers = map[string]float64{
	"V": 1, "MV": 1e-3, "UV": 1e-6, "KV": 1e3,
	"A": 1, "MA": 1e-3, "UA": 1e-6,
	"CEL": 1, "C": 1,
	"S": 1, "MS": 1e-3, "US": 1e-6, "NS": 1e-9,
	// MHZ is megahertz, an exception to M = milli (IEEE 488.2 §7.7.3.5).
	"HZ": 1, "KHZ": 1e3, "MHZ": 1e6,
}

// parseDecimal parses decimal numeric program data (NR1, NR2, NR3) with an
// optional suffix unit. It reports −120 for malformed numbers and −104 for
// non-numeric data.
func parseDecimal(p string) (float64, error) {
	s := strings.TrimSpace(p)
	if s == "" {
		return 0, newErr(errMissingParam, "")
	}
	// Split the numeric part from a suffix unit.
	i := 0
	if i < len(s) && (s[i] == '+' || s[i] == '-') {
		i++
	}
	digits := 0
	for i < len(s) && s[i] >= '0' && s[i] <= '9' {
		i++
		digits++
	}
	if i < len(s) && s[i] == '.' {
		i++
		for i < len(s) && s[i] >= '0' && s[i] <= '9' {
			i++
			digits++
		}
	}
	if digits == 0 {
		if isLetter(s[0]) || s[0] == '(' || s[0] == '"' || s[0] == '#' {
			return 0, newErr(errDataType, p)
		}
		return 0, newErr(errNumericData, p)
	}
	if i < len(s) && (s[i] == 'e' || s[i] == 'E') {
		j := i + 1
		if j < len(s) && (s[j] == '+' || s[j] == '-') {
			j++
		}
		k := j
		for k < len(s) && s[k] >= '0' && s[k] <= '9' {
			k++
		}
		if k > j {
			i = k
		} else if j < len(s) && !isLetter(s[j]) {
			return 0, newErr(errNumericData, p)
		}
	}
	num := s[:i]
	unit := strings.ToUpper(strings.TrimSpace(s[i:]))
	v, err := strconv.ParseFloat(num, 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, newErr(errNumericData, p)
	}
	if unit != "" {
		m, ok := unitMultipliers[unit]
		if !ok {
			return 0, newErr(errInvalidSuffix, unit)
		}
		v *= m
	}
	return v, nil
}

// numericParam parses a number or MIN|MAX|DEF (MINimum, MAXimum, DEFault).
func numericParam(p string, lo, hi, def float64) (float64, error) {
	switch charParam(p) {
	case "MIN", "MINIMUM":
		return lo, nil
	case "MAX", "MAXIMUM":
		return hi, nil
	case "DEF", "DEFAULT":
		return def, nil
	}
	v, err := parseDecimal(p)
	if err != nil {
		return 0, err
	}
	if v < lo || v > hi {
		return 0, newErr(errOutOfRange, fmt.Sprintf("%s not in %g..%g", p, lo, hi))
	}
	return v, nil
}

// boolParam parses ON|OFF|1|0 (a number is rounded; non-zero is ON).
func boolParam(p string) (bool, error) {
	switch charParam(p) {
	case "ON":
		return true, nil
	case "OFF":
		return false, nil
	case "":
	default:
		return false, newErr(errIllegalValue, p)
	}
	v, err := parseDecimal(p)
	if err != nil {
		return false, err
	}
	return math.Round(v) != 0, nil
}

// channelList parses "(@101,102:104)" (SCPI-99 channel list; ranges may
// descend). Each channel must be within lo..hi.
func channelList(p string, lo, hi int) ([]int, error) {
	s := strings.TrimSpace(p)
	if !strings.HasPrefix(s, "(@") || !strings.HasSuffix(s, ")") {
		return nil, newErr(errInvalidExpr, p)
	}
	body := strings.TrimSpace(s[2 : len(s)-1])
	if body == "" {
		return nil, newErr(errInvalidExpr, p)
	}
	var out []int
	for _, item := range strings.Split(body, ",") {
		item = strings.TrimSpace(item)
		a, b, isRange := strings.Cut(item, ":")
		x, err := strconv.Atoi(strings.TrimSpace(a))
		if err != nil {
			return nil, newErr(errInvalidExpr, p)
		}
		y := x
		if isRange {
			y, err = strconv.Atoi(strings.TrimSpace(b))
			if err != nil {
				return nil, newErr(errInvalidExpr, p)
			}
		}
		step := 1
		if y < x {
			step = -1
		}
		if (y-x)*step > hi-lo {
			return nil, newErr(errOutOfRange, p)
		}
		for c := x; ; c += step {
			if c < lo || c > hi {
				return nil, newErr(errOutOfRange, fmt.Sprintf("channel %d", c))
			}
			out = append(out, c)
			if c == y {
				break
			}
		}
	}
	return out, nil
}

// NR3 and NR1 response formats (IEEE 488.2 §8.7.2–8.7.4).
func nr3(v float64) string {
	if math.IsNaN(v) {
		return "+9.91000000E+37"
	}
	if math.IsInf(v, 1) {
		return "+9.90000000E+37"
	}
	if math.IsInf(v, -1) {
		return "-9.90000000E+37"
	}
	return fmt.Sprintf("%+.8E", v)
}

func nr1(v int) string { return strconv.Itoa(v) }

func boolResp(b bool) string {
	if b {
		return "1"
	}
	return "0"
}
