package instrument

import (
	"bytes"
	"embed"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path"
	"reflect"
	"regexp"
	"sort"
	"strings"
	"time"

	toml "github.com/pelletier/go-toml/v2"
)

// Profile tells the generic driver how to speak to one kind of instrument:
// its command templates per role, its message terminator and time-outs, and
// the accuracy figures the uncertainty budget needs. Profiles are TOML
// files of nullbench's own schema (see instrument/profiles/*.toml for
// commented examples); built-in ones are embedded in the binary.
//
// Top-level keys:
//
//	name          required; the profile's name
//	description   free text
//	idn_pattern   Go regexp matched against the *IDN? reply (Probe, Open)
//	terminator    "\n" (default), "\r\n" or "\r"
//	timeout       per-exchange time-out, Go duration ("5s"; default 5s)
//	settle        wait after every set command ("50ms"; default 0)
//	check_errors  read SYST:ERR? after every set command (default true)
//	wait          wall-clock pause after every message sent, for an
//	              instrument that loses a command arriving too soon after
//	              the last ("5ms"; default 0)
//	opc_after_set send *OPC? after every set command and wait for its 1
//	              (IEEE 488.2 §12.5.3), before the error queue is read
//	compound      send a channel's select and its command as one
//	              message joined with ';' (IEEE 488.2 §7.1: a program
//	              message holds several message units)
//
// Role tables ([meter], [supply], [source], [switch], [chamber],
// [thermometer]) hold command templates with the placeholders {channel}
// {value} {unit} {range} {nplc} {count}, an optional settle overriding the
// top-level one, and accuracy figures. See MeterCommands, SupplyCommands,
// SourceCommands, SwitchCommands, ChamberCommands, ThermometerCommands for
// the keys.
type Profile struct {
	Name        string
	Description string
	IDNPattern  string
	Terminator  string
	Timeout     time.Duration
	Settle      time.Duration
	CheckErrors bool
	// Wait is a wall-clock pause after every message sent (wait);
	// OPCAfterSet sends *OPC? after every set command (opc_after_set);
	// Compound joins a channel's select and its command in one message.
	Wait        time.Duration
	OPCAfterSet bool
	Compound    bool

	Meter       *MeterCommands
	Supply      *SupplyCommands
	Source      *SourceCommands
	Switch      *SwitchCommands
	Chamber     *ChamberCommands
	Thermometer *ThermometerCommands
	Generator   *GeneratorCommands // [generator], profile_freq.go
	Digitizer   *DigitizerCommands // [digitizer]
	ACMeter     *ACMeterCommands   // [ac_meter]

	// Figures are the optional [figures] table: timing and noise figures
	// for predictions before a run (check, size). They drive nothing.
	Figures ProfileFigures

	// File is where the profile came from, for messages: a path, or
	// "builtin:NAME".
	File string
}

// MeterAccuracy is a DMM's DC accuracy specification in the usual
// two-term form, ± (gain × reading + offset × range). The offset is given
// in ppm of range because that is how DMM specifications state it
// (typical data-sheet figures, common practice: "~15 ppm reading + 4 ppm range", published DMM specs).
type MeterAccuracy struct {
	GainPPM          float64 // ppm of reading
	OffsetPPMOfRange float64 // ppm of the range in use
}

// HalfWidthVolts is the specification limit for a reading on a range:
//
//	a = GainPPM·1e-6·|reading| + OffsetPPMOfRange·1e-6·range
//
// A limit with no further information is a rectangular distribution of
// half-width a, standard uncertainty a/√3 (GUM JCGM 100:2008 §4.3.7).
func (a MeterAccuracy) HalfWidthVolts(readingVolts, rangeVolts float64) float64 {
	return a.GainPPM*1e-6*math.Abs(readingVolts) + a.OffsetPPMOfRange*1e-6*math.Abs(rangeVolts)
}

// SupplyAccuracy is a supply or source's programming and read-back
// accuracy, each ± (gain × |value| + offset). Typical bench figures are
// 0.03-0.1 % + 5-20 mV (typical data-sheet figures, common practice).
type SupplyAccuracy struct {
	ProgramGainPPM      float64
	ProgramOffsetVolts  float64
	ReadbackGainPPM     float64
	ReadbackOffsetVolts float64
}

