package instrument_test

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"testing"

	"nullbench/instrument"
)

func TestParseNumber(t *testing.T) {
	// NR1/NR2/NR3 forms (IEEE 488.2 numeric response data) and the SCPI
	// special values 9.9E37 = +INF, -9.9E37 = -INF, 9.91E37 = NaN
	// (SCPI-99 Vol 1).
	tests := []struct {
		in   string
		want float64
	}{
		{"42", 42},                              // NR1
		{"-12", -12},                            // NR1 negative
		{"+7", 7},                               // leading +
		{"1.250", 1.25},                         // NR2
		{"-.5", -0.5},                           // NR2 without integer digits
		{"5.", 5},                               // NR2 without fraction digits
		{"+1.23456789E-03", 1.23456789e-3},      // NR3 as a DMM sends it (a 6½-digit DMM reply; common practice)
		{"1.2e+2", 120},                         // lower-case exponent
		{"  +3.5E0 \t", 3.5},                    // surrounding white space
		{"+9.90000000E+37", math.Inf(1)},        // overload, SCPI-99; IEEE 488.2
		{"9.9E37", math.Inf(1)},                 // same, short
		{"-9.9E37", math.Inf(-1)},               // -INF, SCPI-99; IEEE 488.2
		{"9.91E37", math.NaN()},                 // NaN, SCPI-99; IEEE 488.2
		{"+9.91000000E+37", math.NaN()},         // NaN, long form
		{"9.8E37", 9.8e37},                      // a large ordinary number
		{"0", 0},                                // zero
		{"-0.000000E+00", math.Copysign(0, -1)}, // negative zero is still zero
	}
	for _, tc := range tests {
		got, err := instrument.ParseNumber(tc.in)
		if err != nil {
			t.Errorf("ParseNumber(%q): %v", tc.in, err)
			continue
		}
		same := got == tc.want || (math.IsNaN(got) && math.IsNaN(tc.want))
		if !same {
			t.Errorf("ParseNumber(%q) = %v, want %v", tc.in, got, tc.want)
		}
	}
	if !instrument.IsOverload(math.Inf(-1)) || instrument.IsOverload(9.8e37) || instrument.IsOverload(math.NaN()) {
		t.Error("IsOverload disagrees with ±Inf")
	}

	bad := []string{"", " ", "+", "-", ".", "E5", "1E", "1E+", "1.2.3", "INF", "NaN", "0x10", "1_000",
		"1,2", "12V", "1 2", "++1", "1e400", "\x00", "９"}
	for _, in := range bad {
		if v, err := instrument.ParseNumber(in); err == nil || !errors.Is(err, instrument.ErrBadResponse) {
			t.Errorf("ParseNumber(%q) = %v, %v; want ErrBadResponse", in, v, err)
		}
	}
}

func TestParseNumbers(t *testing.T) {
	got, err := instrument.ParseNumbers("+1.23456789E-03,+1.23440000E-03") // two readings as a DMM returns them (common practice)
	if err != nil || len(got) != 2 || got[0] != 1.23456789e-3 || got[1] != 1.2344e-3 {
		t.Errorf("ParseNumbers = %v, %v", got, err)
	}
	got, err = instrument.ParseNumbers("1, -9.9E37 ,3")
	if err != nil || len(got) != 3 || !math.IsInf(got[1], -1) {
		t.Errorf("ParseNumbers with overload = %v, %v", got, err)
	}
	for _, in := range []string{"", "1,,2", "1,", ",1", "1;2"} {
		if _, err := instrument.ParseNumbers(in); err == nil {
			t.Errorf("ParseNumbers(%q) accepted", in)
		}
	}
	_, err = instrument.ParseNumbers("1,2,x")
	if err == nil || !strings.Contains(err.Error(), "value 3 of 3") {
		t.Errorf("error %v does not name the bad value", err)
	}
}

