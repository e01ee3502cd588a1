package instrument

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"strconv"
	"sync"
	"time"
)

var (
	_ Digitizer  = (*DigitizerDriver)(nil)
	_ Identifier = (*DigitizerDriver)(nil)
)

// DigitizerDriver is the Digitizer role driven by a profile's [digitizer]
// table: per-channel range, record length and sample rate, the rate in use
// read back, arm, wait, and one fetch per channel, as ASCII or IEEE 488.2
// definite-length blocks (§8.7.9) of int16 codes or real32 volts.
//
// Plausibility: a rate read back that is not positive and finite, or is
// off the request by more than RateReadbackFactor, is refused
// (ErrImplausible); a record with samples at full scale is returned with an
// error wrapping ErrClipped naming the channel; a record of the wrong
// length is refused.
type DigitizerDriver struct {
	driverBase
	cmds  *DigitizerCommands
	kind  WaveformKind
	order binary.ByteOrder

	mu        sync.Mutex
	n         int       // configured channels (0: not configured)
	samples   int       // per record
	rateHz    float64   // in use, read back
	ranges    []float64 // per channel, as chosen by the instrument when read_range is given
	scale     []float64 // int16 volts per code
	offset    []float64 // int16 volts at code 0
	configErr bool
}

// RateReadbackFactor bounds how far the rate an instrument reports may
// differ from the one asked for (a factor either way): rounding to a clock
// divider stays well inside it; beyond it the setting was not taken (common
// practice, no published source).
const RateReadbackFactor = 2.0

// NewDigitizer binds the Digitizer role using p's [digitizer] table. The
// channels are the profile's, in its order.
func NewDigitizer(s *Session, p *Profile, opts DriverOptions) (*DigitizerDriver, error) {
	b, err := newBase(s, p, "digitizer", opts)
	if err != nil {
		return nil, err
	}
	if p.Digitizer == nil {
		return nil, fmt.Errorf("%s: profile %s (%s) has no [digitizer] table; it serves %v", b.label, p.Name, p.File, p.Roles())
	}
	order := binary.ByteOrder(binary.BigEndian)
	if p.Digitizer.ByteOrder == "little" {
		order = binary.LittleEndian
	}
	return &DigitizerDriver{driverBase: b, cmds: p.Digitizer, kind: waveformKinds[p.Digitizer.Data], order: order}, nil
}

// Channels lists the profile's channels, in Capture order.
func (d *DigitizerDriver) Channels() []string { return append([]string(nil), d.cmds.Channels...) }

// MaxPoints is the record length limit from the profile.
func (d *DigitizerDriver) MaxPoints() int { return d.cmds.MaxPoints }

// RateHz is the sample rate in use as last read back (0 before Configure).
func (d *DigitizerDriver) RateHz() float64 {
	d.mu.Lock()
	defer d.mu.Unlock()
	return d.rateHz
}

// RangesVolts are the channel ranges in use (as read back when the profile
// has read_range, else as asked).
func (d *DigitizerDriver) RangesVolts() []float64 {
	d.mu.Lock()
	defer d.mu.Unlock()
	return append([]float64(nil), d.ranges...)
}

func (d *DigitizerDriver) chanVals(ch string) map[string]string {
	return map[string]string{PhChannel: ch}
}

