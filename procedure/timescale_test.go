package procedure

import (
	"math"
	"strings"
	"testing"
	"time"

	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

func TestCheckTimeScale(t *testing.T) {
	sim := journal.Identity{Instrument: "dmm", IDN: "NULLBENCH-SIM,DMM-65,SIM0001,1.0"}
	real := journal.Identity{Instrument: "psu", IDN: "ACME-INVENTED,PS-2,0042,2.1"}
	cases := []struct {
		scale float64
		ids   []journal.Identity
		ok    bool
	}{
		{1, []journal.Identity{real}, true},
		{100, []journal.Identity{sim}, true},
		{100, []journal.Identity{sim, real}, false},
		{0.5, []journal.Identity{real}, false},
	}
	for _, c := range cases {
		p := &plan.Plan{}
		p.Bench.TimeScale = c.scale
		err := checkTimeScale(p, &Rig{Identities: c.ids})
		if (err == nil) != c.ok {
			t.Errorf("scale %g ids %v: %v", c.scale, c.ids, err)
		}
		if err != nil && !strings.Contains(err.Error(), "psu") {
			t.Errorf("the error does not name the real instrument: %v", err)
		}
	}
}

func TestSecondsDoesNotOverflow(t *testing.T) {
	for _, c := range []struct {
		s    float64
		want time.Duration
	}{
		{2, 2 * time.Second},
		{0, 0},
		{-1, 0},
		{math.NaN(), 0},
		{1e12, time.Duration(math.MaxInt64)}, // 31 700 years: a Duration holds about 292
		{math.Inf(1), time.Duration(math.MaxInt64)},
	} {
		if got := seconds(c.s); got != c.want {
			t.Errorf("seconds(%g) = %v, want %v", c.s, got, c.want)
		}
	}
}