// ProgramHalfWidthVolts is the limit of the output's error for a setting:
// ProgramGainPPM·1e-6·|v| + ProgramOffsetVolts (rectangular, GUM §4.3.7).
func (a SupplyAccuracy) ProgramHalfWidthVolts(volts float64) float64 {
	return a.ProgramGainPPM*1e-6*math.Abs(volts) + a.ProgramOffsetVolts
}

// ReadbackHalfWidthVolts is the limit of a read-back's error:
// ReadbackGainPPM·1e-6·|v| + ReadbackOffsetVolts (rectangular, GUM §4.3.7).
func (a SupplyAccuracy) ReadbackHalfWidthVolts(volts float64) float64 {
	return a.ReadbackGainPPM*1e-6*math.Abs(volts) + a.ReadbackOffsetVolts
}

// SupplyCommands is the [supply] table: a multi-channel DC power supply.
//
//	channels          = ["1", "2"]            the channels a plan may name (optional)
//	select            = "INST:NSEL {channel}" sent before each channel command (optional)
//	set_volts         = "VOLT {value}"        {value} in volts, >= 0
//	set_current_limit = "CURR {value}"        {value} in amps
//	set_output        = "OUTP {value}"        {value} is ON or OFF
//	read_volts        = "MEAS:VOLT?"
//	read_amps         = "MEAS:CURR?"
//	negative_channels = ["2"]                 channels that are true negative outputs (optional)
//	program_gain_ppm, program_offset_volts, readback_gain_ppm, readback_offset_volts (required)
//
// Without select, every channel command must contain {channel} (suffix
// form such as "SOUR{channel}:VOLT {value}"), unless the supply has one
// channel.
//
// A channel in negative_channels is a true negative output: it is
// programmed with the (negative) rail voltage itself and reads back a
// negative voltage. It can serve only supply_neg (bound with negative =
// true); any other channel bound as the negative rail is a floating
// output with its + terminal on ground, programmed with the magnitude.
type SupplyCommands struct {
	Channels                                                          []string
	Select, SetVolts, SetCurrentLimit, SetOutput, ReadVolts, ReadAmps string
	Settle                                                            time.Duration
	Accuracy                                                          SupplyAccuracy
	// MaxAmps is the channels' current rating (max_amps, from the data
	// sheet); 0 when the profile does not state it. check refuses a plan
	// whose current limit exceeds it.
	MaxAmps float64
	// MaxVolts is the channels' voltage rating in magnitude (max_volts,
	// from the data sheet); 0 when not stated. A read-back beyond it is
	// implausible, and check refuses a plan that programs more.
	MaxVolts float64
	// NegativeChannels are the channels that make a negative voltage
	// themselves (negative_channels).
	NegativeChannels []string
}

// IsNegativeOutput reports whether channel is a true negative output.
func (c *SupplyCommands) IsNegativeOutput(channel string) bool {
	return c != nil && contains(c.NegativeChannels, channel)
}

// SourceCommands is the [source] table: a multi-channel DC voltage source.
// Keys as SupplyCommands without set_current_limit and read_amps.
type SourceCommands struct {
	Channels                               []string
	Select, SetVolts, SetOutput, ReadVolts string
	Settle                                 time.Duration
	Accuracy                               SupplyAccuracy
	MaxVolts                               float64 // max_volts, as SupplyCommands.MaxVolts
}

// SwitchCommands is the [switch] table: a relay multiplexer.
//
//	close        = "ROUT:CLOS (@{channel})"
//	open         = "ROUT:OPEN (@{channel})"
//	open_all     = "ROUT:OPEN:ALL"            optional: without it the driver opens each relay it closed
//	query_closed = "ROUT:CLOS? (@{channel})"  optional: replies 1|0; when set, Close and Open check the relay
type SwitchCommands struct {
	Close, Open, OpenAll, QueryClosed string
	Settle                            time.Duration
}

// ChamberCommands is the [chamber] table: a temperature chamber.
//
//	set_point        = "SOUR:TEMP {value}"   {value} in degrees C
//	read_celsius     = "MEAS:TEMP?"          chamber air temperature
//	accuracy_celsius = 0.5                   optional: ± limit of the reading
type ChamberCommands struct {
	SetPoint, ReadCelsius string
	Settle                time.Duration
	AccuracyCelsius       float64
}

// ThermometerCommands is the [thermometer] table.
//
//	read_celsius     = "MEAS:TEMP?"
//	accuracy_celsius = 0.5                   optional: ± limit of the reading
type ThermometerCommands struct {
	ReadCelsius     string
	AccuracyCelsius float64
}

