package sim

import (
	"context"
	"math"
	"math/rand/v2"
	"strings"
	"sync"
	"time"
)

// DMM ranges (volts, full scale) and the NPLC settings it offers.
var (
	dmmRanges = []float64{0.1, 1, 10, 100, 1000}
	dmmNPLCs  = []float64{0.02, 0.2, 1, 10, 100}
)

// dmmNoiseRel is the rms noise of one reading relative to the range, by
// NPLC: 6½-digit DMM resolution against NPLC (typical data-sheet figures, common practice, published DMM
// manuals): 0.02: 1e-4, 0.2: 1e-5, 1: 3e-6, 10: 1e-6, 100: 3e-7.
var dmmNoiseRel = map[float64]float64{0.02: 1e-4, 0.2: 1e-5, 1: 3e-6, 10: 1e-6, 100: 3e-7}

// dmmFloorRel is the total rms of the meter's 1/f floor relative to the
// range: averaging stops helping around here (common practice for a
// 6½-digit meter, no published source: a fraction of a ppm of range).
const dmmFloorRel = 1.5e-7

// dmmOverloadFactor: |v| above 1.2 × range reads ±9.9E37 (instrument/sim/doc.go).
const dmmOverloadFactor = 1.2

// powerLineHz: one power-line cycle is 20 ms (50 Hz), so a reading
// integrates NPLC/50 s of bench time (typical data-sheet figures, common practice: 1 PLC = 20 / 16.7 ms).
const powerLineHz = 50.0

type dmm struct {
	b   *Bench
	rng *rand.Rand // guarded by b.mu

	gain, offset [5]float64 // fixed per instrument (seeded)
	floor        pinkNoise  // relative to range

	// settings, guarded by the instrument's mutex
	rangeIdx int
	auto     bool
	nplc     float64
	count    int

	mm       sync.Mutex // guards the fields below
	autoIdx  int        // range the last autoranged reading used
	pending  *measurement
	readings []float64
	hasData  bool
	format   dmmFormat // buffer format (dialect dmm_buffer)
	armed    bool      // INIT waiting for *TRG (dialect dmm_trigfetch)

	dialect dmmDialect // set before serving; the zero value is the DMM's own dialect
}

type measurement struct {
	done     chan struct{}
	cancel   context.CancelFunc
	readings []float64
	err      error
}

type dmmSettings struct {
	rangeIdx int
	auto     bool
	nplc     float64
	count    int
}

func newDMM(b *Bench, rng *rand.Rand) *dmm {
	d := &dmm{b: b, rng: rng}
	for i, r := range dmmRanges {
		// Gain error within ±8 ppm; offset within ±1 µV on 0.1 V, growing
		// as 1e-5 of range on the higher ranges (common practice, no
		// published source; in line with typical data-sheet figures of 15 ppm + 4 ppm).
		d.gain[i] = 8e-6 * (2*rng.Float64() - 1)
		d.offset[i] = 1e-5 * r * (2*rng.Float64() - 1)
	}
	d.floor = newPinkFromSigma(dmmFloorRel / math.Sqrt(float64(len(pinkDecades))))
	d.reset()
	return d
}

func (d *dmm) reset() {
	d.abort()
	d.rangeIdx, d.auto, d.nplc, d.count = 1, true, 10, 1
	d.mm.Lock()
	d.autoIdx = 1
	d.readings, d.hasData = nil, false
	d.mm.Unlock()
	d.resetDialect()
}

func (d *dmm) settings() dmmSettings {
	return dmmSettings{rangeIdx: d.rangeIdx, auto: d.auto, nplc: d.nplc, count: d.count}
}

// abort cancels a running INIT and discards its readings.
func (d *dmm) abort() {
	d.mm.Lock()
	p := d.pending
	d.pending = nil
	d.mm.Unlock()
	if p != nil {
		p.cancel()
		<-p.done
	}
}

func (d *dmm) invalidate() {
	d.abort()
	d.mm.Lock()
	d.readings, d.hasData = nil, false
	d.mm.Unlock()
}

