package report

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func TestWriteFileAtomicKeepsTheOldFileOnFailure(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "results.csv")
	if err := os.WriteFile(path, []byte("complete,old\r\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	// A write that fails half-way (as a kill would stop it).
	err := WriteFileAtomic(path, func(w io.Writer) error {
		io.WriteString(w, "trunc")
		return errors.New("killed")
	})
	if err == nil {
		t.Fatal("no error")
	}
	if b, _ := os.ReadFile(path); string(b) != "complete,old\r\n" {
		t.Errorf("old file replaced by %q", b)
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Errorf("temporary files left: %v", ents)
	}
	if err := WriteFileAtomic(path, func(w io.Writer) error { _, err := io.WriteString(w, "new"); return err }); err != nil {
		t.Fatal(err)
	}
	fi, _ := os.Stat(path)
	if b, _ := os.ReadFile(path); string(b) != "new" || fi.Mode().Perm() != 0o600 {
		t.Errorf("got %q mode %v", b, fi.Mode())
	}
}

func TestOutputsRefuseSymlinks(t *testing.T) {
	dir := t.TempDir()
	victim := filepath.Join(dir, "victim.txt")
	if err := os.WriteFile(victim, []byte("keep"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{"results.csv", "campaign.xlsx"} {
		link := filepath.Join(dir, name)
		if err := os.Symlink(victim, link); err != nil {
			t.Skip("no symbolic links here:", err)
		}
	}
	err := WriteFileAtomic(filepath.Join(dir, "results.csv"), func(w io.Writer) error { _, err := io.WriteString(w, "x"); return err })
	if !errors.Is(err, ErrSymlink) {
		t.Errorf("csv: %v", err)
	}
	err = WriteWorkbook(filepath.Join(dir, "campaign.xlsx"), &Campaign{}, WorkbookOptions{})
	if !errors.Is(err, ErrSymlink) {
		t.Errorf("workbook: %v", err)
	}
	if b, _ := os.ReadFile(victim); string(b) != "keep" {
		t.Errorf("the link target was overwritten: %q", b)
	}
}

func TestRemoveStaleTemps(t *testing.T) {
	dir := t.TempDir()
	old := filepath.Join(dir, tempPrefix+"123.csv")
	fresh := filepath.Join(dir, tempPrefix+"456.csv")
	keep := filepath.Join(dir, "results.csv")
	for _, p := range []string{old, fresh, keep} {
		if err := os.WriteFile(p, nil, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	past := time.Now().Add(-time.Hour)
	os.Chtimes(old, past, past)
	os.Chtimes(keep, past, past)
	n, err := RemoveStaleTemps(dir)
	if err != nil || n != 1 {
		t.Fatalf("removed %d: %v", n, err)
	}
	ents, _ := os.ReadDir(dir)
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	if got := strings.Join(names, " "); got != tempPrefix+"456.csv results.csv" {
		t.Errorf("left %s", got)
	}
}
