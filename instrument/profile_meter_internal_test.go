package instrument

import (
	"encoding/binary"
	"strings"
	"testing"
)

// blockText, which the dry exercise prints, reads a meter's binary block
// as the profile says: right, the readings in volts and the SCPI codes
// (SCPI-99 vol. 1 §7.2.1.5) by name; in the wrong byte order, values
// that are not the readings, so the mistake shows.
func TestMeterBlockText(t *testing.T) {
	vals := []float64{1e-3, -2.5, 9.9e37, 9.91e37}
	for _, tc := range []struct {
		data, order string
		kind        WaveformKind
		bo          binary.ByteOrder
	}{
		{"real32", "little", WaveReal32, binary.LittleEndian},
		{"real32", "big", WaveReal32, binary.BigEndian},
		{"real64", "little", WaveReal64, binary.LittleEndian},
		{"real64", "big", WaveReal64, binary.BigEndian},
	} {
		m := &MeterCommands{Data: tc.data, ByteOrder: tc.order}
		block := EncodeWaveform(vals, tc.kind, tc.bo, 0, 0)
		want := tc.data + " " + tc.order + "-endian: 1.000000E-03,-2.500000E+00,OVERLOAD,NAN"
		if got := m.blockText(block); got != want {
			t.Errorf("%s %s: %q, want %q", tc.data, tc.order, got, want)
		}
		wrong := &MeterCommands{Data: tc.data, ByteOrder: map[string]string{"big": "little", "little": "big"}[tc.order]}
		if got := wrong.blockText(block); strings.Contains(got, "1.000000E-03") || strings.Contains(got, "-2.500000E+00") {
			t.Errorf("%s read in the wrong byte order still shows the readings: %q", tc.data, got)
		}
	}
	m := &MeterCommands{Data: "real64", ByteOrder: "big"}
	if got := m.blockText([]byte{1, 2, 3}); !strings.Contains(got, "not real64 big-endian readings") {
		t.Errorf("3 bytes as real64: %q", got)
	}
}