func TestParseBlock(t *testing.T) {
	// Check values from IEEE 488.2 §8.7.9:
	// "#15HELLO", and "#210" followed by 10 bytes.
	tests := []struct {
		name       string
		in         string
		data, rest string
	}{
		{"#15HELLO (SCPI-99; IEEE 488.2)", "#15HELLO", "HELLO", ""},
		{"#210 + 10 bytes (SCPI-99; IEEE 488.2)", "#210ABCDEFGHIJ", "ABCDEFGHIJ", ""},
		{"#210 + 10 bytes then more", "#210ABCDEFGHIJ;rest", "ABCDEFGHIJ", ";rest"},
		{"binary with LF, CR and NUL", "#15a\n\r\x00b", "a\n\r\x00b", ""},
		{"empty definite block", "#10", "", ""},
		{"nine length digits", "#9000000003xyz", "xyz", ""},
		{"indefinite #0 with NL^END", "#0abc\n", "abc", ""},
		{"indefinite #0 without NL", "#0abc", "abc", ""},
	}
	for _, tc := range tests {
		data, rest, err := instrument.ParseBlock([]byte(tc.in))
		if err != nil || string(data) != tc.data || string(rest) != tc.rest {
			t.Errorf("%s: ParseBlock(%q) = %q, %q, %v", tc.name, tc.in, data, rest, err)
		}
	}
	for _, in := range []string{"", "#", "15HELLO", "#A5", "#15HELL", "#2", "#21", "#2x1abc", "#3-10abcdefghij"} {
		if _, _, err := instrument.ParseBlock([]byte(in)); !errors.Is(err, instrument.ErrBadResponse) {
			t.Errorf("ParseBlock(%q) error = %v, want ErrBadResponse", in, err)
		}
	}
}

func TestParseErrorResponse(t *testing.T) {
	// SYSTem:ERRor? reply <code>,"<text>[;<info>]" (SCPI-99 Vol 2 §21.8,
	// SCPI-99; IEEE 488.2).
	tests := []struct {
		in   string
		code int
		msg  string
	}{
		{`0,"No error"`, 0, "No error"},
		{`-113,"Undefined header"`, -113, "Undefined header"},
		{`-222,"Data out of range;VOLT max 30"`, -222, "Data out of range;VOLT max 30"},
		{` +0 , "No error" `, 0, "No error"},
		{`-350,"Queue overflow"`, -350, "Queue overflow"},
		{`201,"Relay ""K3"" stuck"`, 201, `Relay "K3" stuck`},
		{`-100,""`, -100, ""},
		{`-102,Syntax error`, -102, "Syntax error"}, // some instruments omit the quotes
		{`-32768,"lowest"`, -32768, "lowest"},
		{`32767,"highest"`, 32767, "highest"},
	}
	for _, tc := range tests {
		code, msg, err := instrument.ParseErrorResponse(tc.in)
		if err != nil || code != tc.code || msg != tc.msg {
			t.Errorf("ParseErrorResponse(%q) = %d, %q, %v", tc.in, code, msg, err)
		}
	}
	for _, in := range []string{"", "0", `x,"a"`, `1.5,"a"`, `1E2,"a"`, `-32769,"a"`, `40000,"a"`,
		`0,"unterminated`, `0,"a"b`, `0,a"b`, `,"a"`} {
		if _, _, err := instrument.ParseErrorResponse(in); !errors.Is(err, instrument.ErrBadResponse) {
			t.Errorf("ParseErrorResponse(%q) error = %v, want ErrBadResponse", in, err)
		}
	}
}

// scpi99StandardCodes are the standard error codes and texts of SCPI-99
// Vol 2 §21.8 that were checked against a copy of the standard; entries
// recalled from memory are marked FromMemory in StandardErrors instead.
var scpi99StandardCodes = map[int]string{
	-100: "Command error", -102: "Syntax error", -103: "Invalid separator", -104: "Data type error",
	-108: "Parameter not allowed", -109: "Missing parameter", -113: "Undefined header",
	-114: "Header suffix out of range", -120: "Numeric data error", -130: "Suffix error",
	-200: "Execution error", -213: "Init ignored", -221: "Settings conflict", -222: "Data out of range",
	-224: "Illegal parameter value", -300: "Device-specific error", -350: "Queue overflow",
	-410: "Query INTERRUPTED", -420: "Query UNTERMINATED", -430: "Query DEADLOCKED",
}