func (d *dmm) waitPending(ctx context.Context) error {
	d.mm.Lock()
	p := d.pending
	d.mm.Unlock()
	if p == nil {
		return nil
	}
	select {
	case <-p.done:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

// rangeFor picks the range index for value v: the smallest range whose full
// scale holds |v| (autorange).
func rangeFor(v float64) int {
	for i, r := range dmmRanges {
		if math.Abs(v) <= r {
			return i
		}
	}
	return len(dmmRanges) - 1
}

// measure takes n readings back to back. Reading k integrates over
// [t0 + kT, t0 + (k+1)T] of bench time, T = NPLC/50 s: the deterministic
// input is sampled M times across each window (so tails are averaged as a
// real integrating converter would), the noise is the exact window mean of
// each noise process, and the reply waits until the last window has passed
// (in scaled wall time).
//
// The wait is one sleep to the end of the last window, after which the
// model is advanced through the sample times in order: the same physics as
// sleeping to every sample time, without n·M separate sleeps (on a
// time-scaled bench each tiny sleep costs the wall clock's timer
// granularity, far more than its scaled length). A command from another
// connection that changes the model during the integration is seen from
// the moment it was executed, for the samples not yet taken then.
func (d *dmm) measure(ctx context.Context, s dmmSettings, n int) ([]float64, error) {
	b := d.b
	T := s.nplc / powerLineHz
	Tdur := time.Duration(T * float64(time.Second))
	m := int(math.Ceil(T / 0.01))
	m = max(1, min(m, 20))
	start := b.clock.Now()
	if err := sleepUntil(ctx, b.clock, start.Add(time.Duration(n)*Tdur)); err != nil {
		return nil, err
	}
	out := make([]float64, 0, n)
	autoIdx := -1
	b.mu.Lock()
	for k := 0; k < n; k++ {
		w0 := start.Add(time.Duration(k) * Tdur)
		w1 := w0.Add(Tdur)
		ri := s.rangeIdx
		var acc float64
		for j := 1; j <= m; j++ {
			b.m.advance(b.secondsAt(w0.Add(time.Duration(j) * Tdur / time.Duration(m))))
			v := b.m.meterDeterministic()
			if j == 1 && s.auto {
				ri = rangeFor(v)
				autoIdx = ri
			}
			acc += v
		}
		r := dmmRanges[ri]
		t0, t1 := b.secondsAt(w0), b.secondsAt(w1)
		v := acc/float64(m) + b.m.meterNoise(t0, t1)
		v += dmmNoiseRel[s.nplc] * r * d.rng.NormFloat64()
		v += r * d.floor.windowMean(d.rng, t0, t1)
		if math.Abs(v) > dmmOverloadFactor*r {
			out = append(out, math.Copysign(math.Inf(1), v))
			continue
		}
		v = v*(1+d.gain[ri]) + d.offset[ri]
		res := 0.1 * dmmNoiseRel[s.nplc] * r
		out = append(out, math.Round(v/res)*res)
	}
	b.mu.Unlock()
	if autoIdx >= 0 {
		d.mm.Lock()
		d.autoIdx = autoIdx
		d.mm.Unlock()
	}
	return out, nil
}

func formatReadings(vs []float64) string {
	parts := make([]string, len(vs))
	for i, v := range vs {
		parts[i] = nr3(v)
	}
	return strings.Join(parts, ",")
}

// rangeParam parses a range value (volts) or MIN|MAX|DEF|AUTO; the next
// range up that holds the value is chosen.
func rangeParam(p string) (idx int, auto bool, err error) {
	switch charParam(p) {
	case "AUTO", "DEF", "DEFAULT":
		return 0, true, nil
	}
	v, err := numericParam(p, 0, dmmRanges[len(dmmRanges)-1], -1)
	if err != nil {
		return 0, false, err
	}
	if v < 0 {
		return 0, true, nil
	}
	for i, r := range dmmRanges {
		if math.Abs(v) <= r*(1+1e-9) {
			return i, false, nil
		}
	}
	return 0, false, newErr(errOutOfRange, p)
}

// nplcParam rounds up to the next available NPLC.
func nplcParam(p string) (float64, error) {
	v, err := numericParam(p, 1e-9, dmmNPLCs[len(dmmNPLCs)-1], 10)
	if err != nil {
		return 0, err
	}
	for _, n := range dmmNPLCs {
		if v <= n*(1+1e-9) {
			return n, nil
		}
	}
	return 0, newErr(errOutOfRange, p)
}

func (d *dmm) commands() []command {
	conf := func(c *call) (string, error) {
		if len(c.params) >= 1 {
			idx, auto, err := rangeParam(c.params[0])
			if err != nil {
				return "", err
			}
			d.rangeIdx, d.auto = idx, auto
		} else {
			d.auto = true
		}
		if len(c.params) == 2 {
			// Resolution: accepted and checked, the NPLC sets it here.
			if charParam(c.params[1]) == "" {
				if _, err := parseDecimal(c.params[1]); err != nil {
					return "", err
				}
			}
		}
		d.invalidate()
		return "", nil
	}
	read := func(c *call) (string, error) {
		d.abort()
		vs, err := d.measure(c.ctx, d.settings(), d.count)
		if err != nil {
			return "", err
		}
		d.mm.Lock()
		d.readings, d.hasData = vs, true
		d.mm.Unlock()
		return formatReadings(vs), nil
	}
	return d.withDialect([]command{
		{pattern: "CONFigure[:VOLTage][:DC]", maxParams: 2, fn: conf},
		{pattern: "CONFigure", query: true, fn: func(*call) (string, error) {
			r := dmmRanges[d.rangeIdx]
			return "\"VOLT " + nr3(r) + "," + nr3(dmmNoiseRel[d.nplc]*r) + "\"", nil
		}},
		{pattern: "[SENSe:]VOLTage[:DC]:RANGe[:UPPer]", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			idx, auto, err := rangeParam(c.params[0])
			if err != nil {
				return "", err
			}
			d.rangeIdx, d.auto = idx, auto
			d.invalidate()
			return "", nil
		}},
		{pattern: "[SENSe:]VOLTage[:DC]:RANGe[:UPPer]", query: true, fn: func(*call) (string, error) {
			if d.auto {
				d.mm.Lock()
				defer d.mm.Unlock()
				return nr3(dmmRanges[d.autoIdx]), nil
			}
			return nr3(dmmRanges[d.rangeIdx]), nil
		}},
		{pattern: "[SENSe:]VOLTage[:DC]:RANGe:AUTO", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			if charParam(c.params[0]) == "ONCE" {
				d.b.mu.Lock()
				d.b.m.advance(d.b.benchSeconds())
				d.rangeIdx = rangeFor(d.b.m.meterDeterministic())
				d.b.mu.Unlock()
				d.auto = false
				return "", nil
			}
			on, err := boolParam(c.params[0])
			if err != nil {
				return "", err
			}
			d.auto = on
			d.invalidate()
			return "", nil
		}},
		{pattern: "[SENSe:]VOLTage[:DC]:RANGe:AUTO", query: true, fn: func(*call) (string, error) {
			return boolResp(d.auto), nil
		}},
		{pattern: "[SENSe:]VOLTage[:DC]:NPLCycles", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			n, err := nplcParam(c.params[0])
			if err != nil {
				return "", err
			}
			d.nplc = n
			d.invalidate()
			return "", nil
		}},
		{pattern: "[SENSe:]VOLTage[:DC]:NPLCycles", query: true, fn: func(*call) (string, error) {
			return nr3(d.nplc), nil
		}},
		{pattern: "SAMPle:COUNt", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			v, err := numericParam(c.params[0], 1, 1000, 1)
			if err != nil {
				return "", err
			}
			if v != math.Trunc(v) {
				return "", newErr(errOutOfRange, c.params[0]+" is not a whole number")
			}
			d.count = int(v)
			d.invalidate()
			return "", nil
		}},
		{pattern: "SAMPle:COUNt", query: true, fn: func(*call) (string, error) {
			return nr1(d.count), nil
		}},
		{pattern: "READ", query: true, fn: read},
		{pattern: "MEASure[:VOLTage][:DC]", query: true, maxParams: 2, fn: func(c *call) (string, error) {
			d.auto = true
			if len(c.params) >= 1 {
				idx, auto, err := rangeParam(c.params[0])
				if err != nil {
					return "", err
				}
				d.rangeIdx, d.auto = idx, auto
			}
			d.abort()
			s := d.settings()
			vs, err := d.measure(c.ctx, s, 1)
			if err != nil {
				return "", err
			}
			d.mm.Lock()
			d.readings, d.hasData = vs, true
			d.mm.Unlock()
			return formatReadings(vs), nil
		}},
		{pattern: "INITiate[:IMMediate]", fn: func(*call) (string, error) {
			return "", d.start()
		}},
		{pattern: "ABORt", fn: func(*call) (string, error) {
			d.abort()
			return "", nil
		}},
		{pattern: "FETCh[:VOLTage][:DC]", query: true, fn: func(c *call) (string, error) {
			if err := d.waitPending(c.ctx); err != nil {
				return "", err
			}
			d.mm.Lock()
			defer d.mm.Unlock()
			if !d.hasData {
				return "", newErr(errDataStale, "no readings: send INIT first")
			}
			return formatReadings(d.readings), nil
		}},
	})
}

// start begins s.count readings in the background (INIT, or *TRG after an
// armed INIT); FETC? and *OPC? wait for them.
func (d *dmm) start() error {
	d.mm.Lock()
	defer d.mm.Unlock()
	if d.pending != nil {
		select {
		case <-d.pending.done:
		default:
			return newErr(errInitIgnored, "measurement in progress")
		}
	}
	ctx, cancel := context.WithCancel(d.b.runContext())
	p := &measurement{done: make(chan struct{}), cancel: cancel}
	d.pending = p
	d.readings, d.hasData = nil, false
	s := d.settings()
	d.b.wg.Add(1)
	go func() {
		defer d.b.wg.Done()
		defer cancel()
		vs, err := d.measure(ctx, s, s.count)
		d.mm.Lock()
		p.readings, p.err = vs, err
		if d.pending == p && err == nil {
			d.readings, d.hasData = vs, true
		}
		d.mm.Unlock()
		close(p.done)
	}()
	return nil
}