// Configure sets each of the first len(rangeVolts) channels' range, the
// record length and the sample rate, then reads back the rate in use (and
// the ranges, and for int16 transfers each channel's scale and offset).
func (d *DigitizerDriver) Configure(ctx context.Context, rateHz float64, samples int, rangeVolts []float64) error {
	c := d.cmds
	if !finite(rateHz) || rateHz <= 0 {
		return d.errorf("sample rate %v Hz: want a positive number", rateHz)
	}
	if samples < 2 || samples > c.MaxPoints {
		return d.errorf("%d samples per record: want 2..%d (profile %s max_points)", samples, c.MaxPoints, d.p.Name)
	}
	n := len(rangeVolts)
	if n < 1 || n > len(c.Channels) {
		return d.errorf("%d channel ranges for a digitizer with channels %v", n, c.Channels)
	}
	for i, r := range rangeVolts {
		if !finite(r) || r <= 0 {
			return d.errorf("channel %s range %v V: want a positive number of volts", c.Channels[i], r)
		}
	}
	var cmds []string
	for i := range n {
		vals := d.chanVals(c.Channels[i])
		vals[PhRange] = formatNumber(rangeVolts[i])
		cmd, err := expandTemplate(c.ConfigureChannel, vals)
		if err != nil {
			return d.wrap(err)
		}
		cmds = append(cmds, cmd)
	}
	pts, err := expandTemplate(c.SetPoints, map[string]string{PhCount: fmt.Sprint(samples)})
	if err != nil {
		return d.wrap(err)
	}
	rate, err := expandTemplate(c.SetRate, map[string]string{PhRate: formatNumber(rateHz), PhInterval: formatNumber(1 / rateHz)})
	if err != nil {
		return d.wrap(err)
	}
	cmds = append(cmds, pts, rate)
	if c.Format != "" {
		cmds = append(cmds, c.Format)
	}
	ranges := append([]float64(nil), rangeVolts...)
	scale, offset := make([]float64, n), make([]float64, n)
	var got float64
	d.mu.Lock()
	d.n = 0 // not configured until this succeeds
	d.mu.Unlock()
	err = d.s.Do(ctx, func(tx *Tx) error {
		for _, cmd := range cmds {
			if err := tx.Write(ctx, cmd); err != nil {
				return err
			}
		}
		v, err := tx.QueryFloat(ctx, c.ReadRate)
		if err != nil {
			return err
		}
		got = v
		for i := range n {
			vals := d.chanVals(c.Channels[i])
			q := func(tpl string, dst *float64) error {
				if tpl == "" {
					return nil
				}
				cmd, err := expandTemplate(tpl, vals)
				if err != nil {
					return err
				}
				v, err := tx.QueryFloat(ctx, cmd)
				if err != nil {
					return err
				}
				if !finite(v) {
					return &OpError{Instrument: d.s.Name(), Command: cmd, Err: fmt.Errorf("%w: %v", ErrImplausible, v)}
				}
				*dst = v
				return nil
			}
			if err := q(c.ReadRange, &ranges[i]); err != nil {
				return err
			}
			if d.kind == WaveInt16 {
				if err := q(c.ScaleQuery, &scale[i]); err != nil {
					return err
				}
				if err := q(c.OffsetQuery, &offset[i]); err != nil {
					return err
				}
			}
		}
		return nil
	})
	if err != nil {
		return d.wrap(err)
	}
	actual := got
	if c.RateReply == "interval" {
		// The reply carries a dozen digits at most: 1/1E-05 is 1E5, not
		// 99999.99999999999.
		actual, _ = strconv.ParseFloat(strconv.FormatFloat(1/got, 'g', 12, 64), 64)
	}
	if !finite(actual) || actual <= 0 || actual > rateHz*RateReadbackFactor || actual < rateHz/RateReadbackFactor {
		return d.errorf("%q answered %v (%s): a rate of %v Hz for %v Hz asked: %w", c.ReadRate, got, c.RateReply, actual, rateHz, ErrImplausible)
	}
	for i := range n {
		if !(ranges[i] > 0) {
			return d.errorf("channel %s: range read back %v V: %w", c.Channels[i], ranges[i], ErrImplausible)
		}
		// int16 codes must span at least half the range (else the range
		// cannot be transferred) and not absurdly more (a converter of
		// fewer bits sends its codes scaled up, common practice).
		if full := math.Abs(scale[i]) * 32768; d.kind == WaveInt16 && !(full >= 0.5*ranges[i] && full <= 1e3*ranges[i]) {
			return d.errorf("channel %s: %v V per code (full scale %v V) for a %v V range: %w", c.Channels[i], scale[i], full, ranges[i], ErrImplausible)
		}
	}
	d.mu.Lock()
	d.n, d.samples, d.rateHz, d.ranges, d.scale, d.offset = n, samples, actual, ranges, scale, offset
	d.mu.Unlock()
	return d.wrap(d.opts.settle(ctx, d.p.Settle))
}

// Capture arms one record, waits for it and fetches every configured
// channel. The exchange may take the session time-out plus twice the
// record's duration. Waveforms with clipped samples are returned together
// with an error wrapping ErrClipped.
func (d *DigitizerDriver) Capture(ctx context.Context) ([]Waveform, error) {
	d.mu.Lock()
	n, samples, rate := d.n, d.samples, d.rateHz
	ranges := append([]float64(nil), d.ranges...)
	scale, offset := append([]float64(nil), d.scale...), append([]float64(nil), d.offset...)
	d.mu.Unlock()
	if n == 0 {
		return nil, d.errorf("capture before a successful Configure")
	}
	c := d.cmds
	record := time.Duration(float64(samples) / rate * float64(time.Second))
	ctx = WithCallTimeout(ctx, d.s.Timeout()+2*record)
	fetch := make([]string, n)
	for i := range n {
		cmd, err := expandTemplate(c.Fetch, d.chanVals(c.Channels[i]))
		if err != nil {
			return nil, d.wrap(err)
		}
		fetch[i] = cmd
	}
	out := make([]Waveform, n)
	var clips []error
	err := d.s.Do(ctx, func(tx *Tx) error {
		if err := tx.Write(ctx, c.Arm); err != nil {
			return err
		}
		if c.Wait != "" {
			if _, err := tx.Query(ctx, c.Wait); err != nil {
				return err
			}
		}
		for i := range n {
			var v []float64
			var nClip int
			if d.kind == WaveASCII {
				var err error
				v, err = tx.QueryFloats(ctx, fetch[i])
				if err != nil {
					return err
				}
				nClip = clippedVolts(v, ranges[i])
			} else {
				data, err := tx.QueryBlock(ctx, fetch[i])
				if err != nil {
					return err
				}
				v, err = DecodeWaveform(data, d.kind, d.order, scale[i], offset[i])
				if err != nil {
					return &OpError{Instrument: d.s.Name(), Command: fetch[i], Err: err}
				}
				// At the int16 extremes, or at the range in volts (a
				// converter of fewer bits clips below the int16 extremes).
				nClip = clippedVolts(v, ranges[i])
				if d.kind == WaveInt16 {
					nClip = max(nClip, clippedInt16(data, d.order))
				}
			}
			if len(v) != samples {
				return &OpError{Instrument: d.s.Name(), Command: fetch[i], Err: fmt.Errorf("%w: %d samples, %d configured", ErrBadResponse, len(v), samples)}
			}
			for _, x := range v {
				if math.IsInf(x, 0) || math.IsNaN(x) {
					nClip++ // overload codes in an ASCII record
				}
			}
			if nClip > 0 {
				clips = append(clips, fmt.Errorf("channel %s: %d of %d samples at full scale (range %g V; choose a larger range): %w",
					c.Channels[i], nClip, samples, ranges[i], ErrClipped))
			}
			out[i] = Waveform{RateHz: rate, Volts: v}
		}
		return nil
	})
	if err != nil {
		return nil, d.wrap(err)
	}
	if len(clips) > 0 {
		return out, d.wrap(errors.Join(clips...))
	}
	return out, nil
}
