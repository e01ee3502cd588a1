package instrument_test

import (
	"context"
	"encoding/binary"
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"

	"nullbench/instrument"
	pb "nullbench/instrument/instrumenttest"
)

// block (driver_freq_test.go) writes an IEEE 488.2 §8.7.9 definite-length block.

// meterProfile is the built-in dmm profile with its [meter] table
// replaced by the given keys.
func meterProfile(t *testing.T, keys string) *instrument.Profile {
	t.Helper()
	p, err := instrument.ParseProfile([]byte(`name = "m"
[meter]
configure = "CONF:VOLT:DC {range}"
nplc = "VOLT:DC:NPLC {nplc}"
gain_ppm = 15
offset_ppm_of_range = 4
`+keys), "m.toml")
	if err != nil {
		t.Fatal(err)
	}
	return p
}

var configure10 = []pb.Exchange{
	{Comment: "select DC volts, 10 V range", Send: "CONF:VOLT:DC 10"}, noErr,
	{Comment: "integrate 1 PLC", Send: "VOLT:DC:NPLC 1"}, noErr,
}

// Each way of getting n readings goes on the wire as the profile says
// (SCPI-99 vol. 2 SAMPle:COUNt, READ?, INITiate, FETCh?, TRACe:DATA?,
// FORMat; IEEE 488.2 *TRG §10.37 and *OPC? §12.5.3), and returns the
// values in order.
func TestMeterReadingModes(t *testing.T) {
	le := binary.LittleEndian
	be := binary.BigEndian
	for _, tc := range []struct {
		name, keys string
		script     []pb.Exchange // after configuring
		format     []pb.Exchange // sent by ConfigureDCVolts after nplc
	}{
		{name: "one per trigger, count left out", keys: `read = "READ?"`, script: []pb.Exchange{
			{Send: "READ?", Reply: "+1.0E-03"}, {Send: "READ?", Reply: "+2.0E-03"}, {Send: "READ?", Reply: "+3.0E-03"},
		}},
		{name: "one per trigger, said explicitly", keys: "one_per_trigger = true\nread = \"MEAS:VOLT:DC?\"", script: []pb.Exchange{
			{Send: "MEAS:VOLT:DC?", Reply: "1E-3"}, {Send: "MEAS:VOLT:DC?", Reply: "2E-3"}, {Send: "MEAS:VOLT:DC?", Reply: "3E-3"},
		}},
		{name: "count and read", keys: "count = \"SAMP:COUN {count}\"\nread = \"READ?\"", script: []pb.Exchange{
			{Send: "SAMP:COUN 3"}, noErr, {Send: "READ?", Reply: "+1.0E-03,+2.0E-03,+3.0E-03"},
		}},
		{name: "init then fetch", keys: "count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\nfetch = \"FETC?\"", script: []pb.Exchange{
			{Send: "SAMP:COUN 3"}, noErr, {Send: "INIT"}, noErr, {Send: "FETC?", Reply: "1E-3,2E-3,3E-3"},
		}},
		{name: "init, trigger, fetch", keys: "count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\ntrigger = \"*TRG\"\nfetch = \"FETC?\"", script: []pb.Exchange{
			{Send: "SAMP:COUN 3"}, noErr, {Send: "INIT"}, noErr, {Send: "*TRG"}, noErr, {Send: "FETC?", Reply: "1E-3,2E-3,3E-3"},
		}},
		{name: "init, *OPC?, fetch", keys: "count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\nsync = \"*OPC?\"\nfetch = \"FETC?\"", script: []pb.Exchange{
			{Send: "SAMP:COUN 3"}, noErr, {Send: "INIT"}, noErr, {Send: "*OPC?", Reply: "1"}, {Send: "FETC?", Reply: "1E-3,2E-3,3E-3"},
		}},
		{name: "init and fetch, one per trigger", keys: "init = \"INIT\"\nsync = \"*OPC?\"\nfetch = \"FETC?\"", script: []pb.Exchange{
			{Send: "INIT"}, noErr, {Send: "*OPC?", Reply: "1"}, {Send: "FETC?", Reply: "1E-3"},
			{Send: "INIT"}, noErr, {Send: "*OPC?", Reply: "1"}, {Send: "FETC?", Reply: "2E-3"},
			{Send: "INIT"}, noErr, {Send: "*OPC?", Reply: "1"}, {Send: "FETC?", Reply: "3E-3"},
		}},
		{name: "buffer, ASCII", keys: "format = \"FORM:DATA ASC\"\ncount = \"SAMP:COUN {count}\"\ninit = \"INIT\"\nfetch = \"TRAC:DATA?\"\ndata = \"ascii\"",
			format: []pb.Exchange{{Send: "FORM:DATA ASC"}, noErr},
			script: []pb.Exchange{{Send: "SAMP:COUN 3"}, noErr, {Send: "INIT"}, noErr, {Send: "TRAC:DATA?", Reply: "1E-3,2E-3,3E-3"}}},
		{name: "buffer, real32 little-endian", keys: "format = \"FORM:DATA REAL,32;:FORM:BORD SWAP\"\ncount = \"SAMP:COUN {count}\"\ninit = \"INIT\"\nfetch = \"TRAC:DATA?\"\ndata = \"real32\"\nbyte_order = \"little\"",
			format: []pb.Exchange{{Send: "FORM:DATA REAL,32;:FORM:BORD SWAP"}, noErr},
			script: []pb.Exchange{{Send: "SAMP:COUN 3"}, noErr, {Send: "INIT"}, noErr,
				{Send: "TRAC:DATA?", Reply: block(instrument.EncodeWaveform([]float64{1e-3, 2e-3, 3e-3}, instrument.WaveReal32, le, 0, 0))}}},
		{name: "buffer, real32 big-endian", keys: "count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\nfetch = \"TRAC:DATA?\"\ndata = \"real32\"\nbyte_order = \"big\"",
			script: []pb.Exchange{{Send: "SAMP:COUN 3"}, noErr, {Send: "INIT"}, noErr,
				{Send: "TRAC:DATA?", Reply: block(instrument.EncodeWaveform([]float64{1e-3, 2e-3, 3e-3}, instrument.WaveReal32, be, 0, 0))}}},
		{name: "buffer, real64 little-endian", keys: "count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\nfetch = \"TRAC:DATA?\"\ndata = \"real64\"\nbyte_order = \"little\"",
			script: []pb.Exchange{{Send: "SAMP:COUN 3"}, noErr, {Send: "INIT"}, noErr,
				{Send: "TRAC:DATA?", Reply: block(instrument.EncodeWaveform([]float64{1e-3, 2e-3, 3e-3}, instrument.WaveReal64, le, 0, 0))}}},
		{name: "buffer, real64 big-endian (default)", keys: "count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\nfetch = \"TRAC:DATA?\"\ndata = \"real64\"",
			script: []pb.Exchange{{Send: "SAMP:COUN 3"}, noErr, {Send: "INIT"}, noErr,
				{Send: "TRAC:DATA?", Reply: block(instrument.EncodeWaveform([]float64{1e-3, 2e-3, 3e-3}, instrument.WaveReal64, be, 0, 0))}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ctx := context.Background()
			p := meterProfile(t, tc.keys)
			script := append(append(append([]pb.Exchange{}, configure10...), tc.format...), tc.script...)
			play := pb.NewPlayback(t, script)
			m, err := instrument.NewMeter(instrument.NewSession("dmm", play, p.SessionOptions()), p, noSettle)
			if err != nil {
				t.Fatal(err)
			}
			if err := m.ConfigureDCVolts(ctx, 10, 1); err != nil {
				t.Fatal(err)
			}
			v, err := m.ReadN(ctx, 3)
			if err != nil {
				t.Fatal(err)
			}
			// real32 keeps about 7 significant digits (IEEE 754 binary32).
			for i, want := range []float64{1e-3, 2e-3, 3e-3} {
				if math.Abs(v[i]-want) > 1e-7*want {
					t.Errorf("reading %d = %v, want %v", i+1, v[i], want)
				}
			}
			if rest := play.Remaining(); len(rest) > 0 {
				t.Errorf("not sent: %v", rest)
			}
		})
	}
}

