package instrument_test

import (
	"strings"
	"testing"

	"nullbench/instrument"
)

// A supply or source channel says which instrument, channel and read-back
// command it is and its rating from the profile's max_volts (the
// simulated PSU-2CH makes up to 40 V, the SRC-3CH ±25 V: instrument/sim).
func TestOutputInfo(t *testing.T) {
	sup := builtin(t, "supply2")
	d, err := instrument.NewSupply(session(t, "psu", sup, nil), sup, "2", true, instrument.DriverOptions{})
	if err != nil {
		t.Fatal(err)
	}
	want := instrument.OutputInfo{Instrument: "psu", Channel: "2", ReadVolts: "INST:NSEL 2; MEAS:VOLT?", MaxVolts: 40}
	if got := d.Output(); got != want {
		t.Errorf("supply Output() = %+v, want %+v", got, want)
	}
	chl := builtin(t, "psu_chanlist")
	dl, err := instrument.NewSupply(session(t, "psu", chl, nil), chl, "1", false, instrument.DriverOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if got := dl.Output(); !strings.Contains(got.ReadVolts, "(@1)") || got.MaxVolts != 40 {
		t.Errorf("channel-list supply Output() = %+v", got)
	}
	src := builtin(t, "source3")
	s, err := instrument.NewSource(session(t, "src", src, nil), src, "3", instrument.DriverOptions{})
	if err != nil {
		t.Fatal(err)
	}
	want = instrument.OutputInfo{Instrument: "src", Channel: "3", ReadVolts: "INST:NSEL 3; MEAS:VOLT?", MaxVolts: 25}
	if got := s.Output(); got != want {
		t.Errorf("source Output() = %+v, want %+v", got, want)
	}
}

// max_volts must be a finite number >= 0, named by key.
func TestProfileMaxVolts(t *testing.T) {
	const doc = `name = "x"
idn_pattern = "X"
[supply]
set_volts = "VOLT {value}"
set_current_limit = "CURR {value}"
set_output = "OUTP {value}"
read_volts = "MEAS:VOLT?"
read_amps = "MEAS:CURR?"
max_volts = -5.0
program_gain_ppm = 1.0
program_offset_volts = 0.0
readback_gain_ppm = 1.0
readback_offset_volts = 0.0
`
	_, err := instrument.ParseProfile([]byte(doc), "x.toml")
	if err == nil || !strings.Contains(err.Error(), "supply.max_volts") {
		t.Errorf("a negative max_volts: %v", err)
	}
	p, err := instrument.ParseProfile([]byte(strings.Replace(doc, "-5.0", "60.0", 1)), "x.toml")
	if err != nil {
		t.Fatal(err)
	}
	if p.Supply.MaxVolts != 60 {
		t.Errorf("MaxVolts = %g", p.Supply.MaxVolts)
	}
}
