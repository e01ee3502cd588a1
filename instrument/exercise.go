package instrument

import (
	"context"
	"fmt"
	"io"
	"strings"
)

// ExerciseStep is one templated command a dry exercise sent (or chose
// not to send).
type ExerciseStep struct {
	Key     string // profile key, e.g. "meter.configure"
	Command string // the expanded command
	Reply   string // the reply to a query
	// Errors are the error-queue entries drained right after the command.
	Errors []QueueEntry
	// Err is an exchange that failed (time-out, lost connection).
	Err error
	// Skipped says why the command was not sent ("" when it was).
	Skipped string
}

// Rejected reports whether the instrument refused the command: it left an
// error-queue entry or the exchange failed.
func (s ExerciseStep) Rejected() bool { return s.Skipped == "" && (len(s.Errors) > 0 || s.Err != nil) }

// ExerciseReport is the outcome of Exercise.
type ExerciseReport struct {
	Profile string // name (file)
	Steps   []ExerciseStep
}

// Rejected lists the keys of the templates the instrument rejected.
func (r ExerciseReport) Rejected() []string {
	var out []string
	for _, s := range r.Steps {
		if s.Rejected() {
			out = append(out, s.Key)
		}
	}
	return out
}

// exerciser is what Exercise needs of a session.
type exerciser interface {
	Write(ctx context.Context, cmd string) error
	Query(ctx context.Context, cmd string) (string, error)
	QueryBlock(ctx context.Context, cmd string) ([]byte, error)
	Errors(ctx context.Context) ([]QueueEntry, error)
}

// exerciseCmd is one entry of the dry-exercise plan.
type exerciseCmd struct {
	key, tpl string
	vals     map[string]string
	skip     string
	block    bool // the reply is an IEEE 488.2 definite-length block
	// decode shows a block's contents (a meter's binary readings), so
	// that a wrong data format or byte order shows as absurd values.
	decode func([]byte) string
}

// ExerciseOptions adjust a dry exercise.
type ExerciseOptions struct {
	// Channel fills {channel} in every template. Without it each role
	// uses the first channel its profile lists, and a role whose profile
	// lists none (a switch) skips its channel templates.
	Channel string
}

// Dry-exercise values: the smallest harmless settings. A meter is set to
// its 10 V range at 1 PLC and 2 readings; outputs are programmed to 0 V
// and OFF; a supply's current limit to 10 mA.
const (
	exerciseRange     = "10"
	exerciseNPLC      = "1"
	exerciseCount     = "2"
	exerciseLimitAmps = "0.01"
	exerciseHz        = "1000"
	exerciseAmplitude = "0.01"
	exercisePoints    = "16"
	exerciseInterval  = "1E-05"
	exerciseRate      = "100000"
)

// noChannel marks a role with no channel to exercise its channel
// templates on.
const noChannel = ""

