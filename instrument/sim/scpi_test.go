package sim

import (
	"context"
	"math"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

// Short forms: SCPI-99 Vol 1 §6 rules and the check values listed in
// SCPI-99; IEEE 488.2 (MEASure→MEAS, VOLTage→VOLT, …); only exact short or long
// forms are valid (VOLTA, MEA → −113).
func TestShortLongForms(t *testing.T) {
	cases := []struct {
		pattern string
		sent    string
		ok      bool
		suffix  int // suffix on the first node, −1 if none
	}{
		{"MEASure", "MEAS", true, -1}, {"MEASure", "MEASURE", true, -1}, {"MEASure", "MEA", false, 0},
		{"VOLTage", "VOLT", true, -1}, {"VOLTage", "VOLTA", false, 0}, {"VOLTage", "VOLTAGE", true, -1},
		{"CURRent", "CURR", true, -1}, {"RANGe", "RANG", true, -1}, {"NPLCycles", "NPLC", true, -1},
		{"NPLCycles", "NPLCYCLES", true, -1}, {"OUTPut#", "OUTP", true, -1}, {"OUTPut#", "OUTP2", true, 2},
		{"OUTPut#", "OUTPUT3", true, 3}, {"INSTrument", "INST", true, -1}, {"NSELect", "NSEL", true, -1},
		{"SYSTem", "SYST", true, -1}, {"ERRor", "ERR", true, -1}, {"IMMediate", "IMM", true, -1},
		{"TEMPerature", "TEMP", true, -1}, {"CLOSe", "CLOS", true, -1}, {"FETCh", "FETC", true, -1},
		{"AUTO", "AUTO", true, -1}, {"SOURce#", "SOUR12", true, 12}, {"VOLTage", "VOLT2", false, 0},
		{"SOURce#", "SOUR", true, -1}, {"SOURce#", "SO", false, 0},
	}
	for _, tc := range cases {
		nodes := compilePattern(tc.pattern)
		suffix := make([]int, len(nodes))
		ok := matchPattern([]string{strings.ToUpper(tc.sent)}, nodes, suffix)
		if ok != tc.ok || (ok && suffix[0] != tc.suffix) {
			t.Errorf("%s vs %s: ok %v suffix %v, want %v %d", tc.sent, tc.pattern, ok, suffix, tc.ok, tc.suffix)
		}
	}
}

func TestOptionalNodes(t *testing.T) {
	const p = "[SOURce#:]VOLTage[:LEVel][:IMMediate][:AMPLitude]"
	nodes := compilePattern(p)
	for _, h := range []string{"VOLT", "SOUR:VOLT", "SOUR2:VOLT:LEV", "VOLTAGE:LEVEL:IMMEDIATE:AMPLITUDE", "VOLT:IMM", "VOLT:AMPL", "SOURCE3:VOLTAGE:AMPL"} {
		if !matchPattern(strings.Split(h, ":"), nodes, make([]int, len(nodes))) {
			t.Errorf("%s should match %s", h, p)
		}
	}
	for _, h := range []string{"LEV", "VOLT:LEV:LEV", "SOUR", "VOLT:AMPL:IMM", "SOUR:SOUR:VOLT"} {
		if matchPattern(strings.Split(h, ":"), nodes, make([]int, len(nodes))) {
			t.Errorf("%s should not match %s", h, p)
		}
	}
}

func TestParseDecimal(t *testing.T) {
	cases := []struct {
		in   string
		want float64
		code int
	}{
		{"1", 1, 0}, {"+1.5", 1.5, 0}, {"-2.5E-3", -2.5e-3, 0}, {".5", 0.5, 0}, {"5.", 5, 0},
		{"1e3", 1000, 0}, {"500mV", 0.5, 0}, {"500 MV", 0.5, 0}, {"2 V", 2, 0}, {"10UA", 1e-5, 0},
		{"abc", 0, errDataType}, {"1.2.3", 0, errInvalidSuffix}, {"--1", 0, errNumericData},
		{"1E", 0, errInvalidSuffix}, {"1 furlong", 0, errInvalidSuffix}, {"(@101)", 0, errDataType}, {"1e999", 0, errNumericData},
	}
	for _, tc := range cases {
		v, err := parseDecimal(tc.in)
		code := 0
		if err != nil {
			code = err.(*scpiError).code
		}
		if code != tc.code || (code == 0 && math.Abs(v-tc.want) > 1e-12*math.Abs(tc.want)) {
			t.Errorf("%q: %v %v, want %v code %d", tc.in, v, err, tc.want, tc.code)
		}
	}
}

func TestChannelList(t *testing.T) {
	cases := []struct {
		in   string
		want string
		code int
	}{
		{"(@101)", "[101]", 0}, {"(@101,102)", "[101 102]", 0}, {"(@101:104)", "[101 102 103 104]", 0},
		{"(@104:102,201)", "[104 103 102 201]", 0}, {"( @101)", "", errInvalidExpr}, {"101", "", errInvalidExpr},
		{"(@)", "", errInvalidExpr}, {"(@1x)", "", errInvalidExpr}, {"(@99)", "", errOutOfRange},
		{"(@101:99999)", "", errOutOfRange},
	}
	for _, tc := range cases {
		got, err := channelList(tc.in, 100, 300)
		code := 0
		if err != nil {
			code = err.(*scpiError).code
		}
		if code != tc.code || (code == 0 && strings.Trim(strings.ReplaceAll(strconvInts(got), ",", " "), " ") != strings.Trim(tc.want, "[]")) {
			t.Errorf("%q: %v %v, want %s code %d", tc.in, got, err, tc.want, tc.code)
		}
	}
}

func strconvInts(a []int) string {
	s := make([]string, len(a))
	for i, v := range a {
		s[i] = strconv.Itoa(v)
	}
	return strings.Join(s, ",")
}

// TestErrorQueue: FIFO; on overflow the newest entry becomes −350 (SCPI-99
// Vol 2 §21.8, SCPI-99; IEEE 488.2).
func TestErrorQueue(t *testing.T) {
	q := errorQueue{limit: 4}
	for i := 1; i <= 6; i++ {
		q.push(newErr(errOutOfRange, strconv.Itoa(i)))
	}
	want := []string{`-222,"Data out of range;1"`, `-222,"Data out of range;2"`, `-222,"Data out of range;3"`, `-350,"Queue overflow"`, `0,"No error"`}
	for _, w := range want {
		if got := q.pop(); got != w {
			t.Errorf("pop %s, want %s", got, w)
		}
	}
}

var nr3re = regexp.MustCompile(`^[+-]\d\.\d{8}E[+-]\d{2,3}$`)

// TestCommandForms sends every command form over a raw TCP client and
// checks the response and the error code left in the queue.
func TestCommandForms(t *testing.T) {
	tb := startBench(t, Config{})
	type step struct {
		line string
		resp string // exact, or "re:" + regexp, or "" for no response
		code int    // first error code expected in the queue afterwards (0 = none)
	}
	nr3 := "re:" + nr3re.String()
	common := func(idn string) []step {
		return []step{
			{"*IDN?", idn, 0}, {"*idn?", idn, 0}, {"*Idn?\r", idn, 0}, {"*CLS", "", 0}, {"*ESR?", "0", 0},
			{"*RST", "", 0}, {"*OPC?", "1", 0}, {"*OPC;*ESR?", "1", 0}, {"*OPC", "", 0}, {"*WAI", "", 0},
			{"*STB?", "0", 0}, {"*TST?", "0", 0}, {"*ESE 36", "", 0}, {"*ESE?", "36", 0}, {"*SRE 4", "", 0},
			{"*SRE?", "4", 0}, {"*IDN?;*OPC?", idn + ";1", 0}, {"*IDN?;", idn, 0}, {"", "", 0},
			{"SYST:ERR?", `0,"No error"`, 0}, {"SYSTem:ERRor:NEXT?", `0,"No error"`, 0},
			{"syst:err:next?", `0,"No error"`, 0}, {":SYST:ERR?", `0,"No error"`, 0},
			{"SYST:ERR:COUN?", "0", 0}, {"SYST:VERS?", "1999.0", 0},
			{"*FOO", "", errUndefHeader}, {"*IDN? 3", "", errParamNotAllowed}, {"BOGUS", "", errUndefHeader},
			{"VOLTA 1", "", errUndefHeader}, {"MEA:VOLT?", "", errUndefHeader}, {"SYST:ERR", "", errUndefHeader},
			{"*ESE", "", errMissingParam}, {"*ESE 300", "", errOutOfRange},
			// A command error discards the rest of the message.
			{"BOGUS;*IDN?", "", errUndefHeader},
			{"*SRE 0;*ESE 0;*CLS", "", 0},
		}
	}
	table := map[string][]step{
		NameDMM: append(common(IDNDMM), []step{
			{"CONF:VOLT:DC 1", "", 0}, {"VOLT:DC:RANG?", "+1.00000000E+00", 0},
			{"CONFigure:VOLTage:DC 10", "", 0}, {"VOLT:RANG?", "+1.00000000E+01", 0},
			{"CONF 0.1", "", 0}, {"SENS:VOLT:DC:RANG?", "+1.00000000E-01", 0},
			{"CONF:VOLT:DC 5", "", 0}, {"VOLT:DC:RANG?", "+1.00000000E+01", 0},
			{"CONF:VOLT:DC MIN", "", 0}, {"VOLT:DC:RANG?", "+1.00000000E-01", 0},
			{"CONF:VOLT:DC MAX", "", 0}, {"VOLT:DC:RANG?", "+1.00000000E+03", 0},
			{"CONF:VOLT:DC AUTO", "", 0}, {"VOLT:DC:RANG:AUTO?", "1", 0},
			{"CONF:VOLT:DC DEF", "", 0}, {"CONF:VOLT:DC 1,1e-6", "", 0}, {"CONF:VOLT:DC 1,MIN", "", 0},
			{"CONF:VOLT:DC 2000", "", errOutOfRange}, {"CONF:VOLT:DC -1", "", errOutOfRange},
			{"CONF?", `re:^"VOLT .*"$`, 0},
			{"VOLT:DC:RANG 0.1", "", 0}, {"VOLT:DC:RANG:AUTO?", "0", 0},
			{"SENS:VOLT:DC:RANG:UPP 100", "", 0}, {"SENSe:VOLTage:DC:RANGe?", "+1.00000000E+02", 0},
			{"VOLT:DC:RANG:AUTO ON", "", 0}, {"VOLT:DC:RANG:AUTO OFF", "", 0}, {"VOLT:DC:RANG:AUTO ONCE", "", 0},
			{"VOLT:DC:RANG:AUTO MAYBE", "", errIllegalValue},
			{"VOLT:DC:NPLC 1", "", 0}, {"VOLT:DC:NPLC?", "+1.00000000E+00", 0},
			{"VOLT:DC:NPLC 5", "", 0}, {"VOLT:NPLC?", "+1.00000000E+01", 0},
			{"VOLT:DC:NPLC 0.05", "", 0}, {"VOLT:DC:NPLC?", "+2.00000000E-01", 0},
			{"sense:voltage:dc:nplcycles 100", "", 0}, {"volt:dc:nplc?", "+1.00000000E+02", 0},
			{"VOLT:DC:NPLC MIN", "", 0}, {"VOLT:DC:NPLC?", "+2.00000000E-02", 0},
			{"VOLT:DC:NPLC 200", "", errOutOfRange}, {"VOLT:DC:NPLC abc", "", errDataType},
			{"VOLT:DC:NPLC", "", errMissingParam}, {"VOLT:DC:NPLC 1,2", "", errParamNotAllowed},
			// Relative path: NPLC then RANG continue VOLT:DC.
			{"VOLT:DC:NPLC 1;RANG 10", "", 0}, {"VOLT:DC:NPLC 1;RANG?", "+1.00000000E+01", 0},
			{"SAMP:COUN 3", "", 0}, {"SAMP:COUN?", "3", 0}, {"SAMPle:COUNt 2;COUN?", "2", 0},
			{"SAMP:COUN 0", "", errOutOfRange}, {"SAMP:COUN 1001", "", errOutOfRange}, {"SAMP:COUN 2.5", "", errOutOfRange},
			{"READ?", "re:^" + nr3re.String()[1:len(nr3re.String())-1] + "," + nr3re.String()[1:len(nr3re.String())-1] + "$", 0},
			{"READ? 5", "", errParamNotAllowed},
			{"SAMP:COUN 1", "", 0},
			{"MEAS:VOLT:DC?", nr3, 0}, {"MEASure?", nr3, 0}, {"MEAS:VOLT? 10", nr3, 0}, {"MEAS:DC?", nr3, 0},
			{"INIT;FETC?", nr3, 0}, {"INITiate:IMMediate", "", 0}, {"FETCh?", nr3, 0}, {"FETC:VOLT:DC?", nr3, 0},
			{"ABOR", "", 0}, {"*RST", "", 0}, {"FETC?", "", errDataStale}, {"VOLT:DC:NPLC?", "+1.00000000E+01", 0},
			{"CURR 1", "", errUndefHeader},
		}...),
		NameSupply: append(common(IDNSupply), []step{
			{"INST:NSEL 2", "", 0}, {"INST:NSEL?", "2", 0}, {"INSTrument:NSELect 1", "", 0},
			{"INST:NSEL 3", "", errOutOfRange}, {"INST CH2", "", 0}, {"INST?", "CH2", 0},
			{"INST:SEL OUT1", "", 0}, {"INST:SEL?", "CH1", 0}, {"INST CH9", "", errIllegalValue},
			{"VOLT 5", "", 0}, {"VOLT?", "+5.00000000E+00", 0}, {"SOUR:VOLT 6", "", 0}, {"VOLT?", "+6.00000000E+00", 0},
			{"SOURce:VOLTage:LEVel:IMMediate:AMPLitude 7", "", 0}, {"VOLT:LEV:IMM:AMPL?", "+7.00000000E+00", 0},
			{"VOLT:LEV 1.2345678", "", 0}, {"VOLT?", "+1.23500000E+00", 0},
			{"VOLT 500mV", "", 0}, {"VOLT?", "+5.00000000E-01", 0},
			{"SOUR2:VOLT 3", "", 0}, {"SOUR2:VOLT?", "+3.00000000E+00", 0}, {"INST:NSEL 2;:VOLT?", "+3.00000000E+00", 0},
			{"INST:NSEL 1", "", 0}, {"SOUR3:VOLT 1", "", errSuffixRange},
			{"VOLT -1", "", errOutOfRange}, {"VOLT 41", "", errOutOfRange}, {"VOLT MAX", "", 0},
			{"VOLT? MAX", "+4.00000000E+01", 0}, {"VOLT? MIN", "+0.00000000E+00", 0}, {"VOLT MIN", "", 0},
			{"VOLT", "", errMissingParam}, {"VOLT abc", "", errDataType},
			{"CURR 0.01", "", 0}, {"CURR?", "+1.00000000E-02", 0}, {"SOUR1:CURR 0.02", "", 0}, {"CURR?", "+2.00000000E-02", 0},
			{"CURR 5", "", errOutOfRange}, {"SOUR2:CURR:LEV:IMM:AMPL 0.05", "", 0}, {"SOUR2:CURR?", "+5.00000000E-02", 0},
			{"OUTP ON", "", 0}, {"OUTP?", "1", 0}, {"OUTP OFF", "", 0}, {"OUTP?", "0", 0}, {"OUTP 1", "", 0},
			{"OUTP 0", "", 0}, {"OUTP2 ON", "", 0}, {"OUTP2?", "1", 0}, {"OUTPut2:STATe OFF", "", 0}, {"OUTP2:STAT?", "0", 0},
			{"OUTP3 ON", "", errSuffixRange}, {"OUTP MAYBE", "", errIllegalValue},
			{"MEAS:VOLT?", nr3, 0}, {"MEAS:CURR?", nr3, 0}, {"MEASure:SCALar:VOLTage:DC?", nr3, 0}, {"MEAS:SCAL:CURR:DC?", nr3, 0},
			// The SCPI path rule: after INST:NSEL the path is INST, so a
			// following VOLT needs ";:" (SCPI-99; IEEE 488.2).
			{"INST:NSEL 1;VOLT 5", "", errUndefHeader}, {"INST:NSEL 1;:VOLT 5", "", 0},
			{"VOLT 1;CURR 0.1", "", 0}, {"*RST", "", 0}, {"VOLT?;CURR?;OUTP?", "+0.00000000E+00;+1.00000000E-01;0", 0},
		}...),
		NameSource: append(common(IDNSource), []step{
			{"SOUR1:VOLT -5", "", 0}, {"SOUR1:VOLT?", "-5.00000000E+00", 0}, {"SOUR3:VOLT 1", "", 0},
			{"INST:NSEL 3;:VOLT?", "+1.00000000E+00", 0}, {"SOUR4:VOLT 1", "", errSuffixRange},
			{"CURR 0.1", "", errUndefHeader}, {"VOLT 30", "", errOutOfRange}, {"VOLT -25", "", 0},
			{"OUTP3 ON", "", 0}, {"OUTP3?", "1", 0}, {"MEAS:VOLT?", nr3, 0}, {"MEAS:CURR?", nr3, 0},
			{"OUTP4 ON", "", errSuffixRange}, {"*RST", "", 0}, {"OUTP1?;OUTP2?;OUTP3?", "0;0;0", 0},
		}...),
		NameSwitch: append(common(IDNSwitch), []step{
			{"ROUT:CLOS (@101)", "", 0}, {"ROUT:CLOS? (@101)", "1", 0}, {"ROUT:CLOS? (@101,102)", "1,0", 0},
			{"ROUT:OPEN (@101)", "", 0}, {"ROUT:OPEN? (@101)", "1", 0}, {"ROUT:CLOS (@101:103)", "", 0},
			{"ROUT:CLOS:STAT?", "(@101,102,103)", 0}, {"ROUT:OPEN:ALL", "", 0}, {"ROUT:CLOS:STAT?", "(@)", 0},
			{"ROUTe:CLOSe (@201)", "", 0}, {"route:close? (@201)", "1", 0}, {"ROUT:OPEN (@201);CLOS? (@201)", "0", 0},
			{"ROUT:CLOS (@150)", "", errOutOfRange}, {"ROUT:CLOS (@abc)", "", errInvalidExpr},
			{"ROUT:CLOS 101", "", errInvalidExpr}, {"ROUT:CLOS", "", errMissingParam},
			{"ROUT:CLOS? (@1x", "", -102}, {"*RST", "", 0}, {"ROUT:CLOS:STAT?", "(@)", 0},
		}...),
		NameChamber: append(common(IDNChamber), []step{
			{"SOUR:TEMP 40", "", 0}, {"SOUR:TEMP?", "+4.00000000E+01", 0}, {"TEMP 30", "", 0}, {"TEMP?", "+3.00000000E+01", 0},
			{"SOURce:TEMPerature:SPOint 35", "", 0}, {"SOUR:TEMP:SPO?", "+3.50000000E+01", 0},
			{"MEAS:TEMP?", nr3, 0}, {"MEASure:SCALar:TEMPerature?", nr3, 0}, {"SOUR:TEMP 200", "", errOutOfRange},
			{"SOUR:TEMP 40;TEMP?", "+4.00000000E+01", 0}, {"SOUR:TEMP 40 CEL", "", 0}, {"*RST", "", 0},
			{"SOUR:TEMP?", "+2.50000000E+01", 0},
		}...),
	}
	clients := map[string]*client{NameDMM: tb.dmm, NameSupply: tb.psu, NameSource: tb.src, NameSwitch: tb.mux, NameChamber: tb.chamber}
	for name, steps := range table {
		t.Run(name, func(t *testing.T) {
			c := clients[name]
			for _, st := range steps {
				if st.resp != "" {
					got := c.query(st.line)
					if re, ok := strings.CutPrefix(st.resp, "re:"); ok {
						if !regexp.MustCompile(re).MatchString(got) {
							t.Errorf("%s %q: response %q does not match %s", name, st.line, got, re)
						}
					} else if got != st.resp {
						t.Errorf("%s %q: response %q, want %q", name, st.line, got, st.resp)
					}
				} else {
					c.send(st.line)
				}
				e := c.query("SYST:ERR?")
				code, _ := strconv.Atoi(e[:strings.IndexByte(e, ',')])
				if code != st.code {
					t.Errorf("%s %q: error %s, want code %d", name, st.line, e, st.code)
				}
				c.query("*CLS;*OPC?")
			}
		})
	}
}

// TestStatusAndQueueOverTCP: −1xx sets ESR bit 5 (32), −2xx bit 4 (16); the
// STB has bit 2 (4) while the queue holds errors; the queue overflows to
// −350; *RST leaves it, *CLS clears it (IEEE 488.2; SCPI-99).
func TestStatusAndQueueOverTCP(t *testing.T) {
	tb := startBench(t, Config{})
	c := tb.psu
	c.query("*CLS;*OPC?")
	c.send("BOGUS")
	c.send("VOLT 99")
	if got := c.query("*STB?"); got != "4" {
		t.Errorf("STB %s, want 4 (error queue not empty)", got)
	}
	if got := c.query("*ESR?"); got != "48" {
		t.Errorf("ESR %s, want 48 (CME 32 + EXE 16)", got)
	}
	for i := 0; i < 12; i++ {
		c.send("BOGUS" + strconv.Itoa(i))
	}
	c.send("*RST")
	if got := c.query("SYST:ERR:COUN?"); got != "10" {
		t.Errorf("queue holds %s after 14 errors and *RST, want 10", got)
	}
	var last string
	for i := 0; i < 10; i++ {
		last = c.query("SYST:ERR?")
	}
	if !strings.HasPrefix(last, "-350,") {
		t.Errorf("10th entry %s, want -350 Queue overflow", last)
	}
	c.send("BOGUS")
	c.send("*CLS")
	c.noError()
	c.send("*ESE 32;*SRE 32")
	c.send("BOGUS")
	if got := c.query("*STB?"); got != "100" {
		t.Errorf("STB %s, want 100 (queue 4 + ESB 32 + MSS 64)", got)
	}
}

// FuzzExecute feeds arbitrary lines to each instrument's parser: it must
// never panic, and a response never contains a line terminator outside a
// definite-length block (IEEE 488.2 §8.7.9: a block's bytes are counted,
// not terminated).
func FuzzExecute(f *testing.F) {
	for _, s := range []string{
		"*IDN?", "CONF:VOLT:DC 1;:VOLT:DC:NPLC 0.02;:SAMP:COUN 3;:READ?", "INST:NSEL 2;:VOLT 5;:OUTP ON",
		"ROUT:CLOS (@101:103,201)", "SOUR:TEMP 85;:MEAS:TEMP?", "SOUR2:VOLT? MAX", "\"abc;def\"", "(@(@",
		"VOLT 1e308", "OUTP99999999999999999999 ON", "*ESE 1e99", ":::", ";;;", "MEAS:VOLT:DC? 0.1,1e-9",
		"INIT;*OPC?;FETC?", "VOLT:DC:RANG:AUTO ONCE", "SOUR1:VOLT -25;:OUTP1 ON",
		"SOUR2:FREQ 1KHZ;:SOUR2:VOLT 1;:OUTP2 ON", "OUTP1:LOAD INF;:SOUR1:VOLT:UNIT VRMS",
		"SWE:POIN 16;:FORM:DATA INT,16;:FORM:BORD SWAP;:INIT;:TRAC:DATA? CH1", "FORM REAL,32;:INIT;:TRAC? CH2;*OPC?",
		"ROUT:CLOS (@2);:CONF:VOLT:AC 1;:DET:BAND 20;:READ?",
	} {
		for i := 0; i < 5; i++ {
			f.Add(uint8(i), s)
		}
	}
	clk := NewManualClock()
	b, err := New(Config{Clock: clk})
	if err != nil {
		f.Fatal(err)
	}
	f.Cleanup(func() { _ = b.Close() })
	ctx := context.Background()
	f.Fuzz(func(t *testing.T, which uint8, line string) {
		in := b.insts[int(which)%len(b.insts)]
		// Keep integrations short so the fuzzer spends its time parsing.
		b.dmmDev.nplc = 0.02
		resp, _ := in.execute(ctx, line)
		if strings.ContainsAny(withoutBlocks(resp), "\n") {
			t.Fatalf("response %q contains a terminator outside a block", resp)
		}
		clk.Advance(1e6)
	})
}

// withoutBlocks removes the definite-length blocks (#<n><len><data>) that
// start a response unit (the start of the response or after ';').
func withoutBlocks(s string) string {
	var out strings.Builder
	for i := 0; i < len(s); {
		if s[i] == '#' && (i == 0 || s[i-1] == ';') && i+1 < len(s) && s[i+1] >= '1' && s[i+1] <= '9' {
			n := int(s[i+1] - '0')
			if i+2+n <= len(s) {
				if l, err := strconv.Atoi(s[i+2 : i+2+n]); err == nil && l >= 0 && i+2+n+l <= len(s) {
					i += 2 + n + l
					continue
				}
			}
		}
		out.WriteByte(s[i])
		i++
	}
	return out.String()
}
