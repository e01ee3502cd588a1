package report

import (
	"strings"
	"unicode/utf8"
)

// maxCellUTF16 is the most characters (UTF-16 code units) a cell holds
// (Excel's specifications and limits; excelize.TotalCellChars).
const maxCellUTF16 = 32767

// cellText is what a workbook cell can hold of s, so that what is written
// reads back exactly:
//   - bytes that are not UTF-8 and characters XML 1.0 cannot carry (C0
//     controls other than tab, LF and CR; U+FFFE, U+FFFF; surrogates)
//     become U+FFFD (XML 1.0 §2.2, production [2] Char);
//   - text beyond 32,767 UTF-16 code units is cut there, never inside a
//     surrogate pair.
//
// Everything else, including leading '=', '+', '-', '@' and leading or
// trailing spaces, is kept verbatim.
func cellText(s string) string {
	if len(s) <= maxCellUTF16 && cleanXML(s) {
		return s // fast path: every byte is a 3-byte-or-less UTF-8 char, so UTF-16 length ≤ len(s)
	}
	var b strings.Builder
	units := 0
	for i, w := 0, 0; i < len(s); i += w {
		r, size := utf8.DecodeRuneInString(s[i:])
		w = size
		if r == utf8.RuneError && size <= 1 || !xmlChar(r) {
			r = utf8.RuneError
		}
		n := 1
		if r > 0xFFFF {
			n = 2
		}
		if units+n > maxCellUTF16 {
			break
		}
		units += n
		b.WriteRune(r)
	}
	return b.String()
}

// cleanXML reports whether s is valid UTF-8 made only of XML 1.0 Chars.
func cleanXML(s string) bool {
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c >= 0x80 {
			return cleanXMLSlow(s)
		}
		if c < 0x20 && c != '\t' && c != '\n' && c != '\r' {
			return false
		}
	}
	return true
}

func cleanXMLSlow(s string) bool {
	if !utf8.ValidString(s) {
		return false
	}
	for _, r := range s {
		if !xmlChar(r) {
			return false
		}
	}
	return true
}

// xmlChar is production [2] Char of XML 1.0.
func xmlChar(r rune) bool {
	switch {
	case r == 0x9, r == 0xA, r == 0xD:
		return true
	case r >= 0x20 && r <= 0xD7FF, r >= 0xE000 && r <= 0xFFFD, r >= 0x10000 && r <= 0x10FFFF:
		return true
	}
	return false
}

// sharedText is cellText for cells written through the normal excelize API
// (shared strings). OOXML readers decode "_xHHHH_" as the character U+HHHH
// (ECMA-376 Part 1 §22.9.2.19, ST_Xstring), and excelize v2.11.1 does not
// escape such literal text in shared strings (its stream writer does), so
// "_x0041_" would read back as "A". Escape the underscore that starts each
// such sequence as "_x005F_", scanning overlapping sequences too
// ("_x0041_x0042_"). TestTextRoundTrip catches the day excelize starts
// doing it itself.
func sharedText(s string) string {
	s = cellText(s)
	if !strings.Contains(s, "_x") {
		return s
	}
	var b strings.Builder
	for i := 0; i < len(s); i++ {
		if s[i] == '_' && xstringAt(s[i+1:]) {
			b.WriteString("_x005F_")
			continue
		}
		b.WriteByte(s[i])
	}
	return b.String()
}

// xstringAt reports whether s starts with "xHHHH_".
func xstringAt(s string) bool {
	if len(s) < 6 || s[0] != 'x' || s[5] != '_' {
		return false
	}
	for _, c := range []byte(s[1:5]) {
		if !('0' <= c && c <= '9' || 'a' <= c && c <= 'f' || 'A' <= c && c <= 'F') {
			return false
		}
	}
	return true
}
