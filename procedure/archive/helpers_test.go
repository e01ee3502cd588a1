package archive

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math"
	"path/filepath"
	"testing"
	"time"

	"nullbench/procedure/archive/archivetest"
)

// backend opens fresh, empty stores of one kind.
type backend struct {
	name string
	// location returns the location of a new, empty store.
	location func(t testing.TB) string
}

func backends() []backend {
	return []backend{
		{"sqlite", func(t testing.TB) string { return filepath.Join(t.TempDir(), "archive.db") }},
		{"postgres", archivetest.PostgresURL},
	}
}

func openStore(t testing.TB, location string) *Store {
	t.Helper()
	s, err := Open(context.Background(), location)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

func hashOf(s string) string {
	h := sha256.Sum256([]byte(s))
	return hex.EncodeToString(h[:])
}

// sampleCampaign makes an invented campaign (part "HX-4107", invented
// instruments) with units × tests × temperatures results, each with
// three budget rows and readingsPer readings.
func sampleCampaign(seed int, lot, bench string, units, readingsPer int) *Campaign {
	started := time.Date(2026, 3, 1, 8, 0, 0, 0, time.UTC).Add(time.Duration(seed) * 24 * time.Hour)
	c := &Campaign{
		JournalHash:   hashOf(fmt.Sprintf("journal %d %s", seed, lot)),
		RunKey:        hashOf(fmt.Sprintf("run %d %s", seed, lot)),
		JournalPath:   fmt.Sprintf("/runs/%s/journal.jsonl", lot),
		PlanHash:      hashOf("plan"),
		PlanFile:      "lot.toml",
		Name:          "incoming " + lot,
		Part:          "HX-4107",
		Lot:           lot,
		Operator:      "bench operator",
		Bench:         bench,
		Started:       started,
		Finished:      started.Add(2 * time.Hour),
		Tool:          "nullbench test",
		DecisionRule:  "guarded acceptance, w = U (ILAC-G8:09/2019 §4.2)",
		TemperaturesC: []float64{25, 85},
		Instruments: []Instrument{
			{Name: "dmm", Roles: []string{"meter"}, Address: "tcp://127.0.0.1:5025", Identity: "Quillon,QM-651,0001,1.0", CalibrationDue: "2027-01-31"},
			{Name: "psu", Roles: []string{"supply_pos", "supply_neg"}, Address: "tcp://127.0.0.1:5026", Identity: "Quillon,QP-22,0002,1.0"},
		},
	}
	tests := []string{"cmrr", "psrr_pos", "psrr_neg"}
	for u := 0; u < units; u++ {
		unit := fmt.Sprintf("U%02d", u+1)
		c.Units = append(c.Units, Unit{ID: unit, Serial: fmt.Sprintf("S%d-%02d", seed, u+1), Channel: fmt.Sprint(u + 1)})
		for _, test := range tests {
			for _, temp := range c.TemperaturesC {
				coef := 1 + 0.1*float64((seed+u)%7) + temp/100
				ratio := 20 * math.Log10(1e6/coef)
				verdict := "pass"
				if u == 3 {
					verdict = "conditional pass"
				}
				c.Results = append(c.Results, Result{Unit: unit, Test: test, TemperatureC: temp,
					CoefficientUVPerV: coef, CoefficientStdUUVPerV: 0.05, CoefficientExpandedUUVPerV: 0.1,
					RatioDB: ratio, ExpandedUDB: 0.9, CoverageK: 2, DOFEffective: math.Inf(1), Resolved: true,
					LowerBoundDB: math.NaN(), LimitDB: 100, PhaseDeg: math.NaN(), PhaseExpandedUDeg: math.NaN(),
					NoiseFloorDB: math.NaN(), Coverage: 0.95, Verdict: verdict, Rule: "guarded",
					Flags: nil, Notes: []string{"slope with drift term", "open-loop correction applied"}})
				for i, comp := range []string{"slope (Type A)", "noise gain K", "meter gain"} {
					c.Budgets = append(c.Budgets, BudgetRow{Unit: unit, Test: test, TemperatureC: temp, Component: comp,
						Kind: map[bool]string{true: "A", false: "B"}[i == 0], Distribution: "normal", Value: 1.001, ValueUnit: "V/V",
						StdUncertainty: 1e-4, Sensitivity: 1.5, Contribution: 1.5e-4, DOF: []float64{8, math.Inf(1), math.Inf(1)}[i]})
				}
				for i := 0; i < readingsPer; i++ {
					c.Readings = append(c.Readings, Reading{Time: started.Add(time.Duration(len(c.Readings)) * time.Second),
						BenchSeconds: float64(len(c.Readings)), Unit: unit, Test: test, TemperatureC: temp, MeasuredC: math.NaN(),
						Step: i, SetVolts: float64(i) - 2, ReadVolts: float64(i) - 2.001, MeterVolts: 1e-5 * float64(i),
						MeterSDVolts: 1e-7, N: 10, SettleSeconds: 0.2})
				}
			}
		}
	}
	return c
}
