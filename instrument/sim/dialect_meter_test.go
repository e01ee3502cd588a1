package sim

import (
	"context"
	"encoding/binary"
	"math"
	"strings"
	"testing"
	"time"
)

// TestMeterDialects: each dialect hands over the same kind of readings by
// its own commands, refuses the commands it does not have (-113 Undefined
// header, SCPI-99 vol. 2 §21.8.9), and reports an overload as 9.9E37
// (SCPI-99 vol. 1 §7.2.1.5). The unpowered part leaves the nulling loop's
// auxiliary amplifier at its rail (14 V; TestOverloadAndAutorange), so the
// 10 V range overloads and the 100 V range reads about 14 V.
func TestMeterDialects(t *testing.T) {
	for _, tc := range []struct {
		dialect, idn string
		missing      []string // commands this dialect does not have
		read         string   // how it returns 2 readings after CONF
	}{
		{"dmm_single", IDNDMMSingle, []string{"SAMP:COUN 2"}, "READ?"},
		{"dmm_initfetch", IDNDMMInitFetch, []string{"READ?"}, "SAMP:COUN 2;:INIT;:FETC?"},
		{"dmm_trigfetch", IDNDMMTrigFetch, []string{"READ?"}, "SAMP:COUN 2;:INIT;*TRG;:FETC?"},
		{"dmm_opc", IDNDMMOPC, []string{"READ?"}, "SAMP:COUN 2;:INIT;*OPC?;:FETC?"},
		{"dmm_buffer", IDNDMMBuffer, []string{"READ?", "FETC?"}, "SAMP:COUN 2;:INIT;:TRAC:DATA?"},
	} {
		t.Run(tc.dialect, func(t *testing.T) {
			tb := startBench(t, Config{Dialects: []string{tc.dialect}})
			if got := tb.dmm.query("*IDN?"); got != tc.idn {
				t.Errorf("*IDN? = %q, want %q", got, tc.idn)
			}
			for _, ep := range tb.b.Endpoints() {
				if ep.Name == NameDMM && ep.Profile != tc.dialect {
					t.Errorf("endpoint profile %q, want %q", ep.Profile, tc.dialect)
				}
			}
			for _, m := range tc.missing {
				tb.dmm.send(m)
				if e := tb.dmm.query("SYST:ERR?"); !strings.HasPrefix(e, "-113,") {
					t.Errorf("%s: error queue %q, want -113", m, e)
				}
			}
			tb.mux.set("ROUT:CLOS (@101)")
			tb.dmm.set("CONF:VOLT:DC 10")
			got := tb.dmm.query(tc.read)
			got = got[strings.LastIndex(got, ";")+1:]
			want := "+9.90000000E+37,+9.90000000E+37"
			if tc.dialect == "dmm_single" {
				want = "+9.90000000E+37"
			}
			if got != want {
				t.Errorf("%s on 14 V, 10 V range = %q, want %q", tc.read, got, want)
			}
			tb.dmm.noError()
		})
	}
}

// TestMeterDialectFetchNeedsOPC: in dmm_opc a FETC? sent while the readings
// are still being taken fails with -230 Data corrupt or stale (SCPI-99
// vol. 2 §21.8.10) instead of waiting.
//
// The bench runs on a clock whose long waits (an integration of 100 NPLC)
// last until the bench closes, so the readings are certainly still being
// taken when FETC? arrives; on the manual clock the measurement could end
// before FETC? is parsed on a loaded machine.
func TestMeterDialectFetchNeedsOPC(t *testing.T) {
	b, err := New(Config{Dialects: []string{"dmm_opc"}, Clock: &stalledClock{ManualClock: NewManualClock(), longest: time.Second}})
	if err != nil {
		t.Fatal(err)
	}
	if err := b.Start(context.Background(), ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = b.Close() })
	var dmm *client
	for _, ep := range b.Endpoints() {
		if ep.Name == NameDMM {
			dmm = dial(t, ep.Address)
		}
	}
	if dmm == nil {
		t.Fatal("no simulated DMM")
	}
	dmm.set("CONF:VOLT:DC 100;:VOLT:DC:NPLC 100;:SAMP:COUN 5")
	dmm.send("INIT;:FETC?")
	if e := dmm.query("SYST:ERR?"); !strings.HasPrefix(e, "-230,") {
		t.Errorf("FETC? during the measurement: error queue %q, want -230", e)
	}
}