// maxWait bounds a profile's wait: a longer pause after every message is
// surely a mistake for a settle.
const maxWait = 10 * time.Second

// ProfileError is a fault in a profile, located by file, line and key.
type ProfileError struct {
	File string
	Line int    // 1-based; 0 when not known
	Key  string // dotted key path, e.g. "meter.configure"; "" for the whole file
	Msg  string
}

func (e *ProfileError) Error() string {
	var sb strings.Builder
	sb.WriteString("profile ")
	sb.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&sb, ":%d", e.Line)
	}
	if e.Key != "" {
		sb.WriteString(": key " + e.Key)
	}
	sb.WriteString(": " + e.Msg)
	return sb.String()
}

// The TOML documents as decoded. Optional numbers are pointers so that a
// missing accuracy figure is told from a zero one.
type profileDoc struct {
	Name        string          `toml:"name"`
	Description string          `toml:"description"`
	IDNPattern  string          `toml:"idn_pattern"`
	Terminator  *string         `toml:"terminator"`
	Timeout     string          `toml:"timeout"`
	Settle      string          `toml:"settle"`
	CheckErrors *bool           `toml:"check_errors"`
	Wait        string          `toml:"wait"`
	OPCAfterSet bool            `toml:"opc_after_set"`
	Compound    bool            `toml:"compound"`
	Meter       *meterDoc       `toml:"meter"`
	Supply      *supplyDoc      `toml:"supply"`
	Source      *sourceDoc      `toml:"source"`
	Switch      *switchDoc      `toml:"switch"`
	Chamber     *chamberDoc     `toml:"chamber"`
	Thermometer *thermometerDoc `toml:"thermometer"`
	Generator   *generatorDoc   `toml:"generator"`
	Digitizer   *digitizerDoc   `toml:"digitizer"`
	ACMeter     *acMeterDoc     `toml:"ac_meter"`
	Figures     *figuresDoc     `toml:"figures"`
}

type figuresDoc struct {
	ExchangeSeconds *float64  `toml:"exchange_s"`
	ReadingOverhead *float64  `toml:"reading_overhead"`
	TriggerSeconds  *float64  `toml:"trigger_s"`
	LineHz          *float64  `toml:"line_hz"`
	NoiseNPLC       []float64 `toml:"noise_nplc"`
	NoiseRelOfRange []float64 `toml:"noise_rel_of_range"`
	FloorRelOfRange *float64  `toml:"floor_rel_of_range"`
	AirTauSeconds   *float64  `toml:"air_tau_s"`
	acFiguresDoc
}

type accuracyDoc struct {
	ProgramGainPPM      *float64 `toml:"program_gain_ppm"`
	ProgramOffsetVolts  *float64 `toml:"program_offset_volts"`
	ReadbackGainPPM     *float64 `toml:"readback_gain_ppm"`
	ReadbackOffsetVolts *float64 `toml:"readback_offset_volts"`
}

type supplyDoc struct {
	Channels        []string `toml:"channels"`
	Select          string   `toml:"select"`
	SetVolts        string   `toml:"set_volts"`
	SetCurrentLimit string   `toml:"set_current_limit"`
	SetOutput       string   `toml:"set_output"`
	ReadVolts       string   `toml:"read_volts"`
	ReadAmps        string   `toml:"read_amps"`
	Settle          string   `toml:"settle"`
	MaxAmps         float64  `toml:"max_amps"`
	MaxVolts        float64  `toml:"max_volts"`
	NegChannels     []string `toml:"negative_channels"`
	accuracyDoc
}

type sourceDoc struct {
	Channels  []string `toml:"channels"`
	Select    string   `toml:"select"`
	SetVolts  string   `toml:"set_volts"`
	SetOutput string   `toml:"set_output"`
	ReadVolts string   `toml:"read_volts"`
	Settle    string   `toml:"settle"`
	MaxVolts  float64  `toml:"max_volts"`
	accuracyDoc
}

type switchDoc struct {
	Close       string `toml:"close"`
	Open        string `toml:"open"`
	OpenAll     string `toml:"open_all"`
	QueryClosed string `toml:"query_closed"`
	Settle      string `toml:"settle"`
}

type chamberDoc struct {
	SetPoint        string   `toml:"set_point"`
	ReadCelsius     string   `toml:"read_celsius"`
	Settle          string   `toml:"settle"`
	AccuracyCelsius *float64 `toml:"accuracy_celsius"`
}

type thermometerDoc struct {
	ReadCelsius     string   `toml:"read_celsius"`
	AccuracyCelsius *float64 `toml:"accuracy_celsius"`
}