// exercisePlan lists every templated command of p in a safe order: every
// output the profile lists is switched off and programmed to 0 V (the ones
// not exercised first), and the relays opened,
// then the read and configure commands. Commands that would turn an
// output on, close a relay or move a chamber are listed as skipped.
func exercisePlan(p *Profile, o ExerciseOptions) []exerciseCmd {
	var out []exerciseCmd
	pick := func(chans []string, single bool) string {
		switch {
		case o.Channel != "":
			return o.Channel
		case len(chans) > 0:
			return chans[0]
		case single:
			return "1"
		}
		return noChannel
	}
	var channel string
	add := func(key, tpl string, skip string, extra ...string) {
		if tpl == "" {
			return
		}
		vals := map[string]string{PhUnit: "V", PhRange: exerciseRange, PhNPLC: exerciseNPLC, PhCount: exerciseCount}
		if channel != noChannel {
			vals[PhChannel] = channel
		} else if skip == "" && strings.Contains(tpl, "{"+PhChannel+"}") {
			skip = "not sent: no channel to name (give one with the channel option)"
		}
		for i := 0; i+1 < len(extra); i += 2 {
			vals[extra[i]] = extra[i+1]
		}
		out = append(out, exerciseCmd{key: key, tpl: tpl, vals: vals, skip: skip})
	}
	// offOthers switches off and zeroes the outputs other than the one
	// exercised, so that every output the profile lists is off.
	offOthers := func(table string, chans []string, sel, setOutput, setVolts string) {
		ex := channel
		for _, c := range chans {
			if c == ex {
				continue
			}
			channel = c
			at := " [channel " + c + "]"
			add(table+".select"+at, sel, "")
			add(table+".set_output"+at, setOutput, "", PhValue, "OFF")
			if setVolts != "" {
				add(table+".set_volts"+at, setVolts, "", PhValue, "0")
			}
		}
		channel = ex
	}
	if s := p.Supply; s != nil {
		channel = pick(s.Channels, true)
		offOthers("supply", s.Channels, s.Select, s.SetOutput, s.SetVolts)
		add("supply.select", s.Select, "")
		add("supply.set_output", s.SetOutput, "", PhValue, "OFF")
		add("supply.set_volts", s.SetVolts, "", PhValue, "0")
		add("supply.set_current_limit", s.SetCurrentLimit, "", PhValue, exerciseLimitAmps, PhUnit, "A")
		add("supply.read_volts", s.ReadVolts, "")
		add("supply.read_amps", s.ReadAmps, "")
	}
	if s := p.Source; s != nil {
		channel = pick(s.Channels, true)
		offOthers("source", s.Channels, s.Select, s.SetOutput, s.SetVolts)
		add("source.select", s.Select, "")
		add("source.set_output", s.SetOutput, "", PhValue, "OFF")
		add("source.set_volts", s.SetVolts, "", PhValue, "0")
		add("source.read_volts", s.ReadVolts, "")
	}
	if g := p.Generator; g != nil {
		channel = pick(g.Channels, true)
		offOthers("generator", g.Channels, g.Select, g.SetOutput, "")
		add("generator.select", g.Select, "")
		add("generator.set_output", g.SetOutput, "", PhValue, "OFF")
		add("generator.set_offset", g.SetOffset, "", PhValue, "0")
		add("generator.set_function", g.SetFunction, "")
		add("generator.set_frequency", g.SetFrequency, "", PhValue, exerciseHz)
		add("generator.set_unit", g.SetUnit, "", PhUnit, g.AmplitudeUnit)
		add("generator.set_load", g.SetLoad, "", PhValue, g.Load)
		add("generator.set_amplitude", g.SetAmplitude, "", PhValue, exerciseAmplitude)
	}
	if s := p.Switch; s != nil {
		channel = pick(nil, false)
		add("switch.open_all", s.OpenAll, "")
		add("switch.open", s.Open, "")
		add("switch.query_closed", s.QueryClosed, "")
		add("switch.close", s.Close, "not sent: it would close a relay")
	}
	if m := p.Meter; m != nil {
		channel = pick(nil, true)
		count := exerciseCount
		if !m.Counted() {
			count = "1" // one reading per trigger
		}
		add("meter.configure", m.Configure, "")
		add("meter.nplc", m.NPLC, "")
		add("meter.format", m.Format, "")
		add("meter.count", m.Count, "", PhCount, count)
		add("meter.read", m.Read, "", PhCount, count)
		add("meter.init", m.Init, "")
		add("meter.trigger", m.Trigger, "")
		add("meter.sync", m.Sync, "")
		add("meter.fetch", m.Fetch, "", PhCount, count)
		if m.kind() != WaveASCII && len(out) > 0 && (out[len(out)-1].key == "meter.fetch" || out[len(out)-1].key == "meter.read") {
			out[len(out)-1].block = true
			out[len(out)-1].decode = m.blockText
		}
	}
	if a := p.ACMeter; a != nil {
		channel = pick(a.Channels, true)
		add("ac_meter.select", a.Select, "")
		add("ac_meter.configure", a.Configure, "")
		add("ac_meter.bandwidth", a.Bandwidth, "", PhValue, exerciseHz)
		add("ac_meter.read", a.Read, "")
	}
	if d := p.Digitizer; d != nil {
		channel = pick(d.Channels, true)
		add("digitizer.configure_channel", d.ConfigureChannel, "")
		add("digitizer.read_range", d.ReadRange, "")
		add("digitizer.set_points", d.SetPoints, "", PhCount, exercisePoints)
		add("digitizer.set_rate", d.SetRate, "", PhInterval, exerciseInterval, PhRate, exerciseRate)
		add("digitizer.read_rate", d.ReadRate, "")
		add("digitizer.format", d.Format, "")
		add("digitizer.scale_query", d.ScaleQuery, "")
		add("digitizer.offset_query", d.OffsetQuery, "")
		add("digitizer.arm", d.Arm, "")
		add("digitizer.wait", d.Wait, "")
		add("digitizer.fetch", d.Fetch, "")
		if d.Data != "" && d.Data != "ascii" && len(out) > 0 && out[len(out)-1].key == "digitizer.fetch" {
			out[len(out)-1].block = true
		}
	}
	channel = noChannel
	if d := p.Chamber; d != nil {
		add("chamber.read_celsius", d.ReadCelsius, "")
		add("chamber.set_point", d.SetPoint, "not sent: it would move the chamber")
	}
	if t := p.Thermometer; t != nil {
		add("thermometer.read_celsius", t.ReadCelsius, "")
	}
	return out
}

