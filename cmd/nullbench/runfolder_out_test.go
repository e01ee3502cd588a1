package main

import (
	"os"
	"path/filepath"
	"testing"

	"nullbench/procedure/plan"
)

// TestCheckOutDirOwnFiles: the journal being reported and its plan are
// not someone else's files in the output folder; anything else still is
// (a folder of foreign files is never written into by mistake).
func TestCheckOutDirOwnFiles(t *testing.T) {
	p := &plan.Plan{Source: "x-plan.toml", Hash: "00"}
	cases := []struct {
		name    string
		files   []string
		wantErr bool
	}{
		{"only the journal and its plan", []string{"x-journal.jsonl", "x-plan.toml"}, false},
		{"a foreign file beside them", []string{"x-journal.jsonl", "x-plan.toml", "notes.txt"}, true},
		{"empty", nil, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			for _, f := range c.files {
				if err := os.WriteFile(filepath.Join(dir, f), []byte("x"), 0o644); err != nil {
					t.Fatal(err)
				}
			}
			err := checkOutDir(dir, p, false, filepath.Join(dir, "x-journal.jsonl"), filepath.Join(dir, "x-plan.toml"))
			if (err != nil) != c.wantErr {
				t.Errorf("checkOutDir with %v: %v, want error %v", c.files, err, c.wantErr)
			}
		})
	}
}
