// Package tomlkeys finds where each key of a TOML document is: the line of
// every key, table and array element, by dotted key path with 1-based
// indexes for arrays of tables ("test[2].levels"). Package plan uses it to
// name a file line in every error found after decoding. It imports nothing
// of ours.
package tomlkeys

import (
	"sort"
	"strconv"
	"strings"

	"github.com/pelletier/go-toml/v2/unstable"
)

// Index records where each key of a TOML file is, so that errors found
// after decoding (validation, safety) can name a file line, and so that
// defaults apply only to keys the file leaves out.
//
// Key paths are dotted, with 1-based indexes for arrays of tables:
// "part.nominal_pos_volts", "test[2].levels", "bench.roles.meter.instrument".
type Index struct {
	lines map[string]int   // key path -> line of the key (1-based)
	elems map[string][]int // path of an array of scalars -> line of each element
	byLn  map[int][]string // Line -> key paths defined on it
}

// Locate walks a TOML document with go-toml's unstable parser. It stops
// at the first syntax error and keeps what it found before it; the decoder
// reports the error itself.
func Locate(data []byte) *Index {
	idx := &Index{lines: map[string]int{}, elems: map[string][]int{}, byLn: map[int][]string{}}
	var nl []int // offsets of '\n'
	for i, c := range data {
		if c == '\n' {
			nl = append(nl, i)
		}
	}
	lineOf := func(n *unstable.Node) int {
		if n == nil || n.Raw.Length == 0 {
			return 0
		}
		off := int(n.Raw.Offset)
		return sort.SearchInts(nl, off) + 1
	}
	arrays := map[string]int{} // array-of-tables path (no index) -> count so far
	resolve := func(base string, parts []string, newArray bool) string {
		path := base
		for i, part := range parts {
			path = Join(path, part)
			if newArray && i == len(parts)-1 {
				arrays[path]++
				path += "[" + strconv.Itoa(arrays[path]) + "]"
			} else if n := arrays[path]; n > 0 {
				path += "[" + strconv.Itoa(n) + "]"
			}
		}
		return path
	}
	var p unstable.Parser
	p.Reset(data)
	current := ""
	var walkKV func(prefix string, kv *unstable.Node)
	walkKV = func(prefix string, kv *unstable.Node) {
		parts, first := keyParts(kv)
		path := resolve(prefix, parts, false)
		idx.set(path, lineOf(first))
		val := kv.Value()
		switch val.Kind {
		case unstable.InlineTable:
			it := val.Children()
			for it.Next() {
				if c := it.Node(); c.Kind == unstable.KeyValue {
					walkKV(path, c)
				}
			}
		case unstable.Array:
			it := val.Children()
			i := 0
			for it.Next() {
				c := it.Node()
				switch c.Kind {
				case unstable.Comment:
					continue
				case unstable.InlineTable:
					sub := path + "[" + strconv.Itoa(i+1) + "]"
					idx.set(sub, lineOf(first))
					ct := c.Children()
					for ct.Next() {
						if g := ct.Node(); g.Kind == unstable.KeyValue {
							walkKV(sub, g)
						}
					}
				case unstable.Array:
					// Nested arrays carry no plan keys; note the line only.
					idx.elems[path] = append(idx.elems[path], lineOf(first))
				default:
					idx.elems[path] = append(idx.elems[path], lineOf(c))
				}
				i++
			}
		}
	}
	for p.NextExpression() {
		e := p.Expression()
		switch e.Kind {
		case unstable.Table, unstable.ArrayTable:
			parts, first := keyParts(e)
			current = resolve("", parts, e.Kind == unstable.ArrayTable)
			idx.set(current, lineOf(first))
		case unstable.KeyValue:
			walkKV(current, e)
		}
	}
	return idx
}

// keyParts returns the parts of a (possibly dotted) key and its first node.
func keyParts(n *unstable.Node) ([]string, *unstable.Node) {
	var parts []string
	var first *unstable.Node
	it := n.Key()
	for it.Next() {
		k := it.Node()
		if first == nil {
			first = k
		}
		parts = append(parts, string(k.Data))
	}
	return parts, first
}

// Join appends one key part to a dotted path, quoting parts that are not
// bare TOML keys.
func Join(path, part string) string {
	if !isBareKey(part) {
		part = strconv.Quote(part)
	}
	if path == "" {
		return part
	}
	return path + "." + part
}

