package instrument

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
)

// WaveformKind is how a digitizer transfers a record.
type WaveformKind int

// Waveform transfer formats (SCPI-99 FORMat[:DATA]).
const (
	WaveASCII  WaveformKind = iota // comma-separated NR1/NR2/NR3 volts
	WaveInt16                      // IEEE 488.2 definite-length block of int16 codes
	WaveReal32                     // definite-length block of IEEE 754 binary32 volts
	WaveReal64                     // definite-length block of IEEE 754 binary64 volts (a meter's REAL,64)
)

var waveformKinds = map[string]WaveformKind{"ascii": WaveASCII, "int16": WaveInt16, "real32": WaveReal32}

// ErrClipped is wrapped when a record holds samples at or beyond the
// channel's full scale: the waveform there is not the signal.
var ErrClipped = errors.New("samples clipped at full scale")

// DecodeWaveform turns the data of one transferred record into volts.
//
//	ASCII:  the reply text, comma-separated numbers (ParseNumbers)
//	int16:  the block's data, 2 bytes per sample, volts = code·scale + offset
//	real32: the block's data, 4 bytes per sample, volts as sent
//	real64: the block's data, 8 bytes per sample, volts as sent
//
// order is the byte order of binary data (SCPI-99 FORMat:BORDer NORMal is
// big-endian, SWAPped little-endian). A binary length that is not a whole
// number of samples, a non-finite real32 sample or an empty record is an
// error wrapping ErrBadResponse.
// (A meter's readings come the same way: MeterDriver decodes its blocks
// here, then maps the SCPI overload and not-a-number codes.)
func DecodeWaveform(data []byte, kind WaveformKind, order binary.ByteOrder, scale, offset float64) ([]float64, error) {
	switch kind {
	case WaveASCII:
		return ParseNumbers(string(data))
	case WaveInt16:
		if len(data) == 0 || len(data)%2 != 0 {
			return nil, fmt.Errorf("%w: int16 record of %d bytes is not a whole, non-zero number of 2-byte samples", ErrBadResponse, len(data))
		}
		if !finite(scale) || scale == 0 || !finite(offset) {
			return nil, fmt.Errorf("int16 record: scale %v V/code and offset %v V must be finite, scale non-zero", scale, offset)
		}
		out := make([]float64, len(data)/2)
		for i := range out {
			out[i] = float64(int16(order.Uint16(data[2*i:])))*scale + offset
		}
		return out, nil
	case WaveReal32:
		if len(data) == 0 || len(data)%4 != 0 {
			return nil, fmt.Errorf("%w: real32 record of %d bytes is not a whole, non-zero number of 4-byte samples", ErrBadResponse, len(data))
		}
		out := make([]float64, len(data)/4)
		for i := range out {
			v := float64(math.Float32frombits(order.Uint32(data[4*i:])))
			if !finite(v) {
				return nil, fmt.Errorf("%w: real32 sample %d of %d is %v", ErrBadResponse, i+1, len(out), v)
			}
			out[i] = v
		}
		return out, nil
	case WaveReal64:
		if len(data) == 0 || len(data)%8 != 0 {
			return nil, fmt.Errorf("%w: real64 record of %d bytes is not a whole, non-zero number of 8-byte samples", ErrBadResponse, len(data))
		}
		out := make([]float64, len(data)/8)
		for i := range out {
			v := math.Float64frombits(order.Uint64(data[8*i:]))
			if !finite(v) {
				return nil, fmt.Errorf("%w: real64 sample %d of %d is %v", ErrBadResponse, i+1, len(out), v)
			}
			out[i] = v
		}
		return out, nil
	}
	return nil, fmt.Errorf("unknown waveform kind %d", kind)
}

// EncodeWaveform is DecodeWaveform's inverse for binary kinds (tests and
// fakes): int16 codes round(v − offset)/scale clamped to int16, real32 or
// real64.
func EncodeWaveform(volts []float64, kind WaveformKind, order binary.ByteOrder, scale, offset float64) []byte {
	switch kind {
	case WaveInt16:
		buf := make([]byte, 2*len(volts))
		for i, v := range volts {
			q := math.Round((v - offset) / scale)
			q = math.Max(math.MinInt16, math.Min(math.MaxInt16, q))
			order.PutUint16(buf[2*i:], uint16(int16(q)))
		}
		return buf
	case WaveReal32:
		buf := make([]byte, 4*len(volts))
		for i, v := range volts {
			order.PutUint32(buf[4*i:], math.Float32bits(float32(v)))
		}
		return buf
	case WaveReal64:
		buf := make([]byte, 8*len(volts))
		for i, v := range volts {
			order.PutUint64(buf[8*i:], math.Float64bits(v))
		}
		return buf
	}
	return nil
}

// clippedInt16 counts samples at the int16 extremes (a converter at full
// scale).
func clippedInt16(data []byte, order binary.ByteOrder) int {
	n := 0
	for i := 0; i+1 < len(data); i += 2 {
		c := int16(order.Uint16(data[i:]))
		if c == math.MaxInt16 || c == math.MinInt16 {
			n++
		}
	}
	return n
}

// ClipFraction: a sample at or beyond this fraction of the channel's range
// counts as clipped when the transfer carries volts (ASCII, real32), since
// a converter's last code sits one step below full scale (common practice,
// no published source).
const ClipFraction = 0.999

func clippedVolts(v []float64, rangeVolts float64) int {
	if !(rangeVolts > 0) {
		return 0
	}
	n := 0
	for _, x := range v {
		if math.Abs(x) >= ClipFraction*rangeVolts {
			n++
		}
	}
	return n
}
