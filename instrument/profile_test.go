package instrument_test

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"nullbench/instrument"
	"nullbench/instrument/sim"
)

// benchIdentities are the *IDN? answers of the simulated bench (instrument/sim/doc.go).
var benchIdentities = map[string]string{
	"dmm":       "NULLBENCH-SIM,DMM-65,SIM0001,1.0",
	"supply2":   "NULLBENCH-SIM,PSU-2CH,SIM0002,1.0",
	"source3":   "NULLBENCH-SIM,SRC-3CH,SIM0003,1.0",
	"switch":    "NULLBENCH-SIM,MUX-40,SIM0004,1.0",
	"chamber":   "NULLBENCH-SIM,CHAMBER-1,SIM0005,1.0",
	"generator": "NULLBENCH-SIM,GEN-3CH,SIM0006,1.0",
	"digitizer": "NULLBENCH-SIM,DIG-2CH,SIM0007,1.0",
	"acvm":      "NULLBENCH-SIM,ACV-2,SIM0008,1.0",
	// dialects (instrument/sim/dialect_switch.go, dialect_supply.go)
	"mux_noopenall": "NULLBENCH-SIM,MUX-40S,SIM0031,1.0",
	"psu_chanlist":  "NULLBENCH-SIM,PSU-2CL,SIM0041,1.0",
	"psu_single":    "NULLBENCH-SIM,PSU-1CH,SIM0042,1.0",
	"psu_negout":    "NULLBENCH-SIM,PSU-2NO,SIM0044,1.0",
	"psu_slow":      "NULLBENCH-SIM,PSU-2SL,SIM0045,1.0",
	// meter dialects (instrument/sim/dialect_meter.go)
	"dmm_single":    sim.IDNDMMSingle,
	"dmm_initfetch": sim.IDNDMMInitFetch,
	"dmm_trigfetch": sim.IDNDMMTrigFetch,
	"dmm_opc":       sim.IDNDMMOPC,
	"dmm_buffer":    sim.IDNDMMBuffer,
}

func TestBuiltinProfiles(t *testing.T) {
	names := instrument.BuiltinProfileNames()
	if strings.Join(names, ",") != "acvm,chamber,digitizer,dmm,dmm_buffer,dmm_initfetch,dmm_opc,dmm_single,dmm_trigfetch,generator,mux_noopenall,psu_chanlist,psu_negout,psu_single,psu_slow,source3,src_eot,supply2,switch" { // the built-in profile files
		t.Fatalf("built-in profiles = %v", names)
	}
	all, err := instrument.BuiltinProfiles()
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range all {
		if p.File != "builtin:"+p.Name {
			t.Errorf("profile %s from %s: name and file disagree", p.Name, p.File)
		}
		// Each built-in matches exactly its own simulated instrument.
		for name, idn := range benchIdentities {
			if got := p.Matches(idn); got != (name == p.Name) {
				t.Errorf("profile %s matches %q: %v", p.Name, idn, got)
			}
		}
		if err := p.Validate(); err != nil {
			t.Errorf("Validate(%s): %v", p.Name, err)
		}
	}
	for name, idn := range benchIdentities {
		p, ok := instrument.MatchProfile(idn, all)
		if !ok || p.Name != name {
			t.Errorf("MatchProfile(%q) = %v, %v; want %s", idn, p, ok, name)
		}
	}
	if _, ok := instrument.MatchProfile("OTHER,THING,1,1", all); ok {
		t.Error("an unknown identity matched a profile")
	}

	dmm, _ := instrument.BuiltinProfile("dmm")
	// 15 ppm of reading + 4 ppm of range: a 6.5-digit DMM's 10 V figure
	// (typical data-sheet figures, common practice, published DMM specifications). At 5 V on 10 V:
	// 75 µV + 40 µV = 115 µV.
	if got := dmm.Meter.Accuracy.HalfWidthVolts(5, 10); !near(got, 115e-6, 1e-12) {
		t.Errorf("dmm half-width at 5 V on 10 V = %g, want 115e-6", got)
	}
	if dmm.Timeout != 5*time.Second || !dmm.CheckErrors || dmm.Terminator != "\n" {
		t.Errorf("dmm settings: %+v", dmm)
	}
	psu, _ := instrument.BuiltinProfile("supply2")
	// 0.05 % + 10 mV, inside the typical data-sheet range 0.03-0.1 % + 5-20 mV: at 15 V
	// 7.5 mV + 10 mV = 17.5 mV.
	if got := psu.Supply.Accuracy.ProgramHalfWidthVolts(-15); !near(got, 17.5e-3, 1e-12) {
		t.Errorf("supply2 program half-width at -15 V = %g, want 17.5e-3", got)
	}
	if psu.Supply.Settle != 100*time.Millisecond || strings.Join(psu.Supply.Channels, ",") != "1,2" {
		t.Errorf("supply2: %+v", psu.Supply)
	}
	ch, _ := instrument.BuiltinProfile("chamber")
	if strings.Join(ch.Roles(), ",") != "chamber,thermometer" {
		t.Errorf("chamber roles = %v", ch.Roles())
	}
}

