package archive

import (
	"context"
	"fmt"
	"math"
	"testing"
	"time"
)

// benchCampaign is an invented campaign of 50 results (25 units × cmrr and
// psrr_pos at 25 °C), each with 3 budget rows and 10 readings (5 levels ×
// 2 repeats): 500 readings.
func benchCampaign(i int) *Campaign {
	lot := fmt.Sprintf("L%04d", i)
	c := sampleCampaign(i, lot, fmt.Sprintf("bench-%d", i%3), 0, 0)
	c.TemperaturesC = []float64{25}
	for u := 0; u < 25; u++ {
		unit := fmt.Sprintf("U%02d", u+1)
		c.Units = append(c.Units, Unit{ID: unit, Serial: fmt.Sprintf("%s-%02d", lot, u+1)})
		for _, test := range []string{"cmrr", "psrr_pos"} {
			coef := 1 + 0.01*float64((i*31+u*7)%50)
			c.Results = append(c.Results, Result{Unit: unit, Test: test, TemperatureC: 25,
				CoefficientUVPerV: coef, CoefficientStdUUVPerV: 0.02, CoefficientExpandedUUVPerV: 0.04,
				RatioDB: 20 * math.Log10(1e6/coef), ExpandedUDB: 0.3, CoverageK: 2.1, DOFEffective: 14, Resolved: true,
				LowerBoundDB: math.NaN(), LimitDB: 100, PhaseDeg: math.NaN(), Verdict: "pass", Rule: "guarded",
				Notes: []string{"slope with drift term"}})
			for k, comp := range []string{"slope (Type A)", "noise gain K", "meter gain"} {
				c.Budgets = append(c.Budgets, BudgetRow{Unit: unit, Test: test, TemperatureC: 25, Component: comp,
					Kind: "B", Distribution: "rectangular", Value: 1, ValueUnit: "V/V", StdUncertainty: 1e-4,
					Sensitivity: 1, Contribution: 1e-4, DOF: float64(8 + k)})
			}
			for rep := 0; rep < 2; rep++ {
				for step := 0; step < 5; step++ {
					n := len(c.Readings)
					c.Readings = append(c.Readings, Reading{Time: c.Started.Add(time.Duration(n) * time.Second),
						BenchSeconds: float64(n), Unit: unit, Test: test, TemperatureC: 25, MeasuredC: math.NaN(),
						Repeat: rep, Step: step, SetVolts: float64(step-2) * 5, ReadVolts: float64(step-2)*5 + 1e-4,
						MeterVolts: coef * 1e-3 * float64(step-2) * 5, MeterSDVolts: 2e-7, N: 10, SettleSeconds: 0.3})
				}
			}
		}
	}
	return c
}

const benchCampaigns = 1000

// BenchmarkAdd1000Campaigns adds 1,000 campaigns of 50 results (with
// 150 budget rows and 500 readings each) to a new store, one transaction
// per campaign as "archive add" does, and reports the time per campaign.
//
//	go test ./procedure/archive -run XXX -bench Add1000 -benchtime 1x
func BenchmarkAdd1000Campaigns(b *testing.B) {
	cs := make([]*Campaign, benchCampaigns)
	for i := range cs {
		cs[i] = benchCampaign(i)
	}
	for _, be := range backends() {
		b.Run(be.name, func(b *testing.B) {
			for b.Loop() {
				b.StopTimer()
				s := openStore(b, be.location(b))
				b.StartTimer()
				for _, c := range cs {
					if _, _, err := s.Add(context.Background(), c); err != nil {
						b.Fatal(err)
					}
				}
				b.StopTimer()
				reportSize(b, s)
				s.Close()
				b.StartTimer()
			}
			b.ReportMetric(float64(b.Elapsed().Milliseconds())/float64(b.N*benchCampaigns), "ms/campaign")
			b.ReportMetric(float64(b.N*benchCampaigns*500)/b.Elapsed().Seconds(), "readings/s")
		})
	}
}

// BenchmarkTrendQuery queries one part's cmrr at 25 °C across the 1,000
// stored campaigns (25,000 results with their lot, bench and serial), the
// selection a trend workbook starts from.
//
//	go test ./procedure/archive -run XXX -bench TrendQuery -benchtime 20x
func BenchmarkTrendQuery(b *testing.B) {
	for _, be := range backends() {
		b.Run(be.name, func(b *testing.B) {
			s := openStore(b, be.location(b))
			ctx := context.Background()
			for i := 0; i < benchCampaigns; i++ {
				if _, _, err := s.Add(ctx, benchCampaign(i)); err != nil {
					b.Fatal(err)
				}
			}
			t25 := 25.0
			b.ResetTimer()
			for b.Loop() {
				rows, err := s.Query(ctx, Filter{Part: "HX-4107", Test: "cmrr", TemperatureC: &t25})
				if err != nil {
					b.Fatal(err)
				}
				if len(rows) != 25*benchCampaigns {
					b.Fatalf("%d rows", len(rows))
				}
			}
		})
	}
}

// reportSize reports the store's size on disk (SQLite: the file after a
// checkpoint; PostgreSQL: pg_database_size).
func reportSize(b *testing.B, s *Store) {
	var n int64
	q := `SELECT page_count * page_size FROM pragma_page_count(), pragma_page_size()`
	if s.d.name == "sqlite" {
		if _, err := s.db.Exec(`PRAGMA wal_checkpoint(TRUNCATE)`); err != nil {
			b.Fatal(err)
		}
	} else {
		q = `SELECT pg_database_size(current_database())`
	}
	if err := s.db.QueryRow(q).Scan(&n); err != nil {
		b.Fatal(err)
	}
	b.ReportMetric(float64(n)/1e6, "MB-on-disk")
}
