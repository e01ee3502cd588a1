package instrument_test

import (
	"errors"
	"strings"
	"testing"

	"nullbench/instrument"
)

func TestParseAddress(t *testing.T) {
	serial := func(dev string, baud, bits int, parity, stop string) instrument.Address {
		return instrument.Address{Scheme: "serial", Device: dev, Baud: baud, DataBits: bits, Parity: parity, StopBits: stop}
	}
	tcp := func(host string, port int) instrument.Address {
		return instrument.Address{Scheme: "tcp", Host: host, Port: port}
	}
	tests := []struct {
		in   string
		want instrument.Address
		str  string // String(); "" means same as in
	}{
		// 5025 is the LXI "scpi-raw" port (LXI Consortium, "LXI Ports,
		// Protocols, and Services", SCPI-99; IEEE 488.2).
		{"tcp://192.0.2.50", tcp("192.0.2.50", 5025), "tcp://192.0.2.50:5025"},
		{"tcp://127.0.0.1:40001", tcp("127.0.0.1", 40001), ""},
		{"tcp://bench-dmm.local:9221", tcp("bench-dmm.local", 9221), ""},
		{"TCP://host:1", tcp("host", 1), "tcp://host:1"},
		{"tcp://[::1]:5025", tcp("::1", 5025), ""},
		{"tcp://[fe80::1]", tcp("fe80::1", 5025), "tcp://[fe80::1]:5025"},
		// Serial defaults 115200 8N1, our documented choice.
		{"serial:///dev/ttyUSB0", serial("/dev/ttyUSB0", 115200, 8, "none", "1"),
			"serial:///dev/ttyUSB0?baud=115200&bits=8&parity=none&stop=1"},
		{"serial:///dev/pts/5?baud=115200", serial("/dev/pts/5", 115200, 8, "none", "1"),
			"serial:///dev/pts/5?baud=115200&bits=8&parity=none&stop=1"},
		{"serial:///dev/ttyS1?baud=9600&bits=7&parity=even&stop=2", serial("/dev/ttyS1", 9600, 7, "even", "2"), ""},
		{"serial://COM3?stop=1.5&parity=odd", serial("COM3", 115200, 8, "odd", "1.5"),
			"serial://COM3?baud=115200&bits=8&parity=odd&stop=1.5"},
	}
	for _, tc := range tests {
		got, err := instrument.ParseAddress(tc.in)
		if err != nil {
			t.Errorf("ParseAddress(%q): %v", tc.in, err)
			continue
		}
		if got != tc.want {
			t.Errorf("ParseAddress(%q) = %+v, want %+v", tc.in, got, tc.want)
		}
		str := tc.str
		if str == "" {
			str = tc.in
		}
		if got.String() != str {
			t.Errorf("String() = %q, want %q", got.String(), str)
		}
		back, err := instrument.ParseAddress(got.String())
		if err != nil || back != got {
			t.Errorf("round trip %q: %+v, %v", got.String(), back, err)
		}
	}
}

func TestParseAddressErrors(t *testing.T) {
	bad := []string{
		"", " tcp://a", "192.0.2.50", "tcp://", "tcp://:5025", "tcp://host:0", "tcp://host:65536", "tcp://host:x",
		"tcp://host:+5", "tcp://host/path", "tcp://host?x=1", "tcp://::1", "udp://host", "serial://",
		"serial:///", "serial://dev/ttyUSB0", "serial:///dev/ttyUSB0?baud=fast", "serial:///dev/ttyUSB0?baud=0",
		"serial:///dev/ttyUSB0?bits=9", "serial:///dev/ttyUSB0?parity=yes", "serial:///dev/ttyUSB0?stop=3",
		"serial:///dev/ttyUSB0?speed=9600", "serial:///dev/ttyUSB0?baud=1&baud=2", "serial:///dev/tty USB0",
		"serial://user@COM3", "tCp://]", "tcp://a b",
	}
	for _, in := range bad {
		_, err := instrument.ParseAddress(in)
		var ae *instrument.AddressError
		if !errors.As(err, &ae) {
			t.Errorf("ParseAddress(%q) error = %v, want *AddressError", in, err)
			continue
		}
		// Every error shows a correct example of both forms.
		for _, ex := range []string{"tcp://192.0.2.50:5025", "serial:///dev/ttyUSB0?baud=115200&bits=8&parity=none&stop=1"} {
			if !strings.Contains(err.Error(), ex) {
				t.Errorf("error for %q lacks the example %q: %v", in, ex, err)
			}
		}
	}
}

func FuzzParseAddress(f *testing.F) {
	for _, s := range []string{"tcp://192.0.2.50", "tcp://127.0.0.1:40001", "tcp://[::1]:5025",
		"serial:///dev/ttyUSB0?baud=115200&bits=8&parity=none&stop=1", "serial://COM3", "serial:///dev/pts/5?baud=9600",
		"udp://x", "tcp://host:99999", "serial:///dev/x?stop=1.5"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		a, err := instrument.ParseAddress(s)
		if err != nil {
			return
		}
		back, err := instrument.ParseAddress(a.String())
		if err != nil || back != a {
			t.Fatalf("%q -> %+v -> %q -> %+v, %v", s, a, a.String(), back, err)
		}
	})
}
