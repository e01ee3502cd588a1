package instrument_test

import (
	"context"
	"testing"

	"nullbench/instrument"
	"nullbench/instrument/sim"
)

// BenchmarkCapture times one two-channel record of 65536 samples from the
// simulated digitizer over loopback TCP, by transfer format: the record's
// synthesis on the bench, its transfer and its decoding.
func BenchmarkCapture(b *testing.B) {
	for _, c := range []struct{ name, data, order, format string }{
		{"ascii", "ascii", "big", "FORM:DATA ASC"},
		{"int16", "int16", "little", "FORM:DATA INT,16;:FORM:BORD SWAP"},
		{"real32", "real32", "big", "FORM:DATA REAL,32;:FORM:BORD NORM"},
	} {
		b.Run(c.name, func(b *testing.B) {
			fb := startFreqBench(b, sim.Config{})
			p := digitizerProfile(b, c.data, c.order, c.format)
			d, err := instrument.NewDigitizer(fb.ins["dig"].Session, p, instrument.DriverOptions{OverrideSettle: true})
			if err != nil {
				b.Fatal(err)
			}
			ctx := context.Background()
			if err := d.Configure(ctx, 1e6, 65536, []float64{2, 2}); err != nil {
				b.Fatal(err)
			}
			b.ResetTimer()
			for range b.N {
				if _, err := d.Capture(ctx); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
