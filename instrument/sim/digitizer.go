package sim

import (
	"context"
	"encoding/binary"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"strconv"
	"strings"
	"sync"
	"time"
)

// The two-channel digitizer DIG-2CH: simultaneously sampled 16-bit
// channels, a 10 MHz sample clock divided by an integer, records of up to
// DigitizerMaxPoints, waveforms as ASCII or IEEE 488.2 definite-length
// blocks of int16 codes or real32 volts in either byte order (SCPI-99
// FORMat:DATA and FORMat:BORDer). Channel 1 is wired to the stimulus-sense
// line, channel 2 to the fixture output (ac.go).

// Digitizer constants (typical data-sheet figures of 16-bit bench
// digitizers, common practice; the built-in profile states the limits).
const (
	DigitizerClockHz   = 10e6   // sample clock before the divider
	DigitizerMaxPoints = 262144 // record length limit
	digMinPoints       = 16
	digMaxDivider      = 1000000
	digGainTolerance   = 0.003 // drawn gain error, ± relative (profile ±0.5 %)
	digOffsetRel       = 5e-4  // drawn offset, ± relative to range
	digBandwidthHz     = 2e6   // input bandwidth, single pole, ±10 % drawn
	digACCornerHz      = 1.5   // AC-coupling corner, ±20 % drawn
	digSkewSeconds     = 1e-9  // drawn sampling delay per channel, ±
	digClockPPM        = 20.0  // drawn sample clock error, ± ppm (profile ±50 ppm)
	digNoiseRel        = 5e-5  // rms input noise relative to range
	digNoiseFloorVolts = 10e-6 // rms input noise floor
	digFullScaleCode   = 32768 // codes per range
	digDefaultPoints   = 1000  // *RST
	digDefaultDivider  = 1000  // *RST: 10 kS/s
)

// digRanges are the channel ranges (volts, peak full scale).
var digRanges = []float64{0.02, 0.05, 0.1, 0.2, 0.5, 1, 2, 5, 10, 20}

// DigitizerMismatch is an extra gain and phase of channel 2 relative to
// channel 1 (Config.DigitizerMismatch): a badly matched pair of inputs, for
// through-calibration tests.
type DigitizerMismatch struct {
	GainDB   float64
	PhaseDeg float64
}

type digChannel struct {
	rangeIdx int
	acCouple bool

	gain, offsetRel, bwHz, acHz, skewS float64 // fixed errors (seeded)
}

type digRecord struct {
	done  time.Time
	codes [2][]int16
	lsb   [2]float64
}

type digitizer struct {
	b        *Bench
	rng      *rand.Rand // guarded by b.mu
	clockRel float64
	mismatch complex128

	// settings, guarded by the instrument's mutex
	ch      [2]digChannel
	points  int
	divider int
	format  string // "ASC", "INT", "REAL"
	swapped bool

	mm  sync.Mutex
	rec *digRecord
}

func newDigitizer(b *Bench, rng *rand.Rand, mis DigitizerMismatch) *digitizer {
	d := &digitizer{b: b, rng: rng}
	d.clockRel = digClockPPM * 1e-6 * (2*rng.Float64() - 1)
	for i := range d.ch {
		c := &d.ch[i]
		c.gain = digGainTolerance * (2*rng.Float64() - 1)
		c.offsetRel = digOffsetRel * (2*rng.Float64() - 1)
		c.bwHz = digBandwidthHz * (1 + 0.1*(2*rng.Float64()-1))
		c.acHz = digACCornerHz * (1 + 0.2*(2*rng.Float64()-1))
		c.skewS = digSkewSeconds * (2*rng.Float64() - 1)
	}
	d.mismatch = cmplx.Rect(math.Pow(10, mis.GainDB/20), mis.PhaseDeg*math.Pi/180)
	d.reset()
	return d
}

func (d *digitizer) reset() {
	for i := range d.ch {
		d.ch[i].rangeIdx, d.ch[i].acCouple = len(digRanges)-2, false
	}
	d.points, d.divider, d.format, d.swapped = digDefaultPoints, digDefaultDivider, "ASC", false
	d.mm.Lock()
	d.rec = nil
	d.mm.Unlock()
}

// response is channel i's complex gain at frequency f: gain error, input
// bandwidth, AC coupling, sampling skew and, on channel 2, the mismatch.
func (d *digitizer) response(i int, f float64) complex128 {
	c := &d.ch[i]
	r := complex(1+c.gain, 0) / complex(1, f/c.bwHz)
	if c.acCouple {
		r *= complex(0, f/c.acHz) / complex(1, f/c.acHz)
	}
	r *= cmplx.Rect(1, -2*math.Pi*f*c.skewS)
	if i == 1 {
		r *= d.mismatch
	}
	return r
}

// rateHz is the nominal sample rate (what the instrument reports).
func (d *digitizer) rateHz() float64 { return DigitizerClockHz / float64(d.divider) }

