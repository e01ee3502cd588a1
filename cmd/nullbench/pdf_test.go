package main

import (
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"
	"unicode/utf8"

	"github.com/xuri/excelize/v2"
)

// The workbook prints: LibreOffice converts it to PDF (headless), every
// page carries "Page n of m" from the footer, and no column of the
// Results table is narrower than its longest value as displayed (a
// clipped number prints as "###"). Skipped only when no libreoffice binary
// is found; .ci/run installs libreoffice-calc and poppler-utils.
func TestWorkbookPrintsToPDF(t *testing.T) {
	lo, err := exec.LookPath("libreoffice")
	if err != nil {
		if lo, err = exec.LookPath("soffice"); err != nil {
			t.Skip("libreoffice not found (CI installs libreoffice-calc)")
		}
	}
	pdftotext, err := exec.LookPath("pdftotext")
	if err != nil {
		t.Fatal("libreoffice is here but pdftotext is not: install poppler-utils (as .ci/run does)")
	}
	b := cliStartSim(t, "")
	dir := t.TempDir()
	plan := cliWriteFile(t, dir, "plan.toml", b.BenchSection()+strings.ReplaceAll(cliPlanBody, "%CMRR_LIMIT%", "90.0"))
	out := filepath.Join(dir, "out")
	cliWantCode(t, cliExec(t, "run", plan, "--out", out), exitOK, "run", plan)
	book := filepath.Join(out, "campaign.xlsx")

	// Column widths against the longest displayed value of each column.
	f, err := excelize.OpenFile(book)
	if err != nil {
		t.Fatal(err)
	}
	rows, err := f.GetRows("Results")
	if err != nil {
		t.Fatal(err)
	}
	for i, row := range rows { // the table ends at the first blank row
		if len(row) == 0 {
			rows = rows[:i]
			break
		}
	}
	for c := range rows[0] {
		col, _ := excelize.ColumnNumberToName(c + 1)
		w, err := f.GetColWidth("Results", col)
		if err != nil {
			t.Fatal(err)
		}
		for r := 1; r < len(rows); r++ {
			if c >= len(rows[r]) {
				continue
			}
			v := rows[r][c]
			cell, _ := excelize.CoordinatesToCellName(c+1, r+1)
			if wraps(t, f, cell) {
				continue // wrapped text grows the row, it is not cut
			}
			if n := utf8.RuneCountInString(v); float64(n) > w {
				t.Errorf("Results column %s (%s) is %.1f characters wide but %s shows %q (%d characters): it prints clipped", col, rows[0][c], w, cell, v, n)
			}
			if isNumberText(v) && (strings.Contains(v, "E-") || strings.Contains(v, "E+")) {
				t.Errorf("Results %s shows %q: plain decimals wanted", cell, v)
			}
		}
	}
	f.Close()

	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	pdfDir := t.TempDir()
	cmd := exec.CommandContext(ctx, lo, "--headless", "--norestore", "-env:UserInstallation=file://"+filepath.Join(t.TempDir(), "lo-profile"),
		"--convert-to", "pdf", "--outdir", pdfDir, book)
	if outb, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("libreoffice --convert-to pdf: %v\n%s", err, outb)
	}
	pdf := filepath.Join(pdfDir, "campaign.pdf")
	if fi, err := os.Stat(pdf); err != nil || fi.Size() == 0 {
		t.Fatalf("no PDF: %v", err)
	}
	txt, err := exec.CommandContext(ctx, pdftotext, "-layout", pdf, "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	text := string(txt)
	pages := regexp.MustCompile(`Page (\d+) of (\d+)`).FindAllStringSubmatch(text, -1)
	if len(pages) < 2 {
		t.Fatalf("the PDF has %d page-number footers, want one per page:\n%.2000s", len(pages), text)
	}
	if pages[0][1] != "1" {
		t.Errorf("the first page footer is %q", pages[0][0])
	}
	for _, p := range pages {
		if p[2] != pages[0][2] {
			t.Errorf("page footers disagree on the page count: %q and %q", pages[0][0], p[0])
		}
	}
	if strconv.Itoa(len(pages)) != pages[0][2] {
		t.Errorf("%d page-number footers for %s pages: some page prints without one", len(pages), pages[0][2])
	}
	t.Logf("%d page-number footers found, %s pages", len(pages), pages[0][2])
	if strings.Contains(text, "###") {
		t.Errorf("the PDF shows ### (a clipped number)")
	}
	for _, want := range []string{"Report identifier", "Tested by", "Reviewed by"} {
		if !strings.Contains(text, want) {
			t.Errorf("the PDF does not show %q", want)
		}
	}
}

var numberText = regexp.MustCompile(`^[-+]?[0-9][0-9.,]*(E[-+]?[0-9]+)?$`)

func isNumberText(s string) bool { return numberText.MatchString(s) }

func wraps(t *testing.T, f *excelize.File, cell string) bool {
	t.Helper()
	id, err := f.GetCellStyle("Results", cell)
	if err != nil {
		t.Fatal(err)
	}
	st, err := f.GetStyle(id)
	if err != nil {
		t.Fatal(err)
	}
	return st.Alignment != nil && st.Alignment.WrapText
}
