package instrument

import "context"

// The role interfaces below are what procedures use. Each is small on
// purpose: one instrument (one Session) may serve several roles, and one
// role value is bound to one channel of one instrument. Only cmd opens and
// closes connections; procedures receive roles.
//
// Every value is in SI units named in the method: volts, amps, degrees
// Celsius. Every call takes a context whose deadline bounds the exchange.

// Supply is one channel of a DC power supply.
//
// A channel wired as a negative rail (a floating output with its positive
// terminal on ground) is programmed and read back as a positive magnitude by
// the instrument; the driver bound with Negative set handles the sign, so
// callers always see the rail's real voltage (for example -15 V).
type Supply interface {
	SetVolts(ctx context.Context, volts float64) error
	SetCurrentLimit(ctx context.Context, amps float64) error
	SetOutput(ctx context.Context, on bool) error
	ReadVolts(ctx context.Context) (float64, error)
	ReadAmps(ctx context.Context) (float64, error)
}

// Source is one channel of a DC voltage source used to drive the part's
// inputs: a common-mode drive, a differential drive, or the reference of a
// nulling loop's auxiliary amplifier.
type Source interface {
	SetVolts(ctx context.Context, volts float64) error
	SetOutput(ctx context.Context, on bool) error
	ReadVolts(ctx context.Context) (float64, error)
}

// Meter is a DC voltmeter.
type Meter interface {
	// ConfigureDCVolts selects DC volts with a fixed range (volts, full
	// scale) and an integration time in power-line cycles.
	ConfigureDCVolts(ctx context.Context, rangeVolts, nplc float64) error
	// Read takes one reading in volts.
	Read(ctx context.Context) (float64, error)
	// ReadN takes n readings in one trigger, in volts.
	ReadN(ctx context.Context, n int) ([]float64, error)
}

// Switch is a relay matrix or multiplexer. Channels are the instrument's own
// channel names as written in the plan (for example "101").
type Switch interface {
	Close(ctx context.Context, channel string) error
	Open(ctx context.Context, channel string) error
	OpenAll(ctx context.Context) error
}

// Thermometer reads a temperature in degrees Celsius.
type Thermometer interface {
	ReadCelsius(ctx context.Context) (float64, error)
}

// Chamber is a temperature chamber: a set point and its own thermometer.
type Chamber interface {
	Thermometer
	SetPointCelsius(ctx context.Context, celsius float64) error
}

// Identifier is anything that can report the identity string of the
// instrument behind it (the *IDN? response), for the journal and reports.
type Identifier interface {
	Identity() string
}

// Generator is one output of a function generator used as a sine stimulus
// (SCPI-99 SOURce subsystem forms: function, frequency, amplitude, offset,
// output state). Amplitudes are peak volts (half the peak-to-peak value)
// into the load the profile names; the driver converts to the instrument's
// own unit.
type Generator interface {
	// SetSine selects a sine of frequencyHz with peakVolts amplitude about
	// offsetVolts. It does not turn the output on.
	SetSine(ctx context.Context, frequencyHz, peakVolts, offsetVolts float64) error
	SetOutput(ctx context.Context, on bool) error
}

// Waveform is one channel's record from a Digitizer: samples in volts taken
// at a uniform interval of 1/RateHz seconds from the same trigger on every
// channel of the record.
type Waveform struct {
	RateHz float64
	Volts  []float64
}

// Digitizer is a sampling instrument with at least two simultaneously
// sampled channels (an oscilloscope or a data-acquisition digitizer).
type Digitizer interface {
	// Configure sets the sample rate, the number of samples per record and
	// each channel's full-scale range in volts (peak). The instrument may
	// round the rate; Capture reports the rate it used.
	Configure(ctx context.Context, rateHz float64, samples int, rangeVolts []float64) error
	// Capture triggers one record and returns one waveform per configured
	// channel, in channel order.
	Capture(ctx context.Context) ([]Waveform, error)
}

// ACVoltmeter reads the RMS magnitude of an AC voltage (no phase): the
// lower-grade alternative to a Digitizer for frequency response.
type ACVoltmeter interface {
	ConfigureACVolts(ctx context.Context, rangeVolts, frequencyHz float64) error
	ReadRMS(ctx context.Context) (float64, error)
}
