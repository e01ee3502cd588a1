package instrument

import (
	"math"
	"strings"
)

// Profile tables of the frequency-response roles: [generator],
// [digitizer] and [ac_meter]. Their accuracy and flatness figures live in
// the [figures] table (ACFigures, figures_ac.go) where the uncertainty
// budget reads them.

// GeneratorCommands is the [generator] table: a function generator's
// sine output (SCPI-99 SOURce and OUTPut subsystems).
//
//	channels       = ["1", "2", "3"]                 the outputs a plan may name (optional)
//	select         = "INST:NSEL {channel}"           sent before each output command (optional)
//	set_function   = "SOUR{channel}:FUNC SIN"        select a sine
//	set_frequency  = "SOUR{channel}:FREQ {value}"    {value} in Hz
//	set_unit       = "SOUR{channel}:VOLT:UNIT {unit}" optional; {unit} is amplitude_unit
//	set_amplitude  = "SOUR{channel}:VOLT {value}"    {value} in amplitude_unit
//	set_offset     = "SOUR{channel}:VOLT:OFFS {value}" {value} in volts
//	set_output     = "OUTP{channel} {value}"         ON or OFF
//	set_load       = "OUTP{channel}:LOAD {value}"    optional; {value} is load
//	amplitude_unit = "VPP"                           VPP (peak to peak) or VPK (peak)
//	load           = "INF"                           the load setting sent with set_load
//	max_peak_volts = 10.0                            |offset| + peak the output may give into the load (required)
//	max_hz         = 1e7                             highest frequency (required)
//
// The amplitude and offset are the voltages across the load setting: a
// generator set for 50 Ω into a high-impedance fixture gives twice the
// programmed voltage, so profiles for fixtures with high-impedance inputs
// set load = "INF".
type GeneratorCommands struct {
	Channels                                    []string
	Select, SetFunction, SetFrequency, SetUnit  string
	SetAmplitude, SetOffset, SetOutput, SetLoad string
	AmplitudeUnit, Load                         string
	MaxPeakVolts, MaxHz                         float64
}

// DigitizerCommands is the [digitizer] table: simultaneously sampled
// channels, one record per trigger.
//
//	channels          = ["1", "2"]                        the channels, in the order Capture returns them (required, at least 2)
//	configure_channel = "SENS{channel}:VOLT:RANG {range}" per channel; must use {channel} and {range}
//	read_range        = "SENS{channel}:VOLT:RANG?"        optional: the range the instrument chose (clip check)
//	set_points        = "SWE:POIN {count}"                samples per record
//	set_rate          = "SWE:TINT {interval}"             sample rate as {rate} (Hz) or {interval} (s)
//	read_rate         = "SWE:TINT?"                       the rate in use, read back after configuring (required)
//	rate_reply        = "interval"                        read_rate answers an "interval" (s) or a "rate" (Hz)
//	format            = "FORM:DATA INT,16"                optional: sent once when configuring
//	data              = "int16"                           transfer: "ascii", "int16" or "real32"
//	byte_order        = "big"                             binary blocks: "big" (SCPI NORMal) or "little" (SWAPped)
//	scale_query       = "SENS{channel}:VOLT:RES?"         int16: volts per code (required for int16)
//	offset_query      = "SENS{channel}:VOLT:OFFS?"        int16: volts at code 0 (optional; 0 without it)
//	arm               = "INIT"                            start a record
//	wait              = "*OPC?"                           optional: returns when the record is complete
//	fetch             = "TRAC:DATA? CH{channel}"          one channel's record
//	max_points        = 262144                            record length limit (required)
//
// volts = code × scale + offset for int16 transfers.
type DigitizerCommands struct {
	Channels                                  []string
	ConfigureChannel, ReadRange               string
	SetPoints, SetRate, ReadRate, RateReply   string
	Format, Data, ByteOrder                   string
	ScaleQuery, OffsetQuery, Arm, Wait, Fetch string
	MaxPoints                                 int
}

// ACMeterCommands is the [ac_meter] table: an AC (true-RMS) voltmeter.
//
//	channels  = ["1", "2"]                 inputs a plan may name (optional)
//	select    = "ROUT:CLOS (@{channel})"   sent before configuring (optional)
//	configure = "CONF:VOLT:AC {range}"     AC volts on a fixed range (volts RMS)
//	bandwidth = "DET:BAND {value}"         optional: {value} is the signal frequency in Hz
//	read      = "READ?"                    one RMS reading in volts
type ACMeterCommands struct {
	Channels                           []string
	Select, Configure, Bandwidth, Read string
}

