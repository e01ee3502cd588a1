package plan

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// freqPlanTOML reads the example frequency-response plan as text, so
// refusal tests can edit it one rule at a time and find the line named.
func freqPlanTOML(t testing.TB) string {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(examplePlanDir, "freq_noise_gain.toml"))
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

func TestParseACPlan(t *testing.T) {
	p := loadExamplePlan(t, "freq_noise_gain")
	if len(p.ACTests) != 3 || len(p.Tests) != 0 {
		t.Fatalf("%d ac tests, %d dc tests", len(p.ACTests), len(p.Tests))
	}
	cm := p.ACTests[0]
	// Defaults (ac.go) fill what the table leaves out.
	if cm.MinCycles != DefaultACMinCycles || cm.Records != DefaultACRecords || cm.Through != ThroughSwitch ||
		cm.MaxRateHz != DefaultACMaxRateHz || cm.Injection != "" {
		t.Errorf("cmrr defaults: %+v", cm)
	}
	pos := p.ACTests[1]
	if pos.Injection != InjectSeries || pos.CouplingGain != 1 || pos.GeneratorChannel != "2" {
		t.Errorf("psrr_pos injection: %+v", pos)
	}
	if l, ok := cm.LimitAtDB(5); !ok || l != 90 {
		t.Errorf("single limit applies to every frequency: %g %v", l, ok)
	}
	if _, ok := pos.LimitAtDB(0); ok {
		t.Error("no limits_db: not judged")
	}
	neg := p.ACTests[2]
	if l, ok := neg.LimitAtDB(2); !ok || l != 78 {
		t.Errorf("per-frequency limit: %g %v", l, ok)
	}
	if got := neg.Frequencies(); len(got) != 4 || got[1] != 60 {
		t.Errorf("named frequencies %v", got)
	}
	if p.Generator.MaxPeakVolts != 2 || p.Part.GBWHz != 1e6 || p.Part.GBWTolerance != 0.3 {
		t.Errorf("generator %+v, gbw %g ± %g", p.Generator, p.Part.GBWHz, p.Part.GBWTolerance)
	}
	roles := map[string]bool{}
	for _, n := range NeededRoles(p) {
		roles[n.Role] = true
	}
	for _, r := range []string{RoleGenerator, RoleDigitizer, RoleSwitch} {
		if !roles[r] {
			t.Errorf("role %s not needed: %v", r, NeededRoles(p))
		}
	}
	if roles[RoleMeter] {
		t.Error("a plan without [[test]] needs no DC meter")
	}
}

// TestLogSpaced checks f_i = lo·(hi/lo)^(i/(n−1)): 10 Hz to 100 kHz in 5
// points is one point per decade (definition of a logarithmic scale;
// values worked by hand).
func TestLogSpaced(t *testing.T) {
	cases := []struct {
		lo, hi float64
		n      int
		want   []float64
	}{
		{10, 1e5, 5, []float64{10, 100, 1e3, 1e4, 1e5}},
		{1, 100, 3, []float64{1, 10, 100}},
		{20, 80, 3, []float64{20, 40, 80}},
		{10, 1e5, 1, nil},
		{0, 1e5, 4, nil},
		{100, 10, 4, nil},
	}
	for _, c := range cases {
		got := LogSpaced(c.lo, c.hi, c.n)
		if len(got) != len(c.want) {
			t.Errorf("LogSpaced(%g, %g, %d) = %v, want %v", c.lo, c.hi, c.n, got, c.want)
			continue
		}
		for i := range got {
			if math.Abs(got[i]-c.want[i]) > 1e-9*c.want[i] {
				t.Errorf("LogSpaced(%g, %g, %d)[%d] = %.12g, want %g", c.lo, c.hi, c.n, i, got[i], c.want[i])
			}
		}
	}
}

