package instrument

import (
	"fmt"
	"net"
	"net/url"
	"strconv"
	"strings"
)

// DefaultTCPPort is the raw-socket SCPI port, IANA service "scpi-raw"
// 5025/tcp, as listed in LXI Consortium, "LXI Ports, Protocols, and
// Services" (lxistandard.org). Some instruments listen elsewhere (for
// example 9221), so an address may name any port.
const DefaultTCPPort = 5025

// Serial line defaults used when an address leaves a setting out:
// 115200 baud, 8 data bits, no parity, 1 stop bit ("8N1"). 8N1 is the
// common setting of instrument serial ports (common practice, no published
// source); many instruments ship at 9600 baud, so a real bench usually
// states baud= in the address. 115200 is our choice because it is what the
// simulated bench serves on its pseudo-terminals.
const (
	DefaultBaud     = 115200
	DefaultDataBits = 8
	DefaultParity   = "none"
	DefaultStopBits = "1"
)

// Address schemes.
const (
	SchemeTCP    = "tcp"
	SchemeSerial = "serial"
)

// addressExamples is appended to every address error so the user sees a
// correct example of both forms.
// 192.0.2.0/24 is TEST-NET-1, reserved for documentation (RFC 5737).
const addressExamples = `want tcp://HOST[:PORT] (port defaults to 5025), e.g. "tcp://192.0.2.50:5025", ` +
	`or serial://DEVICE[?baud=N&bits=5..8&parity=none|odd|even|mark|space&stop=1|1.5|2], ` +
	`e.g. "serial:///dev/ttyUSB0?baud=115200&bits=8&parity=none&stop=1"`

// Address is a parsed instrument address. For SchemeTCP, Host and Port are
// set; for SchemeSerial, Device and the line settings are.
type Address struct {
	Scheme string // SchemeTCP or SchemeSerial

	Host string // TCP host name or IP address (IPv6 without brackets)
	Port int    // TCP port, 1..65535

	Device   string // serial device path, e.g. /dev/ttyUSB0, or a name such as COM3
	Baud     int    // bits per second
	DataBits int    // 5..8
	Parity   string // none, odd, even, mark or space
	StopBits string // "1", "1.5" or "2"
}

// AddressError reports an address that cannot be used, with examples of the
// accepted forms.
type AddressError struct {
	Address string
	Reason  string
}

func (e *AddressError) Error() string {
	return fmt.Sprintf("bad instrument address %q: %s; %s", e.Address, e.Reason, addressExamples)
}

// ParseAddress parses an instrument address:
//
//	tcp://HOST[:PORT]                      raw SCPI socket, PORT defaults to 5025
//	serial://DEVICE[?baud=&bits=&parity=&stop=]
//
// For serial, DEVICE is a path (serial:///dev/ttyUSB0, three slashes) or a
// bare name (serial://COM3). Missing serial settings take DefaultBaud,
// DefaultDataBits, DefaultParity and DefaultStopBits. The error for a bad
// address shows a correct example of both forms.
func ParseAddress(s string) (Address, error) {
	bad := func(format string, args ...any) (Address, error) {
		return Address{}, &AddressError{Address: s, Reason: fmt.Sprintf(format, args...)}
	}
	if strings.TrimSpace(s) != s || s == "" {
		return bad("empty or has surrounding spaces")
	}
	scheme, rest, ok := strings.Cut(s, "://")
	if !ok {
		return bad("no scheme")
	}
	switch strings.ToLower(scheme) {
	case SchemeTCP:
		return parseTCP(s, rest)
	case SchemeSerial:
		return parseSerial(s)
	default:
		return bad("unknown scheme %q", scheme)
	}
}