// problems collects profile faults with their lines.
type problems struct {
	file  string
	lines map[string]int
	errs  []error
}

func (p *problems) add(key, format string, args ...any) {
	p.errs = append(p.errs, &ProfileError{File: p.file, Line: lineOf(p.lines, key), Key: key, Msg: fmt.Sprintf(format, args...)})
}

func (p *problems) err() error { return errors.Join(p.errs...) }

// ParseProfile reads a profile from TOML. file names it in errors. Unknown
// keys, wrong types, bad durations, bad templates and missing required
// keys are all errors naming file, line and key (several are joined).
func ParseProfile(data []byte, file string) (*Profile, error) {
	var doc profileDoc
	dec := toml.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&doc); err != nil {
		return nil, decodeProblems(err, file, data)
	}
	pr := &problems{file: file, lines: keyLines(data)}
	p := &Profile{
		Name:        doc.Name,
		Description: doc.Description,
		IDNPattern:  doc.IDNPattern,
		Terminator:  "\n",
		Timeout:     5 * time.Second,
		CheckErrors: true,
		File:        file,
	}
	if doc.Terminator != nil {
		p.Terminator = *doc.Terminator
	}
	if doc.CheckErrors != nil {
		p.CheckErrors = *doc.CheckErrors
	}
	if doc.Timeout != "" {
		p.Timeout = pr.duration("timeout", doc.Timeout)
	}
	if doc.Settle != "" {
		p.Settle = pr.duration("settle", doc.Settle)
	}
	if doc.Wait != "" {
		p.Wait = pr.duration("wait", doc.Wait)
	}
	p.OPCAfterSet, p.Compound = doc.OPCAfterSet, doc.Compound
	roleSettle := func(key, s string) time.Duration {
		if s == "" {
			return p.Settle
		}
		return pr.duration(key, s)
	}
	if d := doc.Meter; d != nil {
		p.Meter = pr.parseMeter(d, roleSettle("meter.settle", d.Settle)) // profile_meter.go
	}
	if d := doc.Supply; d != nil {
		p.Supply = &SupplyCommands{
			Channels: d.Channels, Select: d.Select, SetVolts: d.SetVolts, SetCurrentLimit: d.SetCurrentLimit,
			SetOutput: d.SetOutput, ReadVolts: d.ReadVolts, ReadAmps: d.ReadAmps,
			Settle:   roleSettle("supply.settle", d.Settle),
			Accuracy: pr.accuracy("supply", d.accuracyDoc),
			MaxAmps:  d.MaxAmps, MaxVolts: d.MaxVolts, NegativeChannels: d.NegChannels,
		}
		nonNegative(pr, "supply.max_amps", d.MaxAmps)
		nonNegative(pr, "supply.max_volts", d.MaxVolts)
	}
	if d := doc.Source; d != nil {
		p.Source = &SourceCommands{
			Channels: d.Channels, Select: d.Select, SetVolts: d.SetVolts,
			SetOutput: d.SetOutput, ReadVolts: d.ReadVolts,
			Settle:   roleSettle("source.settle", d.Settle),
			Accuracy: pr.accuracy("source", d.accuracyDoc),
			MaxVolts: d.MaxVolts,
		}
		nonNegative(pr, "source.max_volts", d.MaxVolts)
	}
	if d := doc.Switch; d != nil {
		p.Switch = &SwitchCommands{Close: d.Close, Open: d.Open, OpenAll: d.OpenAll, QueryClosed: d.QueryClosed,
			Settle: roleSettle("switch.settle", d.Settle)}
	}
	if d := doc.Chamber; d != nil {
		p.Chamber = &ChamberCommands{SetPoint: d.SetPoint, ReadCelsius: d.ReadCelsius,
			Settle: roleSettle("chamber.settle", d.Settle)}
		if d.AccuracyCelsius != nil {
			p.Chamber.AccuracyCelsius = *d.AccuracyCelsius
		}
	}
	if d := doc.Thermometer; d != nil {
		p.Thermometer = &ThermometerCommands{ReadCelsius: d.ReadCelsius}
		if d.AccuracyCelsius != nil {
			p.Thermometer.AccuracyCelsius = *d.AccuracyCelsius
		}
	}
	pr.parseFreqTables(p, &doc)
	p.Figures = pr.figures(doc.Figures)
	p.validate(pr)
	if err := pr.err(); err != nil {
		return nil, err
	}
	return p, nil
}

