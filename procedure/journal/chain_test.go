package journal

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"os"
	"strings"
	"testing"
	"time"

	"nullbench/procedure/plan"
)

// readLines splits a journal file into its lines (each with its newline).
func readLines(t *testing.T, path string) [][]byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return bytes.SplitAfter(b, []byte("\n"))
}

func TestChainIntactJournalVerifies(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	path, _ := writeTestJournal(t, p)
	c, err := ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !c.Chained || c.ChainBreakLine != 0 {
		t.Fatalf("intact journal: chained %v, break at line %d", c.Chained, c.ChainBreakLine)
	}
	if err := c.CheckIntegrity(c.Seal()); err != nil {
		t.Fatalf("intact journal against its own seal: %v", err)
	}
	// The first record's chain is SHA-256 of "" + "\n" + its body, computed
	// here independently with the standard library (FIPS 180-4 SHA-256).
	lines := readLines(t, path)
	first := string(bytes.TrimSpace(lines[0]))
	i := strings.Index(first, `,"chain":"`)
	if i < 0 {
		t.Fatalf("first record has no chain field: %s", first)
	}
	body := first[:i] + "}"
	sum := sha256.Sum256([]byte("\n" + body))
	want := hex.EncodeToString(sum[:])
	if got := first[i+len(`,"chain":"`) : len(first)-2]; got != want {
		t.Errorf("first chain value %s, want SHA-256(\"\\n\"+body) = %s", got, want)
	}
}

func TestChainReportsTheEditedLine(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	tests := []struct {
		name     string
		edit     func(lines [][]byte) [][]byte
		wantLine int
	}{
		{"a meter value changed on line 5", func(l [][]byte) [][]byte {
			l[4] = bytes.Replace(l[4], []byte(`"meter_volts":0.001234`), []byte(`"meter_volts":0.001235`), 1)
			return l
		}, 5},
		{"line 7 deleted", func(l [][]byte) [][]byte {
			return append(l[:6:6], l[7:]...)
		}, 7},
		{"line 4 duplicated", func(l [][]byte) [][]byte {
			out := append([][]byte{}, l[:4]...)
			out = append(out, l[3])
			return append(out, l[4:]...)
		}, 5},
		{"chain field removed from line 3", func(l [][]byte) [][]byte {
			s := string(l[2])
			i := strings.Index(s, `,"chain":"`)
			l[2] = []byte(s[:i] + "}\n")
			return l
		}, 3},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			path, _ := writeTestJournal(t, p)
			lines := tt.edit(readLines(t, path))
			if err := os.WriteFile(path, bytes.Join(lines, nil), 0o644); err != nil {
				t.Fatal(err)
			}
			c, err := ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			err = c.CheckIntegrity(Seal{})
			var ie *IntegrityError
			if !errors.As(err, &ie) || ie.Line != tt.wantLine {
				t.Fatalf("got %v, want journal edited or truncated at line %d", err, tt.wantLine)
			}
			if !strings.Contains(err.Error(), "journal edited or truncated at line") {
				t.Errorf("message %q", err)
			}
		})
	}
}

func TestChainSealFindsACutAtALineBoundary(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	path, _ := writeTestJournal(t, p)
	full, err := ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	seal := full.Seal()
	lines := readLines(t, path)
	// Cut after line 12: lines 1..12 remain, each complete.
	if err := os.WriteFile(path, bytes.Join(lines[:12], nil), 0o644); err != nil {
		t.Fatal(err)
	}
	c, err := ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if c.Truncated || c.ChainBreakLine != 0 {
		t.Fatalf("a cut at a line boundary looks like a torn line or a break: %+v", c)
	}
	err = c.CheckIntegrity(seal)
	var ie *IntegrityError
	if !errors.As(err, &ie) || ie.Line != 13 {
		t.Fatalf("got %v, want truncated at line 13", err)
	}
	// A different journal of the same length ends on another hash.
	other := seal
	other.Chain = strings.Repeat("0", 64)
	if err := full.CheckIntegrity(other); err == nil {
		t.Error("a seal with another chain value passed")
	}
}

func TestChainContinuesAcrossResume(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	path, _ := writeTestJournal(t, p)
	w, _, err := Resume(path, p, testHeader(p))
	if err != nil {
		t.Fatal(err)
	}
	w.Now = func() time.Time { return journalTestTime }
	if err := w.Reading(testReading("U02", plan.TestCMRR, 0, 0, 0, "")); err != nil {
		t.Fatal(err)
	}
	w.Close()
	c, err := ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if c.ChainBreakLine != 0 {
		t.Fatalf("resumed journal breaks at line %d", c.ChainBreakLine)
	}
	// An edited journal is not continued.
	lines := readLines(t, path)
	lines[1] = bytes.Replace(lines[1], []byte("DMM-65"), []byte("DMM-66"), 1)
	if err := os.WriteFile(path, bytes.Join(lines, nil), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, _, err := Resume(path, p, testHeader(p)); err == nil || !strings.Contains(err.Error(), "line 2") {
		t.Fatalf("resume of an edited journal: %v", err)
	}
}

func TestChainOldJournalsReadUnchained(t *testing.T) {
	p := loadJournalPlan(t, "lot")
	path, _ := writeTestJournal(t, p)
	var out []byte
	for _, l := range readLines(t, path) {
		s := string(l)
		if i := strings.Index(s, `,"chain":"`); i >= 0 {
			s = s[:i] + "}\n"
		}
		out = append(out, s...)
	}
	if err := os.WriteFile(path, out, 0o644); err != nil {
		t.Fatal(err)
	}
	c, err := ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if c.Chained || c.CheckIntegrity(Seal{}) != nil {
		t.Fatalf("unchained journal: chained %v, %v", c.Chained, c.CheckIntegrity(Seal{}))
	}
}