func parseTCP(s, rest string) (Address, error) {
	bad := func(format string, args ...any) (Address, error) {
		return Address{}, &AddressError{Address: s, Reason: fmt.Sprintf(format, args...)}
	}
	if strings.ContainsAny(rest, "/?#@ ") {
		return bad("a tcp address has only a host and a port")
	}
	host, port := rest, DefaultTCPPort
	if strings.HasPrefix(rest, "[") || strings.Count(rest, ":") == 1 {
		h, p, err := net.SplitHostPort(rest)
		if err != nil {
			if strings.HasPrefix(rest, "[") && strings.HasSuffix(rest, "]") {
				h, p = rest[1:len(rest)-1], ""
			} else {
				return bad("%v", err)
			}
		}
		host = h
		if p != "" {
			n, err := strconv.Atoi(p)
			if err != nil || n < 1 || n > 65535 || p[0] == '+' {
				return bad("port %q is not a number from 1 to 65535", p)
			}
			port = n
		}
	} else if strings.Contains(rest, ":") {
		return bad("an IPv6 host must be in brackets, e.g. tcp://[::1]:5025")
	}
	if host == "" {
		return bad("no host")
	}
	if !validHost(host) {
		return bad("host %q is neither an IP address nor a host name", host)
	}
	return Address{Scheme: SchemeTCP, Host: host, Port: port}, nil
}

func parseSerial(s string) (Address, error) {
	bad := func(format string, args ...any) (Address, error) {
		return Address{}, &AddressError{Address: s, Reason: fmt.Sprintf(format, args...)}
	}
	u, err := url.Parse(s)
	if err != nil {
		return bad("%v", err)
	}
	if u.User != nil || u.Fragment != "" || u.Port() != "" {
		return bad("a serial address has only a device and settings")
	}
	a := Address{Scheme: SchemeSerial, Baud: DefaultBaud, DataBits: DefaultDataBits,
		Parity: DefaultParity, StopBits: DefaultStopBits}
	switch {
	case u.Host != "" && (u.Path == "" || u.Path == "/"):
		a.Device = u.Host // serial://COM3
	case u.Host == "" && u.Path != "" && u.Path != "/":
		a.Device = u.Path // serial:///dev/ttyUSB0
	default:
		return bad("no device (use three slashes for a path: serial:///dev/ttyUSB0)")
	}
	if !validDevice(a.Device) {
		return bad("device %q: use letters, digits and / _ . + - only, and a path must start with /", a.Device)
	}
	q, err := url.ParseQuery(u.RawQuery)
	if err != nil {
		return bad("settings: %v", err)
	}
	for key, vals := range q {
		if len(vals) != 1 {
			return bad("setting %q given %d times", key, len(vals))
		}
		v := vals[0]
		switch key {
		case "baud":
			n, err := strconv.Atoi(v)
			if err != nil || n <= 0 || v[0] == '+' {
				return bad("baud %q is not a positive whole number", v)
			}
			a.Baud = n
		case "bits":
			n, err := strconv.Atoi(v)
			if err != nil || n < 5 || n > 8 || len(v) != 1 {
				return bad("bits %q is not 5, 6, 7 or 8", v)
			}
			a.DataBits = n
		case "parity":
			switch v {
			case "none", "odd", "even", "mark", "space":
				a.Parity = v
			default:
				return bad("parity %q is not none, odd, even, mark or space", v)
			}
		case "stop":
			switch v {
			case "1", "1.5", "2":
				a.StopBits = v
			default:
				return bad("stop %q is not 1, 1.5 or 2", v)
			}
		default:
			return bad("unknown setting %q (known: baud, bits, parity, stop)", key)
		}
	}
	return a, nil
}

// String formats the address so that ParseAddress(a.String()) == a. Serial
// addresses always list every setting.
func (a Address) String() string {
	switch a.Scheme {
	case SchemeTCP:
		return "tcp://" + net.JoinHostPort(a.Host, strconv.Itoa(a.Port))
	case SchemeSerial:
		return fmt.Sprintf("serial://%s?baud=%d&bits=%d&parity=%s&stop=%s",
			a.Device, a.Baud, a.DataBits, a.Parity, a.StopBits)
	default:
		return fmt.Sprintf("%s://?", a.Scheme)
	}
}

// validDevice accepts a device path (/dev/ttyUSB0) or a bare name (COM3)
// made of characters that survive a round trip through String.
func validDevice(d string) bool {
	for _, r := range d {
		ok := r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' ||
			strings.ContainsRune("/_.+-", r)
		if !ok {
			return false
		}
	}
	return d != "" && (d[0] == '/' || !strings.Contains(d, "/"))
}

// validHost accepts an IP address or a host name of letters, digits, '-',
// '.' and '_'.
func validHost(h string) bool {
	if net.ParseIP(h) != nil {
		return true
	}
	for _, r := range h {
		ok := r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || strings.ContainsRune("-._", r)
		if !ok {
			return false
		}
	}
	return h != ""
}