func (pr *problems) duration(key, s string) time.Duration {
	d, err := time.ParseDuration(s)
	if err != nil || d < 0 {
		pr.add(key, "%q is not a duration such as \"250ms\" or \"5s\"", s)
		return 0
	}
	return d
}

func (pr *problems) required(key string, v *float64) float64 {
	if v == nil {
		pr.add(key, "missing: the uncertainty budget needs it (write 0 if the figure is truly zero)")
		return 0
	}
	return *v
}

func (pr *problems) accuracy(table string, d accuracyDoc) SupplyAccuracy {
	return SupplyAccuracy{
		ProgramGainPPM:      pr.required(table+".program_gain_ppm", d.ProgramGainPPM),
		ProgramOffsetVolts:  pr.required(table+".program_offset_volts", d.ProgramOffsetVolts),
		ReadbackGainPPM:     pr.required(table+".readback_gain_ppm", d.ReadbackGainPPM),
		ReadbackOffsetVolts: pr.required(table+".readback_offset_volts", d.ReadbackOffsetVolts),
	}
}

// decodeProblems turns go-toml's errors into ProfileErrors with positions.
func decodeProblems(err error, file string, data []byte) error {
	var sm *toml.StrictMissingError
	if errors.As(err, &sm) {
		lines := keyLines(data)
		var errs []error
		for i := range sm.Errors {
			e := &sm.Errors[i]
			row, _ := e.Position()
			key := strings.Join(e.Key(), ".")
			if l := lineOf(lines, key); row == 0 && l > 0 {
				row = l
			}
			errs = append(errs, &ProfileError{File: file, Line: row, Key: key, Msg: "unknown key" + knownKeysHint(e.Key(), row, lines)})
		}
		return errors.Join(errs...)
	}
	var de *toml.DecodeError
	if errors.As(err, &de) {
		row, _ := de.Position()
		return &ProfileError{File: file, Line: row, Key: strings.Join(de.Key(), "."), Msg: friendlyDecodeMessage(de.Error())}
	}
	return &ProfileError{File: file, Msg: err.Error()}
}

var typeMismatch = regexp.MustCompile(`cannot decode TOML (\w+) into .* of type (\S+)`)

// friendlyDecodeMessage rewrites go-toml's type errors, which name Go
// types, in the profile's terms.
func friendlyDecodeMessage(msg string) string {
	msg = strings.TrimPrefix(msg, "toml: ")
	m := typeMismatch.FindStringSubmatch(msg)
	if m == nil {
		return msg
	}
	want := map[string]string{
		"string": "a string in quotes", "float64": "a number", "bool": "true or false",
		"[]string": `a list of strings, e.g. ["1", "2"]`,
	}[strings.TrimPrefix(m[2], "*")]
	if want == "" {
		want = "another type"
	}
	return fmt.Sprintf("found a TOML %s; want %s", m[1], want)
}

// knownKeysHint lists the keys allowed beside an unknown one. go-toml
// gives keys inside inline tables without their table, so a one-part key
// below the first table header gets no hint rather than a wrong one.
func knownKeysHint(key []string, row int, lines map[string]int) string {
	if len(key) == 0 {
		return ""
	}
	if len(key) == 1 {
		t := reflect.TypeOf(profileDoc{})
		for i := range t.NumField() {
			f := t.Field(i)
			if f.Type.Kind() != reflect.Pointer || f.Type.Elem().Kind() != reflect.Struct {
				continue // not a table
			}
			if l, ok := lines[f.Tag.Get("toml")]; ok && row >= l {
				return ""
			}
		}
	}
	t := reflect.TypeOf(profileDoc{})
	for _, part := range key[:len(key)-1] {
		f, ok := fieldByTag(t, part)
		if !ok {
			return ""
		}
		t = f.Type
		for t.Kind() == reflect.Pointer {
			t = t.Elem()
		}
		if t.Kind() != reflect.Struct {
			return ""
		}
	}
	where := "at the top level"
	if len(key) > 1 {
		where = "in [" + strings.Join(key[:len(key)-1], ".") + "]"
	}
	return fmt.Sprintf("; known keys %s: %s", where, strings.Join(tomlKeys(t), ", "))
}

func fieldByTag(t reflect.Type, tag string) (reflect.StructField, bool) {
	for i := range t.NumField() {
		f := t.Field(i)
		if f.Anonymous {
			if sf, ok := fieldByTag(f.Type, tag); ok {
				return sf, true
			}
			continue
		}
		if f.Tag.Get("toml") == tag {
			return f, true
		}
	}
	return reflect.StructField{}, false
}

