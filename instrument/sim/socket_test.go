package sim

import (
	"errors"
	"math"
	"regexp"
	"strings"
	"testing"
	"time"
)

// The hand socket (socket.go), tested through SCPI as the tool would see
// it; Insert and Remove are the person at the bench.

// socketPowerUp sets ±15 V rails with a 50 mA limit and the sources on at
// 0 V, closing no switch channel (common practice, JEDEC JESD78 on latch-up; order: supplies up with the
// inputs at 0 V), and lets the rails settle.
func (tb *testBench) socketPowerUp(t testing.TB) {
	t.Helper()
	tb.src.set("SOUR1:VOLT 0;:OUTP1 ON;:SOUR2:VOLT 0;:OUTP2 ON;:SOUR3:VOLT 0;:OUTP3 ON")
	tb.psu.set("INST:NSEL 1;:VOLT 15;:CURR 0.05;:OUTP ON")
	tb.psu.set("INST:NSEL 2;:VOLT 15;:CURR 0.05;:OUTP ON")
	tb.wait(time.Second)
}

// socketPowerDown is the reverse (JEDEC JESD78; common practice: inputs first, then the
// supplies), ending with every output off and the rails discharged.
func (tb *testBench) socketPowerDown(t testing.TB) {
	t.Helper()
	tb.src.set("SOUR1:VOLT 0;:SOUR2:VOLT 0;:SOUR3:VOLT 0")
	tb.wait(100 * time.Millisecond)
	tb.src.set("OUTP1 OFF;:OUTP2 OFF;:OUTP3 OFF")
	tb.psu.set("INST:NSEL 1;:VOLT 0;:INST:NSEL 2;:VOLT 0")
	tb.wait(100 * time.Millisecond)
	tb.psu.set("OUTP1 OFF;:OUTP2 OFF")
	tb.wait(100 * time.Millisecond)
}

// measureKcKp measures kc (common mode driven ±5 V) and kp (V+ moved ±5 V)
// of the unit on the buses, µV/V, in the nulling loop of gain k.
func (tb *testBench) measureKcKp(t testing.TB, k float64) (kc, kp float64) {
	t.Helper()
	tb.dmm.set("CONF:VOLT:DC 1;:VOLT:DC:NPLC 10")
	const s, dwell, n = 5.0, 20 * time.Second, 8
	kc = tb.slope(t, func(l float64) { tb.src.set("SOUR1:VOLT " + ff(l)) }, s, k, dwell, n) * 1e6
	kp = tb.slope(t, func(l float64) { tb.rails(t, 15+l, -15) }, s, k, dwell, n) * 1e6
	return kc, kp
}

