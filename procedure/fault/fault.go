package fault

import (
	"errors"
	"fmt"
	"sort"
	"strings"

	"nullbench/instrument"
	"nullbench/procedure/plan"
)

// BenchContext names what the plan binds to instrument name, for an
// instrument fault's label: the role served by the failing part (where,
// the driver's "supply channel 2", picks the role bound to that channel),
// or every role bound to the instrument, then its address:
// "supply_neg, channel 2, tcp://127.0.0.1:5025".
func BenchContext(p *plan.Plan, name, where string) string {
	if p == nil {
		return ""
	}
	type bound struct{ role, channel string }
	var all []bound
	for _, role := range plan.RoleNames() {
		if b := p.Bench.Roles.Get(role); b.Instrument == name {
			all = append(all, bound{role, b.Channel})
		}
	}
	pick := all
	if _, ch, ok := strings.Cut(where, "channel "); ok {
		ch, _, _ = strings.Cut(ch, " ")
		for _, b := range all {
			if b.channel == ch {
				pick = []bound{b}
				break
			}
		}
	}
	var parts []string
	for _, b := range pick {
		s := b.role
		if b.channel != "" {
			s += ", channel " + b.channel
		}
		parts = append(parts, s)
	}
	s := strings.Join(parts, "; ")
	if in, ok := p.Bench.Instruments[name]; ok && in.Address != "" {
		if s != "" {
			s += ", "
		}
		s += in.Address
	}
	return s
}

// Describe states err cause first and once: for an instrument fault
// the instrument (its part, the plan's roles and address), the command,
// what happened and the error-queue entries (instrument.Fault.Sentence),
// then the runner's step that failed ("step: supply_pos set-volts
// +24 V", the text the runner wrapped around the instrument's
// error). Any other error is its own text.
func Describe(p *plan.Plan, err error) string {
	if err == nil {
		return ""
	}
	f, ok := instrument.FaultOf(err)
	if !ok {
		return err.Error()
	}
	f.Context = BenchContext(p, f.Instrument, f.Where)
	s := f.Sentence()
	if doing := doingBefore(err, f.Err); doing != "" {
		s += " (step: " + doing + ")"
	}
	return s
}

// doingBefore is the runner's words wrapped around inner: the text of err
// before inner's own ("supply_pos set-volts +24 V" of "supply_pos
// set-volts +24 V: psu ..."), or "" when inner's text is not its end.
func doingBefore(err, inner error) string {
	full, own := err.Error(), inner.Error()
	if !strings.HasSuffix(full, own) {
		return ""
	}
	return strings.TrimSpace(strings.TrimSuffix(strings.TrimSpace(strings.TrimSuffix(full, own)), ":"))
}

// SafeStateError is a safe state with problems. Hazard says whether
// something that can hurt the part or a person may remain: a supply,
// source or generator output that may still be on or driven, a rail
// switched off but still programmed away from 0 V (its ramp failed), or a
// chamber not set back to ambient. Relays that could not be opened with every
// output off are not a hazard (the part is unpowered); the message then
// says so instead of "SAFE STATE NOT REACHED".
type SafeStateError struct {
	Hazard bool
	// Remains lists, in words, what may remain ("supply_pos may still be
	// on (last set to +24 V)").
	Remains []string
	// Problems are every failure met, in order.
	Problems []error

	p        *plan.Plan
	redialed map[string]bool // instruments dialed again in the safe state
}

// NewSafeStateError is the safe state's verdict on problems: a hazard
// when remains names anything that may remain. p names the roles and
// addresses of failing instruments in the message; redialed holds the
// instruments the safe state dialed again (either may be nil).
func NewSafeStateError(p *plan.Plan, remains []string, problems []error, redialed map[string]bool) *SafeStateError {
	return &SafeStateError{Hazard: len(remains) > 0, Remains: remains, Problems: problems, p: p, redialed: redialed}
}

func (e *SafeStateError) Error() string {
	var b strings.Builder
	if e.Hazard {
		b.WriteString("SAFE STATE NOT REACHED, check the bench by hand")
		if len(e.Remains) > 0 {
			b.WriteString(": " + strings.Join(e.Remains, "; "))
		}
	} else {
		b.WriteString("every supply, source and generator output is off (the part is unpowered), but")
	}
	for _, l := range problemLines(e.p, e.Problems, e.redialed) {
		b.WriteString("\n    - " + l)
	}
	return b.String()
}

// Unwrap gives errors.Is/As every problem.
func (e *SafeStateError) Unwrap() []error { return e.Problems }

// problemLines states each problem cause first. Commands not sent because
// an instrument's connection was lost earlier are not repeated one by one
// under that cause: they are gathered in one line per instrument, naming
// what was not done.
func problemLines(p *plan.Plan, errs []error, redialed map[string]bool) []string {
	var lines []string
	notDone := map[string][]string{} // instrument label -> what was not done
	lostAt := map[string]string{}
	var order []string
	for _, err := range errs {
		f, ok := instrument.FaultOf(err)
		if ok && f.Kind == instrument.FaultNotSent {
			key := f.Instrument
			if _, seen := notDone[key]; !seen {
				order = append(order, key)
				lostAt[key] = f.LostAt
			}
			what := doingBefore(err, f.Err)
			if what == "" {
				what = fmt.Sprintf("%q", f.Command)
			}
			notDone[key] = append(notDone[key], what)
			continue
		}
		lines = append(lines, Describe(p, err))
	}
	sort.Strings(order)
	for _, key := range order {
		label := key
		if c := BenchContext(p, key, ""); c != "" {
			label += " (" + c + ")"
		}
		again := ""
		if redialed[key] {
			again = " again after it was dialed anew"
		}
		lines = append(lines, fmt.Sprintf("the connection to %s was lost%s (at %q); not done: %s",
			label, again, lostAt[key], strings.Join(notDone[key], "; ")))
	}
	return lines
}

// Hazard reports whether err is (or wraps) a SafeStateError with a
// hazard, or is any other non-nil error (treated as a hazard: nothing says
// the outputs are off).
func Hazard(err error) bool {
	if err == nil {
		return false
	}
	var se *SafeStateError
	if errors.As(err, &se) {
		return se.Hazard
	}
	return true
}