func tomlKeys(t reflect.Type) []string {
	var names []string
	for i := range t.NumField() {
		f := t.Field(i)
		if f.Anonymous {
			names = append(names, tomlKeys(f.Type)...)
			continue
		}
		if tag := f.Tag.Get("toml"); tag != "" && tag != "-" {
			names = append(names, tag)
		}
	}
	return names
}

// tplSpec describes one command template key.
type tplSpec struct {
	key      string
	value    *string
	allowed  []string
	must     []string // placeholders the template must use
	optional bool
	channel  bool // a channel command: needs {channel} when there is no select
}

// Validate checks a profile built in code the way ParseProfile checks a
// file (without line numbers).
func (p *Profile) Validate() error {
	pr := &problems{file: p.File}
	if pr.file == "" {
		pr.file = "(in code)"
	}
	p.validate(pr)
	return pr.err()
}

func (p *Profile) validate(pr *problems) {
	if strings.TrimSpace(p.Name) == "" {
		pr.add("name", "missing: every profile needs a name")
	}
	if err := checkTerminator(p.Terminator); err != nil {
		pr.add("terminator", "%v", err)
	}
	if p.Timeout <= 0 {
		pr.add("timeout", "must be above zero")
	}
	if p.Settle < 0 {
		pr.add("settle", "must not be negative")
	}
	if p.Wait < 0 || p.Wait > maxWait {
		pr.add("wait", "%v: give a pause from 0 to %v", p.Wait, maxWait)
	}
	if p.IDNPattern != "" {
		if _, err := regexp.Compile(p.IDNPattern); err != nil {
			pr.add("idn_pattern", "not a Go regular expression: %v", err)
		}
	}
	if p.Meter == nil && p.Supply == nil && p.Source == nil && p.Switch == nil && p.Chamber == nil && p.Thermometer == nil &&
		p.Generator == nil && p.Digitizer == nil && p.ACMeter == nil {
		pr.add("", "no role table: give at least one of [meter], [supply], [source], [switch], [chamber], [thermometer], [generator], [digitizer], [ac_meter]")
	}
	p.validateFreqTables(pr)
	if m := p.Meter; m != nil {
		m.validate(pr) // profile_meter.go
	}
	chValue := []string{PhChannel, PhValue, PhUnit}
	ch := []string{PhChannel}
	if s := p.Supply; s != nil {
		checkTemplates(pr, "supply", s.Select, s.Channels, []tplSpec{
			{key: "select", value: &s.Select, allowed: ch, must: ch, optional: true},
			{key: "set_volts", value: &s.SetVolts, allowed: chValue, must: []string{PhValue}, channel: true},
			{key: "set_current_limit", value: &s.SetCurrentLimit, allowed: chValue, must: []string{PhValue}, channel: true},
			{key: "set_output", value: &s.SetOutput, allowed: []string{PhChannel, PhValue}, must: []string{PhValue}, channel: true},
			{key: "read_volts", value: &s.ReadVolts, allowed: ch, channel: true},
			{key: "read_amps", value: &s.ReadAmps, allowed: ch, channel: true},
		})
		checkChannels(pr, "supply.channels", s.Channels)
		checkChannels(pr, "supply.negative_channels", s.NegativeChannels)
		for _, c := range s.NegativeChannels {
			if len(s.Channels) > 0 && !contains(s.Channels, c) {
				pr.add("supply.negative_channels", "channel %q is not in channels %v", c, s.Channels)
			}
		}
		checkAccuracy(pr, "supply", s.Accuracy)
		nonNegativeDuration(pr, "supply.settle", s.Settle)
	}
	if s := p.Source; s != nil {
		checkTemplates(pr, "source", s.Select, s.Channels, []tplSpec{
			{key: "select", value: &s.Select, allowed: ch, must: ch, optional: true},
			{key: "set_volts", value: &s.SetVolts, allowed: chValue, must: []string{PhValue}, channel: true},
			{key: "set_output", value: &s.SetOutput, allowed: []string{PhChannel, PhValue}, must: []string{PhValue}, channel: true},
			{key: "read_volts", value: &s.ReadVolts, allowed: ch, channel: true},
		})
		checkChannels(pr, "source.channels", s.Channels)
		checkAccuracy(pr, "source", s.Accuracy)
		nonNegativeDuration(pr, "source.settle", s.Settle)
	}
	if s := p.Switch; s != nil {
		checkTemplates(pr, "switch", "", nil, []tplSpec{
			{key: "close", value: &s.Close, allowed: ch, must: ch},
			{key: "open", value: &s.Open, allowed: ch, must: ch},
			{key: "open_all", value: &s.OpenAll, optional: true},
			{key: "query_closed", value: &s.QueryClosed, allowed: ch, must: ch, optional: true},
		})
		nonNegativeDuration(pr, "switch.settle", s.Settle)
	}
	if c := p.Chamber; c != nil {
		checkTemplates(pr, "chamber", "", nil, []tplSpec{
			{key: "set_point", value: &c.SetPoint, allowed: []string{PhValue, PhUnit}, must: []string{PhValue}},
			{key: "read_celsius", value: &c.ReadCelsius},
		})
		nonNegative(pr, "chamber.accuracy_celsius", c.AccuracyCelsius)
		nonNegativeDuration(pr, "chamber.settle", c.Settle)
	}
	if t := p.Thermometer; t != nil {
		checkTemplates(pr, "thermometer", "", nil, []tplSpec{
			{key: "read_celsius", value: &t.ReadCelsius},
		})
		nonNegative(pr, "thermometer.accuracy_celsius", t.AccuracyCelsius)
	}
}