// A unit in the socket is measured as on its own switch channel: the same
// unit (demo lot U01 and U02) measured both ways on benches of the same
// seed gives the truth within the tolerance TestIdentitiesThroughSCPI
// established for a channel (σ ≈ 0.005 µV/V from the part's 1/f noise, plus
// 0.05 % programming gain of the source and supply, typical data-sheet figures, common practice), and the
// two ways agree with each other. The supply current read over SCPI is
// the part's quiescent current (2 mA, the demo part) with a unit in the
// socket and about 0 with the socket empty, which is what the tool's
// power-up check relies on.
func TestSocketMeasuresLikeChannel(t *testing.T) {
	for _, tc := range []struct {
		id string
		ch string
	}{{"U01", "101"}, {"U02", "102"}} {
		t.Run(tc.id, func(t *testing.T) {
			tr := truthOf(t, newIdleBench(t), tc.id)

			onChannel := startBench(t, Config{})
			onChannel.socketPowerUp(t)
			onChannel.mux.set("ROUT:CLOS (@" + tc.ch + ")")
			onChannel.wait(60 * time.Second)
			kcCh, kpCh := onChannel.measureKcKp(t, tr.NoiseGain)

			inSocket := startBench(t, Config{})
			if err := inSocket.b.Insert(tc.id); err != nil {
				t.Fatalf("insert into a dead socket: %v", err)
			}
			inSocket.socketPowerUp(t)
			inSocket.wait(60 * time.Second)
			amps := []float64{inSocket.psu.float("INST:NSEL 1;:MEAS:CURR?"), inSocket.psu.float("INST:NSEL 2;:MEAS:CURR?")}
			kcS, kpS := inSocket.measureKcKp(t, tr.NoiseGain)

			t.Logf("%s: channel kc %+.4f kp %+.4f µV/V; socket kc %+.4f kp %+.4f µV/V; truth kc %+.4f kp %+.4f; supply %.3f / %.3f mA",
				tc.id, kcCh, kpCh, kcS, kpS, tr.KcUVPerV, tr.KpUVPerV, 1e3*amps[0], 1e3*amps[1])
			tol := func(k float64) float64 { return 0.025 + 1e-3*math.Abs(k) }
			for _, c := range []struct {
				name      string
				got, want float64
				tol       float64
			}{
				{"kc in the socket vs truth", kcS, tr.KcUVPerV, tol(tr.KcUVPerV)},
				{"kp in the socket vs truth", kpS, tr.KpUVPerV, tol(tr.KpUVPerV)},
				{"kc on the channel vs truth", kcCh, tr.KcUVPerV, tol(tr.KcUVPerV)},
				{"kp on the channel vs truth", kpCh, tr.KpUVPerV, tol(tr.KpUVPerV)},
				{"kc socket vs channel", kcS, kcCh, math.Sqrt2 * tol(tr.KcUVPerV)},
				{"kp socket vs channel", kpS, kpCh, math.Sqrt2 * tol(tr.KpUVPerV)},
			} {
				if math.Abs(c.got-c.want) > c.tol {
					t.Errorf("%s: %+.4f µV/V, want %+.4f ± %.4f", c.name, c.got, c.want, c.tol)
				}
			}
			// Quiescent current 2 mA (the demo part's [part] default), the
			// read-back errors ±0.1 % and ±2 µA (power.go).
			for i, a := range amps {
				if math.Abs(a-2e-3) > 0.05e-3 {
					t.Errorf("supply ch%d current %.4f mA with the unit in the socket, want 2 mA", i+1, 1e3*a)
				}
			}
			s := inSocket.b.Inspect()
			if s.Socket != tc.id {
				t.Errorf("Inspect().Socket = %q, want %s", s.Socket, tc.id)
			}
			for _, u := range s.Units {
				if u.Damaged {
					t.Errorf("%s damaged: %s", u.ID, u.DamageReason)
				}
				if want := u.ID == tc.id; u.Connected != want || u.InSocket != want {
					t.Errorf("%s: connected %v, in socket %v; want %v", u.ID, u.Connected, u.InSocket, want)
				}
			}
		})
	}
}

// newIdleBench is a bench of the demo lot on a manual clock, not served (Truth
// and the socket need no server).
func newIdleBench(t testing.TB) *Bench {
	t.Helper()
	b, err := New(Config{Clock: NewManualClock()})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = b.Close() })
	return b
}

// An empty socket with no channel closed is an open meter input (a few µV
// of offset, instrument/sim/doc.go, Hand socket) and draws no supply current; a swap with
// the bench powered down in that order harms nothing.
func TestSocketEmptyAndSwaps(t *testing.T) {
	tb := startBench(t, Config{})
	tb.socketPowerUp(t)
	tb.dmm.set("CONF:VOLT:DC 1;:VOLT:DC:NPLC 10")
	if v := tb.meanRead(t, 4); math.Abs(v) > 20e-6 {
		t.Errorf("empty socket: meter reads %g V, want an open input's few µV", v)
	}
	if a := tb.psu.float("INST:NSEL 1;:MEAS:CURR?"); math.Abs(a) > 20e-6 {
		t.Errorf("empty socket draws %g A, want about 0", a)
	}
	tb.socketPowerDown(t)
	for _, id := range []string{"U03", "U04", "U05"} {
		if cur := tb.b.Socket(); cur != "" {
			if err := tb.b.Remove(); err != nil {
				t.Fatalf("remove %s from a dead socket: %v", cur, err)
			}
		}
		if err := tb.b.Insert(id); err != nil {
			t.Fatalf("insert %s into a dead socket: %v", id, err)
		}
		tb.socketPowerUp(t)
		tb.wait(10 * time.Second)
		// Nulling loop, K = 1000: E0 − Vcm = K·Vio (the nulling loop of instrument/sim/doc.go).
		v := tb.meanRead(t, 4)
		vio := unitSnap(t, tb.b, id).VioUV * 1e-6
		t.Logf("%s in the socket: meter %.3f mV, K·Vio %.3f mV", id, 1e3*v, 1e3*1000*vio)
		// The contact EMF (≤ 0.4 µV + wander) and noise, times K.
		if math.Abs(v-1000*vio) > 1e-3 {
			t.Errorf("%s: meter %.4f V, want K·Vio = %.4f V", id, v, 1000*vio)
		}
		tb.socketPowerDown(t)
	}
	for _, u := range tb.b.Inspect().Units {
		if u.Damaged {
			t.Errorf("%s damaged by swaps on a dead bench: %s", u.ID, u.DamageReason)
		}
	}
}

