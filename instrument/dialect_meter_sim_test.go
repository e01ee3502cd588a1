package instrument_test

import (
	"context"
	"errors"
	"math"
	"regexp"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
	"nullbench/instrument/sim"
)

// meterVariant is a simulated meter dialect and the profile that speaks
// it: the dialect's built-in profile, or a copy with its data format
// changed.
type meterVariant struct {
	name, dialect string
	edit          func(m *instrument.MeterCommands) // nil: the built-in profile as it is
}

// bufferFormat sets the dmm_buffer profile to another transfer format.
func bufferFormat(format, data, order string) func(m *instrument.MeterCommands) {
	return func(m *instrument.MeterCommands) { m.Format, m.Data, m.ByteOrder = format, data, order }
}

var meterVariants = []meterVariant{
	{"dmm", "", nil},
	{"dmm_single", "dmm_single", nil},
	{"dmm_initfetch", "dmm_initfetch", nil},
	{"dmm_trigfetch", "dmm_trigfetch", nil},
	{"dmm_opc", "dmm_opc", nil},
	{"dmm_buffer (real32, little-endian)", "dmm_buffer", nil},
	{"dmm_buffer (real32, big-endian)", "dmm_buffer", bufferFormat("FORM:DATA REAL,32;:FORM:BORD NORM", "real32", "big")},
	{"dmm_buffer (real64, little-endian)", "dmm_buffer", bufferFormat("FORM:DATA REAL,64;:FORM:BORD SWAP", "real64", "little")},
	{"dmm_buffer (real64, big-endian)", "dmm_buffer", bufferFormat("FORM:DATA REAL,64;:FORM:BORD NORM", "real64", "big")},
	{"dmm_buffer (ASCII)", "dmm_buffer", bufferFormat("FORM:DATA ASC", "ascii", "big")},
}

// openMeterVariant serves the bench in v's dialect and opens its meter
// with v's profile, and the switch with its own.
func openMeterVariant(t *testing.T, v meterVariant) (*sim.Bench, *instrument.MeterDriver, *instrument.SwitchDriver) {
	t.Helper()
	var ds []string
	if v.dialect != "" {
		ds = []string{v.dialect}
	}
	name := v.dialect
	if name == "" {
		name = "dmm"
	}
	p, err := instrument.BuiltinProfile(name)
	if err != nil {
		t.Fatal(err)
	}
	if v.edit != nil {
		cp, m := *p, *p.Meter
		v.edit(&m)
		cp.Meter = &m
		if err := cp.Validate(); err != nil {
			t.Fatal(err)
		}
		p = &cp
	}
	b, in := openDialectBench(t, ds, sim.NameDMM, p)
	meter, err := instrument.NewMeter(in.Session, in.Profile, noSettle)
	if err != nil {
		t.Fatal(err)
	}
	ep := endpoint(t, b, sim.NameSwitch)
	mux, err := instrument.Open(context.Background(), ep.Name, ep.Address, ep.Profile, instrument.OpenOptions{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = mux.Close() })
	sw, err := instrument.NewSwitch(mux.Session, mux.Profile, noSettle)
	if err != nil {
		t.Fatal(err)
	}
	return b, meter, sw
}

