package instrument

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// SCPI special numeric responses (SCPI-99 Vol 1, as restated in
// SCPI-99; IEEE 488.2): 9.9E37 stands for +INF (and is what a meter returns on
// overload), -9.9E37 for -INF, 9.91E37 for NaN ("not a number").
const (
	OverloadValue   = 9.9e37
	NotANumberValue = 9.91e37
)

var (
	// ErrBadResponse is wrapped by every parse error of a response.
	ErrBadResponse = errors.New("malformed response")
	// ErrOverload is wrapped by drivers when a reading was 9.9E37 or
	// -9.9E37 (over range); the reading itself is returned as ±Inf.
	ErrOverload = errors.New("overload: the instrument returned 9.9E37 (SCPI +/-INF)")
	// ErrNotANumber is wrapped by drivers when a reading was 9.91E37
	// (SCPI NaN); the reading itself is returned as NaN.
	ErrNotANumber = errors.New("the instrument returned 9.91E37 (SCPI NaN)")
)

// ParseNumber parses one numeric response in any of the IEEE 488.2 forms
// NR1 (integer, "-12"), NR2 (fixed point, "+1.250") and NR3 (floating point,
// "+1.23456789E-03"), with optional surrounding spaces or tabs and an
// optional leading sign (IEEE 488.2 §8.7 numeric response data).
//
// The SCPI special values come back as IEEE floats: 9.9E37 -> +Inf,
// -9.9E37 -> -Inf, 9.91E37 -> NaN, so IsOverload and math.IsNaN tell them
// apart from readings. Text such as "INF", "0x10" or "1_000" is an error.
func ParseNumber(s string) (float64, error) {
	t := strings.Trim(s, " \t")
	if !isSCPINumber(t) {
		return 0, fmt.Errorf("%w: %q is not an SCPI number (NR1, NR2 or NR3)", ErrBadResponse, clipString(s))
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil {
		return 0, fmt.Errorf("%w: %q: out of range for a float64", ErrBadResponse, clipString(s))
	}
	switch v {
	case OverloadValue:
		return math.Inf(1), nil
	case -OverloadValue:
		return math.Inf(-1), nil
	case NotANumberValue:
		return math.NaN(), nil
	}
	return v, nil
}

// isSCPINumber checks [sign] digits [. digits] [E [sign] digits] with at
// least one mantissa digit.
func isSCPINumber(t string) bool {
	i := 0
	if i < len(t) && (t[i] == '+' || t[i] == '-') {
		i++
	}
	digits := 0
	for i < len(t) && t[i] >= '0' && t[i] <= '9' {
		i++
		digits++
	}
	if i < len(t) && t[i] == '.' {
		i++
		for i < len(t) && t[i] >= '0' && t[i] <= '9' {
			i++
			digits++
		}
	}
	if digits == 0 {
		return false
	}
	if i < len(t) && (t[i] == 'e' || t[i] == 'E') {
		i++
		if i < len(t) && (t[i] == '+' || t[i] == '-') {
			i++
		}
		exp := 0
		for i < len(t) && t[i] >= '0' && t[i] <= '9' {
			i++
			exp++
		}
		if exp == 0 {
			return false
		}
	}
	return i == len(t)
}

// IsOverload reports whether v is a parsed SCPI overload (±9.9E37, that is
// ±Inf).
func IsOverload(v float64) bool { return math.IsInf(v, 0) }

// ParseNumbers parses a comma-separated list of numeric responses, such as
// a READ? reply with several readings. An empty reply is an error.
func ParseNumbers(s string) ([]float64, error) {
	if strings.Trim(s, " \t") == "" {
		return nil, fmt.Errorf("%w: empty reply where numbers were expected", ErrBadResponse)
	}
	parts := strings.Split(s, ",")
	out := make([]float64, len(parts))
	for i, p := range parts {
		v, err := ParseNumber(p)
		if err != nil {
			return nil, fmt.Errorf("value %d of %d: %w", i+1, len(parts), err)
		}
		out[i] = v
	}
	return out, nil
}

// ParseBlock parses an arbitrary block response (IEEE 488.2 §8.7.9 and
// §8.7.10):
//
//	definite:   #<n><n digits: length><length bytes>   n = 1..9, e.g. "#15HELLO"
//	indefinite: #0<bytes> ended by NL^END
//
// For a definite block it returns the data and whatever follows it (rest);
// for an indefinite block the data is everything after "#0" except one
// trailing NL, and rest is empty.
func ParseBlock(b []byte) (data, rest []byte, err error) {
	if len(b) < 2 || b[0] != '#' {
		return nil, nil, fmt.Errorf("%w: a block starts with '#' and a digit, got %q", ErrBadResponse, clip(b))
	}
	n := int(b[1] - '0')
	if b[1] < '0' || b[1] > '9' {
		return nil, nil, fmt.Errorf("%w: block header %q: the character after '#' must be a digit", ErrBadResponse, clip(b))
	}
	if n == 0 {
		data = b[2:]
		if len(data) > 0 && data[len(data)-1] == '\n' {
			data = data[:len(data)-1]
		}
		return data, nil, nil
	}
	if len(b) < 2+n {
		return nil, nil, fmt.Errorf("%w: block header %q is shorter than its %d length digits", ErrBadResponse, clip(b), n)
	}
	length := 0
	for _, c := range b[2 : 2+n] {
		if c < '0' || c > '9' {
			return nil, nil, fmt.Errorf("%w: block length %q is not all digits", ErrBadResponse, b[2:2+n])
		}
		length = length*10 + int(c-'0')
	}
	end := 2 + n + length
	if len(b) < end {
		return nil, nil, fmt.Errorf("%w: block announces %d bytes but only %d follow", ErrBadResponse, length, len(b)-2-n)
	}
	return b[2+n : end], b[end:], nil
}

// ParseErrorResponse parses a SYSTem:ERRor[:NEXT]? reply
//
//	<code>,"<description>[;<device information>]"
//
// (SCPI-99 Vol 2 §21.8; code is an NR1 in -32768..32767, 0 means no
// error). msg is the whole quoted text with doubled quotes undone. An
// unquoted text is accepted as given, since some instruments omit the
// quotes.
func ParseErrorResponse(s string) (code int, msg string, err error) {
	head, text, ok := strings.Cut(s, ",")
	if !ok {
		return 0, "", fmt.Errorf("%w: error queue reply %q: want <code>,\"<text>\"", ErrBadResponse, clipString(s))
	}
	h := strings.Trim(head, " \t")
	if h == "" || !isSCPINumber(h) || strings.ContainsAny(h, ".eE") {
		return 0, "", fmt.Errorf("%w: error queue reply %q: code %q is not an integer", ErrBadResponse, clipString(s), clipString(head))
	}
	code, err = strconv.Atoi(strings.TrimPrefix(h, "+"))
	if err != nil || code < -32768 || code > 32767 {
		return 0, "", fmt.Errorf("%w: error queue reply %q: code out of -32768..32767", ErrBadResponse, clipString(s))
	}
	text = strings.Trim(text, " \t")
	if !strings.HasPrefix(text, `"`) {
		if strings.Contains(text, `"`) {
			return 0, "", fmt.Errorf("%w: error queue reply %q: stray quote in the text", ErrBadResponse, clipString(s))
		}
		return code, text, nil
	}
	var sb strings.Builder
	for i := 1; i < len(text); i++ {
		c := text[i]
		if c != '"' {
			sb.WriteByte(c)
			continue
		}
		if i+1 < len(text) && text[i+1] == '"' { // doubled quote inside the string
			sb.WriteByte('"')
			i++
			continue
		}
		if i != len(text)-1 {
			return 0, "", fmt.Errorf("%w: error queue reply %q: text after the closing quote", ErrBadResponse, clipString(s))
		}
		return code, sb.String(), nil
	}
	return 0, "", fmt.Errorf("%w: error queue reply %q: unterminated string", ErrBadResponse, clipString(s))
}

func clipString(s string) string { return string(clip([]byte(s))) }

// QueueEntry is one entry read from an instrument's error queue.
type QueueEntry struct {
	Code    int
	Message string // the instrument's text, including any ";info"
}

func (q QueueEntry) String() string { return fmt.Sprintf("%d,%q", q.Code, q.Message) }

// InstrumentError is an entry of an instrument's error queue, tied to the
// command after which it was read. A Session with CheckErrors returns one
// for the first entry and keeps the rest of the drained queue in More.
type InstrumentError struct {
	Instrument string // the session's name, e.g. "dmm"
	Where      string // the driver's part, e.g. "supply channel 1" (OpError.Where)
	Command    string // the program message sent, "" when not known
	Code       int
	Message    string       // the instrument's text
	More       []QueueEntry // further entries drained with this one, oldest first
}

// Class is the SCPI class of the error code.
func (e *InstrumentError) Class() ErrorClass { return ClassOf(e.Code) }

func (e *InstrumentError) Error() string {
	var sb strings.Builder
	sb.WriteString(instrumentLabel(e.Instrument, e.Where))
	if e.Command != "" {
		fmt.Fprintf(&sb, ": after %q", e.Command)
	} else {
		sb.WriteString(": error queue")
	}
	fmt.Fprintf(&sb, ": instrument error %d %q (%s)", e.Code, e.Message, describeCode(e.Code))
	if len(e.More) > 0 {
		fmt.Fprintf(&sb, "; %d more in the queue:", len(e.More))
		for _, m := range e.More {
			sb.WriteString(" " + m.String())
		}
	}
	return sb.String()
}

// describeCode gives the standard meaning, class and ESR bit of a code.
func describeCode(code int) string {
	c := ClassOf(code)
	var parts []string
	if se, ok := LookupStandardError(code); ok {
		parts = append(parts, "SCPI-99: "+se.Meaning)
	}
	parts = append(parts, c.String())
	if bit := c.ESRBit(); bit >= 0 {
		parts = append(parts, fmt.Sprintf("sets ESR bit %d %s", bit, c.ESRName()))
	}
	return strings.Join(parts, ", ")
}