// The SCPI overload value ±9.9E37 and not-a-number 9.91E37 (SCPI-99 vol. 1
// §7.2.1.5), in ASCII or as binary reals (9.9E37 as the nearest binary32
// in REAL,32), are never returned as numbers: each is an error naming the
// instrument, the command and the meaning.
func TestMeterOverloadAndNotANumber(t *testing.T) {
	le := binary.LittleEndian
	blockKeys := func(data string) string {
		return "count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\nfetch = \"TRAC:DATA?\"\ndata = \"" + data + "\"\nbyte_order = \"little\""
	}
	for _, tc := range []struct {
		name, keys, cmd, reply string
		want                   error
		meaning                string
	}{
		{"ascii overload", "count = \"SAMP:COUN {count}\"\nread = \"READ?\"", "READ?", "+1.0E-03,+9.90000000E+37", instrument.ErrOverload, "the 10 V range is too small"},
		{"ascii negative overload", "count = \"SAMP:COUN {count}\"\nread = \"READ?\"", "READ?", "-9.9E37,+1.0E-03", instrument.ErrOverload, "the 10 V range is too small"},
		{"ascii not a number", "count = \"SAMP:COUN {count}\"\nread = \"READ?\"", "READ?", "+1.0E-03,+9.91E37", instrument.ErrNotANumber, "the meter took no reading"},
		{"real32 overload", blockKeys("real32"), "TRAC:DATA?", block(instrument.EncodeWaveform([]float64{1e-3, 9.9e37}, instrument.WaveReal32, le, 0, 0)), instrument.ErrOverload, "range is too small"},
		{"real32 not a number", blockKeys("real32"), "TRAC:DATA?", block(instrument.EncodeWaveform([]float64{9.91e37, 1e-3}, instrument.WaveReal32, le, 0, 0)), instrument.ErrNotANumber, "no reading"},
		{"real64 overload", blockKeys("real64"), "TRAC:DATA?", block(instrument.EncodeWaveform([]float64{-9.9e37, 1e-3}, instrument.WaveReal64, le, 0, 0)), instrument.ErrOverload, "range is too small"},
		{"real64 not a number", blockKeys("real64"), "TRAC:DATA?", block(instrument.EncodeWaveform([]float64{1e-3, 9.91e37}, instrument.WaveReal64, le, 0, 0)), instrument.ErrNotANumber, "no reading"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ctx := context.Background()
			p := meterProfile(t, tc.keys)
			script := append([]pb.Exchange{}, configure10...)
			script = append(script, pb.Exchange{Send: "SAMP:COUN 2"}, noErr)
			if p.Meter.Fetches() {
				script = append(script, pb.Exchange{Send: "INIT"}, noErr)
			}
			script = append(script, pb.Exchange{Send: tc.cmd, Reply: tc.reply})
			m, err := instrument.NewMeter(instrument.NewSession("dmm", pb.NewPlayback(t, script), p.SessionOptions()), p, noSettle)
			if err != nil {
				t.Fatal(err)
			}
			if err := m.ConfigureDCVolts(ctx, 10, 1); err != nil {
				t.Fatal(err)
			}
			v, err := m.ReadN(ctx, 2)
			if !errors.Is(err, tc.want) {
				t.Fatalf("ReadN = %v, %v; want %v", v, err, tc.want)
			}
			for _, s := range []string{"dmm meter", strconv.Quote(tc.cmd), tc.meaning} {
				if !strings.Contains(err.Error(), s) {
					t.Errorf("error %q does not say %q", err, s)
				}
			}
			finiteOnes := 0
			for _, x := range v {
				if !math.IsNaN(x) && !math.IsInf(x, 0) {
					finiteOnes++
				}
			}
			if finiteOnes != 1 {
				t.Errorf("readings %v: want the code as ±Inf or NaN beside one real reading", v)
			}
		})
	}
}

