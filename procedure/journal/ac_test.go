package journal

import (
	"path/filepath"
	"strings"
	"testing"

	"nullbench/procedure/plan"
)

// TestACReadingRoundTrip writes ac-reading records and reads them back:
// the fits survive (the journal is what `report` refits from), the work
// keys mark the points done, and CheckReadings refuses a second record of
// a point and a unit outside the plan, naming the line.
func TestACReadingRoundTrip(t *testing.T) {
	p := &plan.Plan{Hash: strings.Repeat("ab", 32), Source: "f.toml", Units: []plan.Unit{{ID: "N01"}}}
	path := filepath.Join(t.TempDir(), "j.jsonl")
	w, err := Open(path, testHeader(p))
	if err != nil {
		t.Fatal(err)
	}
	var cov [3][3]float64
	cov[0][0], cov[1][1], cov[0][1], cov[1][0] = 1e-12, 2e-12, 3e-13, 3e-13
	rec := ACReading{Unit: "N01", Test: plan.TestPSRRPos, FreqIndex: 3, FrequencyHz: 517.9, Record: ACThrough, Repeat: 1,
		GeneratorChannel: "2", GeneratorPeakVolts: 0.5, GeneratorOn: true, RateHz: 1e5, Samples: 2000, Cycles: 11,
		Channels: []ACChannelFit{{FrequencyHz: 517.9, A: 0.3, B: -0.4, C: 1e-3, Cov: cov, N: 2000, DOF: 1997, ResidualSDV: 1e-4}, {FrequencyHz: 517.9, A: 0.31, B: -0.39}}}
	if err := w.ACReading(rec); err != nil {
		t.Fatal(err)
	}
	for _, bad := range []ACReading{
		{Unit: "N01", Test: plan.TestCMRR, FrequencyHz: 50, Record: "calibration"},
		{Unit: "N01", Test: plan.TestCMRR, FrequencyHz: 0, Record: ACFloor},
		{Test: plan.TestCMRR, FrequencyHz: 50, Record: ACFloor},
	} {
		if err := w.ACReading(bad); err == nil {
			t.Errorf("accepted %+v", bad)
		}
	}
	w.Close()
	c, err := ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.ACReadings) != 1 || c.ACReadings[0].Channels[0].Cov != cov || c.ACReadings[0].Channels[1].A != 0.31 || c.ACReadingLines[0] != 2 {
		t.Fatalf("read back %+v (lines %v)", c.ACReadings, c.ACReadingLines)
	}
	k := ACKeyOf(rec)
	if !c.Done().Has(k) || k.Part != "ac-through" || k.Step != 3 || k.Repeat != 1 {
		t.Errorf("key %+v done %v", k, c.Done().Has(k))
	}
	if err := CheckReadings(p, c); err != nil {
		t.Fatal(err)
	}
	c.ACReadings = append(c.ACReadings, c.ACReadings[0])
	c.ACReadingLines = append(c.ACReadingLines, 3)
	if err := CheckReadings(p, c); err == nil || !strings.Contains(err.Error(), "line 3: a second through record") {
		t.Errorf("duplicate: %v", err)
	}
	c.ACReadings[1].Unit = "X9"
	if err := CheckReadings(p, c); err == nil || !strings.Contains(err.Error(), `unit "X9"`) {
		t.Errorf("unknown unit: %v", err)
	}
}
