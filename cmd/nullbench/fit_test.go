package main

import (
	"math"
	"os"
	"strings"
	"testing"
)

// cliNorrisCSV turns the NIST StRD Norris data file (columns y x) into the
// CSV "fit" reads: stimulus (x), measured (y), with a header row.
func cliNorrisCSV(t *testing.T) (string, int) {
	t.Helper()
	data, err := os.ReadFile(cliRepoFile("fit", "testdata", "reference", "nist_lls_norris.txt"))
	if err != nil {
		t.Fatal(err)
	}
	var b strings.Builder
	b.WriteString("x,y\n")
	n := 0
	for _, line := range strings.Split(string(data), "\n") {
		f := strings.Fields(line)
		if len(f) != 2 || strings.HasPrefix(line, "#") || f[0] == "y" {
			continue
		}
		b.WriteString(f[1] + "," + f[0] + "\n")
		n++
	}
	return b.String(), n
}

// "fit" on the NIST StRD Norris data reproduces the certified values.
func TestFitNorrisCertifiedValues(t *testing.T) {
	text, n := cliNorrisCSV(t)
	if n != 36 { // "36 Observations" (NIST description of Norris)
		t.Fatalf("%d observations read from the Norris file, want 36", n)
	}
	csvPath := cliWriteFile(t, t.TempDir(), "norris.csv", text)
	r := cliExec(t, "fit", csvPath, "--stimulus", "cm", "--gain", "1", "--json")
	cliWantCode(t, r, exitOK, "fit", csvPath)
	lines := cliJSONLines(t, r.out)
	if len(lines) != 1 {
		t.Fatalf("%d JSON objects, want 1:\n%s", len(lines), r.out)
	}
	m := lines[0]
	// NIST/ITL StRD Norris, certified values (fit/testdata/reference/
	// nist_lls_norris.txt, copied verbatim from the NIST file): B1, its
	// standard deviation, B0 and the residual standard deviation. At least
	// 10 significant digits must agree.
	tests := []struct {
		key  string
		want float64
	}{
		{"slope", 1.00211681802045},
		{"slope_u", 4.29796848199937e-04},
		{"intercept_volts", -0.262323073774029},
		{"residual_sd", 0.884796396144373},
	}
	for _, tt := range tests {
		got, ok := m[tt.key].(float64)
		if !ok {
			t.Errorf("%s missing: %v", tt.key, m)
			continue
		}
		rel := math.Abs(got-tt.want) / math.Abs(tt.want)
		t.Logf("%s = %.15g, certified %.15g, relative error %.2g", tt.key, got, tt.want, rel)
		if !(rel <= 1e-10) {
			t.Errorf("%s = %.15g, certified %.15g (relative error %.2g > 1e-10)", tt.key, got, tt.want, rel)
		}
	}
	if m["n"] != 36.0 || m["dof"] != 34.0 || m["quantity"] != "CMRR" {
		t.Errorf("n %v, dof %v, quantity %v; want 36, 34 (NIST: residual degrees of freedom 34), CMRR", m["n"], m["dof"], m["quantity"])
	}

	// The same file as text: the slope to the six digits shown.
	r = cliExec(t, "fit", csvPath, "--stimulus", "supply", "--gain", "1")
	cliWantCode(t, r, exitOK, "fit", csvPath)
	if !strings.Contains(r.out, "PSRR from 36 readings") || !strings.Contains(r.out, "1.00212 V/V") {
		t.Errorf("text output lacks the quantity or the slope:\n%s", r.out)
	}
}

// A CSV the fit cannot read is a usage error naming the file and line.
func TestFitBadCSV(t *testing.T) {
	tests := []struct {
		name, text, want string
	}{
		{"not a number", "stimulus,measured\n0,0.1\n1,1.1\nx,2.0\n", "line 4: field 1 \"x\""},
		{"not finite", "0,0.1\n1,NaN\n", "line 2: field 2"},
		{"ragged", "0,0.1\n1,1.1\n2,2.1,7\n", "line 3: 3 fields, earlier rows have 2"},
		{"one column", "# comment\n0\n", "line 2: 1 fields"},
		{"bad quote", "0,0.1\n1,\"1.1\n", "line 2"},
		{"empty", "stimulus,measured\n", "no readings"},
	}
	dir := t.TempDir()
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path := cliWriteFile(t, dir, strings.ReplaceAll(tt.name, " ", "_")+".csv", tt.text)
			r := cliExec(t, "fit", path, "--stimulus", "cm", "--gain", "1000")
			cliWantCode(t, r, exitUsage, "fit", path)
			if !strings.Contains(r.err, path+": ") || !strings.Contains(r.err, tt.want) {
				t.Errorf("stderr %q, want %s: ...%s...", r.err, path, tt.want)
			}
			if r.out != "" {
				t.Errorf("output for a bad file: %s", r.out)
			}
		})
	}
}

// Constant readings (a stuck meter) used to print "CMRR ≥ 2041.7 dB" with
// exit 0; a stimulus that never moved is no better. Both are errors now.
func TestFitImplausibleReadings(t *testing.T) {
	tests := []struct{ name, text, want string }{
		{"stuck meter", "stimulus,measured\n-5,0.802339\n0,0.802339\n5,0.802339\n-5,0.802339\n5,0.802339\n", "stuck meter"},
		{"stimulus did not move", "stimulus,measured\n1,0.1001\n1,0.1003\n1,0.0999\n", "stimulus shows no variation"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path := cliWriteFile(t, t.TempDir(), "points.csv", tt.text)
			r := cliExec(t, "fit", path, "--stimulus", "cm", "--gain", "1000")
			cliWantCode(t, r, exitFailure, "fit", path)
			if !strings.Contains(r.err, tt.want) || strings.Contains(r.out, "dB") {
				t.Errorf("stdout %q stderr %q; want an error saying %q and no ratio", r.out, r.err, tt.want)
			}
		})
	}
}
