package plan

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"os"
	"reflect"
	"regexp"
	"sort"
	"strconv"
	"strings"

	toml "github.com/pelletier/go-toml/v2"
)

// Error is one problem found in a plan file: where it is (file, line,
// key), what is wrong and how to fix it. Its Error reads like
//
//	plans/lot.toml:12: key "test[1].levels": level 25 V gives ...; lower it or ...
type Error struct {
	File    string // the plan's path as given
	Line    int    // 1-based; 0 when the line is unknown (plans built in code)
	Key     string // dotted key path, 1-based [[table]] indexes: "test[2].levels"
	Problem string // what is wrong
	Fix     string // what to do about it
}

func (e *Error) Error() string {
	var b strings.Builder
	file := e.File
	if file == "" {
		file = "plan"
	}
	b.WriteString(file)
	if e.Line > 0 {
		b.WriteString(":")
		b.WriteString(strconv.Itoa(e.Line))
	}
	b.WriteString(":")
	if e.Key != "" {
		fmt.Fprintf(&b, " key %q:", e.Key)
	}
	b.WriteString(" ")
	b.WriteString(e.Problem)
	if e.Fix != "" {
		b.WriteString("; ")
		b.WriteString(e.Fix)
	}
	return b.String()
}

// Errors is every problem found in a plan, in file order where known.
type Errors []*Error

func (es Errors) Error() string {
	lines := make([]string, len(es))
	for i, e := range es {
		lines[i] = e.Error()
	}
	return strings.Join(lines, "\n")
}

// Unwrap lets errors.As find each Error.
func (es Errors) Unwrap() []error {
	out := make([]error, len(es))
	for i, e := range es {
		out[i] = e
	}
	return out
}

func (es Errors) sorted() Errors {
	sort.SliceStable(es, func(i, j int) bool {
		li, lj := es[i].Line, es[j].Line
		if li == 0 || lj == 0 {
			return li != 0 && lj == 0
		}
		return li < lj
	})
	return es
}

// Load reads, decodes, defaults and validates the plan file at path.
// It does not judge safety: call safety.CheckSafety (package
// procedure/safety) before any instrument contact.
func Load(path string) (*Plan, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("read plan: %w; check the path", err)
	}
	return Parse(data, path)
}

// Parse decodes a plan from TOML (name is the file name used in error
// messages and Plan.Source), applies the defaults of the keys it leaves
// out, and validates it. Unknown keys are errors. Every error is a
// Error (or Errors) naming file, line and key.
//
// Plan.Hash is the SHA-256 of data, in hex: journals record it so that a
// run is resumed only with the plan it was started from.
func Parse(data []byte, name string) (*Plan, error) {
	if name == "" {
		name = "plan"
	}
	keys := locateKeys(data)
	p := &Plan{}
	dec := toml.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(p); err != nil {
		return nil, translateDecodeError(err, name, keys)
	}
	sum := sha256.Sum256(data)
	p.Source = name
	p.Hash = hex.EncodeToString(sum[:])
	p.keys = keys
	p.applyDefaults(keys.has)
	if err := Validate(p); err != nil {
		return nil, err
	}
	return p, nil
}

var typeErrRE = regexp.MustCompile(`cannot decode TOML (\w+) into struct field \S+ of type (\S+)`)

