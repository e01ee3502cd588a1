package plan

import "nullbench/procedure/plan/internal/tomlkeys"

// keyIndex records where each key of the plan file is (tomlkeys.Index), so
// that errors found after decoding (validation, safety) can name a file
// line, and so that defaults apply only to keys the file leaves out. Key
// paths are dotted, with 1-based indexes for arrays of tables:
// "part.nominal_pos_volts", "test[2].levels".
type keyIndex struct{ x *tomlkeys.Index }

// locateKeys walks the plan file (tomlkeys.Locate).
func locateKeys(data []byte) *keyIndex { return &keyIndex{tomlkeys.Locate(data)} }

// has reports whether the file sets the key (or opens the table) at path.
func (k *keyIndex) has(path string) bool { return k != nil && k.x.Has(path) }

// line returns the line of the key at path, or of its nearest enclosing
// table that the file names; 0 when nothing is known.
func (k *keyIndex) line(path string) int {
	if k == nil {
		return 0
	}
	return k.x.Line(path)
}

// elemLine returns the line of element i (0-based) of the array at path,
// or the line of the key itself.
func (k *keyIndex) elemLine(path string, i int) int {
	if k == nil {
		return 0
	}
	return k.x.ElemLine(path, i)
}

// keyAt finds the indexed path defined on line whose parts, without array
// indexes, are parts (tomlkeys.Index.KeyAt).
func (k *keyIndex) keyAt(line int, parts []string) string {
	if k == nil {
		return (*tomlkeys.Index)(nil).KeyAt(line, parts)
	}
	return k.x.KeyAt(line, parts)
}

func joinKey(path, part string) string { return tomlkeys.Join(path, part) }
func splitKey(path string) []string    { return tomlkeys.Split(path) }
func parentKey(path string) string     { return tomlkeys.Parent(path) }
func stripIndexes(path string) string  { return tomlkeys.StripIndexes(path) }