// Hot swaps (socket.go: any contact farther from 0 V than the part's
// input_beyond_rail_volts, 0.3 V for the demo part, JEDEC JESD78; common practice) damage the
// unit moved, and only it; the error wraps ErrLiveSocket.
func TestSocketHotSwap(t *testing.T) {
	cases := []struct {
		name   string
		do     func(t *testing.T, tb *testBench) error
		damage string // regexp the reason matches; "" = no damage, no error
	}{
		{"insert with the supplies on", func(t *testing.T, tb *testBench) error {
			tb.socketPowerUp(t)
			return tb.b.Insert("U02")
		}, "inserted with the socket live"},
		{"remove with the supplies on", func(t *testing.T, tb *testBench) error {
			if err := tb.b.Insert("U02"); err != nil {
				t.Fatal(err)
			}
			tb.socketPowerUp(t)
			return tb.b.Remove()
		}, "pulled out with the socket live"},
		{"insert with the supplies off and the common mode at 2 V", func(t *testing.T, tb *testBench) error {
			tb.src.set("SOUR1:VOLT 2;:OUTP1 ON")
			tb.wait(time.Second)
			return tb.b.Insert("U02")
		}, `common mode (1\.99|2\.00)\d V`},
		{"insert with the loop reference at -1 V", func(t *testing.T, tb *testBench) error {
			tb.src.set("SOUR3:VOLT -1;:OUTP3 ON")
			tb.wait(time.Second)
			return tb.b.Insert("U02")
		}, `loop reference -(0\.99|1\.00)\d V`},
		{"insert the moment the supplies are switched off", func(t *testing.T, tb *testBench) error {
			tb.socketPowerUp(t)
			tb.src.set("OUTP1 OFF;:OUTP2 OFF;:OUTP3 OFF")
			tb.psu.set("OUTP1 OFF;:OUTP2 OFF") // rails still charged
			return tb.b.Insert("U02")
		}, "inserted with the socket live"},
		{"insert 100 ms after the supplies are switched off", func(t *testing.T, tb *testBench) error {
			tb.socketPowerUp(t)
			tb.src.set("OUTP1 OFF;:OUTP2 OFF;:OUTP3 OFF")
			tb.psu.set("OUTP1 OFF;:OUTP2 OFF")
			// 15 V at 1 V/ms, then τ = 2 ms (model.go): discharged.
			tb.wait(100 * time.Millisecond)
			return tb.b.Insert("U02")
		}, ""},
		{"insert with the outputs on at 0 V", func(t *testing.T, tb *testBench) error {
			tb.src.set("SOUR1:VOLT 0;:OUTP1 ON;:SOUR3:VOLT 0;:OUTP3 ON")
			tb.psu.set("INST:NSEL 1;:VOLT 0;:OUTP ON;:INST:NSEL 2;:VOLT 0;:OUTP ON")
			tb.wait(time.Second)
			return tb.b.Insert("U02")
		}, ""},
		{"insert with the common mode at 0.2 V (within the rating)", func(t *testing.T, tb *testBench) error {
			tb.src.set("SOUR1:VOLT 0.2;:OUTP1 ON")
			tb.wait(time.Second)
			return tb.b.Insert("U02")
		}, ""},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			tb := startBench(t, Config{})
			err := tc.do(t, tb)
			tb.wait(100 * time.Millisecond)
			var damaged []UnitSnapshot
			for _, u := range tb.b.Inspect().Units {
				if u.Damaged {
					damaged = append(damaged, u)
				}
			}
			if tc.damage == "" {
				if err != nil {
					t.Errorf("error %v, want none", err)
				}
				for _, u := range damaged {
					t.Errorf("%s damaged: %s", u.ID, u.DamageReason)
				}
				if tb.b.Socket() != "U02" {
					t.Errorf("socket holds %q, want U02", tb.b.Socket())
				}
				return
			}
			if !errors.Is(err, ErrLiveSocket) || !strings.Contains(err.Error(), "DAMAGED") {
				t.Errorf("error %v, want one wrapping ErrLiveSocket that says DAMAGED", err)
			}
			if len(damaged) != 1 || damaged[0].ID != "U02" || !regexp.MustCompile(tc.damage).MatchString(damaged[0].DamageReason) {
				t.Fatalf("damaged %+v, want only U02 with %q", damaged, tc.damage)
			}
			t.Logf("U02: %s", damaged[0].DamageReason)
			if tr := truthOf(t, tb.b, "U02"); tr.Damage == "" {
				t.Error("Truth() does not report the damage")
			}
		})
	}
}