// translateDecodeError turns go-toml's errors into Errors in the
// plan's own words (no Go type names).
func translateDecodeError(err error, file string, keys *keyIndex) error {
	var strict *toml.StrictMissingError
	if errors.As(err, &strict) {
		var es Errors
		for i := range strict.Errors {
			de := &strict.Errors[i]
			line, _ := de.Position()
			parts := []string(de.Key())
			key := keys.keyAt(line, parts)
			full := splitKey(stripIndexes(key))
			name := ""
			if len(full) > 0 {
				name = full[len(full)-1]
			}
			known := knownKeys(full[:max(len(full)-1, 0)])
			fix := "remove it or correct its spelling"
			if s := closestKey(name, known); s != "" {
				fix = fmt.Sprintf("did you mean %q? Correct the spelling or remove the key", s)
			}
			if len(known) > 0 {
				fix += " (keys allowed here: " + strings.Join(known, ", ") + ")"
			}
			es = append(es, &Error{File: file, Line: line, Key: key, Problem: "unknown key", Fix: fix})
		}
		return es.sorted()
	}
	var de *toml.DecodeError
	if errors.As(err, &de) {
		line, col := de.Position()
		parts := []string(de.Key())
		msg := strings.TrimPrefix(de.Error(), "toml: ")
		pe := &Error{File: file, Line: line}
		if len(parts) > 0 {
			pe.Key = keys.keyAt(line, parts)
		}
		if m := typeErrRE.FindStringSubmatch(msg); m != nil {
			pe.Problem = fmt.Sprintf("the value is a TOML %s, but this key takes %s", m[1], humanType(m[2]))
			pe.Fix = "write the value as " + humanType(m[2])
			return Errors{pe}
		}
		pe.Problem = fmt.Sprintf("TOML syntax (column %d): %s", col, msg)
		pe.Fix = "correct that line (TOML: key = value, [table], [[array-of-tables]]; strings in quotes)"
		if strings.Contains(msg, "already defined") {
			pe.Fix = "give each key once per table; remove or rename the repeated one"
		}
		return Errors{pe}
	}
	return Errors{{File: file, Problem: "cannot decode plan: " + err.Error(), Fix: "check the file is a TOML plan"}}
}

// humanType names a Go field type the way a plan author writes it.
func humanType(goType string) string {
	switch {
	case goType == "string":
		return `a quoted string ("...")`
	case goType == "bool":
		return "true or false"
	case goType == "float64" || goType == "float32":
		return "a number (e.g. 15 or 0.001)"
	case strings.HasPrefix(goType, "int") || strings.HasPrefix(goType, "uint"):
		return "a whole number (e.g. 3)"
	case goType == "[]float64":
		return "a list of numbers (e.g. [-10, 0, 10])"
	case strings.HasPrefix(goType, "[]"):
		return "a list"
	case strings.HasPrefix(goType, "map["), strings.Contains(goType, "plan."):
		return "a table"
	}
	return goType
}

// knownKeys lists the keys allowed under the table at parts (key parts as
// go-toml reports them, without array indexes), from the Plan type's toml
// tags. Map tables (instruments, limits) take any key; for them it lists
// the keys of their values or, for limits, the result names.
func knownKeys(parts []string) []string {
	t := reflect.TypeOf(Plan{})
	for _, part := range parts {
		for t.Kind() == reflect.Slice || t.Kind() == reflect.Pointer {
			t = t.Elem()
		}
		switch t.Kind() {
		case reflect.Struct:
			f, ok := fieldByTag(t, part)
			if !ok {
				return nil
			}
			t = f.Type
		case reflect.Map:
			t = t.Elem()
		default:
			return nil
		}
	}
	for t.Kind() == reflect.Slice || t.Kind() == reflect.Pointer {
		t = t.Elem()
	}
	if t == reflect.TypeOf(Limits{}) {
		return LimitNames()
	}
	if t.Kind() == reflect.Map {
		t = t.Elem()
	}
	if t.Kind() != reflect.Struct {
		return nil
	}
	var out []string
	for i := 0; i < t.NumField(); i++ {
		tag := strings.Split(t.Field(i).Tag.Get("toml"), ",")[0]
		if tag != "" && tag != "-" {
			out = append(out, tag)
		}
	}
	return out
}

func fieldByTag(t reflect.Type, tag string) (reflect.StructField, bool) {
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		if strings.Split(f.Tag.Get("toml"), ",")[0] == tag {
			return f, true
		}
	}
	return reflect.StructField{}, false
}

// closestKey returns the known key nearest to name by edit distance, if it
// is close enough to be a likely misspelling (distance ≤ 2, or ≤ 3 for
// long keys).
func closestKey(name string, known []string) string {
	best, bestD := "", 1<<30
	for _, k := range known {
		if d := editDistance(name, k); d < bestD {
			best, bestD = k, d
		}
	}
	limit := 2
	if len(name) >= 10 {
		limit = 3
	}
	if bestD <= limit {
		return best
	}
	return ""
}

// editDistance is the Levenshtein distance between a and b (bytes).
func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}
