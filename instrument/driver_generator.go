package instrument

import (
	"context"
	"fmt"
	"math"
	"sync"
)

var (
	_ Generator  = (*GeneratorDriver)(nil)
	_ Identifier = (*GeneratorDriver)(nil)
)

// GeneratorDriver is one output of a function generator driven by a
// profile's [generator] table (SCPI-99 SOURce:FUNCtion, :FREQuency,
// :VOLTage, :VOLTage:OFFSet, OUTPut). Amplitudes are peak volts across
// the profile's load setting; the driver converts to the profile's
// amplitude unit (VPP = 2 × peak).
type GeneratorDriver struct {
	channelBase
	cmds *GeneratorCommands

	mu     sync.Mutex
	loaded bool // the load setting has been sent since the driver was made
}

// NewGenerator binds the Generator role to one output of a generator.
func NewGenerator(s *Session, p *Profile, channel string, opts DriverOptions) (*GeneratorDriver, error) {
	if p != nil && p.Generator == nil {
		return nil, fmt.Errorf("%s generator: profile %s (%s) has no [generator] table; it serves %v", sessionName(s), p.Name, p.File, p.Roles())
	}
	var c *GeneratorCommands
	var tpls []string
	var sel string
	var chans []string
	if p != nil {
		c = p.Generator
		tpls = []string{c.SetFunction, c.SetFrequency, c.SetUnit, c.SetAmplitude, c.SetOffset, c.SetOutput, c.SetLoad}
		sel, chans = c.Select, c.Channels
	}
	b, err := newChannelBase(s, p, "generator", channel, sel, chans, tpls, opts)
	if err != nil {
		return nil, err
	}
	return &GeneratorDriver{channelBase: b, cmds: c}, nil
}

// Limits returns the profile's output limits: the largest |offset| + peak
// (volts, into the load setting) and the highest frequency.
func (g *GeneratorDriver) Limits() (maxPeakVolts, maxHz float64) {
	return g.cmds.MaxPeakVolts, g.cmds.MaxHz
}

// AmplitudeValue converts a peak amplitude to the number the instrument
// takes in unit ("VPP": peak-to-peak, 2 × peak; "VPK": peak).
func AmplitudeValue(peakVolts float64, unit string) float64 {
	if unit == "VPP" {
		return 2 * peakVolts
	}
	return peakVolts
}

// SetSine programs a sine of frequencyHz, peakVolts about offsetVolts,
// in one transaction: load setting (first time), function, frequency,
// unit, amplitude, offset. It refuses, before sending anything, a
// frequency outside (0, max_hz] or |offset| + peak beyond max_peak_volts.
func (g *GeneratorDriver) SetSine(ctx context.Context, frequencyHz, peakVolts, offsetVolts float64) error {
	c := g.cmds
	if !finite(frequencyHz) || frequencyHz <= 0 || frequencyHz > c.MaxHz {
		return g.errorf("frequency %v Hz: want 0 < f <= %g Hz (profile %s max_hz)", frequencyHz, c.MaxHz, g.p.Name)
	}
	if !finite(peakVolts) || peakVolts < 0 {
		return g.errorf("amplitude %v V peak: want a finite number >= 0", peakVolts)
	}
	if !finite(offsetVolts) || math.Abs(offsetVolts)+peakVolts > c.MaxPeakVolts {
		return g.errorf("offset %g V with %g V peak reaches %g V: beyond the %g V the profile %s allows (max_peak_volts)",
			offsetVolts, peakVolts, math.Abs(offsetVolts)+peakVolts, c.MaxPeakVolts, g.p.Name)
	}
	g.mu.Lock()
	needLoad := !g.loaded && c.SetLoad != ""
	g.mu.Unlock()
	var cmds []string
	add := func(tpl, value, unit string) error {
		if tpl == "" {
			return nil
		}
		cmd, err := g.expand(tpl, value, unit)
		if err != nil {
			return err
		}
		cmds = append(cmds, cmd)
		return nil
	}
	steps := []struct{ tpl, value, unit string }{
		{c.SetFunction, "", ""},
		{c.SetFrequency, formatNumber(frequencyHz), "HZ"},
		{c.SetUnit, c.AmplitudeUnit, c.AmplitudeUnit},
		{c.SetAmplitude, formatNumber(AmplitudeValue(peakVolts, c.AmplitudeUnit)), c.AmplitudeUnit},
		{c.SetOffset, formatNumber(offsetVolts), "V"},
	}
	if needLoad {
		steps = append([]struct{ tpl, value, unit string }{{c.SetLoad, c.Load, ""}}, steps...)
	}
	for _, st := range steps {
		if err := add(st.tpl, st.value, st.unit); err != nil {
			return g.wrap(err)
		}
	}
	err := g.s.Do(ctx, func(tx *Tx) error {
		first, err := g.selectChannel(ctx, tx, cmds[0])
		if err != nil {
			return err
		}
		for i, cmd := range cmds {
			if i == 0 {
				cmd = first
			}
			if err := tx.Write(ctx, cmd); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return g.wrap(err)
	}
	if needLoad {
		g.mu.Lock()
		g.loaded = true
		g.mu.Unlock()
	}
	return nil
}

// SetOutput turns the output on or off. Turning it on first sends the
// load setting if SetSine has not.
func (g *GeneratorDriver) SetOutput(ctx context.Context, on bool) error {
	g.mu.Lock()
	needLoad := on && !g.loaded && g.cmds.SetLoad != ""
	g.mu.Unlock()
	if needLoad {
		if err := g.set(ctx, g.cmds.SetLoad, g.cmds.Load, "", 0); err != nil {
			return err
		}
		g.mu.Lock()
		g.loaded = true
		g.mu.Unlock()
	}
	return g.set(ctx, g.cmds.SetOutput, onOff(on), "", g.p.Settle)
}