type generatorDoc struct {
	Channels      []string `toml:"channels"`
	Select        string   `toml:"select"`
	SetFunction   string   `toml:"set_function"`
	SetFrequency  string   `toml:"set_frequency"`
	SetUnit       string   `toml:"set_unit"`
	SetAmplitude  string   `toml:"set_amplitude"`
	SetOffset     string   `toml:"set_offset"`
	SetOutput     string   `toml:"set_output"`
	SetLoad       string   `toml:"set_load"`
	AmplitudeUnit string   `toml:"amplitude_unit"`
	Load          string   `toml:"load"`
	MaxPeakVolts  *float64 `toml:"max_peak_volts"`
	MaxHz         *float64 `toml:"max_hz"`
}

type digitizerDoc struct {
	Channels         []string `toml:"channels"`
	ConfigureChannel string   `toml:"configure_channel"`
	ReadRange        string   `toml:"read_range"`
	SetPoints        string   `toml:"set_points"`
	SetRate          string   `toml:"set_rate"`
	ReadRate         string   `toml:"read_rate"`
	RateReply        string   `toml:"rate_reply"`
	Format           string   `toml:"format"`
	Data             string   `toml:"data"`
	ByteOrder        string   `toml:"byte_order"`
	ScaleQuery       string   `toml:"scale_query"`
	OffsetQuery      string   `toml:"offset_query"`
	Arm              string   `toml:"arm"`
	Wait             string   `toml:"wait"`
	Fetch            string   `toml:"fetch"`
	MaxPoints        *int     `toml:"max_points"`
}

type acMeterDoc struct {
	Channels  []string `toml:"channels"`
	Select    string   `toml:"select"`
	Configure string   `toml:"configure"`
	Bandwidth string   `toml:"bandwidth"`
	Read      string   `toml:"read"`
}

// parseFreqTables fills the frequency-response role tables from doc.
func (pr *problems) parseFreqTables(p *Profile, doc *profileDoc) {
	if d := doc.Generator; d != nil {
		g := &GeneratorCommands{
			Channels: d.Channels, Select: d.Select, SetFunction: d.SetFunction, SetFrequency: d.SetFrequency,
			SetUnit: d.SetUnit, SetAmplitude: d.SetAmplitude, SetOffset: d.SetOffset, SetOutput: d.SetOutput,
			SetLoad: d.SetLoad, AmplitudeUnit: strings.ToUpper(d.AmplitudeUnit), Load: d.Load,
			MaxPeakVolts: pr.required("generator.max_peak_volts", d.MaxPeakVolts),
			MaxHz:        pr.required("generator.max_hz", d.MaxHz),
		}
		if g.AmplitudeUnit == "" {
			g.AmplitudeUnit = "VPP"
		}
		p.Generator = g
	}
	if d := doc.Digitizer; d != nil {
		g := &DigitizerCommands{
			Channels: d.Channels, ConfigureChannel: d.ConfigureChannel, ReadRange: d.ReadRange,
			SetPoints: d.SetPoints, SetRate: d.SetRate, ReadRate: d.ReadRate, RateReply: strings.ToLower(d.RateReply),
			Format: d.Format, Data: strings.ToLower(d.Data), ByteOrder: strings.ToLower(d.ByteOrder),
			ScaleQuery: d.ScaleQuery, OffsetQuery: d.OffsetQuery, Arm: d.Arm, Wait: d.Wait, Fetch: d.Fetch,
		}
		if d.MaxPoints == nil {
			pr.add("digitizer.max_points", "missing: the record length limit (samples per channel)")
		} else {
			g.MaxPoints = *d.MaxPoints
		}
		if g.RateReply == "" {
			g.RateReply = "rate"
		}
		if g.Data == "" {
			g.Data = "ascii"
		}
		if g.ByteOrder == "" {
			g.ByteOrder = "big"
		}
		p.Digitizer = g
	}
	if d := doc.ACMeter; d != nil {
		p.ACMeter = &ACMeterCommands{Channels: d.Channels, Select: d.Select, Configure: d.Configure,
			Bandwidth: d.Bandwidth, Read: d.Read}
	}
}