// TestValidateACRefusals breaks one [[ac_test]] rule at a time and checks
// the error's key, its line in the document and its fix.
func TestValidateACRefusals(t *testing.T) {
	rep := func(old, new string) func(string) string {
		return func(s string) string {
			if !strings.Contains(s, old) {
				panic("test edit does not apply: " + old)
			}
			return strings.Replace(s, old, new, 1)
		}
	}
	cases := []struct {
		name     string
		edit     func(string) string
		lineOf   string
		key      string
		contains []string
	}{
		{"no frequencies", rep("start_hz = 10.0\nstop_hz = 1e5\npoints = 8\npeak_volts = 1.0", "peak_volts = 1.0"),
			"", "ac_test[1].frequencies_hz", []string{"no frequencies"}},
		{"two frequency lists", rep("start_hz = 10.0\nstop_hz = 1e5\npoints = 8\npeak_volts = 1.0", "frequencies_hz = [50.0]\nstart_hz = 10.0\nstop_hz = 1e5\npoints = 8\npeak_volts = 1.0"),
			"", "ac_test[1].frequencies_hz", []string{"two frequency lists"}},
		{"sweep upside down", rep("start_hz = 10.0\nstop_hz = 1e5\npoints = 8\npeak_volts = 1.0", "start_hz = 1e5\nstop_hz = 10.0\npoints = 8\npeak_volts = 1.0"),
			"start_hz = 1e5", "ac_test[1].start_hz", []string{"not usable"}},
		// A sweep of 10¹² points is refused before its list is built (it
		// was built first, a 8 TB allocation).
		{"sweep of a trillion points", rep("points = 8\npeak_volts = 1.0", "points = 1000000000000\npeak_volts = 1.0"),
			"", "ac_test[1].start_hz", []string{"not usable"}},
		{"repeated frequency", rep("frequencies_hz = [50.0, 60.0, 100.0, 120.0]", "frequencies_hz = [50.0, 60.0, 50.0, 120.0]"),
			"frequencies_hz = [50.0, 60.0, 50.0", "ac_test[3].frequencies_hz", []string{"listed twice"}},
		{"frequency at Nyquist", rep("frequencies_hz = [50.0, 60.0, 100.0, 120.0]", "frequencies_hz = [50.0, 60.0, 100.0, 6e5]"),
			"", "ac_test[3].max_rate_hz", []string{"Nyquist"}},
		{"limits do not match frequencies", rep("limits_db = [80.0, 80.0, 78.0, 78.0]", "limits_db = [80.0, 78.0]"),
			"limits_db = [80.0, 78.0]", "ac_test[3].limits_db", []string{"2 limits for 4 frequencies"}},
		{"negative limit", rep("limits_db = [90.0]", "limits_db = [-90.0]"),
			"limits_db = [-90.0]", "ac_test[1].limits_db", []string{"out of range"}},
		{"zero peak", rep("peak_volts = 1.0", "peak_volts = 0.0"),
			"peak_volts = 0.0", "ac_test[1].peak_volts", []string{"must be positive"}},
		{"generator beyond its limit", rep("peak_volts = 1.0", "peak_volts = 3.0\nstimulus_range_volts = 5.0"),
			"peak_volts = 3.0", "ac_test[1].peak_volts", []string{"generator.max_peak_volts = 2 V"}},
		{"coupling gain divides the peak", rep("coupling_gain = 1.0", "coupling_gain = 0.2"),
			"", "ac_test[2].peak_volts", []string{"2.5 V peak"}},
		{"no generator limit", rep("max_peak_volts = 2.0\n", ""),
			"", "generator.max_peak_volts", []string{"not given"}},
		{"offset on a psrr test", rep("injection = \"series_injector\"", "injection = \"series_injector\"\noffset_volts = 1.0"),
			"offset_volts = 1.0", "ac_test[2].offset_volts", []string{"psrr"}},
		{"offset beyond the generator", rep("limits_db = [90.0]", "limits_db = [90.0]\noffset_volts = 6.0"),
			"offset_volts = 6.0", "ac_test[1].offset_volts", []string{"max_offset_volts = 5 V"}},
		{"unknown injection", rep("injection = \"series_injector\"", "injection = \"transformer\""),
			"injection = \"transformer\"", "ac_test[2].injection", []string{"unknown injection"}},
		{"injection on cmrr", rep("limits_db = [90.0]", "limits_db = [90.0]\ninjection = \"series_injector\""),
			"", "ac_test[1].injection", []string{"drives the common-mode node"}},
		{"board kind on an op-amp fixture", rep("kind = \"cmrr\"", "kind = \"board_cmrr\""),
			"kind = \"board_cmrr\"", "ac_test[1].kind", []string{"not available"}},
		{"duplicate kind", rep("kind = \"psrr_neg\"", "kind = \"psrr_pos\""),
			"", "ac_test[3].kind", []string{"already measured by ac_test[2]"}},
		{"supply-shift common mode", rep("common_mode = \"input_drive\"", "common_mode = \"supply_shift\""),
			"", "ac_test[1].kind", []string{"input_drive"}},
		{"through switch without a channel", rep("limits_db = [90.0]\nthrough_channel = \"190\"", "limits_db = [90.0]"),
			"", "ac_test[1].through_channel", []string{"without a channel"}},
		{"unknown through", rep("limits_db = [90.0]", "limits_db = [90.0]\nthrough = \"relay\""),
			"through = \"relay\"", "ac_test[1].through", []string{"unknown through"}},
		{"peak overloads the range", rep("peak_volts = 1.0", "peak_volts = 1.5"),
			"", "ac_test[1].stimulus_range_volts", []string{"overloads the 1 V range"}},
		{"response range below the through's peak", rep("limits_db = [90.0]", "limits_db = [90.0]\nresponse_range_volts = 0.2"),
			"response_range_volts = 0.2", "ac_test[1].response_range_volts", []string{"through calibration"}},
		{"zero records", rep("limits_db = [90.0]", "limits_db = [90.0]\nrecords = 0"),
			"records = 0", "ac_test[1].records", []string{"out of range"}},
		{"record too short", rep("limits_db = [90.0]", "limits_db = [90.0]\nmin_samples = 8"),
			"", "ac_test[1].min_samples", []string{"not usable"}},
		{"gbw tolerance of 1", rep("gbw_tolerance = 0.3", "gbw_tolerance = 1.0"),
			"", "part.gbw_hz", []string{"not usable"}},
		{"generator not bound", rep("generator  = { instrument = \"gen\", channel = \"1\" }\n", ""),
			"", "bench.roles.generator", []string{"not bound"}},
		{"unknown key in an ac_test", rep("limits_db = [90.0]", "limits_db = [90.0]\npeak_volt = 1.0"),
			"peak_volt = 1.0", "ac_test[1].peak_volt", []string{"unknown key", "peak_volts"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			doc := c.edit(freqPlanTOML(t))
			_, err := Parse([]byte(doc), "f.toml")
			if err == nil {
				t.Fatal("plan accepted")
			}
			var es Errors
			if !errors.As(err, &es) {
				t.Fatalf("error %T: %v", err, err)
			}
			var hit *Error
			for _, e := range es {
				if e.Key != c.key {
					continue
				}
				ok := true
				for _, s := range c.contains {
					ok = ok && strings.Contains(e.Error(), s)
				}
				if ok {
					hit = e
					break
				}
			}
			if hit == nil {
				t.Fatalf("no error on key %q containing %q; got:\n%v", c.key, c.contains, err)
			}
			if c.lineOf != "" {
				if want := lineContaining(t, doc, c.lineOf, 1); hit.Line != want {
					t.Errorf("line %d, want %d (%q): %v", hit.Line, want, c.lineOf, hit)
				}
			} else if hit.Line == 0 {
				t.Errorf("error without a line: %v", hit)
			}
			if hit.Fix == "" {
				t.Errorf("no fix given: %v", hit)
			}
		})
	}
}