// Exercise sends each templated read and configure command of p once to
// the instrument behind s, with its outputs kept off: supplies, sources
// and generators are switched off (and programmed to 0 V) before anything
// else, relays are opened, and no command that turns an output on, closes
// a relay or moves a chamber is ever sent. After every command the error
// queue is drained (SYSTem:ERRor?, IEEE 488.2 / SCPI-99 §21.8), so each
// step carries the entries it caused. s should not check errors itself.
// A failed exchange is recorded in its step and the exercise goes on;
// only a failure to read the error queue ends it.
func Exercise(ctx context.Context, s exerciser, p *Profile, o ExerciseOptions) (ExerciseReport, error) {
	r := ExerciseReport{Profile: fmt.Sprintf("%s (%s)", p.Name, p.File)}
	for _, c := range exercisePlan(p, o) {
		st := ExerciseStep{Key: c.key, Skipped: c.skip}
		cmd, err := expandTemplate(c.tpl, c.vals)
		if err != nil {
			st.Command = c.tpl
			if st.Skipped == "" {
				st.Skipped = "not sent: " + err.Error()
			}
			r.Steps = append(r.Steps, st)
			continue
		}
		st.Command = cmd
		if st.Skipped != "" {
			r.Steps = append(r.Steps, st)
			continue
		}
		switch {
		case c.block:
			var b []byte
			if b, st.Err = s.QueryBlock(ctx, cmd); st.Err == nil {
				st.Reply = fmt.Sprintf("(block of %d bytes)", len(b))
				if c.decode != nil {
					st.Reply += " " + c.decode(b)
				}
			}
		case isQuery(cmd):
			st.Reply, st.Err = s.Query(ctx, cmd)
		default:
			st.Err = s.Write(ctx, cmd)
		}
		if ctx.Err() != nil {
			r.Steps = append(r.Steps, st)
			return r, ctx.Err()
		}
		st.Errors, err = s.Errors(ctx)
		r.Steps = append(r.Steps, st)
		if err != nil {
			return r, fmt.Errorf("%s: reading the error queue after %q: %w", c.key, cmd, err)
		}
	}
	return r, nil
}

// isQuery says whether a program message expects a reply: its last
// message unit's header ends in '?'.
func isQuery(cmd string) bool {
	units := strings.Split(cmd, ";")
	head, _, _ := strings.Cut(strings.TrimSpace(units[len(units)-1]), " ")
	return strings.HasSuffix(head, "?")
}

