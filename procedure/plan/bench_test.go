package plan

import (
	"path/filepath"
	"strings"
	"testing"
)

func TestCheckBench(t *testing.T) {
	p := &Plan{Source: "p.toml", Bench: Bench{
		Instruments: map[string]Instrument{"psu": {Profile: "supply2"}, "src": {Profile: "./src.toml"}, "x": {Profile: "nosuch"}},
		Roles: Roles{
			SupplyPos: RoleBinding{Instrument: "psu", Channel: "1"},
			SupplyNeg: RoleBinding{Instrument: "psu", Channel: "3", Negative: true},
		},
	}, Part: Part{CurrentLimitAmps: 5}}
	lookup := func(_, profile string) (BenchProfile, error) {
		if profile == "supply2" {
			return BenchProfile{Roles: map[string]bool{"supply": true}, SupplyChannels: []string{"1", "2"}, SupplyMaxAmps: 3}, nil
		}
		return BenchProfile{}, errUnknown
	}
	err := CheckBench(p, lookup)
	if err == nil {
		t.Fatal("no error")
	}
	for _, want := range []string{
		`key "bench.instrument.src.profile": profile "./src.toml": unknown`,
		`key "bench.instrument.x.profile": profile "nosuch": unknown`,
		`key "bench.roles.supply_neg.channel": instrument psu has no channel "3"`,
		`key "part.current_limit_amps": current limit 5 A is beyond the 3 A rating of psu`,
	} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("error lacks %q:\n%v", want, err)
		}
	}
	if n := strings.Count(err.Error(), "current limit 5 A"); n != 1 {
		t.Errorf("the current-limit problem is reported %d times", n)
	}
}

var errUnknown = errorString("unknown")

type errorString string

func (e errorString) Error() string { return string(e) }

// A true negative output (negative_channels) serves only supply_neg, and
// only bound with negative = true: the polarity rules of safety.CheckSafety
// depend on that flag.
func TestCheckBenchNegativeOutput(t *testing.T) {
	lookup := func(_, _ string) (BenchProfile, error) {
		return BenchProfile{Roles: map[string]bool{"supply": true}, SupplyChannels: []string{"1", "2"}, SupplyNegativeChannels: []string{"2"}}, nil
	}
	for _, tc := range []struct {
		name     string
		pos, neg RoleBinding
		want     string
	}{
		{"ok", RoleBinding{Instrument: "psu", Channel: "1"}, RoleBinding{Instrument: "psu", Channel: "2", Negative: true}, ""},
		{"not marked", RoleBinding{Instrument: "psu", Channel: "1"}, RoleBinding{Instrument: "psu", Channel: "2"},
			`key "bench.roles.supply_neg": channel "2" of psu is a negative output`},
		{"as V+", RoleBinding{Instrument: "psu", Channel: "2"}, RoleBinding{Instrument: "psu", Channel: "1", Negative: true},
			`key "bench.roles.supply_pos.channel": channel "2" of psu is a negative output`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := &Plan{Source: "p.toml", Bench: Bench{
				Instruments: map[string]Instrument{"psu": {Profile: "psu_negout"}},
				Roles:       Roles{SupplyPos: tc.pos, SupplyNeg: tc.neg},
			}}
			err := CheckBench(p, lookup)
			if tc.want == "" {
				if err != nil {
					t.Fatal(err)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want %q", err, tc.want)
			}
		})
	}
}

// TestProfilePath: relative profile paths are taken from the plan file's
// folder; absolute paths and built-in names are left as they are.
func TestProfilePath(t *testing.T) {
	p := &Plan{Source: filepath.Join("lab", "plans", "p.toml")}
	abs, _ := filepath.Abs(filepath.Join("x", "abs.toml"))
	tests := []struct{ entry, want string }{
		{"supply2", "supply2"},
		{"my.toml", filepath.Join("lab", "plans", "my.toml")},
		{"profiles/psu.toml", filepath.Join("lab", "plans", "profiles", "psu.toml")},
		{"../shared/psu.toml", filepath.Join("lab", "shared", "psu.toml")},
		{abs, abs},
	}
	for _, tt := range tests {
		if got := p.ProfilePath(tt.entry); got != tt.want {
			t.Errorf("ProfilePath(%q) = %q, want %q", tt.entry, got, tt.want)
		}
	}
}