// A sync query that does not answer 1, a fetch with the wrong number of
// readings, and a block that is not whole samples are errors naming the
// command.
func TestMeterReadingFaults(t *testing.T) {
	for _, tc := range []struct {
		name, keys string
		script     []pb.Exchange
		n          int
		want       string
	}{
		{"sync answers 0", "init = \"INIT\"\nsync = \"*OPC?\"\nfetch = \"FETC?\"",
			[]pb.Exchange{{Send: "INIT"}, noErr, {Send: "*OPC?", Reply: "0"}}, 1, `"*OPC?"`},
		{"one per trigger gets two", `read = "READ?"`,
			[]pb.Exchange{{Send: "READ?", Reply: "1E-3,2E-3"}}, 2, `"READ?" returned 2 readings, want 1`},
		{"counted gets one", "count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\nfetch = \"FETC?\"",
			[]pb.Exchange{{Send: "SAMP:COUN 2"}, noErr, {Send: "INIT"}, noErr, {Send: "FETC?", Reply: "1E-3"}}, 2, `"FETC?" returned 1 readings, asked for 2 with "SAMP:COUN 2"`},
		{"ragged real32 block", "init = \"INIT\"\nfetch = \"TRAC:DATA?\"\ndata = \"real32\"",
			[]pb.Exchange{{Send: "INIT"}, noErr, {Send: "TRAC:DATA?", Reply: block([]byte{1, 2, 3, 4, 5})}}, 1, "real32 record of 5 bytes"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ctx := context.Background()
			p := meterProfile(t, tc.keys)
			m, err := instrument.NewMeter(instrument.NewSession("dmm", pb.NewPlayback(t, tc.script), p.SessionOptions()), p, noSettle)
			if err != nil {
				t.Fatal(err)
			}
			_, err = m.ReadN(ctx, tc.n)
			// The meter is named first: "dmm meter: ..." for the driver's
			// own errors, "dmm (meter): ..." for a session error it tags.
			if err == nil || !strings.Contains(err.Error(), tc.want) ||
				!strings.HasPrefix(err.Error(), "dmm meter") && !strings.HasPrefix(err.Error(), "dmm (meter)") {
				t.Fatalf("ReadN: %v; want %q", err, tc.want)
			}
		})
	}
}