// validateFreqTables checks the frequency-response role tables.
func (p *Profile) validateFreqTables(pr *problems) {
	ch := []string{PhChannel}
	chValue := []string{PhChannel, PhValue}
	if g := p.Generator; g != nil {
		checkTemplates(pr, "generator", g.Select, g.Channels, []tplSpec{
			{key: "select", value: &g.Select, allowed: ch, must: ch, optional: true},
			{key: "set_function", value: &g.SetFunction, allowed: ch, channel: true},
			{key: "set_frequency", value: &g.SetFrequency, allowed: chValue, must: []string{PhValue}, channel: true},
			{key: "set_unit", value: &g.SetUnit, allowed: []string{PhChannel, PhUnit}, must: []string{PhUnit}, optional: true, channel: true},
			{key: "set_amplitude", value: &g.SetAmplitude, allowed: chValue, must: []string{PhValue}, channel: true},
			{key: "set_offset", value: &g.SetOffset, allowed: chValue, must: []string{PhValue}, channel: true},
			{key: "set_output", value: &g.SetOutput, allowed: chValue, must: []string{PhValue}, channel: true},
			{key: "set_load", value: &g.SetLoad, allowed: chValue, must: []string{PhValue}, optional: true, channel: true},
		})
		checkChannels(pr, "generator.channels", g.Channels)
		if g.AmplitudeUnit != "VPP" && g.AmplitudeUnit != "VPK" {
			pr.add("generator.amplitude_unit", "%q: want \"VPP\" or \"VPK\"", g.AmplitudeUnit)
		}
		if g.SetLoad != "" && !validLoad(g.Load) {
			pr.add("generator.load", "%q: want \"INF\" or a resistance in ohms such as \"50\"", g.Load)
		}
		if g.SetLoad == "" && g.Load != "" {
			pr.add("generator.load", "load is given but set_load is not: give the command that sends it")
		}
		positive(pr, "generator.max_peak_volts", g.MaxPeakVolts)
		positive(pr, "generator.max_hz", g.MaxHz)
	}
	if d := p.Digitizer; d != nil {
		chRange := []string{PhChannel, PhRange}
		specs := []tplSpec{
			{key: "configure_channel", value: &d.ConfigureChannel, allowed: chRange, must: chRange},
			{key: "read_range", value: &d.ReadRange, allowed: ch, must: ch, optional: true},
			{key: "set_points", value: &d.SetPoints, allowed: []string{PhCount}, must: []string{PhCount}},
			{key: "set_rate", value: &d.SetRate, allowed: []string{PhRate, PhInterval}},
			{key: "read_rate", value: &d.ReadRate},
			{key: "format", value: &d.Format, optional: true},
			{key: "scale_query", value: &d.ScaleQuery, allowed: ch, optional: d.Data != "int16"},
			{key: "offset_query", value: &d.OffsetQuery, allowed: ch, optional: true},
			{key: "arm", value: &d.Arm},
			{key: "wait", value: &d.Wait, optional: true},
			{key: "fetch", value: &d.Fetch, allowed: ch, must: ch},
		}
		checkTemplates(pr, "digitizer", "", nil, specs)
		if d.SetRate != "" {
			if segs, err := parseTemplate(d.SetRate, []string{PhRate, PhInterval}); err == nil && !uses(segs, PhRate) && !uses(segs, PhInterval) {
				pr.add("digitizer.set_rate", "template %q must contain {rate} or {interval}", d.SetRate)
			}
		}
		checkChannels(pr, "digitizer.channels", d.Channels)
		if len(d.Channels) < 2 {
			pr.add("digitizer.channels", "%d channels: a digitizer for frequency response needs at least 2 (stimulus and response)", len(d.Channels))
		}
		if d.RateReply != "rate" && d.RateReply != "interval" {
			pr.add("digitizer.rate_reply", "%q: want \"rate\" (Hz) or \"interval\" (s)", d.RateReply)
		}
		if _, ok := waveformKinds[d.Data]; !ok {
			pr.add("digitizer.data", "%q: want \"ascii\", \"int16\" or \"real32\"", d.Data)
		}
		if d.ByteOrder != "big" && d.ByteOrder != "little" {
			pr.add("digitizer.byte_order", "%q: want \"big\" or \"little\"", d.ByteOrder)
		}
		if d.MaxPoints < 2 {
			pr.add("digitizer.max_points", "%d: want at least 2 samples per record", d.MaxPoints)
		}
	}
	if a := p.ACMeter; a != nil {
		checkTemplates(pr, "ac_meter", a.Select, a.Channels, []tplSpec{
			{key: "select", value: &a.Select, allowed: ch, must: ch, optional: true},
			{key: "configure", value: &a.Configure, allowed: []string{PhRange, PhChannel}, must: []string{PhRange}},
			{key: "bandwidth", value: &a.Bandwidth, allowed: chValue, must: []string{PhValue}, optional: true},
			{key: "read", value: &a.Read, allowed: ch},
		})
		checkChannels(pr, "ac_meter.channels", a.Channels)
	}
}

func validLoad(s string) bool {
	if strings.EqualFold(s, "INF") {
		return true
	}
	v, err := ParseNumber(s)
	return err == nil && v > 0 && !math.IsInf(v, 0)
}

func positive(pr *problems, key string, v float64) {
	if !(v > 0) || math.IsInf(v, 0) {
		pr.add(key, "%v: must be a finite number > 0", v)
	}
}
