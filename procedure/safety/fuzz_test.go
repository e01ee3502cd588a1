package safety

import (
	"os"
	"path/filepath"
	"testing"

	"nullbench/procedure/plan"
)

// FuzzSafetyRules: on every plan the parser accepts, the safety rules,
// the hazard assessment and the power orders never panic.
func FuzzSafetyRules(f *testing.F) {
	for _, name := range []string{"lot", "noise_gain", "board", "unsafe_hazardous", "freq_noise_gain"} {
		data, err := os.ReadFile(filepath.Join(examplePlanDir, name+".toml"))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Add([]byte("[[test]]\nkind = 'cmrr'\nlevels = [1, 2, nan]\n"))
	f.Add([]byte("[[ac_test]]\nkind = 'cmrr'\nstart_hz = 10.0\nstop_hz = 1e9\npoints = 1000000\nlimits_db = [nan]\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		p, err := plan.Parse(data, "fuzz.toml")
		if err != nil {
			return
		}
		_ = AssessHazard(p)
		if CheckSafety(p) == nil {
			_ = PowerUpOrder(p)
			_ = PowerDownOrder(p)
		}
	})
}
