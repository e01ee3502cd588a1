package instrument

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"
	"sync"
	"time"
)

// Compile-time checks that the profile-driven drivers serve their roles.
var (
	_ Meter       = (*MeterDriver)(nil)
	_ Supply      = (*SupplyDriver)(nil)
	_ Source      = (*SourceDriver)(nil)
	_ Switch      = (*SwitchDriver)(nil)
	_ Chamber     = (*ChamberDriver)(nil)
	_ Thermometer = (*ThermometerDriver)(nil)
	_ Thermometer = (*ChamberDriver)(nil)
	_ Identifier  = (*MeterDriver)(nil)
	_ Identifier  = (*SupplyDriver)(nil)
	_ Identifier  = (*SourceDriver)(nil)
	_ Identifier  = (*SwitchDriver)(nil)
	_ Identifier  = (*ChamberDriver)(nil)
	_ Identifier  = (*ThermometerDriver)(nil)
)

// DriverOptions configure a profile-driven driver. The zero value sleeps
// in real time for the profile's settle durations.
type DriverOptions struct {
	// Sleep waits d of bench time after set commands. The procedure
	// passes its clock's Sleep so that a time-scaled bench settles in
	// scaled time; tests pass a recorder. nil: a real sleep that ends
	// early with ctx.
	Sleep func(ctx context.Context, d time.Duration) error
	// When OverrideSettle is set, Settle replaces the profile's settle
	// duration for this driver (zero: no settling).
	Settle         time.Duration
	OverrideSettle bool
}

