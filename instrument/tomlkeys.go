package instrument

import (
	"strings"

	"github.com/pelletier/go-toml/v2/unstable"
)

// keyLines maps every dotted key path of a TOML document ("meter",
// "meter.configure") to the line where it is written, so that semantic
// errors found after decoding can name file, line and key. Keys inside
// inline tables are included. A document that does not parse gives what
// was indexed before the fault (the decoder reports the fault itself).
func keyLines(data []byte) map[string]int {
	lines := map[string]int{}
	var p unstable.Parser
	p.Reset(data)
	var table []string
	for p.NextExpression() {
		e := p.Expression()
		switch e.Kind {
		case unstable.Table, unstable.ArrayTable:
			it := e.Key()
			table, _ = keyPath(&it, nil)
			addLine(lines, table, e, &p)
		case unstable.KeyValue:
			indexKeyValue(&p, lines, table, e)
		}
	}
	return lines
}

func indexKeyValue(p *unstable.Parser, lines map[string]int, prefix []string, kv *unstable.Node) {
	it := kv.Key()
	path, first := keyPath(&it, prefix)
	if first != nil {
		setLine(lines, path, p.Shape(first.Raw).Start.Line)
	}
	v := kv.Value()
	if v != nil && v.Kind == unstable.InlineTable {
		c := v.Children()
		for c.Next() {
			if n := c.Node(); n.Kind == unstable.KeyValue {
				indexKeyValue(p, lines, path, n)
			}
		}
	}
}

// keyPath appends the parts of a (dotted) key to prefix and returns the
// first key node, whose position is the key's line.
func keyPath(it *unstable.Iterator, prefix []string) ([]string, *unstable.Node) {
	path := append([]string(nil), prefix...)
	var first *unstable.Node
	for it.Next() {
		n := it.Node()
		if first == nil {
			first = n
		}
		path = append(path, string(n.Data))
	}
	return path, first
}

func addLine(lines map[string]int, path []string, e *unstable.Node, p *unstable.Parser) {
	it := e.Key()
	if it.Next() {
		setLine(lines, path, p.Shape(it.Node().Raw).Start.Line)
	}
}

func setLine(lines map[string]int, path []string, line int) {
	k := strings.Join(path, ".")
	if _, ok := lines[k]; !ok {
		lines[k] = line
	}
}

// lineOf finds the line of key, or of its nearest written parent, or 0.
func lineOf(lines map[string]int, key string) int {
	for key != "" {
		if l, ok := lines[key]; ok {
			return l
		}
		i := strings.LastIndexByte(key, '.')
		if i < 0 {
			break
		}
		key = key[:i]
	}
	return 0
}
