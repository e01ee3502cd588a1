package plan

import (
	"strings"
	"testing"
)

// The refusals below are the tool's own rules (a plan must not start on a
// bench whose profiles cannot do what it asks; common practice, no
// published source).
func TestCheckBenchRoleTemplates(t *testing.T) {
	full := func(table string, keys ...string) map[string]bool {
		m := map[string]bool{}
		for _, k := range keys {
			m[table+"."+k] = true
		}
		return m
	}
	supplyAll := []string{"set_volts", "set_output", "read_volts", "set_current_limit", "read_amps"}
	without := func(all []string, drop string) []string {
		var out []string
		for _, k := range all {
			if k != drop {
				out = append(out, k)
			}
		}
		return out
	}
	base := func() *Plan {
		return &Plan{Source: "lab/p.toml", Bench: Bench{
			Instruments: map[string]Instrument{"psu": {Profile: "profiles/xyz.toml"}, "dmm": {Profile: "dmm"}, "mux": {Profile: "mux.toml"}},
			Roles: Roles{
				Meter:     RoleBinding{Instrument: "dmm"},
				SupplyPos: RoleBinding{Instrument: "psu", Channel: "1"},
				Switch:    RoleBinding{Instrument: "mux"},
			},
		}, Tests: []Test{{Kind: TestPSRRPos, Readings: 5}}}
	}
	tests := []struct {
		name     string
		edit     func(*Plan)
		profiles map[string]BenchProfile
		want     []string // substrings of the error; none: accepted
	}{
		{"all there", nil, map[string]BenchProfile{
			"psu": {Roles: map[string]bool{"supply": true}, Templates: full("supply", supplyAll...)},
			"dmm": {Roles: map[string]bool{"meter": true}, Templates: full("meter", "configure", "nplc", "count", "read")},
			"mux": {Roles: map[string]bool{"switch": true}, Templates: full("switch", "close", "open")},
		}, nil},
		{"supply without volt setting, stepped by psrr_pos", nil, map[string]BenchProfile{
			"psu": {Roles: map[string]bool{"supply": true}, Templates: full("supply", without(supplyAll, "set_volts")...)},
			"dmm": {Roles: map[string]bool{"meter": true}, Templates: full("meter", "configure", "nplc", "count", "read")},
			"mux": {Roles: map[string]bool{"switch": true}, Templates: full("switch", "close", "open_all")},
		}, []string{`lab/p.toml: key "bench.roles.supply_pos.instrument": profiles/xyz.toml: no "set_volts" template in [supply]; the plan's psrr_pos test needs it to step V+`}},
		// Without count the meter takes 5 triggers of one reading each.
		{"meter without count while readings = 5", nil, map[string]BenchProfile{
			"psu": {Roles: map[string]bool{"supply": true}, Templates: full("supply", supplyAll...)},
			"dmm": {Roles: map[string]bool{"meter": true}, Templates: full("meter", "configure", "nplc", "read")},
			"mux": {Roles: map[string]bool{"switch": true}, Templates: full("switch", "close", "open")},
		}, nil},
		{"meter read with init and fetch", nil, map[string]BenchProfile{
			"psu": {Roles: map[string]bool{"supply": true}, Templates: full("supply", supplyAll...)},
			"dmm": {Roles: map[string]bool{"meter": true}, Templates: full("meter", "configure", "nplc", "count", "init", "fetch")},
			"mux": {Roles: map[string]bool{"switch": true}, Templates: full("switch", "close", "open")},
		}, nil},
		{"meter that cannot take readings", nil, map[string]BenchProfile{
			"psu": {Roles: map[string]bool{"supply": true}, Templates: full("supply", supplyAll...)},
			"dmm": {Roles: map[string]bool{"meter": true}, Templates: full("meter", "configure", "nplc", "count", "init")},
			"mux": {Roles: map[string]bool{"switch": true}, Templates: full("switch", "close", "open")},
		}, []string{`key "bench.roles.meter.instrument": built-in profile "dmm": no "read" or "fetch" template in [meter]; the plan needs it to take readings`}},
		{"meter without count, one reading a point", func(p *Plan) { p.Tests[0].Readings = 1 }, map[string]BenchProfile{
			"psu": {Roles: map[string]bool{"supply": true}, Templates: full("supply", supplyAll...)},
			"dmm": {Roles: map[string]bool{"meter": true}, Templates: full("meter", "configure", "nplc", "read")},
			"mux": {Roles: map[string]bool{"switch": true}, Templates: full("switch", "close", "open")},
		}, nil},
		{"switch that cannot open", nil, map[string]BenchProfile{
			"psu": {Roles: map[string]bool{"supply": true}, Templates: full("supply", supplyAll...)},
			"dmm": {Roles: map[string]bool{"meter": true}, Templates: full("meter", "configure", "nplc", "count", "read")},
			"mux": {Roles: map[string]bool{"switch": true}, Templates: full("switch", "close", "query_closed")},
		}, []string{`mux.toml: no "open" or "open_all" template in [switch]; the plan needs it to disconnect each unit`}},
		{"supply profile bound to the meter role", func(p *Plan) { p.Bench.Roles.Meter.Instrument = "psu" }, map[string]BenchProfile{
			"psu": {Roles: map[string]bool{"supply": true}, Templates: full("supply", supplyAll...)},
			"dmm": {Roles: map[string]bool{"meter": true}, Templates: full("meter", "configure", "nplc", "count", "read")},
			"mux": {Roles: map[string]bool{"switch": true}, Templates: full("switch", "close", "open")},
		}, []string{`key "bench.roles.meter.instrument": profiles/xyz.toml: no [meter] table (it is written for supply); the plan binds instrument psu to the meter role`}},
		{"meter profile bound to a supply role", func(p *Plan) { p.Bench.Roles.SupplyPos.Instrument = "dmm" }, map[string]BenchProfile{
			"psu": {Roles: map[string]bool{"supply": true}, Templates: full("supply", supplyAll...)},
			"dmm": {Roles: map[string]bool{"meter": true}, Templates: full("meter", "configure", "nplc", "count", "read")},
			"mux": {Roles: map[string]bool{"switch": true}, Templates: full("switch", "close", "open")},
		}, []string{`key "bench.roles.supply_pos.instrument": built-in profile "dmm": no [supply] table (it is written for meter); the plan binds instrument dmm to the supply_pos role`}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			p := base()
			if tt.edit != nil {
				tt.edit(p)
			}
			err := CheckBench(p, func(name, _ string) (BenchProfile, error) { return tt.profiles[name], nil })
			if len(tt.want) == 0 {
				if err != nil {
					t.Fatalf("refused: %v", err)
				}
				return
			}
			if err == nil {
				t.Fatal("accepted")
			}
			for _, w := range tt.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error lacks %q:\n%v", w, err)
				}
			}
			if n := strings.Count(err.Error(), "\n") + 1; n != len(tt.want) {
				t.Errorf("%d problems, want %d:\n%v", n, len(tt.want), err)
			}
		})
	}
}