// Every meter dialect, read with its profile, gives the same readings of
// the same input: the unpowered part leaves the nulling loop's auxiliary
// amplifier at its 14 V rail (instrument/sim TestOverloadAndAutorange),
// read on the 100 V range at 1 NPLC, where one reading's noise is 3 ppm
// of range, 0.3 mV rms (6.5-digit DMM resolution against NPLC, typical
// data-sheet figures, common practice). Two means of 5 readings then
// differ by 0.2 mV rms; 2 mV is 10 σ. On the 10 V range the same input is
// over range: the overload code 9.9E37 (SCPI-99 vol. 1 §7.2.1.5), in
// ASCII or binary, is an error naming the meter, the command and the
// range too small, never a number.
func TestMeterDialectsReadTheSame(t *testing.T) {
	ctx := context.Background()
	var ref float64
	for i, v := range meterVariants {
		t.Run(v.name, func(t *testing.T) {
			_, m, sw := openMeterVariant(t, v)
			if err := sw.Close(ctx, "101"); err != nil {
				t.Fatal(err)
			}
			if err := m.ConfigureDCVolts(ctx, 100, 1); err != nil {
				t.Fatal(err)
			}
			for _, n := range []int{5, 1, 5} { // the count changes and changes back
				vals, err := m.ReadN(ctx, n)
				if err != nil {
					t.Fatal(err)
				}
				if len(vals) != n {
					t.Fatalf("ReadN(%d) gave %d readings", n, len(vals))
				}
				var mean float64
				for _, x := range vals {
					mean += x / float64(n)
				}
				if math.Abs(mean-14) > 0.5 {
					t.Fatalf("mean of %d readings %g V, want about 14 V (the auxiliary amplifier's rail)", n, mean)
				}
				if n != 5 {
					continue
				}
				if i == 0 && ref == 0 {
					ref = mean
				}
				if math.Abs(mean-ref) > 2e-3 {
					t.Errorf("mean of 5 readings %.6f V, the default meter read %.6f V", mean, ref)
				}
			}
			if err := m.ConfigureDCVolts(ctx, 10, 1); err != nil {
				t.Fatal(err)
			}
			vals, err := m.ReadN(ctx, 3)
			if !errors.Is(err, instrument.ErrOverload) || len(vals) != 3 || !math.IsInf(vals[0], 1) {
				t.Fatalf("14 V on the 10 V range: %v, %v; want +Inf and ErrOverload", vals, err)
			}
			query := m.Profile().Meter.Read + m.Profile().Meter.Fetch
			for _, want := range []string{"dmm meter", `"` + query + `"`, "the 10 V range is too small"} {
				if !strings.Contains(err.Error(), want) {
					t.Errorf("overload error %q does not say %q", err, want)
				}
			}
		})
	}
}

// Each dialect really departs from the bench's own meter: the default
// dmm profile fails on it, naming the command the dialect lacks.
func TestMeterDialectsRefuseTheDefaultProfile(t *testing.T) {
	ctx := context.Background()
	p, err := instrument.BuiltinProfile("dmm")
	if err != nil {
		t.Fatal(err)
	}
	dmm := *p
	dmm.IDNPattern = "^NULLBENCH-SIM,"   // past the identity check, to the commands
	dmm.Timeout = 300 * time.Millisecond // a command the dialect lacks gets no reply
	for _, tc := range []struct{ dialect, cmd string }{
		{"dmm_single", "SAMP:COUN"},
		{"dmm_initfetch", "READ?"},
		{"dmm_trigfetch", "READ?"},
		{"dmm_opc", "READ?"},
		{"dmm_buffer", "READ?"},
	} {
		t.Run(tc.dialect, func(t *testing.T) {
			_, in := openDialectBench(t, []string{tc.dialect}, sim.NameDMM, &dmm)
			m, err := instrument.NewMeter(in.Session, in.Profile, noSettle)
			if err != nil {
				t.Fatal(err)
			}
			if err := m.ConfigureDCVolts(ctx, 100, 1); err != nil {
				t.Fatal(err)
			}
			_, err = m.ReadN(ctx, 2)
			if err == nil || !strings.Contains(err.Error(), tc.cmd) {
				t.Fatalf("the dmm profile on %s: %v; want an error naming %s", tc.dialect, err, tc.cmd)
			}
		})
	}
}

// readingReply masks the numbers a meter answers in an exercise report:
// the readings are noise around the unpowered input, not what is pinned.
var readingReply = regexp.MustCompile(`(meter\.(?:read|fetch) +\S+\n +-> (?:\(block of \d+ bytes\) \w+ \w+-endian: )?)[-+0-9.E,]+\n`)

// Each meter dialect's built-in profile passes its dry exercise on the
// dialect with nothing rejected; the report text is pinned per dialect.
func TestExerciseMeterDialects(t *testing.T) {
	for _, d := range []string{"dmm_single", "dmm_initfetch", "dmm_trigfetch", "dmm_opc", "dmm_buffer"} {
		t.Run(d, func(t *testing.T) {
			b, in := openDialectBench(t, []string{d}, sim.NameDMM, nil)
			if in.Profile.Name != d {
				t.Fatalf("the %s dialect's endpoint names profile %s", d, in.Profile.Name)
			}
			r, err := instrument.ExerciseAt(context.Background(), endpoint(t, b, sim.NameDMM).Address, in.Profile, instrument.ExerciseOptions{})
			if err != nil {
				t.Fatalf("%v\n%s", err, r)
			}
			if rej := r.Rejected(); len(rej) > 0 {
				t.Errorf("the %s dialect rejected its own profile's %v:\n%s", d, rej, r)
			}
			text := readingReply.ReplaceAllString(r.String(), "${1}(readings)\n")
			checkGolden(t, "exercise_"+d+".golden", text)
		})
	}
}