func checkTemplates(pr *problems, table, sel string, channels []string, specs []tplSpec) {
	var withCh, withoutCh []string
	for _, sp := range specs {
		key := table + "." + sp.key
		tpl := *sp.value
		if tpl == "" {
			if !sp.optional {
				pr.add(key, "missing: the %s role needs this command template", table)
			}
			continue
		}
		segs, err := parseTemplate(tpl, sp.allowed)
		if err != nil {
			pr.add(key, "%v", err)
			continue
		}
		for _, ph := range sp.must {
			if !uses(segs, ph) {
				pr.add(key, "template %q must contain {%s}", tpl, ph)
			}
		}
		if sp.channel {
			if uses(segs, PhChannel) {
				withCh = append(withCh, sp.key)
			} else {
				withoutCh = append(withoutCh, sp.key)
			}
		}
	}
	if sel == "" && len(withoutCh) > 0 && (len(withCh) > 0 || len(channels) > 1) {
		pr.add(table+"."+withoutCh[0],
			"with no select template every channel command must contain {channel}, but %s do not (or give select = \"INST:NSEL {channel}\")",
			strings.Join(withoutCh, ", "))
	}
}

func checkChannels(pr *problems, key string, chans []string) {
	seen := map[string]bool{}
	for _, c := range chans {
		if !validChannel(c) {
			pr.add(key, "channel %q: use letters, digits and ! only", c)
		}
		if seen[c] {
			pr.add(key, "channel %q listed twice", c)
		}
		seen[c] = true
	}
}

// validChannel keeps a channel name from changing the command around it
// (no separators, spaces or brackets).
func validChannel(c string) bool {
	if c == "" || len(c) > 32 {
		return false
	}
	for _, r := range c {
		if !(r >= '0' && r <= '9' || r >= 'A' && r <= 'Z' || r >= 'a' && r <= 'z' || r == '!') {
			return false
		}
	}
	return true
}

func checkAccuracy(pr *problems, table string, a SupplyAccuracy) {
	nonNegative(pr, table+".program_gain_ppm", a.ProgramGainPPM)
	nonNegative(pr, table+".program_offset_volts", a.ProgramOffsetVolts)
	nonNegative(pr, table+".readback_gain_ppm", a.ReadbackGainPPM)
	nonNegative(pr, table+".readback_offset_volts", a.ReadbackOffsetVolts)
}

func nonNegative(pr *problems, key string, v float64) {
	if v < 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		pr.add(key, "%v: must be a finite number >= 0", v)
	}
}

func nonNegativeDuration(pr *problems, key string, d time.Duration) {
	if d < 0 {
		pr.add(key, "must not be negative")
	}
}

// Matches reports whether an *IDN? reply matches the profile's idn_pattern
// (a profile without one matches nothing).
func (p *Profile) Matches(idn string) bool {
	if p.IDNPattern == "" {
		return false
	}
	re, err := regexp.Compile(p.IDNPattern)
	return err == nil && re.MatchString(idn)
}

