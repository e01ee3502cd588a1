package instrument

import (
	"context"
	"errors"
	"strings"
	"testing"
)

// CheckTerminator takes any short string that starts with a control
// character, and refuses what would cut replies (IEEE 488.2 §8.7: response
// data other than blocks is printable ASCII, so only a terminator that
// starts with a control character cannot occur inside one).
func TestCheckTerminator(t *testing.T) {
	tests := []struct {
		term string
		ok   bool
		msg  string
	}{
		{"\n", true, ""},
		{"\r\n", true, ""},
		{"\r", true, ""},
		{"\x03", true, ""},        // ETX
		{"\r\n\x04", true, ""},    // CR LF EOT
		{"\r\n> ", true, ""},      // a prompt after CR LF
		{"\x00", true, ""},        // NUL
		{"\x7f", true, ""},        // DEL
		{"", false, "empty"},      // nothing to split on
		{";", false, "printable"}, // ends every SCPI message unit
		{"OK\n", false, "printable"},
		{" \n", false, "printable"},
		{"\n" + strings.Repeat("x", MaxTerminatorBytes), false, "at most 8"},
	}
	for _, tc := range tests {
		err := CheckTerminator(tc.term)
		if (err == nil) != tc.ok {
			t.Errorf("CheckTerminator(%q) = %v, want ok %v", tc.term, err, tc.ok)
			continue
		}
		if err != nil && !strings.Contains(err.Error(), tc.msg) {
			t.Errorf("CheckTerminator(%q) = %v, want it to say %q", tc.term, err, tc.msg)
		}
	}
}

// Multi-byte and control-character terminators split the stream exactly
// where the whole string stands, also when it straddles two reads.
func TestLineBufferArbitraryTerminators(t *testing.T) {
	tests := []struct {
		term  string
		in    string
		lines []string
	}{
		{"\r\n\x04", "+1.5\r\n\x04-2\r\n\x04", []string{"+1.5", "-2"}},
		{"\r\n\x04", "a\r\nb\r\n\x04", []string{"a\r\nb"}}, // CR LF alone is data here
		{"\r\n\x04", "\r\n\x04\r\n\x04", []string{"", ""}},
		{"\x03", "1,2,3\x034\x03", []string{"1,2,3", "4"}},
		{"\r\n> ", "ok\r\n> 5\r\n> ", []string{"ok", "5"}},
	}
	for _, tc := range tests {
		for _, step := range []int{1, 2, 3, 1000} {
			got := splitAll(t, tc.term, tc.in, step)
			if strings.Join(got, "|") != strings.Join(tc.lines, "|") {
				t.Errorf("term %q in %q step %d: %q, want %q", tc.term, tc.in, step, got, tc.lines)
			}
		}
	}
}

func splitAll(t *testing.T, term, in string, step int) []string {
	t.Helper()
	b := newLineBuffer(DialOptions{Terminator: term}.withDefaults())
	fill := trickle(in, step)
	var got []string
	for {
		line, err := b.readLine(context.Background(), fill)
		if err != nil {
			if !errors.Is(err, ErrClosed) {
				t.Errorf("term %q in %q step %d: %v", term, in, step, err)
			}
			return got
		}
		got = append(got, string(line))
	}
}

// FuzzTerminator: for every terminator CheckTerminator accepts, printable
// messages joined with it come back one by one, whatever the read size;
// CheckTerminator never panics.
func FuzzTerminator(f *testing.F) {
	f.Add("\n", "+1.0E-3,2", uint8(1))
	f.Add("\r\n", "NULLBENCH-SIM,SRC-3CH,SIM0003,1.0", uint8(3))
	f.Add("\r", "0,\"No error\"", uint8(2))
	f.Add("\r\n\x04", "VOLT 5;OUTP ON", uint8(1))
	f.Add("\x03", "1", uint8(7))
	f.Add("\r\n> ", "-113,\"Undefined header\"", uint8(4))
	f.Add(";", "a;b", uint8(1))
	f.Fuzz(func(t *testing.T, term, msg string, step uint8) {
		if CheckTerminator(term) != nil {
			return
		}
		// Printable ASCII only, as IEEE 488.2 response data.
		msg = strings.Map(func(r rune) rune {
			if r < 0x20 || r > 0x7e {
				return -1
			}
			return r
		}, msg)
		lines := []string{msg, "", msg + "x"}
		in := strings.Join(lines, term) + term
		got := splitAll(t, term, in, int(step%16)+1)
		if strings.Join(got, "\x00") != strings.Join(lines, "\x00") {
			t.Fatalf("term %q: %q split into %q, want %q", term, in, got, lines)
		}
	})
}

// A profile's terminator, written with TOML escapes, reaches both the
// session (program messages) and the transport (responses).
func TestProfileTerminatorReachesSessionAndTransport(t *testing.T) {
	for _, tc := range []struct{ toml, want string }{
		{`"\u0003"`, "\x03"},
		{`"\r\n\u0004"`, "\r\n\x04"},
		{`"\r"`, "\r"},
	} {
		data := "name = \"t\"\nterminator = " + tc.toml + "\n[chamber]\nset_point = \"TEMP {value}\"\nread_celsius = \"TEMP?\"\n"
		p, err := ParseProfile([]byte(data), "t.toml")
		if err != nil {
			t.Fatalf("%s: %v", tc.toml, err)
		}
		if so, do := p.SessionOptions(), p.DialOptions(); so.Terminator != tc.want || do.Terminator != tc.want {
			t.Errorf("%s: session %q, dial %q, want %q", tc.toml, so.Terminator, do.Terminator, tc.want)
		}
	}
}