func isBareKey(s string) bool {
	if s == "" {
		return false
	}
	for i := 0; i < len(s); i++ {
		c := s[i]
		if !(c >= 'A' && c <= 'Z' || c >= 'a' && c <= 'z' || c >= '0' && c <= '9' || c == '-' || c == '_') {
			return false
		}
	}
	return true
}

func (k *Index) set(path string, line int) {
	if _, ok := k.lines[path]; ok {
		return
	}
	k.lines[path] = line
	k.byLn[line] = append(k.byLn[line], path)
}

// Has reports whether the file sets the key (or opens the table) at path.
func (k *Index) Has(path string) bool {
	if k == nil {
		return false
	}
	_, ok := k.lines[path]
	return ok
}

// Line returns the line of the key at path, or of its nearest enclosing
// table that the file names; 0 when nothing is known.
func (k *Index) Line(path string) int {
	if k == nil {
		return 0
	}
	for path != "" {
		if l, ok := k.lines[path]; ok && l > 0 {
			return l
		}
		path = Parent(path)
	}
	return 0
}

// ElemLine returns the line of element i (0-based) of the array at path, or
// the line of the key itself.
func (k *Index) ElemLine(path string, i int) int {
	if k != nil {
		if e := k.elems[path]; i >= 0 && i < len(e) && e[i] > 0 {
			return e[i]
		}
	}
	return k.Line(path)
}

// KeyAt finds the indexed path defined on line whose parts, without array
// indexes, are parts (as go-toml reports them). go-toml sometimes leaves
// out the key of an inline table (it reports bench.roles.chanel for
// chanel inside bench.roles.source_ref = {...}); then the path on that
// Line that starts with the same table and ends with the same key is
// taken. It falls back to the parts joined with dots.
func (k *Index) KeyAt(line int, parts []string) string {
	plain := ""
	for _, p := range parts {
		plain = Join(plain, p)
	}
	if k == nil || len(parts) == 0 {
		return plain
	}
	for _, cand := range k.byLn[line] {
		if StripIndexes(cand) == plain {
			return cand
		}
	}
	for _, cand := range k.byLn[line] {
		cp := Split(StripIndexes(cand))
		if len(cp) <= len(parts) || cp[len(cp)-1] != parts[len(parts)-1] {
			continue
		}
		prefix := true
		for i := 0; i < len(parts)-1; i++ {
			if cp[i] != parts[i] {
				prefix = false
				break
			}
		}
		if prefix {
			return cand
		}
	}
	return plain
}

// Split splits a dotted key path into its parts, unquoting quoted
// parts and keeping array indexes on their part ("test[2]").
func Split(path string) []string {
	var parts []string
	for path != "" {
		if path[0] == '"' {
			end := 1
			for end < len(path) && (path[end] != '"' || path[end-1] == '\\') {
				end++
			}
			q, err := strconv.Unquote(path[:min(end+1, len(path))])
			if err != nil {
				q = path[1:min(end, len(path))]
			}
			rest := path[min(end+1, len(path)):]
			if i := strings.IndexByte(rest, '.'); i >= 0 {
				q += rest[:i]
				rest = rest[i+1:]
			} else {
				q += rest
				rest = ""
			}
			parts = append(parts, q)
			path = rest
			continue
		}
		if i := strings.IndexByte(path, '.'); i >= 0 {
			parts = append(parts, path[:i])
			path = path[i+1:]
		} else {
			parts = append(parts, path)
			path = ""
		}
	}
	return parts
}

// Parent drops the last part (or array index) of a key path.
func Parent(path string) string {
	if strings.HasSuffix(path, "]") {
		if i := strings.LastIndexByte(path, '['); i > 0 {
			return path[:i]
		}
	}
	// Walk back over a quoted last part, if any.
	if strings.HasSuffix(path, `"`) {
		if i := strings.LastIndex(path[:len(path)-1], `."`); i >= 0 {
			return path[:i]
		}
		return ""
	}
	if i := strings.LastIndexByte(path, '.'); i >= 0 {
		return path[:i]
	}
	return ""
}

// StripIndexes removes "[n]" array indexes from a key path.
func StripIndexes(path string) string {
	var b strings.Builder
	inQuote := false
	for i := 0; i < len(path); i++ {
		c := path[i]
		switch {
		case c == '"' && (i == 0 || path[i-1] != '\\'):
			inQuote = !inQuote
		case c == '[' && !inQuote:
			j := strings.IndexByte(path[i:], ']')
			if j > 0 {
				i += j
				continue
			}
		}
		b.WriteByte(c)
	}
	return b.String()
}
