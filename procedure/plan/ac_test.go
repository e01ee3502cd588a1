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
	if err := CheckSafety(p); err != nil {
		t.Errorf("example frequency plan refused: %v", err)
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

// widenGenerator lifts the generator limits and the digitizer ranges, so
// that only the part's ratings can refuse a sine.
func widenGenerator(p *Plan) {
	p.Generator.MaxPeakVolts, p.Generator.MaxOffsetVolts = 20, 20
	p.Fixture.MaxStimulusVolts = 20
	for i := range p.ACTests {
		p.ACTests[i].StimulusRangeVolts = 20
		p.ACTests[i].ResponseRangeVolts = 20
	}
}

// TestCheckSafetyACPeaks: the sine is checked at DC level ± peak. The
// example part's common-mode range is V+ − 2 V − 0.5 V margin = +12.5 V
// and V− + 2.5 V = −12.5 V (cm_headroom + cm_margin, as at DC), and its
// span rating is 36 V on ±15 V rails, so a rail may carry at most 6 V
// peak of ripple. (Limits worked by hand from the plan's ratings.)
func TestCheckSafetyACPeaks(t *testing.T) {
	cases := []struct {
		name      string
		edit      func(p *Plan)
		refused   bool
		key       string
		contains  []string
		safePeakV float64 // the largest safe peak the fix names (0: not checked)
	}{
		{"cm offset + peak inside the range", func(p *Plan) { p.ACTests[0].OffsetVolts, p.ACTests[0].PeakVolts = 11, 1.5 }, false, "", nil, 0},
		{"cm offset + peak beyond the range", func(p *Plan) { p.ACTests[0].OffsetVolts, p.ACTests[0].PeakVolts = 12, 1 },
			true, "ac_test[1].peak_volts", []string{"cmrr sine positive peak", "common-mode range"}, 0.5},
		{"cm negative peak beyond the range", func(p *Plan) { p.ACTests[0].OffsetVolts, p.ACTests[0].PeakVolts = -11, 2 },
			true, "ac_test[1].peak_volts", []string{"negative peak", "common-mode range"}, 1.5},
		{"cm DC level alone beyond the range", func(p *Plan) { p.ACTests[0].OffsetVolts, p.ACTests[0].PeakVolts = 13, 0.1 },
			true, "ac_test[1].peak_volts", []string{"common-mode range"}, 0},
		{"ripple beyond the span rating", func(p *Plan) { p.ACTests[1].PeakVolts = 7 },
			true, "ac_test[2].peak_volts", []string{"psrr_pos sine positive peak", "36 V"}, 6},
		{"ripple inside the span rating", func(p *Plan) { p.ACTests[1].PeakVolts = 5.5 }, false, "", nil, 0},
		{"V− ripple beyond the span rating", func(p *Plan) { p.ACTests[2].PeakVolts = 6.5 },
			true, "ac_test[3].peak_volts", []string{"psrr_neg sine negative peak"}, 6},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := loadExamplePlan(t, "freq_noise_gain")
			widenGenerator(p)
			c.edit(p)
			err := CheckSafety(p)
			if !c.refused {
				if err != nil {
					t.Fatalf("refused: %v", err)
				}
				return
			}
			var se *SafetyError
			if !errors.As(err, &se) {
				t.Fatalf("want a SafetyError, got %v", err)
			}
			found := false
			for _, r := range se.Refusals {
				ok := r.Key == c.key
				for _, s := range c.contains {
					ok = ok && strings.Contains(r.Error(), s)
				}
				if !ok {
					continue
				}
				found = true
				if r.Line == 0 {
					t.Errorf("refusal without a line: %v", r)
				}
				if c.safePeakV > 0 && !strings.Contains(r.Fix, fmtMag(c.safePeakV)) {
					t.Errorf("fix %q does not name the largest safe peak %s", r.Fix, fmtMag(c.safePeakV))
				}
			}
			if !found {
				t.Errorf("no refusal on %q containing %q:\n%v", c.key, c.contains, err)
			}
		})
	}
}

// TestAssessHazardCountsACPeaks: the hazardous-voltage gate (60 V DC,
// SELV per IEC 60950-1 §1.2.8) sees a sine's peak, not its DC level: ±28 V
// rails are 56 V across (below), and 5 V peak of ripple on V+ takes them
// to 61 V (above).
func TestAssessHazardCountsACPeaks(t *testing.T) {
	p := loadExamplePlan(t, "freq_noise_gain")
	p.Part.NominalPosVolts, p.Part.NominalNegVolts, p.Part.MaxSupplySpanVolts = 28, -28, 70
	p.ACTests = p.ACTests[:2]
	widenGenerator(p)
	p.ACTests[1].PeakVolts = 1
	if h := AssessHazard(p); h.Hazardous || math.Abs(h.MaxAcrossVolts-57) > 1e-9 {
		t.Fatalf("1 V peak on 56 V: %+v", h)
	}
	p.ACTests[1].PeakVolts = 5
	h := AssessHazard(p)
	if !h.Hazardous || math.Abs(h.MaxAcrossVolts-61) > 1e-9 || !strings.Contains(h.Where, "ac_test[2] (psrr_pos) sine positive peak") {
		t.Fatalf("5 V peak on 56 V: %+v", h)
	}
	if err := CheckSafety(p); err == nil || !strings.Contains(err.Error(), "hazard") {
		t.Errorf("hazardous sine accepted without consent: %v", err)
	}
}

// TestWriteCheckACTests: check lists each [[ac_test]] with its sine's
// extremes at the part and, per frequency, the limit and the bench time
// of its three records. At 10 Hz with min_cycles 8 and min_samples 2000 a
// record is 8 cycles = 0.8 s; settling is max(10 cycles, 0.2 s) = 1 s; three
// records with their settling take 5.4 s (worked by hand from the
// defaults in ac.go).
func TestWriteCheckACTests(t *testing.T) {
	p := loadExamplePlan(t, "freq_noise_gain")
	var b strings.Builder
	if err := WriteCheck(&b, p, nil); err != nil {
		t.Fatal(err)
	}
	out := b.String()
	for _, s := range []string{
		"ac_test[1] cmrr: sine 1 V peak about 0 V on the common-mode node (generator output 1 at 1 V peak)",
		"ac_test[2] psrr_pos: sine 0.5 V peak about 0 V on the rail through a series_injector",
		"at the peaks: V+ +14.5 V … +15.5 V",
		"10 Hz  limit ≥ 90 dB      record 0.8s, with settling 5.4s",
		"60 Hz  limit ≥ 80 dB",
	} {
		if !strings.Contains(out, s) {
			t.Errorf("check output lacks %q:\n%s", s, out)
		}
	}
	if got := ACRecordSeconds(&p.ACTests[0], 10); math.Abs(got-0.8) > 1e-12 {
		t.Errorf("record at 10 Hz %g s, want 0.8", got)
	}
}
