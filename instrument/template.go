package instrument

import (
	"fmt"
	"strconv"
	"strings"
)

// Template placeholders. A profile's command templates may use these,
// each only where it makes sense (see the profile key documentation):
//
//	{channel} the role's channel as written in the plan ("2", "101")
//	{value}   the number to program (volts, amps or degrees C), or ON/OFF
//	{unit}    the SI unit of {value} as an SCPI suffix: V, A or CEL
//	{range}   the meter range in volts
//	{nplc}    the integration time in power-line cycles
//	{count}   readings per trigger (samples per record for a digitizer)
//	{rate}    a digitizer's sample rate in Hz
//	{interval} a digitizer's sample interval in seconds
const (
	PhChannel  = "channel"
	PhValue    = "value"
	PhUnit     = "unit"
	PhRange    = "range"
	PhNPLC     = "nplc"
	PhCount    = "count"
	PhRate     = "rate"
	PhInterval = "interval"
)

var knownPlaceholders = []string{PhChannel, PhValue, PhUnit, PhRange, PhNPLC, PhCount, PhRate, PhInterval}

// segment is a literal or a placeholder of a template.
type segment struct {
	lit string
	ph  string
}

// parseTemplate splits a command template into literals and placeholders.
// allowed lists the placeholders the template may use.
func parseTemplate(tpl string, allowed []string) ([]segment, error) {
	var segs []segment
	rest := tpl
	for rest != "" {
		open := strings.IndexAny(rest, "{}")
		if open < 0 {
			segs = append(segs, segment{lit: rest})
			break
		}
		if rest[open] == '}' {
			return nil, fmt.Errorf("unmatched '}' in %q", tpl)
		}
		if open > 0 {
			segs = append(segs, segment{lit: rest[:open]})
		}
		end := strings.IndexAny(rest[open+1:], "{}")
		if end < 0 || rest[open+1+end] != '}' {
			return nil, fmt.Errorf("unclosed '{' in %q", tpl)
		}
		name := rest[open+1 : open+1+end]
		if !contains(knownPlaceholders, name) {
			return nil, fmt.Errorf("unknown placeholder {%s} in %q; known: %s", name, tpl, braceList(knownPlaceholders))
		}
		if !contains(allowed, name) {
			return nil, fmt.Errorf("placeholder {%s} has no meaning here; allowed: %s", name, braceList(allowed))
		}
		segs = append(segs, segment{ph: name})
		rest = rest[open+1+end+1:]
	}
	if strings.ContainsAny(tpl, "\r\n") {
		return nil, fmt.Errorf("a command template must be one line, got %q", tpl)
	}
	return segs, nil
}

func uses(segs []segment, ph string) bool {
	for _, s := range segs {
		if s.ph == ph {
			return true
		}
	}
	return false
}

// expandTemplate fills a template; every placeholder it uses must be in vals.
func expandTemplate(tpl string, vals map[string]string) (string, error) {
	segs, err := parseTemplate(tpl, knownPlaceholders)
	if err != nil {
		return "", err
	}
	var sb strings.Builder
	for _, s := range segs {
		if s.ph == "" {
			sb.WriteString(s.lit)
			continue
		}
		v, ok := vals[s.ph]
		if !ok {
			return "", fmt.Errorf("template %q: no value for {%s} here", tpl, s.ph)
		}
		sb.WriteString(v)
	}
	return sb.String(), nil
}

// formatNumber writes a number for a program message: the shortest form
// that reads back as the same float64, in NR1/NR2/NR3 (IEEE 488.2
// decimal numeric program data accepts all three).
func formatNumber(v float64) string {
	if v == 0 {
		return "0" // also for -0
	}
	return strconv.FormatFloat(v, 'G', -1, 64)
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

func braceList(names []string) string {
	if len(names) == 0 {
		return "none"
	}
	out := make([]string, len(names))
	for i, n := range names {
		out[i] = "{" + n + "}"
	}
	return strings.Join(out, " ")
}