func near(a, b, tol float64) bool { return a-b <= tol && b-a <= tol }

func TestResolveProfile(t *testing.T) {
	p, err := instrument.ResolveProfile("switch")
	if err != nil || p.Name != "switch" {
		t.Fatalf("ResolveProfile(switch) = %v, %v", p, err)
	}
	_, err = instrument.ResolveProfile("dmm7")
	if err == nil || !strings.Contains(err.Error(), strings.Join(instrument.BuiltinProfileNames(), ", ")) {
		t.Errorf("unknown name: %v (should list the built-in names)", err)
	}
	dir := t.TempDir()
	file := filepath.Join(dir, "my.toml")
	src, _ := os.ReadFile("profiles/dmm.toml")
	if err := os.WriteFile(file, []byte(strings.Replace(string(src), `name        = "dmm"`, `name = "mine"`, 1)), 0o644); err != nil {
		t.Fatal(err)
	}
	p, err = instrument.ResolveProfile(file)
	if err != nil || p.Name != "mine" || p.File != file {
		t.Errorf("ResolveProfile(%s) = %+v, %v", file, p, err)
	}
	if _, err := instrument.ResolveProfile(filepath.Join(dir, "none.toml")); err == nil {
		t.Error("a missing file resolved")
	}
}

// TestProfileErrors checks that every kind of fault names file, line and
// key.
func TestProfileErrors(t *testing.T) {
	const good = `name = "t"
[meter]
configure = "CONF:VOLT:DC {range}"
nplc = "VOLT:DC:NPLC {nplc}"
count = "SAMP:COUN {count}"
read = "READ?"
gain_ppm = 15
offset_ppm_of_range = 4
`
	if _, err := instrument.ParseProfile([]byte(good), "good.toml"); err != nil {
		t.Fatalf("the base document fails: %v", err)
	}
	tests := []struct {
		name string
		doc  string
		want []string // substrings of the error
	}{
		{"unknown top-level key", "bogus = 1\n" + good,
			[]string{"profile t.toml:1: key bogus: unknown key", "known keys at the top level: name, description"}},
		{"unknown key in a table", strings.Replace(good, "read = ", "raed = \"x\"\nread = ", 1),
			[]string{"t.toml:6: key meter.raed: unknown key", "known keys in [meter]: configure, nplc, format, count, one_per_trigger, read, init"}},
		{"wrong type", strings.Replace(good, "gain_ppm = 15", "gain_ppm = \"15\"", 1),
			[]string{"t.toml:7: key meter.gain_ppm: found a TOML string; want a number"}},
		{"wrong type for a template", strings.Replace(good, `read = "READ?"`, "read = 5", 1),
			[]string{"t.toml:6: key meter.read: found a TOML integer; want a string in quotes"}},
		{"syntax error", strings.Replace(good, "[meter]", "[meter", 1),
			[]string{"t.toml:2:"}},
		{"bad duration", "timeout = \"5 seconds\"\n" + good,
			[]string{"t.toml:1: key timeout:", `"5 seconds" is not a duration`}},
		{"unknown placeholder", strings.Replace(good, "{range}", "{rnage}", 1),
			[]string{"t.toml:3: key meter.configure: unknown placeholder {rnage}"}},
		{"placeholder with no meaning here", strings.Replace(good, `"READ?"`, `"READ? {channel}"`, 1),
			[]string{"t.toml:6: key meter.read: placeholder {channel} has no meaning here; allowed: {count}"}},
		{"placeholder missing", strings.Replace(good, "SAMP:COUN {count}", "SAMP:COUN 1", 1),
			[]string{"t.toml:5: key meter.count:", "must contain {count}"}},
		{"unclosed brace", strings.Replace(good, "{nplc}", "{nplc", 1),
			[]string{"t.toml:4: key meter.nplc: unclosed '{'"}},
		{"missing template", strings.Replace(good, "read = \"READ?\"\n", "", 1),
			[]string{"t.toml:2: key meter.read: missing"}},
		{"missing accuracy", strings.Replace(good, "gain_ppm = 15\n", "", 1),
			[]string{"t.toml:2: key meter.gain_ppm: missing: the uncertainty budget needs it"}},
		{"negative accuracy", strings.Replace(good, "gain_ppm = 15", "gain_ppm = -1", 1),
			[]string{"t.toml:7: key meter.gain_ppm:", ">= 0"}},
		{"bad regexp", "idn_pattern = \"^(x\"\n" + good,
			[]string{"t.toml:1: key idn_pattern: not a Go regular expression"}},
		{"bad terminator", "terminator = \";\"\n" + good,
			[]string{"t.toml:1: key terminator:"}},
		{"printable terminator", "terminator = \"OK\\n\"\n" + good,
			[]string{"t.toml:1: key terminator:", "printable"}},
		{"empty terminator", "terminator = \"\"\n" + good,
			[]string{"t.toml:1: key terminator:", "empty"}},
		{"long terminator", "terminator = \"\\r\\n123456789\"\n" + good,
			[]string{"t.toml:1: key terminator:", "at most 8"}},
		{"no name", strings.Replace(good, `name = "t"`, "", 1),
			[]string{"t.toml: key name: missing"}},
		{"no role", `name = "t"`,
			[]string{"no role table"}},
		{"inline table key", `name = "t"
meter = { configure = "CONF:VOLT:DC {range}", nplc = "VOLT:DC:NPLC {nplc}", count = "SAMP:COUN {count}", read = "READ? {nplc}", gain_ppm = 1, offset_ppm_of_range = 1 }
`, []string{"t.toml:2: key meter.read: placeholder {nplc}"}},
		{"channels without select", `name = "t"
[supply]
channels = ["1", "2"]
set_volts = "SOUR{channel}:VOLT {value}"
set_current_limit = "CURR {value}"
set_output = "OUTP{channel} {value}"
read_volts = "MEAS:VOLT? (@{channel})"
read_amps = "MEAS:CURR? (@{channel})"
program_gain_ppm = 1
program_offset_volts = 0
readback_gain_ppm = 1
readback_offset_volts = 0
`, []string{"t.toml:5: key supply.set_current_limit: with no select template every channel command must contain {channel}"}},
		{"bad channel name", `name = "t"
[source]
channels = ["1", "A B"]
select = "INST:NSEL {channel}"
set_volts = "VOLT {value}"
set_output = "OUTP {value}"
read_volts = "MEAS:VOLT?"
program_gain_ppm = 1
program_offset_volts = 0
readback_gain_ppm = 1
readback_offset_volts = 0
`, []string{`t.toml:3: key source.channels: channel "A B"`}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := instrument.ParseProfile([]byte(tc.doc), "t.toml")
			if err == nil {
				t.Fatal("accepted")
			}
			var pe *instrument.ProfileError
			if !errors.As(err, &pe) {
				t.Errorf("error %v is not a *ProfileError", err)
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error\n  %v\nlacks\n  %s", err, w)
				}
			}
		})
	}
}