func (d *digitizer) waitPending(ctx context.Context) error {
	d.mm.Lock()
	r := d.rec
	d.mm.Unlock()
	if r == nil {
		return nil
	}
	return sleepUntil(ctx, d.b.clock, r.done)
}

// acquire takes one record from bench time now: the model is evaluated at
// the trigger (a change during the record is not seen), the samples at
// t0 + k/fs_true.
func (d *digitizer) acquire() {
	b := d.b
	start := b.clock.Now()
	n := d.points
	fsTrue := d.rateHz() * (1 + d.clockRel)
	dur := time.Duration(float64(n) / fsTrue * float64(time.Second))
	rec := &digRecord{done: start.Add(dur)}
	b.mu.Lock()
	m := b.m
	m.advance(b.secondsAt(start))
	a := m.acSense(d.rateHz())
	var theta0 float64
	if a.activeOutput >= 0 {
		theta0 = m.gen[a.activeOutput].phaseAt(m.t)
	}
	w := 2 * math.Pi * a.f / fsTrue
	for i := range 2 {
		c := &d.ch[i]
		rng := digRanges[c.rangeIdx]
		lsb := rng / digFullScaleCode
		rec.lsb[i] = lsb
		p := a.ph[i] * d.response(i, a.f)
		dc := c.offsetRel * rng
		if !c.acCouple {
			dc += a.dc[i] * (1 + c.gain)
		}
		sigma := math.Hypot(a.noise[i], math.Hypot(digNoiseRel*rng, digNoiseFloorVolts))
		codes := make([]int16, n)
		amp, ph := cmplx.Abs(p), cmplx.Phase(p)
		for k := range n {
			v := dc + amp*math.Sin(theta0+ph+w*float64(k)) + sigma*d.rng.NormFloat64()
			q := math.Round(v / lsb)
			q = math.Max(-digFullScaleCode, math.Min(digFullScaleCode-1, q))
			codes[k] = int16(q)
		}
		rec.codes[i] = codes
	}
	b.mu.Unlock()
	d.mm.Lock()
	d.rec = rec
	d.mm.Unlock()
}

// formatTrace renders channel i of the record in the selected format.
func (d *digitizer) formatTrace(r *digRecord, i int) string {
	codes, lsb := r.codes[i], r.lsb[i]
	order := binary.ByteOrder(binary.BigEndian)
	if d.swapped {
		order = binary.LittleEndian
	}
	switch d.format {
	case "INT":
		buf := make([]byte, 2*len(codes))
		for k, c := range codes {
			order.PutUint16(buf[2*k:], uint16(c))
		}
		return block(buf)
	case "REAL":
		buf := make([]byte, 4*len(codes))
		for k, c := range codes {
			order.PutUint32(buf[4*k:], math.Float32bits(float32(float64(c)*lsb)))
		}
		return block(buf)
	}
	var sb strings.Builder
	sb.Grow(16 * len(codes))
	for k, c := range codes {
		if k > 0 {
			sb.WriteByte(',')
		}
		sb.WriteString(nr3(float64(c) * lsb))
	}
	return sb.String()
}

// block wraps data in a definite-length arbitrary block (IEEE 488.2 §8.7.9).
func block(data []byte) string {
	n := strconv.Itoa(len(data))
	return "#" + strconv.Itoa(len(n)) + n + string(data)
}

// traceParam parses CH1|CH2 (or 1|2).
func traceParam(p string) (int, error) {
	s := strings.ToUpper(strings.TrimSpace(p))
	s = strings.TrimPrefix(s, "CH")
	switch s {
	case "1":
		return 0, nil
	case "2":
		return 1, nil
	}
	return 0, errf(errIllegalValue, "trace %s (CH1 or CH2)", p)
}

func (d *digitizer) channel(c *call, node int) (*digChannel, error) {
	n := c.suffixAt(node)
	if n == -1 {
		n = 1
	}
	if n < 1 || n > len(d.ch) {
		return nil, errf(errSuffixRange, "channel %d (1..%d)", n, len(d.ch))
	}
	return &d.ch[n-1], nil
}

// invalidate drops a finished or running record after a settings change.
func (d *digitizer) invalidate() {
	d.mm.Lock()
	d.rec = nil
	d.mm.Unlock()
}

