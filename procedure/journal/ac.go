package journal

import (
	"errors"
	"fmt"
	"math"
	"time"

	"nullbench/procedure/plan"
)

// ACReading is one record of a frequency-response test ([[ac_test]]) at
// one frequency: a digitizer record reduced to the IEEE Std 1057-2017
// §4.1.3.1 three-parameter sine fit of each channel at the stimulus
// frequency (the linear coefficients and their covariance, enough for
// `report` to redo every later step of the analysis without the samples),
// or an AC voltmeter's two RMS readings.
//
// Record says which of the three records of a frequency it is:
//
//	through    both channels on the stimulus (through relay closed, or the
//	           probe moved by hand): the channel gain and phase mismatch
//	floor      the generator output off: what the setup reads with no
//	           stimulus, at the stimulus frequency (the noise floor)
//	stimulus   the measurement: channel 1 the stimulus at the part,
//	           channel 2 the fixture output
type ACReading struct {
	Time         time.Time `json:"time"`
	BenchSeconds float64   `json:"bench_s"`
	Unit         string    `json:"unit"`
	Test         string    `json:"test"` // the [[ac_test]] kind
	TempIndex    int       `json:"temp_index"`
	TemperatureC float64   `json:"temperature_c"`
	Session      int       `json:"session,omitempty"`
	FreqIndex    int       `json:"freq_index"` // index into ACTest.Frequencies()
	FrequencyHz  float64   `json:"frequency_hz"`
	Record       string    `json:"record"` // ACThrough, ACFloor, ACStimulus
	Repeat       int       `json:"repeat"` // record number at this frequency, from 0
	// The generator as set: its output, peak and offset volts at its
	// terminals (peak_volts/coupling_gain for an injected rail).
	GeneratorChannel     string  `json:"generator_channel,omitempty"`
	GeneratorPeakVolts   float64 `json:"generator_peak_volts"`
	GeneratorOffsetVolts float64 `json:"generator_offset_volts,omitempty"`
	GeneratorOn          bool    `json:"generator_on"`
	// Digitizer records: the rate used, samples and the whole cycles the
	// coherent plan asked for, and one fit per channel (1 stimulus, 2
	// response).
	RateHz   float64        `json:"rate_hz,omitempty"`
	Samples  int            `json:"samples,omitempty"`
	Cycles   int            `json:"cycles,omitempty"`
	Channels []ACChannelFit `json:"channels,omitempty"`
	// AC voltmeter records: RMS volts of input 1 (stimulus) and 2
	// (response); no phase.
	RMSVolts []float64 `json:"rms_volts,omitempty"`
	Flags    []string  `json:"flags,omitempty"`
	Problem  string    `json:"problem,omitempty"`
}

// Records of an ACReading.
const (
	ACThrough  = "through"
	ACFloor    = "floor"
	ACStimulus = "stimulus"
)

// ACRecords lists the records of one frequency in the order the runner
// takes them.
func ACRecords() []string { return []string{ACFloor, ACThrough, ACStimulus} }

// ACChannelFit is one channel's sine fit y = A·cos(ωt) + B·sin(ωt) + C at
// FrequencyHz, t from the record's first sample, with Cov the covariance
// of (A, B, C), s²·(DᵀD)⁻¹ (IEEE Std 1057-2017 §4.1.3.1; GUM 4.2), N
// samples and DOF = N − 3.
type ACChannelFit struct {
	FrequencyHz  float64       `json:"frequency_hz"`
	A            float64       `json:"a"`
	B            float64       `json:"b"`
	C            float64       `json:"c"`
	Cov          [3][3]float64 `json:"cov"`
	N            int           `json:"n"`
	DOF          int           `json:"dof"`
	ResidualSDV  float64       `json:"residual_sd_v"`
	RangeVolts   float64       `json:"range_volts,omitempty"`
	PeakAbsVolts float64       `json:"peak_abs_volts,omitempty"` // largest |sample|, for the overload check
}

// ACPart is the WorkKey part of an AC record: "ac-" + record, so that no
// AC key equals a DC point's.
func ACPart(record string) string { return "ac-" + record }

// ACKeyOf is the work key of the point an ACReading records: the test
// kind, the record as part, the frequency index as step and the record
// number as repeat.
func ACKeyOf(r ACReading) plan.WorkKey {
	return plan.WorkKey{TempIndex: r.TempIndex, Unit: r.Unit, Test: r.Test, Repeat: r.Repeat, Part: ACPart(r.Record), Step: r.FreqIndex}
}

// ACReading records one frequency-response record.
func (w *Writer) ACReading(r ACReading) error {
	return w.Write(Record{Kind: RecordACReading, AC: &r})
}

func checkACReading(r *ACReading) error {
	if r.Unit == "" || r.Test == "" {
		return errors.New("ac-reading record without unit or test")
	}
	switch r.Record {
	case ACThrough, ACFloor, ACStimulus:
	default:
		return fmt.Errorf("ac-reading record %q is not one of %s, %s, %s", r.Record, ACThrough, ACFloor, ACStimulus)
	}
	if !(r.FrequencyHz > 0) || math.IsInf(r.FrequencyHz, 0) {
		return fmt.Errorf("ac-reading record at %v Hz", r.FrequencyHz)
	}
	if r.FreqIndex < 0 || r.Repeat < 0 {
		return fmt.Errorf("ac-reading record with frequency index %d, record %d", r.FreqIndex, r.Repeat)
	}
	return nil
}
