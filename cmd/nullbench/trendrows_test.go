package main

import (
	"math"
	"testing"

	"nullbench/procedure/archive"
)

// TestTrendRowsCarryUnresolved: a result whose ratio was not resolved is
// marked BoundOnly in both value modes, so the trend leaves it out of the
// statistics; with --value uv the coefficient is no point estimate either
// (its expanded uncertainty reaches zero, GUM JCGM 100:2008 6.2.1: the
// interval y ± U then includes 0).
func TestTrendRowsCarryUnresolved(t *testing.T) {
	rows := []archive.Row{
		{Part: "HX-4107", Lot: "L1", Result: archive.Result{Unit: "U1", Test: "cmrr", CoefficientUVPerV: 0.4,
			CoefficientExpandedUUVPerV: 0.9, RatioDB: math.NaN(), LowerBoundDB: 120.9, LimitDB: 100, Resolved: false}},
		{Part: "HX-4107", Lot: "L1", Result: archive.Result{Unit: "U2", Test: "cmrr", CoefficientUVPerV: 2,
			CoefficientExpandedUUVPerV: 0.1, RatioDB: 113.98, LowerBoundDB: 113.5, LimitDB: 100, Resolved: true}},
	}
	for _, uv := range []bool{false, true} {
		got := trendRows(rows, uv)
		if !got[0].BoundOnly || got[1].BoundOnly {
			t.Errorf("uv=%v: BoundOnly %v, %v; want true (unresolved), false", uv, got[0].BoundOnly, got[1].BoundOnly)
		}
	}
}
