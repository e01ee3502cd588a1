package instrument

import (
	"errors"
	"math"
)

// ErrImplausible is wrapped when an instrument answers a finite number that
// no working instrument of its kind gives in that state: a meter reading
// far beyond its configured range that is not the overload code, a supply
// read-back of 1E300. The value is never used as a reading.
var ErrImplausible = errors.New("implausible answer")

// MeterOverRangeFactor is how far beyond its range a meter may read before
// the reading is refused: DMMs display up to about 120 % of range before
// they report overload (e.g. a 10 V range reads to 12 V; common practice,
// no published source). Anything larger that is not the overload code
// (9.9E37) is an instrument or transport fault, not a measurement.
const MeterOverRangeFactor = 1.2

// beyondRange counts the finite readings whose magnitude exceeds
// MeterOverRangeFactor × rangeVolts, and returns the first such value. A
// range of 0 (not configured) checks nothing.
func beyondRange(readings []float64, rangeVolts float64) (n int, first float64) {
	if !(rangeVolts > 0) {
		return 0, 0
	}
	lim := MeterOverRangeFactor * rangeVolts
	for _, v := range readings {
		if !math.IsInf(v, 0) && !math.IsNaN(v) && math.Abs(v) > lim {
			if n == 0 {
				first = v
			}
			n++
		}
	}
	return n, first
}
