package fit

import (
	"bytes"
	"encoding/json"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"
)

var update = flag.Bool("update", false, "rewrite golden files in testdata/")

// checkGolden compares got with testdata/name, or rewrites it with -update.
func checkGolden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", name)
	if *update {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./fit -run Golden -update to create it)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s differs from golden file (go test ./fit -run Golden -update to accept):\n--- got\n%s\n--- want\n%s", name, got, want)
	}
}

// TestHandFitGolden runs an invented hand-taken sweep (HX-4107, testdata)
// through ReadPointsCSV and HandFit and compares the text and JSON the
// command prints with golden files.
func TestHandFitGolden(t *testing.T) {
	f, err := os.Open(filepath.Join("testdata", "hand_cm_hx4107.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	p, err := ReadPointsCSV(f)
	if err != nil {
		t.Fatal(err)
	}
	h, err := HandFit(p, HandOptions{Stimulus: "cm", Gain: 1000, GainTol: 0.001, MeterGainPPM: 20, StimulusGainPPM: 500})
	if err != nil {
		t.Fatal(err)
	}
	var text bytes.Buffer
	if err := h.WriteText(&text); err != nil {
		t.Fatal(err)
	}
	checkGolden(t, "hand_cm_hx4107.golden.txt", text.Bytes())
	js, err := json.MarshalIndent(h, "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	checkGoldenJSON(t, "hand_cm_hx4107.golden.json", append(js, '\n'))
}

// checkGoldenJSON is checkGolden for JSON, comparing numbers to 1e-9
// relative so that last-digit differences between platforms (FMA fusion on
// arm64) do not fail it.
func checkGoldenJSON(t *testing.T, name string, got []byte) {
	t.Helper()
	if *update {
		checkGolden(t, name, got)
		return
	}
	want, err := os.ReadFile(filepath.Join("testdata", name))
	if err != nil {
		t.Fatalf("%v (run go test ./fit -run Golden -update to create it)", err)
	}
	var g, w any
	if err := json.Unmarshal(got, &g); err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(want, &w); err != nil {
		t.Fatal(err)
	}
	if path, ok := jsonClose(g, w, "$"); !ok {
		t.Errorf("%s differs from golden file at %s (go test ./fit -run Golden -update to accept):\n%s", name, path, got)
	}
}

func jsonClose(a, b any, path string) (string, bool) {
	switch av := a.(type) {
	case map[string]any:
		bv, ok := b.(map[string]any)
		if !ok || len(av) != len(bv) {
			return path, false
		}
		for k, v := range av {
			if p, ok := jsonClose(v, bv[k], path+"."+k); !ok {
				return p, false
			}
		}
		return "", true
	case []any:
		bv, ok := b.([]any)
		if !ok || len(av) != len(bv) {
			return path, false
		}
		for i := range av {
			if p, ok := jsonClose(av[i], bv[i], fmt.Sprintf("%s[%d]", path, i)); !ok {
				return p, false
			}
		}
		return "", true
	case float64:
		bv, ok := b.(float64)
		return path, ok && math.Abs(av-bv) <= 1e-9*math.Max(math.Abs(av), math.Abs(bv))
	default:
		return path, a == b
	}
}