// A binary block header is the instrument's word: a header announcing
// more than the readings asked for (n × 8 bytes plus 64 bytes of slack)
// is refused before anything is allocated for it, with an error naming
// the meter and the command. The length digits follow the definite-length
// block header of IEEE 488.2 §8.7.9; only the header is sent, so reading
// the announced data would fail differently.
func TestMeterRefusesOversizedBlockHeader(t *testing.T) {
	for _, tc := range []struct {
		name, data string
		n          int
		announced  string
		allowed    string
	}{
		// 60 000 000 is below the session's 64 MiB default, so only the
		// meter's own cap refuses it.
		{"one real64 reading, 60 MB announced", "real64", 1, "60000000", "72"},
		{"three real32 readings, one byte past the slack", "real32", 3, "89", "88"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ctx := context.Background()
			p := meterProfile(t, "count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\nfetch = \"TRAC:DATA?\"\ndata = \""+tc.data+"\"")
			header := "#" + strconv.Itoa(len(tc.announced)) + tc.announced
			script := []pb.Exchange{{Send: "SAMP:COUN " + strconv.Itoa(tc.n)}, noErr, {Send: "INIT"}, noErr, {Send: "TRAC:DATA?", Reply: header}}
			m, err := instrument.NewMeter(instrument.NewSession("dmm", pb.NewPlayback(t, script), p.SessionOptions()), p, noSettle)
			if err != nil {
				t.Fatal(err)
			}
			v, err := m.ReadN(ctx, tc.n)
			if !errors.Is(err, instrument.ErrBadResponse) {
				t.Fatalf("ReadN = %v, %v; want ErrBadResponse", v, err)
			}
			for _, s := range []string{"dmm", "meter", `"TRAC:DATA?"`, "announces " + tc.announced + " bytes", "the " + tc.allowed + " allowed"} {
				if !strings.Contains(err.Error(), s) {
					t.Errorf("error %q does not say %q", err, s)
				}
			}
		})
	}
}