func (o DriverOptions) settle(ctx context.Context, profile time.Duration) error {
	d := profile
	if o.OverrideSettle {
		d = o.Settle
	}
	if d <= 0 {
		return nil
	}
	if o.Sleep != nil {
		return o.Sleep(ctx, d)
	}
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-t.C:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

// driverBase holds what every driver has: the session, the profile, the
// options and a label for messages ("psu channel 2").
type driverBase struct {
	s     *Session
	p     *Profile
	opts  DriverOptions
	label string
}

// Identity is the *IDN? reply the session read (see Session.Identify), or
// a note that the instrument was not identified.
func (b *driverBase) Identity() string {
	if id, ok := b.s.Identity(); ok {
		return id.Raw
	}
	return fmt.Sprintf("%s (not identified; profile %s)", b.s.Name(), b.p.Name)
}

// Profile is the profile driving this instrument.
func (b *driverBase) Profile() *Profile { return b.p }

// Session is the session the driver talks through.
func (b *driverBase) Session() *Session { return b.s }

// errorf prefixes a driver-level error with the driver's label.
func (b *driverBase) errorf(format string, args ...any) error {
	return fmt.Errorf("%s: "+format, append([]any{b.label}, args...)...)
}

// wrap ties an error to the driver: a session error of this instrument
// (which already names the instrument and the command) gets the role part
// of the label in its Where, so the instrument is named once ("psu
// (supply channel 1): ..."), not twice; any other error is prefixed with
// the label.
func (b *driverBase) wrap(err error) error {
	if err == nil {
		return nil
	}
	where := strings.TrimPrefix(b.label, b.s.Name()+" ")
	var op *OpError
	if errors.As(err, &op) && op.Instrument == b.s.Name() {
		if op.Where == "" {
			op.Where = where
		}
		return err
	}
	var ie *InstrumentError
	if errors.As(err, &ie) && ie.Instrument == b.s.Name() {
		if ie.Where == "" {
			ie.Where = where
		}
		return err
	}
	return fmt.Errorf("%s: %w", b.label, err)
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func newBase(s *Session, p *Profile, role string, opts DriverOptions) (driverBase, error) {
	if s == nil || p == nil {
		return driverBase{}, fmt.Errorf("%s driver: nil session or profile", role)
	}
	if err := p.Validate(); err != nil {
		return driverBase{}, fmt.Errorf("%s %s driver: %w", s.Name(), role, err)
	}
	return driverBase{s: s, p: p, opts: opts, label: s.Name() + " " + role}, nil
}

// The meter driver is in driver_meter.go.

// ---- channel drivers (supply, source) ----

// channelBase runs channel commands: the select template (if any) and the
// command, in one transaction, so no other caller's channel selection can
// come between.
type channelBase struct {
	driverBase
	channel string
	sel     string
}

func newChannelBase(s *Session, p *Profile, role, channel, sel string, channels []string, tpls []string, opts DriverOptions) (channelBase, error) {
	b, err := newBase(s, p, role+" channel "+channel, opts)
	if err != nil {
		return channelBase{}, err
	}
	if !validChannel(channel) {
		return channelBase{}, b.errorf("channel %q: use letters, digits and ! only", channel)
	}
	if len(channels) > 0 && !contains(channels, channel) {
		return channelBase{}, b.errorf("profile %s has channels %v; no channel %q", p.Name, channels, channel)
	}
	named := sel != ""
	for _, t := range tpls {
		if segs, err := parseTemplate(t, knownPlaceholders); err == nil && uses(segs, PhChannel) {
			named = true
		}
	}
	if !named && len(channels) == 0 && channel != "1" {
		return channelBase{}, b.errorf("profile %s cannot select a channel (no select template, no {channel}); only channel 1 exists", p.Name)
	}
	return channelBase{driverBase: b, channel: channel, sel: sel}, nil
}

// Channel is the channel this driver is bound to.
func (c *channelBase) Channel() string { return c.channel }

func (c *channelBase) expand(tpl, value, unit string) (string, error) {
	vals := map[string]string{PhChannel: c.channel}
	if value != "" {
		vals[PhValue] = value
		vals[PhUnit] = unit
	}
	return expandTemplate(tpl, vals)
}

func (c *channelBase) set(ctx context.Context, tpl, value, unit string, settle time.Duration) error {
	cmd, err := c.expand(tpl, value, unit)
	if err != nil {
		return c.wrap(err)
	}
	err = c.s.Do(ctx, func(tx *Tx) error {
		msg, err := c.selectChannel(ctx, tx, cmd)
		if err != nil {
			return err
		}
		return tx.Write(ctx, msg)
	})
	if err != nil {
		return c.wrap(err)
	}
	return c.wrap(c.opts.settle(ctx, settle))
}

func (c *channelBase) read(ctx context.Context, tpl string) (float64, error) {
	cmd, err := c.expand(tpl, "", "")
	if err != nil {
		return 0, c.wrap(err)
	}
	var v float64
	err = c.s.Do(ctx, func(tx *Tx) error {
		msg, err := c.selectChannel(ctx, tx, cmd)
		if err != nil {
			return err
		}
		v, err = tx.QueryFloat(ctx, msg)
		return err
	})
	if err != nil {
		return 0, c.wrap(err)
	}
	if math.IsInf(v, 0) {
		return v, c.errorf("%q: %w", cmd, ErrOverload)
	}
	if math.IsNaN(v) {
		return v, c.errorf("%q: %w", cmd, ErrNotANumber)
	}
	return v, nil
}

// selectChannel selects the channel for cmd and returns the message to
// send: cmd itself after a select message of its own, or, with the
// profile's compound, the select and cmd joined with ';' in one message
// (IEEE 488.2 §7.1: message units of one program message are separated
// by ';'). cmd then gets a leading ':' so that its header starts again
// at the root instead of below the select's subsystem (SCPI-99 vol. 1
// ch. 6, header paths; clause from memory).
func (c *channelBase) selectChannel(ctx context.Context, tx *Tx, cmd string) (string, error) {
	if c.sel == "" {
		return cmd, nil
	}
	sel, err := c.expand(c.sel, "", "")
	if err != nil {
		return "", err
	}
	if c.p.Compound {
		if !strings.HasPrefix(cmd, ":") && !strings.HasPrefix(cmd, "*") {
			cmd = ":" + cmd
		}
		return sel + ";" + cmd, nil
	}
	return cmd, tx.Write(ctx, sel)
}

func onOff(on bool) string {
	if on {
		return "ON"
	}
	return "OFF"
}

// SupplyDriver is one channel of a supply, driven by a profile's [supply]
// table.
//
// A channel wired as a negative rail (negative = true: a floating output
// with its + terminal on ground) is programmed with the magnitude —
// SetVolts(-15) sends 15 — and read back with the sign restored; asking
// it for a positive voltage is an error. ReadAmps returns the current as
// the supply reports it (positive when the output sources current),
// whichever way the channel is wired.
//
// A channel the profile lists in negative_channels is a true negative
// output: bound as the negative rail it is programmed with the negative
// voltage itself (SetVolts(-15) sends -15) and its read-back is taken as
// it comes.
type SupplyDriver struct {
	channelBase
	cmds     *SupplyCommands
	negative bool
	trueNeg  bool // a true negative output (negative_channels)
}

// NewSupply binds the Supply role to one channel of a supply.
func NewSupply(s *Session, p *Profile, channel string, negative bool, opts DriverOptions) (*SupplyDriver, error) {
	if p != nil && p.Supply == nil {
		return nil, fmt.Errorf("%s supply: profile %s (%s) has no [supply] table; it serves %v", sessionName(s), p.Name, p.File, p.Roles())
	}
	role := "supply"
	if negative {
		role = "supply (negative rail)"
	}
	var c *SupplyCommands
	var tpls []string
	if p != nil {
		c = p.Supply
		tpls = []string{c.SetVolts, c.SetCurrentLimit, c.SetOutput, c.ReadVolts, c.ReadAmps}
	}
	trueNeg := c.IsNegativeOutput(channel)
	if trueNeg {
		role = "supply (negative output)"
	}
	b, err := newChannelBase(s, p, role, channel, selOf(c), chansOf(c), tpls, opts)
	if err != nil {
		return nil, err
	}
	if trueNeg && !negative {
		return nil, b.errorf("profile %s lists channel %s in negative_channels: it makes only 0 V or less; bind it as supply_neg with negative = true", p.Name, channel)
	}
	return &SupplyDriver{channelBase: b, cmds: c, negative: negative, trueNeg: trueNeg}, nil
}

func selOf(c *SupplyCommands) string {
	if c == nil {
		return ""
	}
	return c.Select
}

func chansOf(c *SupplyCommands) []string {
	if c == nil {
		return nil
	}
	return c.Channels
}

func sessionName(s *Session) string {
	if s == nil {
		return "(no session)"
	}
	return s.Name()
}

// Negative reports whether the channel is wired as a negative rail.
func (d *SupplyDriver) Negative() bool { return d.negative }

// NegativeOutput reports whether the channel is a true negative output
// (programmed with the negative voltage itself).
func (d *SupplyDriver) NegativeOutput() bool { return d.trueNeg }

// Accuracy is the supply's programming and read-back accuracy.
func (d *SupplyDriver) Accuracy() SupplyAccuracy { return d.cmds.Accuracy }

// SetVolts programs the rail voltage (negative for a negative rail).
func (d *SupplyDriver) SetVolts(ctx context.Context, volts float64) error {
	if !finite(volts) {
		return d.errorf("voltage %v: not a number", volts)
	}
	mag := volts
	switch {
	case d.negative && volts > 0:
		return d.errorf("refusing %+g V: this channel is wired as the negative rail (+ terminal on ground) and can only make 0 V or below", volts)
	case d.trueNeg:
		// programmed as it is: the output makes the negative voltage
	case d.negative:
		mag = -volts
	case volts < 0:
		return d.errorf("refusing %g V: a supply channel programs a positive magnitude; for a negative rail wire the channel floating and bind it with negative = true", volts)
	}
	return d.set(ctx, d.cmds.SetVolts, formatNumber(mag), "V", d.cmds.Settle)
}

// SetCurrentLimit programs the current limit in amps (> 0).
func (d *SupplyDriver) SetCurrentLimit(ctx context.Context, amps float64) error {
	if !finite(amps) || amps <= 0 {
		return d.errorf("current limit %v A: must be a positive number of amps", amps)
	}
	return d.set(ctx, d.cmds.SetCurrentLimit, formatNumber(amps), "A", d.cmds.Settle)
}

// SetOutput turns the channel's output on or off.
func (d *SupplyDriver) SetOutput(ctx context.Context, on bool) error {
	return d.set(ctx, d.cmds.SetOutput, onOff(on), "", d.cmds.Settle)
}

// ReadVolts reads the output voltage back, with the rail's sign.
func (d *SupplyDriver) ReadVolts(ctx context.Context) (float64, error) {
	v, err := d.read(ctx, d.cmds.ReadVolts)
	if d.negative && !d.trueNeg {
		v = -v
	}
	return v, err
}

// ReadAmps reads the output current back, as the supply reports it.
func (d *SupplyDriver) ReadAmps(ctx context.Context) (float64, error) {
	return d.read(ctx, d.cmds.ReadAmps)
}

// SourceDriver is one channel of a DC voltage source, driven by a
// profile's [source] table. Voltages of either sign are passed through.
type SourceDriver struct {
	channelBase
	cmds *SourceCommands
}

// NewSource binds the Source role to one channel of a source.
func NewSource(s *Session, p *Profile, channel string, opts DriverOptions) (*SourceDriver, error) {
	if p != nil && p.Source == nil {
		return nil, fmt.Errorf("%s source: profile %s (%s) has no [source] table; it serves %v", sessionName(s), p.Name, p.File, p.Roles())
	}
	var c *SourceCommands
	var sel string
	var chans, tpls []string
	if p != nil {
		c = p.Source
		sel, chans = c.Select, c.Channels
		tpls = []string{c.SetVolts, c.SetOutput, c.ReadVolts}
	}
	b, err := newChannelBase(s, p, "source", channel, sel, chans, tpls, opts)
	if err != nil {
		return nil, err
	}
	return &SourceDriver{channelBase: b, cmds: c}, nil
}

// Accuracy is the source's programming and read-back accuracy.
func (d *SourceDriver) Accuracy() SupplyAccuracy { return d.cmds.Accuracy }

// SetVolts programs the output voltage.
func (d *SourceDriver) SetVolts(ctx context.Context, volts float64) error {
	if !finite(volts) {
		return d.errorf("voltage %v: not a number", volts)
	}
	return d.set(ctx, d.cmds.SetVolts, formatNumber(volts), "V", d.cmds.Settle)
}

// SetOutput turns the channel's output on or off.
func (d *SourceDriver) SetOutput(ctx context.Context, on bool) error {
	return d.set(ctx, d.cmds.SetOutput, onOff(on), "", d.cmds.Settle)
}

// ReadVolts reads the output voltage back.
func (d *SourceDriver) ReadVolts(ctx context.Context) (float64, error) {
	return d.read(ctx, d.cmds.ReadVolts)
}

// ---- switch ----

// SwitchDriver is the Switch role driven by a profile's [switch] table.
// When the profile has query_closed, Close and Open read the relay state
// back and fail if it is not what was asked: which unit the meter sees
// depends on it.
//
// The driver keeps the set of relays it closed (and those named to Adopt).
// OpenAll sends the profile's open_all when it has one; without it the
// driver opens each relay of that set, one by one, each checked with
// query_closed where the profile gives one. Either way a relay is only
// closed by Close, and the procedure opens all before it closes the next
// (break before make).
type SwitchDriver struct {
	driverBase
	cmds *SwitchCommands

	mu     sync.Mutex
	closed map[string]bool // relays closed by this driver, or adopted, not yet seen open
}

// ErrRelayState is wrapped when a relay does not report the state it was
// switched to.
var ErrRelayState = errors.New("relay did not take the state asked for")

// NewSwitch binds the Switch role using p's [switch] table.
func NewSwitch(s *Session, p *Profile, opts DriverOptions) (*SwitchDriver, error) {
	b, err := newBase(s, p, "switch", opts)
	if err != nil {
		return nil, err
	}
	if p.Switch == nil {
		return nil, fmt.Errorf("%s: profile %s (%s) has no [switch] table; it serves %v", b.label, p.Name, p.File, p.Roles())
	}
	return &SwitchDriver{driverBase: b, cmds: p.Switch, closed: map[string]bool{}}, nil
}

// Adopt names relays that may be closed although this driver did not
// close them (the plan's channels, left closed by an earlier run): the
// next OpenAll of a switch without open_all opens them too.
func (d *SwitchDriver) Adopt(channels ...string) error {
	for _, ch := range channels {
		if !validChannel(ch) {
			return d.errorf("channel %q: use letters, digits and ! only (one channel per call)", ch)
		}
	}
	d.mu.Lock()
	defer d.mu.Unlock()
	for _, ch := range channels {
		d.closed[ch] = true
	}
	return nil
}

// Tracked lists, sorted, the relays the driver would open at OpenAll
// without open_all: those it closed or adopted and has not opened since.
func (d *SwitchDriver) Tracked() []string {
	d.mu.Lock()
	defer d.mu.Unlock()
	out := make([]string, 0, len(d.closed))
	for ch := range d.closed {
		out = append(out, ch)
	}
	sort.Strings(out)
	return out
}

// Close closes one relay channel (for example "101").
func (d *SwitchDriver) Close(ctx context.Context, channel string) error {
	return d.move(ctx, d.cmds.Close, channel, true)
}

// Open opens one relay channel.
func (d *SwitchDriver) Open(ctx context.Context, channel string) error {
	return d.move(ctx, d.cmds.Open, channel, false)
}

// OpenAll opens every relay it can (see Opening): with the profile's
// open_all, in one command; without it, each relay the driver closed or
// adopted, in channel order, every one tried even when an earlier one
// fails (the errors are joined).
func (d *SwitchDriver) OpenAll(ctx context.Context) error {
	_, err := d.OpenAllReport(ctx)
	return err
}

func (d *SwitchDriver) move(ctx context.Context, tpl, channel string, closed bool) error {
	if err := d.send(ctx, tpl, channel, closed); err != nil {
		return d.wrap(err)
	}
	return d.wrap(d.opts.settle(ctx, d.cmds.Settle))
}

// send moves one relay, checks it with query_closed if the profile has
// it, and keeps the set of closed relays. A relay asked to close is
// tracked before the command goes out, so that a failed or unanswered
// close is still opened by OpenAll; a relay leaves the set only once
// opened without error.
func (d *SwitchDriver) send(ctx context.Context, tpl, channel string, closed bool) error {
	if !validChannel(channel) {
		return fmt.Errorf("channel %q: use letters, digits and ! only (one channel per call)", channel)
	}
	vals := map[string]string{PhChannel: channel}
	cmd, err := expandTemplate(tpl, vals)
	if err != nil {
		return err
	}
	var check string
	if d.cmds.QueryClosed != "" {
		if check, err = expandTemplate(d.cmds.QueryClosed, vals); err != nil {
			return err
		}
	}
	if closed {
		d.mu.Lock()
		d.closed[channel] = true
		d.mu.Unlock()
	}
	err = d.s.Do(ctx, func(tx *Tx) error {
		if err := tx.Write(ctx, cmd); err != nil {
			return err
		}
		if check == "" {
			return nil
		}
		v, err := tx.QueryFloat(ctx, check)
		if err != nil {
			return err
		}
		if got := v != 0; got != closed {
			return fmt.Errorf("channel %s: after %q, %q answers %g: %w", channel, cmd, check, v, ErrRelayState)
		}
		return nil
	})
	if err == nil && !closed {
		d.mu.Lock()
		delete(d.closed, channel)
		d.mu.Unlock()
	}
	return err
}

// ---- chamber and thermometer ----

// ChamberDriver is the Chamber role (and its Thermometer) driven by a
// profile's [chamber] table.
type ChamberDriver struct {
	driverBase
	cmds *ChamberCommands
}

// NewChamber binds the Chamber role using p's [chamber] table.
func NewChamber(s *Session, p *Profile, opts DriverOptions) (*ChamberDriver, error) {
	b, err := newBase(s, p, "chamber", opts)
	if err != nil {
		return nil, err
	}
	if p.Chamber == nil {
		return nil, fmt.Errorf("%s: profile %s (%s) has no [chamber] table; it serves %v", b.label, p.Name, p.File, p.Roles())
	}
	return &ChamberDriver{driverBase: b, cmds: p.Chamber}, nil
}

// AccuracyCelsius is the ± limit of the chamber's sensor (0 if not given).
func (d *ChamberDriver) AccuracyCelsius() float64 { return d.cmds.AccuracyCelsius }

// SetPointCelsius programs the chamber's set point.
func (d *ChamberDriver) SetPointCelsius(ctx context.Context, celsius float64) error {
	if !finite(celsius) {
		return d.errorf("set point %v °C: not a number", celsius)
	}
	cmd, err := expandTemplate(d.cmds.SetPoint, map[string]string{PhValue: formatNumber(celsius), PhUnit: "CEL"})
	if err != nil {
		return d.wrap(err)
	}
	if err := d.s.Write(ctx, cmd); err != nil {
		return d.wrap(err)
	}
	return d.wrap(d.opts.settle(ctx, d.cmds.Settle))
}

// ReadCelsius reads the chamber air temperature.
func (d *ChamberDriver) ReadCelsius(ctx context.Context) (float64, error) {
	return readCelsius(ctx, &d.driverBase, d.cmds.ReadCelsius)
}

func readCelsius(ctx context.Context, b *driverBase, tpl string) (float64, error) {
	cmd, err := expandTemplate(tpl, nil)
	if err != nil {
		return 0, b.wrap(err)
	}
	v, err := b.s.QueryFloat(ctx, cmd)
	if err != nil {
		return 0, b.wrap(err)
	}
	if !finite(v) {
		return v, b.errorf("%q answered %v: %w", cmd, v, ErrOverload)
	}
	return v, nil
}

// ThermometerDriver is the Thermometer role driven by a profile's
// [thermometer] table.
type ThermometerDriver struct {
	driverBase
	cmds *ThermometerCommands
}

// NewThermometer binds the Thermometer role using p's [thermometer] table.
func NewThermometer(s *Session, p *Profile, opts DriverOptions) (*ThermometerDriver, error) {
	b, err := newBase(s, p, "thermometer", opts)
	if err != nil {
		return nil, err
	}
	if p.Thermometer == nil {
		return nil, fmt.Errorf("%s: profile %s (%s) has no [thermometer] table; it serves %v", b.label, p.Name, p.File, p.Roles())
	}
	return &ThermometerDriver{driverBase: b, cmds: p.Thermometer}, nil
}

// AccuracyCelsius is the ± limit of the sensor (0 if not given).
func (d *ThermometerDriver) AccuracyCelsius() float64 { return d.cmds.AccuracyCelsius }

// ReadCelsius reads the temperature.
func (d *ThermometerDriver) ReadCelsius(ctx context.Context) (float64, error) {
	return readCelsius(ctx, &d.driverBase, d.cmds.ReadCelsius)
}
