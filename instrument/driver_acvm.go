package instrument

import (
	"context"
	"fmt"
	"sync"
	"time"
)

var (
	_ ACVoltmeter = (*ACVoltmeterDriver)(nil)
	_ Identifier  = (*ACVoltmeterDriver)(nil)
)

// ACVoltmeterDriver is the ACVoltmeter role on one input of an AC
// voltmeter, driven by a profile's [ac_meter] table. Readings are RMS
// volts; an overload (SCPI +9.9E37) is +Inf with ErrOverload; a reading
// below zero or beyond MeterOverRangeFactor × range is refused
// (ErrImplausible).
type ACVoltmeterDriver struct {
	channelBase
	cmds *ACMeterCommands

	mu         sync.Mutex
	rangeVolts float64
}

// NewACVoltmeter binds the ACVoltmeter role to one input of an AC
// voltmeter ("1" when the profile has a single input).
func NewACVoltmeter(s *Session, p *Profile, channel string, opts DriverOptions) (*ACVoltmeterDriver, error) {
	if p != nil && p.ACMeter == nil {
		return nil, fmt.Errorf("%s AC voltmeter: profile %s (%s) has no [ac_meter] table; it serves %v", sessionName(s), p.Name, p.File, p.Roles())
	}
	var c *ACMeterCommands
	var tpls []string
	var sel string
	var chans []string
	if p != nil {
		c = p.ACMeter
		tpls = []string{c.Configure, c.Bandwidth, c.Read}
		sel, chans = c.Select, c.Channels
	}
	b, err := newChannelBase(s, p, "AC voltmeter", channel, sel, chans, tpls, opts)
	if err != nil {
		return nil, err
	}
	return &ACVoltmeterDriver{channelBase: b, cmds: c}, nil
}

// ConfigureACVolts selects the input, AC volts on a fixed range (volts
// RMS) and, when the profile has a bandwidth template, the detector
// bandwidth for a signal of frequencyHz.
func (a *ACVoltmeterDriver) ConfigureACVolts(ctx context.Context, rangeVolts, frequencyHz float64) error {
	if !finite(rangeVolts) || rangeVolts <= 0 {
		return a.errorf("range %v V: must be a positive number of volts", rangeVolts)
	}
	if !finite(frequencyHz) || frequencyHz <= 0 {
		return a.errorf("frequency %v Hz: must be a positive number", frequencyHz)
	}
	vals := map[string]string{PhChannel: a.channel, PhRange: formatNumber(rangeVolts), PhValue: formatNumber(frequencyHz)}
	conf, err := expandTemplate(a.cmds.Configure, vals)
	if err != nil {
		return a.wrap(err)
	}
	var band string
	if a.cmds.Bandwidth != "" {
		if band, err = expandTemplate(a.cmds.Bandwidth, vals); err != nil {
			return a.wrap(err)
		}
	}
	err = a.s.Do(ctx, func(tx *Tx) error {
		msg, err := a.selectChannel(ctx, tx, conf)
		if err != nil {
			return err
		}
		if err := tx.Write(ctx, msg); err != nil {
			return err
		}
		if band != "" {
			return tx.Write(ctx, band)
		}
		return nil
	})
	if err != nil {
		return a.wrap(err)
	}
	a.mu.Lock()
	a.rangeVolts = rangeVolts
	a.mu.Unlock()
	return a.wrap(a.opts.settle(ctx, a.p.Settle))
}

// ReadRMS selects the input and takes one RMS reading in volts.
func (a *ACVoltmeterDriver) ReadRMS(ctx context.Context) (float64, error) {
	a.mu.Lock()
	rng := a.rangeVolts
	a.mu.Unlock()
	// An AC reading settles over seconds on its slowest filter (common
	// practice, no published source): allow 10 s beyond the time-out.
	ctx = WithCallTimeout(ctx, a.s.Timeout()+10*time.Second)
	v, err := a.read(ctx, a.cmds.Read)
	if err != nil {
		return v, err
	}
	if v < 0 {
		return v, a.errorf("%q: %g V RMS is negative: %w", a.cmds.Read, v, ErrImplausible)
	}
	if rng > 0 && v > MeterOverRangeFactor*rng {
		return v, a.errorf("%q: %g V RMS beyond %g × the %g V range and not the overload code: %w", a.cmds.Read, v, MeterOverRangeFactor, rng, ErrImplausible)
	}
	return v, nil
}