// The meter keys are checked with the file and key named: each mode's
// needs, contradictions between keys, and the data format.
func TestMeterProfileKeys(t *testing.T) {
	for _, tc := range []struct {
		keys, want string
	}{
		{``, `key meter.read: missing`},
		{"read = \"READ?\"\ninit = \"INIT\"\nfetch = \"FETC?\"", `key meter.read: give either read`},
		{"init = \"INIT\"", `key meter.fetch: missing`},
		{"fetch = \"FETC?\"", `key meter.init: missing`},
		{"read = \"READ?\"\ntrigger = \"*TRG\"", `key meter.trigger: trigger is sent after init`},
		{"read = \"READ?\"\nsync = \"*OPC?\"", `key meter.sync: sync waits for readings started by init`},
		{"init = \"INIT\"\nsync = \"*OPC\"\nfetch = \"FETC?\"", `key meter.sync: "*OPC" is not a query`},
		{"init = \"INIT\"\nfetch = \"FETC\"", `key meter.fetch: "FETC" is not a query`},
		{"read = \"READ\"", `key meter.read: "READ" is not a query`},
		{"count = \"SAMP:COUN 5\"\nread = \"READ?\"", `key meter.count: template "SAMP:COUN 5" must contain {count}`},
		{"count = \"SAMP:COUN {count}\"\none_per_trigger = true\nread = \"READ?\"", `key meter.one_per_trigger: true, and a count template is given too`},
		{"one_per_trigger = false\nread = \"READ?\"", `key meter.one_per_trigger: false, but there is no count template`},
		{"read = \"READ?\"\ndata = \"real16\"", `key meter.data: "real16": want "ascii", "real32" or "real64"`},
		{"read = \"READ?\"\ndata = \"real32\"\nbyte_order = \"middle\"", `key meter.byte_order: "middle": want "big"`},
		{"read = \"READ?\"\nbyte_order = \"little\"", `key meter.byte_order: byte_order is for binary readings`},
		{"init = \"INIT {range}\"\nfetch = \"FETC?\"", `key meter.init: placeholder {range} has no meaning here`},
		{"read = \"READ?\"\nformat = \"FORM {count}\"", `key meter.format: placeholder {count} has no meaning here`},
	} {
		_, err := instrument.ParseProfile([]byte(`name = "m"
[meter]
configure = "CONF:VOLT:DC {range}"
nplc = "VOLT:DC:NPLC {nplc}"
gain_ppm = 15
offset_ppm_of_range = 4
`+tc.keys), "m.toml")
		if err == nil || !strings.Contains(err.Error(), "profile m.toml:") || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("keys %q: error %v, want %q", tc.keys, err, tc.want)
		}
	}
	// What each mode reads as.
	for _, tc := range []struct {
		keys              string
		counted, fetches  bool
		readingsKey, data string
	}{
		{`read = "READ?"`, false, false, "meter.read", "ascii"},
		{"count = \"SAMP:COUN {count}\"\nread = \"READ?\"", true, false, "meter.read", "ascii"},
		{"count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\nfetch = \"TRAC:DATA?\"\ndata = \"real32\"", true, true, "meter.fetch", "real32"},
	} {
		m := meterProfile(t, tc.keys).Meter
		if m.Counted() != tc.counted || m.Fetches() != tc.fetches || m.ReadingsKey() != tc.readingsKey || m.Data != tc.data || m.ByteOrder != "big" {
			t.Errorf("keys %q: counted %v fetches %v key %s data %s order %s", tc.keys, m.Counted(), m.Fetches(), m.ReadingsKey(), m.Data, m.ByteOrder)
		}
	}
}