func TestStandardErrorsAgainstSCPI99(t *testing.T) {
	// Source: SCPI-99 Vol 2 §21.8.
	table := instrument.StandardErrors()
	byCode := map[int]instrument.StandardError{}
	for _, se := range table {
		if _, dup := byCode[se.Code]; dup {
			t.Errorf("code %d listed twice", se.Code)
		}
		byCode[se.Code] = se
	}
	for code, meaning := range scpi99StandardCodes {
		se, ok := byCode[code]
		switch {
		case !ok:
			t.Errorf("code %d (%s) missing", code, meaning)
		case se.Meaning != meaning:
			t.Errorf("code %d: meaning %q, SCPI-99 Vol 2 §21.8 says %q", code, se.Meaning, meaning)
		case se.FromMemory:
			t.Errorf("code %d is in the checked SCPI-99 list but marked from memory", code)
		}
	}
	for _, se := range table {
		if _, listed := scpi99StandardCodes[se.Code]; !listed && !se.FromMemory && se.Code != 0 {
			t.Errorf("code %d (%s) is not in the checked SCPI-99 list and not marked from memory", se.Code, se.Meaning)
		}
		if got, ok := instrument.LookupStandardError(se.Code); !ok || got != se {
			t.Errorf("LookupStandardError(%d) = %+v, %v", se.Code, got, ok)
		}
	}
	if !sort.SliceIsSorted(table, func(i, j int) bool { return table[i].Code > table[j].Code }) {
		t.Error("StandardErrors is not sorted by descending code")
	}
	if _, ok := instrument.LookupStandardError(-999); ok {
		t.Error("LookupStandardError(-999) found something")
	}
	// `0,"No error"` when the queue is empty (SCPI-99; IEEE 488.2).
	if se, ok := instrument.LookupStandardError(0); !ok || se.Meaning != "No error" {
		t.Errorf("code 0 = %+v", se)
	}
}

func TestErrorClasses(t *testing.T) {
	// Ranges and ESR bits: -1xx CME bit 5, -2xx EXE bit 4, -3xx DDE bit 3,
	// -4xx QYE bit 2 (SCPI-99; IEEE 488.2, SCPI-99 Vol 2 §21.8). The -5xx..-8xx
	// event classes and URQ/RQC bits are from memory of SCPI-99 §21.8.
	tests := []struct {
		code  int
		class instrument.ErrorClass
		bit   int
		name  string
	}{
		{0, instrument.ClassNone, -1, ""},
		{-100, instrument.ClassCommand, 5, "CME"},
		{-199, instrument.ClassCommand, 5, "CME"},
		{-222, instrument.ClassExecution, 4, "EXE"},
		{-350, instrument.ClassDeviceSpecific, 3, "DDE"},
		{-430, instrument.ClassQuery, 2, "QYE"},
		{-500, instrument.ClassPowerOn, 7, "PON"},     // from memory
		{-600, instrument.ClassUserRequest, 6, "URQ"}, // from memory
		{-700, instrument.ClassRequestControl, 1, "RQC"},
		{-800, instrument.ClassOperationComplete, 0, "OPC"},
		{-99, instrument.ClassUnknown, -1, ""},
		{-900, instrument.ClassUnknown, -1, ""},
		{12, instrument.ClassDeviceDefined, -1, ""},
	}
	for _, tc := range tests {
		c := instrument.ClassOf(tc.code)
		if c != tc.class || c.ESRBit() != tc.bit || c.ESRName() != tc.name {
			t.Errorf("ClassOf(%d) = %v bit %d %q; want %v bit %d %q", tc.code, c, c.ESRBit(), c.ESRName(), tc.class, tc.bit, tc.name)
		}
	}
	// The ESR bit weights of SCPI-99; IEEE 488.2: CME 32, EXE 16, DDE 8, QYE 4, OPC 1, PON 128.
	for _, w := range []struct {
		c      instrument.ErrorClass
		weight int
	}{{instrument.ClassCommand, 32}, {instrument.ClassExecution, 16}, {instrument.ClassDeviceSpecific, 8},
		{instrument.ClassQuery, 4}, {instrument.ClassOperationComplete, 1}, {instrument.ClassPowerOn, 128}} {
		if 1<<w.c.ESRBit() != w.weight {
			t.Errorf("%v: ESR weight %d, SCPI-99; IEEE 488.2 says %d", w.c, 1<<w.c.ESRBit(), w.weight)
		}
	}
}