// SessionOptions returns the session settings the profile asks for.
func (p *Profile) SessionOptions() SessionOptions {
	return SessionOptions{Terminator: p.Terminator, Timeout: p.Timeout, CheckErrors: p.CheckErrors,
		Wait: p.Wait, OPCAfterSet: p.OPCAfterSet}
}

// DialOptions returns the transport settings the profile asks for.
func (p *Profile) DialOptions() DialOptions {
	return DialOptions{Terminator: p.Terminator}
}

// Roles lists the roles the profile can serve, e.g. ["chamber",
// "thermometer"].
func (p *Profile) Roles() []string {
	var r []string
	for _, x := range []struct {
		name string
		ok   bool
	}{{"meter", p.Meter != nil}, {"supply", p.Supply != nil}, {"source", p.Source != nil},
		{"switch", p.Switch != nil}, {"chamber", p.Chamber != nil}, {"thermometer", p.Thermometer != nil},
		{"generator", p.Generator != nil}, {"digitizer", p.Digitizer != nil}, {"ac_meter", p.ACMeter != nil}} {
		if x.ok {
			r = append(r, x.name)
		}
	}
	return r
}

// MatchProfile returns the first profile whose idn_pattern matches the
// *IDN? reply.
func MatchProfile(idn string, profiles []*Profile) (*Profile, bool) {
	for _, p := range profiles {
		if p != nil && p.Matches(idn) {
			return p, true
		}
	}
	return nil, false
}

// LoadProfile reads a profile file.
func LoadProfile(file string) (*Profile, error) {
	data, err := os.ReadFile(file)
	if err != nil {
		return nil, fmt.Errorf("profile %s: %w", file, err)
	}
	return ParseProfile(data, file)
}

//go:embed profiles/*.toml
var builtinFS embed.FS

// BuiltinProfileNames lists the profiles embedded in the binary, sorted.
func BuiltinProfileNames() []string {
	entries, _ := fs.ReadDir(builtinFS, "profiles")
	var names []string
	for _, e := range entries {
		if n, ok := strings.CutSuffix(e.Name(), ".toml"); ok {
			names = append(names, n)
		}
	}
	sort.Strings(names)
	return names
}

// BuiltinProfile returns a profile embedded in the binary by name (dmm,
// supply2, source3, switch, chamber).
func BuiltinProfile(name string) (*Profile, error) {
	if !validProfileName(name) {
		return nil, unknownBuiltin(name)
	}
	data, err := builtinFS.ReadFile(path.Join("profiles", name+".toml"))
	if err != nil {
		return nil, unknownBuiltin(name)
	}
	return ParseProfile(data, "builtin:"+name)
}

func validProfileName(name string) bool {
	if name == "" {
		return false
	}
	for _, r := range name {
		if !(r >= 'a' && r <= 'z' || r >= '0' && r <= '9' || r == '_' || r == '-') {
			return false
		}
	}
	return true
}

func unknownBuiltin(name string) error {
	return fmt.Errorf("no built-in profile %q (built in: %s); to use a profile file give its path, e.g. ./profiles/mydmm.toml",
		name, strings.Join(BuiltinProfileNames(), ", "))
}

// BuiltinProfileSource returns the bytes of a built-in profile (to keep a
// copy of the profile a run used beside its journal).
func BuiltinProfileSource(name string) ([]byte, error) {
	if !validProfileName(name) {
		return nil, unknownBuiltin(name)
	}
	data, err := builtinFS.ReadFile(path.Join("profiles", name+".toml"))
	if err != nil {
		return nil, unknownBuiltin(name)
	}
	return data, nil
}

// IsProfilePath says whether a plan's profile entry names a file (it
// contains a path separator or ends in ".toml") rather than a built-in
// profile.
func IsProfilePath(nameOrPath string) bool {
	return strings.ContainsAny(nameOrPath, `/\`) || strings.HasSuffix(nameOrPath, ".toml")
}

// BuiltinProfiles parses every embedded profile.
func BuiltinProfiles() ([]*Profile, error) {
	var out []*Profile
	for _, n := range BuiltinProfileNames() {
		p, err := BuiltinProfile(n)
		if err != nil {
			return nil, err
		}
		out = append(out, p)
	}
	return out, nil
}

// ResolveProfile takes a plan's profile entry: a built-in name ("dmm"), or
// a path to a profile file (anything containing a path separator or ending
// in ".toml").
func ResolveProfile(nameOrPath string) (*Profile, error) {
	if IsProfilePath(nameOrPath) {
		return LoadProfile(nameOrPath)
	}
	return BuiltinProfile(nameOrPath)
}