// A unit hot-inserted and then powered draws the damaged part's big
// current (part.go: a ~150 Ω path), so the tool's supply-current check
// sees it over SCPI: the supply goes into constant current at its limit.
func TestSocketHotInsertedPartDrawsCurrent(t *testing.T) {
	tb := startBench(t, Config{})
	tb.socketPowerUp(t)
	if err := tb.b.Insert("U01"); !errors.Is(err, ErrLiveSocket) {
		t.Fatalf("insert into a live socket: %v, want ErrLiveSocket", err)
	}
	tb.wait(time.Second)
	if a := tb.psu.float("INST:NSEL 1;:MEAS:CURR?"); a < 40e-3 {
		t.Errorf("the damaged part draws %.3f mA, want the 50 mA limit", 1e3*a)
	}
}

// Refusals change nothing: an unknown id, a second unit into an occupied
// socket, the same unit twice, and removing from an empty socket.
func TestSocketRefusals(t *testing.T) {
	b := newIdleBench(t)
	if err := b.Remove(); err == nil || !strings.Contains(err.Error(), "empty") {
		t.Errorf("remove from an empty socket: %v", err)
	}
	err := b.Insert("U99")
	if err == nil || !strings.Contains(err.Error(), `no unit "U99"`) || !strings.Contains(err.Error(), "U01, U02") {
		t.Errorf("unknown id: %v, want a refusal listing the units", err)
	}
	if b.Socket() != "" {
		t.Fatalf("socket holds %q after a refusal", b.Socket())
	}
	if err := b.Insert("U01"); err != nil {
		t.Fatal(err)
	}
	if err := b.Insert("U02"); err == nil || !strings.Contains(err.Error(), "holds unit U01") {
		t.Errorf("second unit: %v", err)
	}
	if err := b.Insert("U01"); err == nil || !strings.Contains(err.Error(), "already in the socket") {
		t.Errorf("same unit twice: %v", err)
	}
	if b.Socket() != "U01" {
		t.Errorf("socket holds %q, want U01", b.Socket())
	}
	st := b.SocketState()
	if st.Unit != "U01" || st.Live || st.Damaged || !strings.Contains(st.Contacts, "V+ 0.000 V") {
		t.Errorf("socket state %+v", st)
	}
	if err := b.Remove(); err != nil || b.Socket() != "" {
		t.Errorf("remove: %v, socket %q", err, b.Socket())
	}
}

// Closing a switch channel while a unit is in the socket parallels the two
// (the socket is wired onto the buses): the meter reads the mean of the
// two fixture outputs, as with two closed channels (instrument/sim/doc.go, Hand socket).
// Closing the socket unit's own channel connects nothing more: that unit
// has left its matrix position.
func TestSocketParallelsAClosedChannel(t *testing.T) {
	tb := startBench(t, Config{})
	if err := tb.b.Insert("U02"); err != nil {
		t.Fatal(err)
	}
	tb.socketPowerUp(t)
	tb.dmm.set("CONF:VOLT:DC 1;:VOLT:DC:NPLC 10")
	tb.wait(30 * time.Second)
	read := func() (meter float64, vio map[string]float64) {
		tb.wait(10 * time.Second)
		meter = tb.meanRead(t, 4)
		vio = map[string]float64{}
		for _, u := range tb.b.Inspect().Units {
			if u.Connected {
				vio[u.ID] = u.VioUV * 1e-6
			}
		}
		return meter, vio
	}
	// K = 1000; the contact EMFs (≤ 0.4 µV each) and noise, times K.
	const k, tol = 1000.0, 1e-3
	alone, vio := read()
	if len(vio) != 1 || math.Abs(alone-k*vio["U02"]) > tol {
		t.Fatalf("U02 alone: meter %.4f V, connected %v", alone, vio)
	}
	tb.mux.set("ROUT:CLOS (@102)") // U02's own channel: its position is empty
	own, vio := read()
	if len(vio) != 1 || math.Abs(own-alone) > tol {
		t.Errorf("U02's own channel closed: meter %.4f V (alone %.4f V), connected %v", own, alone, vio)
	}
	tb.mux.set("ROUT:OPEN:ALL;:ROUT:CLOS (@101)")
	both, vio := read()
	want := k * (vio["U01"] + vio["U02"]) / 2
	t.Logf("U02 alone %.3f mV; with channel 101 closed %.3f mV, mean of K·Vio %.3f mV", 1e3*alone, 1e3*both, 1e3*want)
	if len(vio) != 2 || math.Abs(both-want) > tol || math.Abs(both-alone) < 10*tol {
		t.Errorf("U01 on 101 and U02 in the socket: meter %.4f V, want the mean %.4f V; connected %v", both, want, vio)
	}
}
