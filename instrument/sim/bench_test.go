package sim

import (
	"bytes"
	"encoding/json"
	"flag"
	"math"
	"os"
	"testing"
)

var update = flag.Bool("update", false, "rewrite golden files in testdata/")

// TestTruthGolden pins the demo lot's truth (the `sim --truth` printout);
// refresh with go test -run TruthGolden -update.
func TestTruthGolden(t *testing.T) {
	b, err := New(Config{Clock: NewManualClock()})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	truth := b.Truth()
	got, err := json.MarshalIndent(truth, "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	got = append(got, '\n')
	const golden = "testdata/default_truth.golden.json"
	if *update {
		if err := os.WriteFile(golden, got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("%v (run with -update to create it)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("truth differs from %s (run with -update if the change is intended)", golden)
	}
	// Self-consistency of every entry, and the JSON keys the lead prints.
	var generic []map[string]any
	if err := json.Unmarshal(got, &generic); err != nil {
		t.Fatal(err)
	}
	for i, u := range truth {
		for _, k := range []string{"id", "fixture", "channel", "cmrr_db", "psrr_pos_db", "psrr_neg_db", "aol_db",
			"kc_uv_per_v", "kp_uv_per_v", "kn_uv_per_v", "ko_uv_per_v", "signs"} {
			if _, ok := generic[i][k]; !ok {
				t.Errorf("%s: key %q missing", u.ID, k)
			}
		}
		sum := u.KcUVPerV + u.KpUVPerV + u.KnUVPerV + u.KoUVPerV
		if math.Abs(sum) > 1e-12 {
			t.Errorf("%s: kc+kp+kn+ko = %g µV/V", u.ID, sum)
		}
		for _, c := range []struct {
			db, k float64
		}{{u.CMRRdB, u.KcUVPerV}, {u.PSRRPosdB, u.KpUVPerV}, {u.PSRRNegdB, u.KnUVPerV}, {u.AOLdB, u.KoUVPerV}} {
			if math.Abs(c.db-20*math.Log10(1e6/math.Abs(c.k))) > 1e-9 {
				t.Errorf("%s: %g dB does not match %g µV/V", u.ID, c.db, c.k)
			}
		}
		if u.Kind == "board" {
			if u.Board == nil {
				t.Fatalf("%s: no board truth", u.ID)
			}
			// Exact four-resistor bridge with an ideal op-amp (Sedra &
			// Smith difference amplifier), recomputed here independently.
			r := u.Board.ResistorsOhms
			adR := 0.5 * (r[3]/(r[2]+r[3])*(1+r[1]/r[0]) + r[1]/r[0])
			acmR := (r[0]*r[3] - r[1]*r[2]) / (r[0] * (r[2] + r[3]))
			if d := 20*math.Log10(math.Abs(adR/acmR)) - u.Board.ResistorCMRRdB; math.Abs(d) > 1e-9 {
				t.Errorf("%s: resistor CMRR off by %g dB", u.ID, d)
			}
			t.Logf("%s: CMRR %.2f dB (resistors alone %.2f dB), PSRR+ %.2f dB, PSRR− %.2f dB RTI, G %.4f",
				u.ID, u.Board.CMRRdB, u.Board.ResistorCMRRdB, u.Board.PSRRPosdB, u.Board.PSRRNegdB, u.Board.GainVPerV)
		}
	}
}