func TestProfileDefaults(t *testing.T) {
	p, err := instrument.ParseProfile([]byte(`name = "t"
settle = "30ms"
[switch]
close = "ROUT:CLOS (@{channel})"
open = "ROUT:OPEN (@{channel})"
open_all = "ROUT:OPEN:ALL"
[thermometer]
read_celsius = "MEAS:TEMP?"
`), "t.toml")
	if err != nil {
		t.Fatal(err)
	}
	if p.Terminator != "\n" || p.Timeout != 5*time.Second || !p.CheckErrors || p.Switch.Settle != 30*time.Millisecond {
		t.Errorf("defaults: %+v %+v", p, p.Switch)
	}
	so := p.SessionOptions()
	if so.Terminator != "\n" || so.Timeout != 5*time.Second || !so.CheckErrors {
		t.Errorf("SessionOptions = %+v", so)
	}
	if p.Matches("anything") {
		t.Error("a profile without idn_pattern matched")
	}
}

func FuzzParseProfile(f *testing.F) {
	for _, n := range instrument.BuiltinProfileNames() {
		data, err := os.ReadFile(filepath.Join("profiles", n+".toml"))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Add([]byte("name = \"x\"\nmeter = { configure = \"{range}\" }\n"))
	f.Add([]byte("[supply]\nselect = \"{channel\"\n"))
	f.Add([]byte("a.b.c = 1\n[[x]]\n"))
	f.Add([]byte("name = \"t\"\nterminator = \"\\r\\n\\u0004\"\n[chamber]\nset_point = \"TEMP {value}\"\nread_celsius = \"TEMP?\"\n"))
	f.Add([]byte("name = \"t\"\nterminator = \"OK\\n\"\n[chamber]\nset_point = \"TEMP {value}\"\nread_celsius = \"TEMP?\"\n"))
	meter := "name = \"m\"\n[meter]\nconfigure = \"CONF {range}\"\nnplc = \"NPLC {nplc}\"\ngain_ppm = 1\noffset_ppm_of_range = 1\n"
	f.Add([]byte(meter + "one_per_trigger = true\nread = \"READ?\"\n"))
	f.Add([]byte(meter + "count = \"SAMP:COUN {count}\"\ninit = \"INIT\"\ntrigger = \"*TRG\"\nsync = \"*OPC?\"\nfetch = \"FETC?\"\n"))
	f.Add([]byte(meter + "init = \"INIT\"\nfetch = \"TRAC:DATA? {count}\"\ndata = \"real64\"\nbyte_order = \"little\"\nformat = \"FORM REAL,64\"\n"))
	f.Add([]byte(meter + "read = \"READ?\"\ninit = \"INIT\"\nbyte_order = \"little\"\none_per_trigger = false\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		p, err := instrument.ParseProfile(data, "fuzz.toml")
		if err != nil {
			if !strings.Contains(err.Error(), "profile fuzz.toml") {
				t.Fatalf("error does not name the file: %v", err)
			}
			return
		}
		if err := p.Validate(); err != nil {
			t.Fatalf("parsed profile fails Validate: %v", err)
		}
		// A meter that parsed has exactly one way of reading, and a count
		// only when it takes several readings per trigger.
		if m := p.Meter; m != nil {
			if (m.Read != "") == m.Fetches() || (m.Fetches() && m.Fetch == "") || m.Counted() != (m.Count != "") {
				t.Fatalf("meter parsed with read %q init %q fetch %q count %q one_per_trigger %v", m.Read, m.Init, m.Fetch, m.Count, m.OnePerTrigger)
			}
		}
	})
}

// The per-instrument keys (wait, opc_after_set, compound), a switch with
// no open_all and a supply's negative_channels parse into the profile and
// reach the session options; bad values name their key.
func TestProfileInstrumentOptions(t *testing.T) {
	p, err := instrument.ParseProfile([]byte(`name = "t"
terminator = "\r"
wait = "4ms"
opc_after_set = true
compound = true
[switch]
close = "ROUT:CLOS (@{channel})"
open = "ROUT:OPEN (@{channel})"
[supply]
channels = ["1", "2"]
negative_channels = ["2"]
set_volts = "VOLT {value},(@{channel})"
set_current_limit = "CURR {value},(@{channel})"
set_output = "OUTP {value},(@{channel})"
read_volts = "MEAS:VOLT? (@{channel})"
read_amps = "MEAS:CURR? (@{channel})"
program_gain_ppm = 0
program_offset_volts = 0
readback_gain_ppm = 0
readback_offset_volts = 0
`), "t.toml")
	if err != nil {
		t.Fatal(err)
	}
	so := p.SessionOptions()
	if so.Terminator != "\r" || so.Wait != 4*time.Millisecond || !so.OPCAfterSet || !p.Compound {
		t.Errorf("session options %+v, compound %v", so, p.Compound)
	}
	if p.Switch.OpenAll != "" || !p.Supply.IsNegativeOutput("2") || p.Supply.IsNegativeOutput("1") {
		t.Errorf("switch %+v, negative channels %v", p.Switch, p.Supply.NegativeChannels)
	}
	for _, tc := range []struct{ doc, want string }{
		{"name = \"t\"\nwait = \"soon\"\n[thermometer]\nread_celsius = \"T?\"\n", `t.toml:2: key wait`},
		{"name = \"t\"\nwait = \"1m\"\n[thermometer]\nread_celsius = \"T?\"\n", `key wait: 1m0s: give a pause from 0 to 10s`},
		{"name = \"t\"\n[supply]\nchannels = [\"1\"]\nnegative_channels = [\"2\"]\nset_volts = \"VOLT {value}\"\nset_current_limit = \"CURR {value}\"\nset_output = \"OUTP {value}\"\nread_volts = \"V?\"\nread_amps = \"I?\"\nprogram_gain_ppm = 0\nprogram_offset_volts = 0\nreadback_gain_ppm = 0\nreadback_offset_volts = 0\n",
			`key supply.negative_channels: channel "2" is not in channels [1]`},
	} {
		_, err := instrument.ParseProfile([]byte(tc.doc), "t.toml")
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("error %v, want %q", err, tc.want)
		}
	}
}
