package instrument

import (
	"encoding/binary"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
)

// MeterCommands is the [meter] table: a DC voltmeter. It describes every
// common way a meter hands over n readings, with no Go code.
//
//	configure = "CONF:VOLT:DC {range}"   select DC volts and range; may use {range} {nplc} {unit}
//	nplc      = "VOLT:DC:NPLC {nplc}"    integration time; must use {nplc}
//	format    = "FORM:DATA REAL,32"      optional: sent after configure and nplc (data format, byte order)
//	count     = "SAMP:COUN {count}"      optional: readings per trigger; must use {count}
//	one_per_trigger = true               optional: say the meter takes one reading per trigger (no count)
//
// and one of two ways to trigger and collect:
//
//	read      = "READ?"                  trigger and return the readings in one query
//
// or
//
//	init      = "INIT"                   start (or arm) the readings
//	trigger   = "*TRG"                   optional: start the readings INIT armed
//	sync      = "*OPC?"                  optional: a query answering 1 once the readings are taken
//	fetch     = "FETC?"                  return the readings ("TRAC:DATA?" for a buffer)
//
// with the reply of read or fetch given as
//
//	data       = "ascii"                 "ascii" (NR1/NR2/NR3, comma-separated; default),
//	                                     "real32" or "real64": an IEEE 488.2 definite-length
//	                                     block of IEEE 754 binary reals
//	byte_order = "big"                   binary blocks: "big" (SCPI NORMal, default) or "little" (SWAPped)
//
//	gain_ppm            = 15             accuracy, ppm of reading (required)
//	offset_ppm_of_range = 4              accuracy, ppm of range (required)
//
// With count, n readings are one trigger: count n, then read (or init,
// trigger, sync, fetch) returning n values. Without count (or with
// one_per_trigger) they are n triggers of one reading each.
type MeterCommands struct {
	Configure, NPLC, Count, Read string
	// Init, Trigger, Sync and Fetch are the init/fetch way of reading;
	// Format is sent when configuring.
	Init, Trigger, Sync, Fetch, Format string
	// OnePerTrigger: the meter takes one reading per trigger
	// (one_per_trigger, or no count template).
	OnePerTrigger bool
	// Data is "ascii", "real32" or "real64"; ByteOrder "big" or "little".
	Data, ByteOrder string
	Settle          time.Duration // after configure; the profile's settle unless the table sets one
	Accuracy        MeterAccuracy
}

// Counted reports whether n readings come from one trigger (a count
// template) rather than n triggers of one reading.
func (m *MeterCommands) Counted() bool { return m.Count != "" && !m.OnePerTrigger }

// Fetches reports whether readings are collected with init … fetch rather
// than one read query.
func (m *MeterCommands) Fetches() bool { return m.Init != "" }

// ReadingsKey is the profile key of the query that returns the readings
// ("meter.read" or "meter.fetch").
func (m *MeterCommands) ReadingsKey() string {
	if m.Fetches() {
		return "meter.fetch"
	}
	return "meter.read"
}

// meterDataKind maps a meter.data value to the transfer format of the
// readings; ok is false for a value the profile may not use.
func meterDataKind(data string) (kind WaveformKind, ok bool) {
	switch data {
	case "ascii":
		return WaveASCII, true
	case "real32":
		return WaveReal32, true
	case "real64":
		return WaveReal64, true
	}
	return WaveASCII, false
}

func (m *MeterCommands) kind() WaveformKind {
	k, _ := meterDataKind(m.Data)
	return k
}

func (m *MeterCommands) order() binary.ByteOrder {
	if m.ByteOrder == "little" {
		return binary.LittleEndian
	}
	return binary.BigEndian
}

type meterDoc struct {
	Configure        string   `toml:"configure"`
	NPLC             string   `toml:"nplc"`
	Format           string   `toml:"format"`
	Count            string   `toml:"count"`
	OnePerTrigger    *bool    `toml:"one_per_trigger"`
	Read             string   `toml:"read"`
	Init             string   `toml:"init"`
	Trigger          string   `toml:"trigger"`
	Sync             string   `toml:"sync"`
	Fetch            string   `toml:"fetch"`
	Data             string   `toml:"data"`
	ByteOrder        string   `toml:"byte_order"`
	Settle           string   `toml:"settle"`
	GainPPM          *float64 `toml:"gain_ppm"`
	OffsetPPMOfRange *float64 `toml:"offset_ppm_of_range"`
}