func TestInstrumentErrorMessage(t *testing.T) {
	e := &instrument.InstrumentError{Instrument: "psu", Command: "VOLT 99", Code: -222, Message: "Data out of range",
		More: []instrument.QueueEntry{{Code: -113, Message: "Undefined header"}}}
	want := `psu: after "VOLT 99": instrument error -222 "Data out of range" (SCPI-99: Data out of range, execution error, sets ESR bit 4 EXE); 1 more in the queue: -113,"Undefined header"`
	if e.Error() != want {
		t.Errorf("got  %s\nwant %s", e.Error(), want)
	}
	e = &instrument.InstrumentError{Instrument: "mux", Code: 301, Message: "Relay fault"}
	if got := e.Error(); got != `mux: error queue: instrument error 301 "Relay fault" (device-defined error)` {
		t.Errorf("got %s", got)
	}
}

func FuzzParseNumber(f *testing.F) {
	for _, s := range []string{"42", "-12", "+1.250", "+1.23456789E-03", "9.9E37", "-9.9E37", "9.91E37",
		" 1e5 ", ".5", "5.", "1e400", "INF", "", "+", "1.2.3"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		v, err := instrument.ParseNumber(s)
		if err != nil {
			if !errors.Is(err, instrument.ErrBadResponse) {
				t.Fatalf("error %v does not wrap ErrBadResponse", err)
			}
			return
		}
		if !strings.ContainsAny(s, "0123456789") {
			t.Fatalf("%q parsed as %v without a digit", s, v)
		}
		// Round trip: a finite value printed in NR3 parses back to itself.
		if !math.IsInf(v, 0) && !math.IsNaN(v) {
			back, err := instrument.ParseNumber(strconv.FormatFloat(v, 'E', -1, 64))
			if err != nil || back != v {
				t.Fatalf("%q -> %v -> %v, %v", s, v, back, err)
			}
		}
	})
}

func FuzzParseNumbers(f *testing.F) {
	for _, s := range []string{"+1.23456789E-03,+1.23440000E-03", "1,2,3", "9.9E37,-9.9E37", "", ",", "1,,2"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		vs, err := instrument.ParseNumbers(s)
		if err != nil {
			return
		}
		if len(vs) != strings.Count(s, ",")+1 {
			t.Fatalf("%q gave %d values", s, len(vs))
		}
	})
}

func FuzzParseBlock(f *testing.F) {
	for _, s := range []string{"#15HELLO", "#210ABCDEFGHIJ", "#0abc\n", "#10", "#9000000003xyz", "#", "#2", "#A"} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		data, rest, err := instrument.ParseBlock(b)
		if err != nil {
			return
		}
		if b[1] == '0' {
			return
		}
		// Re-encoding the header with the same digit count gives the input back.
		n := int(b[1] - '0')
		enc := fmt.Sprintf("#%d%0*d", n, n, len(data))
		re := append(append([]byte(enc), data...), rest...)
		if !bytes.Equal(re, b) {
			t.Fatalf("%q -> data %q rest %q -> %q", b, data, rest, re)
		}
	})
}

func FuzzParseErrorResponse(f *testing.F) {
	for _, s := range []string{`0,"No error"`, `-113,"Undefined header"`, `-222,"Data out of range;VOLT max 30"`,
		`201,"Relay ""K3"" stuck"`, `-102,Syntax error`, `x`, `0,"`} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		code, msg, err := instrument.ParseErrorResponse(s)
		if err != nil {
			return
		}
		if code < -32768 || code > 32767 {
			t.Fatalf("%q: code %d out of range", s, code)
		}
		// Quoting the message back SCPI-style parses to the same pair.
		q := `"` + strings.ReplaceAll(msg, `"`, `""`) + `"`
		c2, m2, err := instrument.ParseErrorResponse(strconv.Itoa(code) + "," + q)
		if err != nil || c2 != code || m2 != msg {
			t.Fatalf("%q -> %d %q -> %d %q %v", s, code, msg, c2, m2, err)
		}
	})
}