func (d *digitizer) commands() []command {
	return []command{
		{pattern: "[SENSe#:]VOLTage[:DC]:RANGe[:UPPer]", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			ch, err := d.channel(c, 0)
			if err != nil {
				return "", err
			}
			v, err := numericParam(c.params[0], 0, digRanges[len(digRanges)-1], digRanges[len(digRanges)-2])
			if err != nil {
				return "", err
			}
			for i, r := range digRanges {
				if v <= r*(1+1e-9) {
					ch.rangeIdx = i
					d.invalidate()
					return "", nil
				}
			}
			return "", errf(errOutOfRange, "%s V", c.params[0])
		}},
		{pattern: "[SENSe#:]VOLTage[:DC]:RANGe[:UPPer]", query: true, fn: func(c *call) (string, error) {
			ch, err := d.channel(c, 0)
			if err != nil {
				return "", err
			}
			return nr3(digRanges[ch.rangeIdx]), nil
		}},
		{pattern: "[SENSe#:]VOLTage[:DC]:RESolution", query: true, fn: func(c *call) (string, error) {
			ch, err := d.channel(c, 0)
			if err != nil {
				return "", err
			}
			return nr3(digRanges[ch.rangeIdx] / digFullScaleCode), nil
		}},
		{pattern: "[SENSe#:]VOLTage[:DC]:OFFSet", query: true, fn: func(c *call) (string, error) {
			if _, err := d.channel(c, 0); err != nil {
				return "", err
			}
			return nr3(0), nil
		}},
		{pattern: "INPut#:COUPling", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			ch, err := d.channel(c, 0)
			if err != nil {
				return "", err
			}
			switch charParam(c.params[0]) {
			case "AC":
				ch.acCouple = true
			case "DC":
				ch.acCouple = false
			default:
				return "", errf(errIllegalValue, "coupling %s (AC or DC)", c.params[0])
			}
			d.invalidate()
			return "", nil
		}},
		{pattern: "INPut#:COUPling", query: true, fn: func(c *call) (string, error) {
			ch, err := d.channel(c, 0)
			if err != nil {
				return "", err
			}
			if ch.acCouple {
				return "AC", nil
			}
			return "DC", nil
		}},
		{pattern: "[SENSe:]SWEep:POINts", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			v, err := numericParam(c.params[0], digMinPoints, DigitizerMaxPoints, digDefaultPoints)
			if err != nil {
				return "", err
			}
			if v != math.Trunc(v) {
				return "", errf(errOutOfRange, "%s is not a whole number", c.params[0])
			}
			d.points = int(v)
			d.invalidate()
			return "", nil
		}},
		{pattern: "[SENSe:]SWEep:POINts", query: true, fn: func(*call) (string, error) { return nr1(d.points), nil }},
		// The sample interval rounds to a whole number of clock periods.
		{pattern: "[SENSe:]SWEep:TINTerval", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			v, err := numericParam(c.params[0], 1/DigitizerClockHz, digMaxDivider/DigitizerClockHz, digDefaultDivider/DigitizerClockHz)
			if err != nil {
				return "", err
			}
			d.divider = max(1, min(digMaxDivider, int(math.Round(v*DigitizerClockHz))))
			d.invalidate()
			return "", nil
		}},
		{pattern: "[SENSe:]SWEep:TINTerval", query: true, fn: func(*call) (string, error) {
			return nr3(float64(d.divider) / DigitizerClockHz), nil
		}},
		{pattern: "FORMat[:DATA]", minParams: 1, maxParams: 2, fn: func(c *call) (string, error) {
			kind := charParam(c.params[0])
			width := ""
			if len(c.params) == 2 {
				width = strings.TrimSpace(c.params[1])
			}
			switch {
			case (kind == "ASC" || kind == "ASCII") && (width == "" || width == "0"):
				d.format = "ASC"
			case (kind == "INT" || kind == "INTEGER") && (width == "" || width == "16"):
				d.format = "INT"
			case kind == "REAL" && (width == "" || width == "32"):
				d.format = "REAL"
			default:
				return "", errf(errIllegalValue, "format %s (ASCii, INTeger,16 or REAL,32)", strings.Join(c.params, ","))
			}
			return "", nil
		}},
		{pattern: "FORMat[:DATA]", query: true, fn: func(*call) (string, error) {
			switch d.format {
			case "INT":
				return "INT,16", nil
			case "REAL":
				return "REAL,32", nil
			}
			return "ASC,0", nil
		}},
		{pattern: "FORMat:BORDer", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			switch charParam(c.params[0]) {
			case "NORM", "NORMAL":
				d.swapped = false
			case "SWAP", "SWAPPED":
				d.swapped = true
			default:
				return "", errf(errIllegalValue, "byte order %s (NORMal or SWAPped)", c.params[0])
			}
			return "", nil
		}},
		{pattern: "FORMat:BORDer", query: true, fn: func(*call) (string, error) {
			if d.swapped {
				return "SWAP", nil
			}
			return "NORM", nil
		}},
		{pattern: "INITiate[:IMMediate]", fn: func(*call) (string, error) {
			d.acquire()
			return "", nil
		}},
		{pattern: "ABORt", fn: func(*call) (string, error) {
			d.invalidate()
			return "", nil
		}},
		{pattern: "TRACe[:DATA]", query: true, minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			i, err := traceParam(c.params[0])
			if err != nil {
				return "", err
			}
			if err := d.waitPending(c.ctx); err != nil {
				return "", err
			}
			d.mm.Lock()
			r := d.rec
			d.mm.Unlock()
			if r == nil {
				return "", newErr(errDataStale, "no record: send INIT first")
			}
			return d.formatTrace(r, i), nil
		}},
	}
}