// ExerciseAt dials addr with p's transport and session settings (error
// checking left to Exercise) and runs Exercise.
func ExerciseAt(ctx context.Context, addr string, p *Profile, o ExerciseOptions) (ExerciseReport, error) {
	a, err := ParseAddress(addr)
	if err != nil {
		return ExerciseReport{}, err
	}
	c, err := Dial(ctx, a, p.DialOptions())
	if err != nil {
		return ExerciseReport{}, err
	}
	defer c.Close()
	if err := c.Drain(ctx); err != nil {
		return ExerciseReport{}, err
	}
	opts := p.SessionOptions()
	opts.CheckErrors = false
	s := NewSession("exercise "+a.String(), c, opts)
	if _, err := s.Errors(ctx); err != nil { // stale entries are not the exercise's
		return ExerciseReport{}, err
	}
	return Exercise(ctx, s, p, o)
}

// Write prints the report for a person.
func (r ExerciseReport) Write(w io.Writer) error {
	_, err := io.WriteString(w, r.String())
	return err
}

func (r ExerciseReport) String() string {
	var sb strings.Builder
	fmt.Fprintf(&sb, "exercise:  %s, outputs kept off, relays open\n", r.Profile)
	for _, s := range r.Steps {
		fmt.Fprintf(&sb, "  %-34s %s\n", s.Key, s.Command)
		switch {
		case s.Skipped != "":
			fmt.Fprintf(&sb, "  %-34s %s\n", "", s.Skipped)
			continue
		case s.Err != nil:
			fmt.Fprintf(&sb, "  %-34s failed: %v\n", "", s.Err)
		case isQuery(s.Command):
			fmt.Fprintf(&sb, "  %-34s -> %s\n", "", s.Reply)
		}
		for _, e := range s.Errors {
			fmt.Fprintf(&sb, "  %-34s error %s\n", "", e)
		}
	}
	if rej := r.Rejected(); len(rej) > 0 {
		fmt.Fprintf(&sb, "rejected:  %s\n", strings.Join(rej, ", "))
	} else {
		sb.WriteString("rejected:  none; every template sent was accepted\n")
	}
	return sb.String()
}

// TemplateKeys lists the command templates the profile gives, as
// "table.key" (e.g. "supply.set_volts"), for checks of what a plan needs.
func (p *Profile) TemplateKeys() map[string]bool {
	out := map[string]bool{}
	put := func(table string, kv ...string) {
		for i := 0; i+1 < len(kv); i += 2 {
			if kv[i+1] != "" {
				out[table+"."+kv[i]] = true
			}
		}
	}
	if m := p.Meter; m != nil {
		put("meter", "configure", m.Configure, "nplc", m.NPLC, "count", m.Count, "read", m.Read,
			"format", m.Format, "init", m.Init, "trigger", m.Trigger, "sync", m.Sync, "fetch", m.Fetch)
	}
	if s := p.Supply; s != nil {
		put("supply", "select", s.Select, "set_volts", s.SetVolts, "set_current_limit", s.SetCurrentLimit,
			"set_output", s.SetOutput, "read_volts", s.ReadVolts, "read_amps", s.ReadAmps)
	}
	if s := p.Source; s != nil {
		put("source", "select", s.Select, "set_volts", s.SetVolts, "set_output", s.SetOutput, "read_volts", s.ReadVolts)
	}
	if s := p.Switch; s != nil {
		put("switch", "close", s.Close, "open", s.Open, "open_all", s.OpenAll, "query_closed", s.QueryClosed)
	}
	if c := p.Chamber; c != nil {
		put("chamber", "set_point", c.SetPoint, "read_celsius", c.ReadCelsius)
	}
	if t := p.Thermometer; t != nil {
		put("thermometer", "read_celsius", t.ReadCelsius)
	}
	return out
}