// stalledClock is a ManualClock whose waits of longest or more block until
// their context ends (the bench closing).
type stalledClock struct {
	*ManualClock
	longest time.Duration
}

func (c *stalledClock) Sleep(ctx context.Context, d time.Duration) error {
	if d < c.longest {
		return c.ManualClock.Sleep(ctx, d)
	}
	<-ctx.Done()
	return ctx.Err()
}

// TestMeterDialectBinaryBlock: TRAC:DATA? in REAL,64 and REAL,32, normal
// and swapped byte order, is an IEEE 488.2 §8.7.9 definite-length block of
// IEEE 754 reals whose values are the ASCII readings'.
func TestMeterDialectBinaryBlock(t *testing.T) {
	tb := startBench(t, Config{Dialects: []string{"dmm_buffer"}})
	tb.mux.set("ROUT:CLOS (@101)")
	tb.dmm.set("CONF:VOLT:DC 100;:SAMP:COUN 3")
	tb.dmm.set("INIT")
	ascii := tb.dmm.floats("TRAC:DATA?")
	for _, tc := range []struct {
		form  string
		size  int
		order binary.ByteOrder
	}{
		{"REAL,64;:FORM:BORD NORM", 8, binary.BigEndian},
		{"REAL,64;:FORM:BORD SWAP", 8, binary.LittleEndian},
		{"REAL,32;:FORM:BORD NORM", 4, binary.BigEndian},
		{"REAL,32;:FORM:BORD SWAP", 4, binary.LittleEndian},
	} {
		tb.dmm.set("FORM " + tc.form)
		tb.dmm.send("TRAC:DATA?")
		hdr := make([]byte, 3)
		if _, err := readFull(tb.dmm, hdr); err != nil {
			t.Fatal(err)
		}
		n := 3 * tc.size
		if string(hdr[:2]) != "#2" {
			t.Fatalf("%s: header %q, want #2", tc.form, hdr)
		}
		rest := make([]byte, 1+n+1)
		if _, err := readFull(tb.dmm, rest); err != nil {
			t.Fatal(err)
		}
		if got := string(hdr[2:]) + string(rest[:1]); got != itoa2(n) {
			t.Fatalf("%s: length %q, want %d", tc.form, got, n)
		}
		data := rest[1 : 1+n]
		for i, a := range ascii {
			var v float64
			if tc.size == 8 {
				v = math.Float64frombits(tc.order.Uint64(data[i*8:]))
			} else {
				v = float64(math.Float32frombits(tc.order.Uint32(data[i*4:])))
			}
			// ASCII NR3 keeps 9 significant digits; float32 about 7.
			tol := 1e-8 * math.Abs(a)
			if tc.size == 4 {
				tol = 1e-7 * math.Abs(a)
			}
			if math.Abs(v-a) > tol {
				t.Errorf("%s: reading %d = %.9g, ASCII %.9g", tc.form, i, v, a)
			}
		}
	}
}

func itoa2(n int) string { return string(rune('0'+n/10)) + string(rune('0'+n%10)) }

func readFull(c *client, p []byte) (int, error) {
	n := 0
	for n < len(p) {
		k, err := c.r.Read(p[n:])
		n += k
		if err != nil {
			return n, err
		}
	}
	return n, nil
}

// TestDialectsRefused: unknown names and two dialects of one instrument.
func TestDialectsRefused(t *testing.T) {
	for _, ds := range [][]string{{"dmm_nosuch"}, {"dmm_single", "dmm_opc"}} {
		if _, err := New(Config{Dialects: ds}); err == nil {
			t.Errorf("New with dialects %v: no error", ds)
		}
	}
}
