package safety

import (
	"errors"
	"math"
	"strings"
	"testing"

	"nullbench/procedure/plan"
)

// TestExampleFreqPlanSafe: the shipped frequency-response plan passes
// the safety rules as it stands.
func TestExampleFreqPlanSafe(t *testing.T) {
	p := loadExamplePlan(t, "freq_noise_gain")
	if err := CheckSafety(p); err != nil {
		t.Errorf("example frequency plan refused: %v", err)
	}
}

// widenGenerator lifts the generator limits and the digitizer ranges, so
// that only the part's ratings can refuse a sine.
func widenGenerator(p *plan.Plan) {
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
		edit      func(p *plan.Plan)
		refused   bool
		key       string
		contains  []string
		safePeakV float64 // the largest safe peak the fix names (0: not checked)
	}{
		{"cm offset + peak inside the range", func(p *plan.Plan) { p.ACTests[0].OffsetVolts, p.ACTests[0].PeakVolts = 11, 1.5 }, false, "", nil, 0},
		{"cm offset + peak beyond the range", func(p *plan.Plan) { p.ACTests[0].OffsetVolts, p.ACTests[0].PeakVolts = 12, 1 },
			true, "ac_test[1].peak_volts", []string{"cmrr sine positive peak", "common-mode range"}, 0.5},
		{"cm negative peak beyond the range", func(p *plan.Plan) { p.ACTests[0].OffsetVolts, p.ACTests[0].PeakVolts = -11, 2 },
			true, "ac_test[1].peak_volts", []string{"negative peak", "common-mode range"}, 1.5},
		{"cm DC level alone beyond the range", func(p *plan.Plan) { p.ACTests[0].OffsetVolts, p.ACTests[0].PeakVolts = 13, 0.1 },
			true, "ac_test[1].peak_volts", []string{"common-mode range"}, 0},
		{"ripple beyond the span rating", func(p *plan.Plan) { p.ACTests[1].PeakVolts = 7 },
			true, "ac_test[2].peak_volts", []string{"psrr_pos sine positive peak", "36 V"}, 6},
		{"ripple inside the span rating", func(p *plan.Plan) { p.ACTests[1].PeakVolts = 5.5 }, false, "", nil, 0},
		{"V− ripple beyond the span rating", func(p *plan.Plan) { p.ACTests[2].PeakVolts = 6.5 },
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
				if c.safePeakV > 0 && !strings.Contains(r.Fix, plan.FormatMag(c.safePeakV)) {
					t.Errorf("fix %q does not name the largest safe peak %s", r.Fix, plan.FormatMag(c.safePeakV))
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