// parseMeter fills p.Meter from the [meter] table.
func (pr *problems) parseMeter(d *meterDoc, settle time.Duration) *MeterCommands {
	m := &MeterCommands{
		Configure: d.Configure, NPLC: d.NPLC, Count: d.Count, Read: d.Read,
		Init: d.Init, Trigger: d.Trigger, Sync: d.Sync, Fetch: d.Fetch, Format: d.Format,
		Data: d.Data, ByteOrder: d.ByteOrder,
		Settle: settle,
		Accuracy: MeterAccuracy{
			GainPPM:          pr.required("meter.gain_ppm", d.GainPPM),
			OffsetPPMOfRange: pr.required("meter.offset_ppm_of_range", d.OffsetPPMOfRange),
		},
	}
	if d.OnePerTrigger != nil {
		m.OnePerTrigger = *d.OnePerTrigger
		if !*d.OnePerTrigger && d.Count == "" {
			pr.add("meter.one_per_trigger", "false, but there is no count template: give count = \"SAMP:COUN {count}\", or leave one_per_trigger out")
		}
	} else if d.Count == "" {
		m.OnePerTrigger = true
	}
	if d.ByteOrder != "" && d.Data != "real32" && d.Data != "real64" {
		pr.add("meter.byte_order", "byte_order is for binary readings: set data = \"real32\" or \"real64\", or leave byte_order out")
	}
	if m.Data == "" {
		m.Data = "ascii"
	}
	if m.ByteOrder == "" {
		m.ByteOrder = "big"
	}
	return m
}

// validateMeter checks the [meter] table: one way of reading (read, or
// init with fetch), the templates that way needs, the data format.
func (m *MeterCommands) validate(pr *problems) {
	fetch := m.Init != "" || m.Fetch != ""
	checkTemplates(pr, "meter", "", nil, []tplSpec{
		{key: "configure", value: &m.Configure, allowed: []string{PhRange, PhNPLC, PhUnit}, must: []string{PhRange}},
		{key: "nplc", value: &m.NPLC, allowed: []string{PhNPLC}, must: []string{PhNPLC}},
		{key: "format", value: &m.Format, optional: true},
		{key: "count", value: &m.Count, allowed: []string{PhCount}, must: []string{PhCount}, optional: true},
		{key: "read", value: &m.Read, allowed: []string{PhCount}, optional: fetch},
		{key: "init", value: &m.Init, optional: !fetch},
		{key: "trigger", value: &m.Trigger, optional: true},
		{key: "sync", value: &m.Sync, optional: true},
		{key: "fetch", value: &m.Fetch, allowed: []string{PhCount}, optional: !fetch},
	})
	switch {
	case m.Read != "" && fetch:
		pr.add("meter.read", "give either read (one query that triggers and returns the readings) or init and fetch, not both")
	case !fetch && m.Trigger != "":
		pr.add("meter.trigger", "trigger is sent after init: give init and fetch instead of read, or leave trigger out")
	case !fetch && m.Sync != "":
		pr.add("meter.sync", "sync waits for readings started by init: give init and fetch instead of read, or leave sync out")
	}
	if m.Sync != "" && !isQuery(m.Sync) {
		pr.add("meter.sync", "%q is not a query: give one that answers 1 once the readings are taken, e.g. \"*OPC?\" (IEEE 488.2 §12.5.3)", m.Sync)
	}
	for _, x := range []struct{ key, tpl string }{{"meter.read", m.Read}, {"meter.fetch", m.Fetch}} {
		if x.tpl != "" && !isQuery(x.tpl) {
			pr.add(x.key, "%q is not a query (its last header must end in '?'): it must return the readings", x.tpl)
		}
	}
	if m.OnePerTrigger && m.Count != "" {
		pr.add("meter.one_per_trigger", "true, and a count template is given too: leave count out for a meter that takes one reading per trigger")
	}
	if _, ok := meterDataKind(m.Data); !ok {
		pr.add("meter.data", "%q: want \"ascii\", \"real32\" or \"real64\"", m.Data)
	}
	if m.ByteOrder != "big" && m.ByteOrder != "little" {
		pr.add("meter.byte_order", "%q: want \"big\" (SCPI NORMal) or \"little\" (SWAPped)", m.ByteOrder)
	}
	nonNegative(pr, "meter.gain_ppm", m.Accuracy.GainPPM)
	nonNegative(pr, "meter.offset_ppm_of_range", m.Accuracy.OffsetPPMOfRange)
	nonNegativeDuration(pr, "meter.settle", m.Settle)
}

// blockText shows a binary block of readings as the profile's data and
// byte_order read it: the values in volts (OVERLOAD and NAN for the SCPI
// codes), or why they cannot be read. The dry exercise prints it, so
// that a wrong byte order shows as absurd values.
func (m *MeterCommands) blockText(data []byte) string {
	vs, err := DecodeWaveform(data, m.kind(), m.order(), 0, 0)
	if err != nil {
		return fmt.Sprintf("not %s %s-endian readings: %v", m.Data, m.ByteOrder, err)
	}
	parts := make([]string, len(vs))
	for i, v := range vs {
		switch v = scpiSpecialReal(v, m.kind()); {
		case math.IsInf(v, 0):
			parts[i] = "OVERLOAD"
		case math.IsNaN(v):
			parts[i] = "NAN"
		default:
			parts[i] = strconv.FormatFloat(v, 'E', 6, 64)
		}
	}
	return m.Data + " " + m.ByteOrder + "-endian: " + strings.Join(parts, ",")
}
