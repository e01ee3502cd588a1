package tomlkeys

import (
	"bytes"
	"testing"
)

// doc's lines are counted by hand (TOML v1.0.0: tables, arrays of tables,
// inline tables, arrays).
const doc = `title = "x"        # 1
[part]             # 2
nominal = 15.0     # 3
[[test]]           # 4
kind = "cmrr"      # 5
levels = [         # 6
  -1.0,            # 7
  1.0,             # 8
]                  # 9
[[test]]           # 10
kind = "aol"       # 11
[bench.roles]      # 12
meter = { instrument = "dmm", channel = "1" }  # 13
"odd key" = 2      # 14
`

func TestLocate(t *testing.T) {
	k := Locate([]byte(doc))
	for _, c := range []struct {
		path string
		line int
	}{
		{"title", 1}, {"part", 2}, {"part.nominal", 3}, {"test[1]", 4}, {"test[1].kind", 5},
		{"test[1].levels", 6}, {"test[2].kind", 11}, {"bench.roles.meter.channel", 13},
		{`bench.roles."odd key"`, 14},
		{"test[2].missing", 10}, // the nearest enclosing table the file names
		{"nowhere", 0},
	} {
		if got := k.Line(c.path); got != c.line {
			t.Errorf("Line(%q) = %d, want %d", c.path, got, c.line)
		}
	}
	if got := k.ElemLine("test[1].levels", 1); got != 8 {
		t.Errorf("ElemLine(levels, 1) = %d, want 8", got)
	}
	if !k.Has("test[2].kind") || k.Has("test[3]") {
		t.Error("Has: want test[2].kind, not test[3]")
	}
	if got := k.KeyAt(11, []string{"test", "kind"}); got != "test[2].kind" {
		t.Errorf("KeyAt(11, test.kind) = %q", got)
	}
	if got := Split(`a."b.c".d[2]`); len(got) != 3 || got[1] != "b.c" || got[2] != "d[2]" {
		t.Errorf("Split = %q", got)
	}
	if got := Join("a", "b c"); got != `a."b c"` {
		t.Errorf("Join = %q", got)
	}
}

// FuzzLocate: any input, however broken, gives an index whose lines lie
// within the document.
func FuzzLocate(f *testing.F) {
	f.Add([]byte(doc))
	f.Add([]byte("[a\nb = "))
	f.Fuzz(func(t *testing.T, data []byte) {
		k := Locate(data)
		n := bytes.Count(data, []byte("\n")) + 1
		for path, l := range k.lines {
			if l < 1 || l > n || k.Line(path) != l {
				t.Fatalf("key %q at line %d of %d", path, l, n)
			}
		}
	})
}
