package instrument_test

import (
	"math"
	"os"
	"strings"
	"testing"

	"nullbench/instrument"
)

// TestFreqProfileErrors: each fault in a [generator], [digitizer] or
// [ac_meter] table is reported with its key (and line), the way the other
// role tables are.
func TestFreqProfileErrors(t *testing.T) {
	read := func(name string) string {
		b, err := os.ReadFile("profiles/" + name + ".toml")
		if err != nil {
			t.Fatal(err)
		}
		return string(b)
	}
	gen, dig, acvm := read("generator"), read("digitizer"), read("acvm")
	cases := []struct {
		name, src, old, new, key string
	}{
		{"no max_peak_volts", gen, "max_peak_volts = 10.0", "", "generator.max_peak_volts"},
		{"VRMS unit", gen, `amplitude_unit = "VPP"`, `amplitude_unit = "VRMS"`, "generator.amplitude_unit"},
		{"bad load", gen, `load           = "INF"`, `load = "fifty"`, "generator.load"},
		{"frequency without value", gen, `set_frequency  = "SOUR{channel}:FREQ {value}"`, `set_frequency = "SOUR{channel}:FREQ 1"`, "generator.set_frequency"},
		{"one channel", dig, `channels          = ["1", "2"]`, `channels = ["1"]`, "digitizer.channels"},
		{"unknown data", dig, `data              = "int16"`, `data = "float64"`, "digitizer.data"},
		{"bad byte order", dig, `byte_order        = "little"`, `byte_order = "middle"`, "digitizer.byte_order"},
		{"rate without placeholder", dig, `set_rate          = "SWE:TINT {interval}"`, `set_rate = "SWE:TINT 1"`, "digitizer.set_rate"},
		{"int16 without scale", dig, `scale_query       = "SENS{channel}:VOLT:RES?"`, ``, "digitizer.scale_query"},
		{"no max_points", dig, `max_points        = 262144`, ``, "digitizer.max_points"},
		{"rate reply", dig, `rate_reply        = "interval"`, `rate_reply = "period"`, "digitizer.rate_reply"},
		{"configure without range", acvm, `configure = "CONF:VOLT:AC {range}"`, `configure = "CONF:VOLT:AC"`, "ac_meter.configure"},
		{"flatness length", dig, `flatness_db            = [7.0, 0.15, 0.01, 0.01, 0.01, 0.02, 1.2]`, `flatness_db = [7.0]`, "figures.flatness_db"},
		{"ac_hz order", acvm, `ac_hz                  = [3.0, 20.0, 200.0, 1e3, 2e4, 1e5, 3e5]`, `ac_hz = [3.0, 2.0, 200.0, 1e3, 2e4, 1e5, 3e5]`, "figures.ac_hz"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			if !strings.Contains(c.src, c.old) {
				t.Fatalf("profile has no line %q", c.old)
			}
			_, err := instrument.ParseProfile([]byte(strings.Replace(c.src, c.old, c.new, 1)), "p.toml")
			if err == nil || !strings.Contains(err.Error(), "key "+c.key) {
				t.Errorf("error %v, want one naming key %s", err, c.key)
			}
		})
	}
}

// TestACFiguresInterpolation: the flatness and mismatch tables interpolate
// linearly in log10 f between their points and hold their end values
// beyond; a missing figure is NaN and says so.
func TestACFiguresInterpolation(t *testing.T) {
	p, err := instrument.BuiltinProfile("digitizer")
	if err != nil {
		t.Fatal(err)
	}
	a := p.Figures.AC
	if !a.Given() || a.AmplitudeAccuracyPct != 0.5 || a.ClockPPM != 50 || a.NoiseRelOfRange != 1e-4 {
		t.Fatalf("figures %+v", a)
	}
	for _, c := range []struct{ f, want float64 }{
		{0.1, 12}, {1, 12}, {10, 4}, {math.Sqrt(10 * 100), (4 + 0.4) / 2}, {1e5, 1}, {1e7, 6},
	} {
		if got, ok := a.PhaseMismatchDegAt(c.f); !ok || math.Abs(got-c.want) > 1e-12 {
			t.Errorf("phase mismatch at %g Hz: %v, want %v", c.f, got, c.want)
		}
	}
	g, err := instrument.BuiltinProfile("acvm")
	if err != nil {
		t.Fatal(err)
	}
	if v, ok := g.Figures.AC.GainMismatchDBAt(1e3); ok || !math.IsNaN(v) {
		t.Errorf("AC voltmeter gain mismatch %v, %v: it has no such table", v, ok)
	}
	if d, _ := instrument.BuiltinProfile("dmm"); d.Figures.AC.Given() {
		t.Error("the DMM profile reports AC figures")
	}
}
