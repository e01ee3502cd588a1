package instrument_test

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"

	"nullbench/instrument"
	pb "nullbench/instrument/instrumenttest"
)

// digitizerProfile is the built-in digitizer profile with the transfer
// format, byte order and the command selecting them replaced.
func digitizerProfile(t testing.TB, data, order, format string) *instrument.Profile {
	t.Helper()
	src, err := os.ReadFile("profiles/digitizer.toml")
	if err != nil {
		t.Fatal(err)
	}
	s := string(src)
	for _, r := range [][2]string{
		{`data              = "int16"`, `data = "` + data + `"`},
		{`byte_order        = "little"`, `byte_order = "` + order + `"`},
		{`format            = "FORM:DATA INT,16;:FORM:BORD SWAP"`, `format = "` + format + `"`},
	} {
		if !strings.Contains(s, r[0]) {
			t.Fatalf("built-in digitizer profile has no line %q", r[0])
		}
		s = strings.Replace(s, r[0], r[1], 1)
	}
	p, err := instrument.ParseProfile([]byte(s), "digitizer-"+data+"-"+order+".toml")
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// block wraps data as an IEEE 488.2 §8.7.9 definite-length block.
func block(data []byte) string {
	n := strconv.Itoa(len(data))
	return "#" + strconv.Itoa(len(n)) + n + string(data)
}

func asciiRecord(v []float64) string {
	parts := make([]string, len(v))
	for i, x := range v {
		parts[i] = strconv.FormatFloat(x, 'E', 8, 64)
	}
	return strings.Join(parts, ",")
}

// TestDigitizerDriverFormats plays back one configure and capture per
// transfer format and byte order: ASCII (NR3 list), int16 blocks with a
// scale and offset (big-endian = FORMat:BORDer NORMal, little = SWAPped,
// SCPI-99 FORMat), real32 blocks. The record holds bytes equal to LF and CR
// inside the block, which only a length-counted read gets right.
func TestDigitizerDriverFormats(t *testing.T) {
	// Exact in int16 steps: 2^-14 V on ch1 (2 V full scale), 2^-20 V on
	// ch2 about a 2^-9 V offset.
	ch1 := []float64{0.5, -0.25, 0.125, 0.0009765625, -1.0009765625}
	ch2 := []float64{0.009765625, -0.01953125, 0.0029296875, 0.0048828125, -0.0107421875}
	const scale1, scale2, off2 = 1.0 / (1 << 14), 1.0 / (1 << 20), 0.001953125
	enc := func(v []float64, kind instrument.WaveformKind, order binary.ByteOrder, scale, off float64) string {
		return block(instrument.EncodeWaveform(v, kind, order, scale, off))
	}
	cases := []struct {
		data, order, format string
		kind                instrument.WaveformKind
		bo                  binary.ByteOrder
	}{
		{"ascii", "big", "FORM:DATA ASC", instrument.WaveASCII, binary.BigEndian},
		{"int16", "big", "FORM:DATA INT,16;:FORM:BORD NORM", instrument.WaveInt16, binary.BigEndian},
		{"int16", "little", "FORM:DATA INT,16;:FORM:BORD SWAP", instrument.WaveInt16, binary.LittleEndian},
		{"real32", "big", "FORM:DATA REAL,32;:FORM:BORD NORM", instrument.WaveReal32, binary.BigEndian},
		{"real32", "little", "FORM:DATA REAL,32;:FORM:BORD SWAP", instrument.WaveReal32, binary.LittleEndian},
	}
	for _, c := range cases {
		t.Run(c.data+"-"+c.order, func(t *testing.T) {
			ctx := context.Background()
			p := digitizerProfile(t, c.data, c.order, c.format)
			script := []pb.Exchange{
				{Comment: "ch1: AC coupling, 2 V range", Send: "INP1:COUP AC;:SENS1:VOLT:RANG 2"}, noErr,
				{Comment: "ch2: AC coupling, 0.05 V range", Send: "INP2:COUP AC;:SENS2:VOLT:RANG 0.05"}, noErr,
				{Comment: "5 points", Send: "SWE:POIN 5"}, noErr,
				{Comment: "10 µs interval", Send: "SWE:TINT 1E-05"}, noErr,
				{Comment: "transfer format", Send: c.format}, noErr,
				{Comment: "interval in use", Send: "SWE:TINT?", Reply: "+1.00000000E-05"},
				{Comment: "ch1 range chosen", Send: "SENS1:VOLT:RANG?", Reply: "+2.00000000E+00"},
			}
			if c.kind == instrument.WaveInt16 {
				script = append(script,
					pb.Exchange{Comment: "ch1 volts per code", Send: "SENS1:VOLT:RES?", Reply: strconv.FormatFloat(scale1, 'E', 10, 64)},
					pb.Exchange{Comment: "ch1 offset", Send: "SENS1:VOLT:OFFS?", Reply: "0"})
			}
			script = append(script, pb.Exchange{Comment: "ch2 range chosen", Send: "SENS2:VOLT:RANG?", Reply: "+5.00000000E-02"})
			if c.kind == instrument.WaveInt16 {
				script = append(script,
					pb.Exchange{Comment: "ch2 volts per code", Send: "SENS2:VOLT:RES?", Reply: strconv.FormatFloat(scale2, 'E', 10, 64)},
					pb.Exchange{Comment: "ch2 offset", Send: "SENS2:VOLT:OFFS?", Reply: strconv.FormatFloat(off2, 'E', 10, 64)})
			}
			var r1, r2 string
			switch c.kind {
			case instrument.WaveASCII:
				r1, r2 = asciiRecord(ch1), asciiRecord(ch2)
			case instrument.WaveInt16:
				r1, r2 = enc(ch1, c.kind, c.bo, scale1, 0), enc(ch2, c.kind, c.bo, scale2, off2)
			default:
				r1, r2 = enc(ch1, c.kind, c.bo, 0, 0), enc(ch2, c.kind, c.bo, 0, 0)
			}
			script = append(script,
				pb.Exchange{Comment: "arm", Send: "INIT"}, noErr,
				pb.Exchange{Comment: "wait for the record", Send: "*OPC?", Reply: "1"},
				pb.Exchange{Comment: "fetch ch1", Send: "TRAC:DATA? CH1", Reply: r1},
				pb.Exchange{Comment: "fetch ch2", Send: "TRAC:DATA? CH2", Reply: r2},
			)
			s := session(t, "dig", p, script)
			d, err := instrument.NewDigitizer(s, p, instrument.DriverOptions{OverrideSettle: true})
			if err != nil {
				t.Fatal(err)
			}
			if err := d.Configure(ctx, 1e5, 5, []float64{2, 0.05}); err != nil {
				t.Fatal(err)
			}
			if d.RateHz() != 1e5 {
				t.Errorf("rate %v Hz, want the 1e5 Hz read back", d.RateHz())
			}
			wf, err := d.Capture(ctx)
			if err != nil {
				t.Fatal(err)
			}
			want := [][]float64{ch1, ch2}
			for i, w := range wf {
				if w.RateHz != 1e5 || len(w.Volts) != 5 {
					t.Fatalf("ch%d: %v Hz, %d samples", i+1, w.RateHz, len(w.Volts))
				}
				for k := range w.Volts {
					// int16: exact; real32: float32 rounding (2^-24 relative);
					// ASCII: 9 significant digits.
					if math.Abs(w.Volts[k]-want[i][k]) > 1e-8*math.Max(1, math.Abs(want[i][k])) {
						t.Errorf("ch%d sample %d: %v V, want %v V", i+1, k, w.Volts[k], want[i][k])
					}
				}
			}
		})
	}
}

// TestDigitizerRateReadbackChecked: a rate read back far from the one
// asked is refused as implausible, and Capture then refuses to run.
func TestDigitizerRateReadbackChecked(t *testing.T) {
	ctx := context.Background()
	p := digitizerProfile(t, "ascii", "big", "FORM:DATA ASC")
	s := session(t, "dig", p, []pb.Exchange{
		{Send: "INP1:COUP AC;:SENS1:VOLT:RANG 1"}, noErr,
		{Send: "INP2:COUP AC;:SENS2:VOLT:RANG 1"}, noErr,
		{Send: "SWE:POIN 100"}, noErr,
		{Send: "SWE:TINT 1E-06"}, noErr,
		{Send: "FORM:DATA ASC"}, noErr,
		{Comment: "the instrument kept its 1 ms interval", Send: "SWE:TINT?", Reply: "+1.00000000E-03"},
		{Send: "SENS1:VOLT:RANG?", Reply: "1"},
		{Send: "SENS2:VOLT:RANG?", Reply: "1"},
	})
	d, err := instrument.NewDigitizer(s, p, instrument.DriverOptions{OverrideSettle: true})
	if err != nil {
		t.Fatal(err)
	}
	err = d.Configure(ctx, 1e6, 100, []float64{1, 1})
	if !errors.Is(err, instrument.ErrImplausible) {
		t.Fatalf("Configure with a 1 kHz read-back for 1 MHz: %v, want ErrImplausible", err)
	}
	if _, err := d.Capture(ctx); err == nil {
		t.Error("Capture after a refused Configure ran")
	}
	// Arguments the driver refuses before sending anything.
	for _, bad := range []struct {
		rate float64
		n    int
		r    []float64
	}{{0, 100, []float64{1}}, {1e5, 1, []float64{1}}, {1e5, 300000, []float64{1}}, {1e5, 100, nil}, {1e5, 100, []float64{1, 1, 1}}, {1e5, 100, []float64{-1}}} {
		if err := d.Configure(ctx, bad.rate, bad.n, bad.r); err == nil {
			t.Errorf("Configure(%v, %d, %v) accepted", bad.rate, bad.n, bad.r)
		}
	}
}

// TestGeneratorDriverCommands: SetSine sends the load setting once, then
// function, frequency, unit, amplitude (peak converted to VPP: 2 × peak)
// and offset; SetOutput sends OUTP.
func TestGeneratorDriverCommands(t *testing.T) {
	ctx := context.Background()
	p := builtin(t, "generator")
	s := session(t, "gen", p, []pb.Exchange{
		{Comment: "load: high impedance", Send: "OUTP2:LOAD INF"}, noErr,
		{Comment: "sine", Send: "SOUR2:FUNC SIN"}, noErr,
		{Comment: "1 kHz", Send: "SOUR2:FREQ 1000"}, noErr,
		{Comment: "amplitude unit", Send: "SOUR2:VOLT:UNIT VPP"}, noErr,
		{Comment: "0.25 V peak = 0.5 Vpp", Send: "SOUR2:VOLT 0.5"}, noErr,
		{Comment: "no offset", Send: "SOUR2:VOLT:OFFS 0"}, noErr,
		{Comment: "output on", Send: "OUTP2 ON"}, noErr,
		{Comment: "sine again: no load this time", Send: "SOUR2:FUNC SIN"}, noErr,
		{Send: "SOUR2:FREQ 60"}, noErr,
		{Send: "SOUR2:VOLT:UNIT VPP"}, noErr,
		{Send: "SOUR2:VOLT 2"}, noErr,
		{Send: "SOUR2:VOLT:OFFS -0.5"}, noErr,
		{Comment: "output off", Send: "OUTP2 OFF"}, noErr,
	})
	g, err := instrument.NewGenerator(s, p, "2", instrument.DriverOptions{OverrideSettle: true})
	if err != nil {
		t.Fatal(err)
	}
	if err := g.SetSine(ctx, 1000, 0.25, 0); err != nil {
		t.Fatal(err)
	}
	if err := g.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	if err := g.SetSine(ctx, 60, 1, -0.5); err != nil {
		t.Fatal(err)
	}
	if err := g.SetOutput(ctx, false); err != nil {
		t.Fatal(err)
	}
	if pk, hz := g.Limits(); pk != 10 || hz != 1e7 {
		t.Errorf("limits %v V, %v Hz", pk, hz)
	}
	if _, err := instrument.NewGenerator(s, p, "4", instrument.DriverOptions{}); err == nil {
		t.Error("output 4 accepted by a three-output profile")
	}
	for _, bad := range [][3]float64{{0, 1, 0}, {-5, 1, 0}, {math.NaN(), 1, 0}, {1e3, -1, 0}, {1e3, 6, 5}, {1e3, 1, math.Inf(1)}} {
		if err := g.SetSine(ctx, bad[0], bad[1], bad[2]); err == nil {
			t.Errorf("SetSine(%v) accepted", bad)
		}
	}
}

// TestACVoltmeterDriver: select the input, configure range and detector
// bandwidth, read; an overload is +Inf with ErrOverload, a reading far
// beyond the range is refused.
func TestACVoltmeterDriver(t *testing.T) {
	ctx := context.Background()
	p := builtin(t, "acvm")
	s := session(t, "acvm", p, []pb.Exchange{
		{Comment: "input 2", Send: "ROUT:CLOS (@2)"}, noErr,
		{Comment: "AC volts, 1 V range", Send: "CONF:VOLT:AC 1"}, noErr,
		{Comment: "signal at 60 Hz", Send: "DET:BAND 60"}, noErr,
		{Send: "ROUT:CLOS (@2)"}, noErr,
		{Comment: "read", Send: "READ?", Reply: "+7.07106000E-01"},
		{Send: "ROUT:CLOS (@2)"}, noErr,
		{Comment: "overload", Send: "READ?", Reply: "+9.90000000E+37"},
		{Send: "ROUT:CLOS (@2)"}, noErr,
		{Comment: "garbage", Send: "READ?", Reply: "+5.00000000E+02"},
	})
	a, err := instrument.NewACVoltmeter(s, p, "2", instrument.DriverOptions{OverrideSettle: true})
	if err != nil {
		t.Fatal(err)
	}
	if err := a.ConfigureACVolts(ctx, 1, 60); err != nil {
		t.Fatal(err)
	}
	if v, err := a.ReadRMS(ctx); err != nil || v != 0.707106 {
		t.Errorf("ReadRMS = %v, %v", v, err)
	}
	if v, err := a.ReadRMS(ctx); !math.IsInf(v, 1) || !errors.Is(err, instrument.ErrOverload) {
		t.Errorf("overload: %v, %v", v, err)
	}
	if _, err := a.ReadRMS(ctx); !errors.Is(err, instrument.ErrImplausible) {
		t.Errorf("500 V on a 1 V range: %v, want ErrImplausible", err)
	}
}

// TestDecodeWaveform checks the decoder against hand-built bytes: int16
// 0x0102 big-endian is 258 codes, little-endian 513 (IEEE 754 / two's
// complement by definition); real32 0x3F800000 is 1.0 (IEEE 754 binary32).
func TestDecodeWaveform(t *testing.T) {
	cases := []struct {
		data       []byte
		kind       instrument.WaveformKind
		order      binary.ByteOrder
		scale, off float64
		want       []float64
		wantErr    bool
	}{
		{[]byte{0x01, 0x02, 0xFF, 0xFE}, instrument.WaveInt16, binary.BigEndian, 1, 0, []float64{258, -2}, false},
		{[]byte{0x01, 0x02, 0xFF, 0xFE}, instrument.WaveInt16, binary.LittleEndian, 1, 0, []float64{513, -257}, false},
		{[]byte{0x80, 0x00}, instrument.WaveInt16, binary.BigEndian, 0.5, 1, []float64{-16383}, false},
		{[]byte{0x3F, 0x80, 0x00, 0x00}, instrument.WaveReal32, binary.BigEndian, 0, 0, []float64{1}, false},
		{[]byte{0x00, 0x00, 0x80, 0x3F}, instrument.WaveReal32, binary.LittleEndian, 0, 0, []float64{1}, false},
		{[]byte("1.5,-2E-3,+7"), instrument.WaveASCII, nil, 0, 0, []float64{1.5, -2e-3, 7}, false},
		{[]byte{0x01}, instrument.WaveInt16, binary.BigEndian, 1, 0, nil, true},
		{nil, instrument.WaveInt16, binary.BigEndian, 1, 0, nil, true},
		{[]byte{0, 0, 0}, instrument.WaveReal32, binary.BigEndian, 0, 0, nil, true},
		{[]byte{0x7F, 0xC0, 0, 0}, instrument.WaveReal32, binary.BigEndian, 0, 0, nil, true}, // NaN
		{[]byte{0x01, 0x02}, instrument.WaveInt16, binary.BigEndian, 0, 0, nil, true},        // zero scale
		{[]byte("1,,2"), instrument.WaveASCII, nil, 0, 0, nil, true},
	}
	for i, c := range cases {
		got, err := instrument.DecodeWaveform(c.data, c.kind, c.order, c.scale, c.off)
		if (err != nil) != c.wantErr {
			t.Errorf("case %d: err %v, want error %v", i, err, c.wantErr)
			continue
		}
		if fmt.Sprint(got) != fmt.Sprint(c.want) {
			t.Errorf("case %d: %v, want %v", i, got, c.want)
		}
	}
}

// FuzzDecodeWaveform: any bytes decode without panic; what decodes has one
// sample per 2 (int16), 4 (real32) or 8 (real64, a meter's REAL,64
// buffer) bytes, all finite, and re-encodes to the same bytes.
func FuzzDecodeWaveform(f *testing.F) {
	f.Add([]byte{0x01, 0x02, 0xFF, 0xFE}, uint8(1), true)
	f.Add([]byte{0x3F, 0x80, 0x00, 0x00}, uint8(2), false)
	f.Add([]byte("1.5,-2E-3,+7"), uint8(0), true)
	f.Add([]byte("#15HELLO"), uint8(0), false)
	f.Add([]byte{0x7F, 0x80, 0, 0, 0xFF, 0x80, 0, 0}, uint8(2), true)
	f.Add([]byte{0x47, 0xD2, 0x9E, 0xAD, 0x3C, 0x2E, 0xFC, 0x7E}, uint8(3), true) // 9.9E37 as binary64
	f.Add([]byte{0x7F, 0xF0, 0, 0, 0, 0, 0, 0}, uint8(3), true)                   // +Inf: refused
	f.Fuzz(func(t *testing.T, data []byte, kind uint8, big bool) {
		k := instrument.WaveformKind(kind % 4)
		order := binary.ByteOrder(binary.LittleEndian)
		if big {
			order = binary.BigEndian
		}
		v, err := instrument.DecodeWaveform(data, k, order, 1.0/1024, 0)
		if err != nil {
			return
		}
		for _, x := range v {
			if k != instrument.WaveASCII && (math.IsNaN(x) || math.IsInf(x, 0)) {
				t.Fatalf("non-finite sample %v decoded", x)
			}
		}
		switch k {
		case instrument.WaveInt16:
			if len(v) != len(data)/2 {
				t.Fatalf("%d samples from %d bytes", len(v), len(data))
			}
			if back := instrument.EncodeWaveform(v, k, order, 1.0/1024, 0); string(back) != string(data) {
				t.Fatalf("int16 round trip: % x -> % x", data, back)
			}
		case instrument.WaveReal32:
			if len(v) != len(data)/4 {
				t.Fatalf("%d samples from %d bytes", len(v), len(data))
			}
			back := instrument.EncodeWaveform(v, k, order, 0, 0)
			again, err := instrument.DecodeWaveform(back, k, order, 0, 0)
			if err != nil || fmt.Sprint(again) != fmt.Sprint(v) {
				t.Fatalf("real32 round trip: %v -> %v (%v)", v, again, err)
			}
		case instrument.WaveReal64:
			if len(v) != len(data)/8 {
				t.Fatalf("%d samples from %d bytes", len(v), len(data))
			}
			if back := instrument.EncodeWaveform(v, k, order, 0, 0); string(back) != string(data) {
				t.Fatalf("real64 round trip: % x -> % x", data, back)
			}
		}
	})
}
