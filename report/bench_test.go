package report

import (
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"runtime/metrics"
	"sync"
	"testing"
	"time"
)

// largeCampaign is a synthetic campaign of the size a lot qualification
// reaches: units × temperatures × 4 tests, every reading kept (10 levels ×
// 2 repeats per test). Ratios are drawn from a seeded source.
func largeCampaign(units int, temps []float64) *Campaign {
	rng := rand.New(rand.NewPCG(4107, 220))
	tests := []string{"cmrr", "psrr_pos", "psrr_neg", "psrr_sym"}
	levels := []float64{0, 2, -2, 4, -4, 6, -6, 8, -8, 10}
	const repeats = 2
	nRes := units * len(temps) * len(tests)
	c := fixtureCampaign(defaultUnits, temps[:1]) // summary fields; rows replaced below
	c.Units = make([]UnitInfo, 0, units)
	c.Results = make([]Result, 0, nRes)
	c.Budgets = make([]BudgetRow, 0, 5*nRes)
	c.Fits = make([]FitRow, 0, nRes)
	c.Readings = make([]Reading, 0, nRes*len(levels)*repeats)
	c.LotStats, c.Closures, c.Temperature = nil, nil, nil
	t0 := time.Date(2026, 4, 1, 6, 0, 0, 0, time.UTC)
	bench := 0.0
	for _, temp := range temps {
		for u := range units {
			id := fmt.Sprintf("L7-%04d", u+1)
			if temp == temps[0] {
				c.Units = append(c.Units, UnitInfo{ID: id, Serial: fmt.Sprintf("SN%06d", 200000+u)})
			}
			for _, test := range tests {
				db := 118 + 6*rng.NormFloat64()
				coef := 1e6 / math.Pow(10, db/20)
				verdict := VerdictPass
				switch {
				case db < 109:
					verdict = VerdictFail
				case db < 110:
					verdict = VerdictConditionalFail
				case db < 111:
					verdict = VerdictConditionalPass
				}
				c.Results = append(c.Results, Result{Unit: id, Test: test, TemperatureC: temp,
					CoefficientUVPerV: coef, CoefficientStdUUVPerV: 0.05 * coef, RatioDB: db, ExpandedUDB: 0.9,
					ExpandedUDBLow: math.NaN(), ExpandedUDBHigh: math.NaN(), CoverageK: 2.1, DOFEffective: 17,
					Resolved: true, LowerBoundDB: math.NaN(), LimitDB: 110, Verdict: verdict, Rule: "guarded"})
				for k, comp := range []string{"slope (Type A)", "noise gain K", "meter gain", "stimulus read-back", "thermal EMF"} {
					c.Budgets = append(c.Budgets, BudgetRow{Unit: id, Test: test, TemperatureC: temp, Component: comp,
						Kind: "B", Distribution: "rectangular", Value: 1, ValueUnit: "1", StdUncertainty: 1e-3,
						Sensitivity: coef, Contribution: coef * 0.01 * float64(k+1), DOF: math.Inf(1)})
				}
				fit := FitRow{Unit: id, Test: test, TemperatureC: temp, N: len(levels) * repeats, Intercept: 1e-4,
					SlopeVPerV: 1e-3 * coef, SlopeU: 5e-5 * coef, DriftVPerS: 1e-9, DriftOriginSeconds: bench + 90,
					ResidualSDVolts: 2e-7, DOF: 17, MaxDeviationUV: 0.4}
				c.Fits = append(c.Fits, fit)
				for rep := range repeats {
					for step, x := range levels {
						c.Readings = append(c.Readings, Reading{Time: t0.Add(time.Duration(bench * float64(time.Second))),
							BenchSeconds: bench, Unit: id, Test: test, TemperatureC: temp, MeasuredC: temp + 0.02,
							Repeat: rep, Step: step, SetVolts: x, ReadVolts: x + 1e-4,
							MeterVolts: fit.Intercept + fit.SlopeVPerV*x + 2e-7*rng.NormFloat64(), MeterSDVolts: 3e-7,
							N: 10, SettleSeconds: 1.2})
						bench += 9
					}
				}
			}
		}
		for _, test := range tests {
			c.LotStats = append(c.LotStats, LotRow{Test: test, TemperatureC: temp, N: units, Mean: 118, SD: 6, Min: 98,
				Median: 118, Max: 138, LimitDB: 110, Cpl: 0.44, ToleranceBoundDB: 102, Coverage: 0.99, Confidence: 0.95, Yield: 0.91})
		}
	}
	for u := range units {
		for _, test := range tests {
			c.Temperature = append(c.Temperature, TempRow{Unit: fmt.Sprintf("L7-%04d", u+1), Test: test, SlopeDBPerC: -0.01, SlopeU: 0.002, RepeatabilityDB: 0.2})
		}
	}
	return c
}

// peakHeap samples the heap in use (objects plus unused heap spans, i.e.
// MemStats.HeapInuse) through runtime/metrics, which does not stop the
// world, until stop is called.
func peakHeap() (stop func() uint64) {
	samples := []metrics.Sample{{Name: "/memory/classes/heap/objects:bytes"}, {Name: "/memory/classes/heap/unused:bytes"}}
	var peak uint64
	done := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		tick := time.NewTicker(2 * time.Millisecond)
		defer tick.Stop()
		for {
			metrics.Read(samples)
			if v := samples[0].Value.Uint64() + samples[1].Value.Uint64(); v > peak {
				peak = v
			}
			select {
			case <-done:
				return
			case <-tick.C:
			}
		}
	}()
	return func() uint64 { close(done); wg.Wait(); return peak }
}

// BenchmarkWorkbookLargeCampaign: 1,000 units × 3 temperatures × 4 tests,
// 240,000 readings. Run once: go test ./report -run ^$ -bench Large -benchtime=1x
func BenchmarkWorkbookLargeCampaign(b *testing.B) {
	c := largeCampaign(1000, []float64{-40, 25, 85})
	if len(c.Readings) != 240000 {
		b.Fatalf("%d readings, want 240000", len(c.Readings))
	}
	dir := b.TempDir()
	runtime.GC()
	var before runtime.MemStats
	runtime.ReadMemStats(&before)
	b.ReportAllocs()
	b.ResetTimer()
	stop := peakHeap()
	var size int64
	for i := 0; i < b.N; i++ {
		path := filepath.Join(dir, fmt.Sprintf("large-%d.xlsx", i))
		if err := WriteWorkbook(path, c, WorkbookOptions{TmpDir: dir}); err != nil {
			b.Fatal(err)
		}
		fi, _ := os.Stat(path)
		size = fi.Size()
	}
	peak := stop()
	b.StopTimer()
	b.ReportMetric(float64(peak)/1e6, "peak-heap-MB")
	b.ReportMetric(float64(before.HeapInuse)/1e6, "campaign-heap-MB")
	b.ReportMetric(float64(size)/1e6, "file-MB")
}

// BenchmarkReadingsCSVLarge exports the same 240,000 readings as CSV.
func BenchmarkReadingsCSVLarge(b *testing.B) {
	c := largeCampaign(1000, []float64{-40, 25, 85})
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if err := WriteReadingsCSV(io.Discard, c.Readings, CSVOptions{}); err != nil {
			b.Fatal(err)
		}
	}
}
