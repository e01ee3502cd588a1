package instrument

import (
	"context"
	"fmt"
	"math"
	"sync"
	"time"
)

// MeterDriver is the Meter role driven by a profile's [meter] table, in
// whichever way the profile says the meter hands over readings (see
// MeterCommands): one query returning n values after a sample count, n
// triggers of one reading each, init … fetch with an optional bus trigger
// and *OPC? synchronisation, and a buffer fetched as ASCII or as an IEEE
// 488.2 definite-length block of binary reals.
//
// Readings outside what the meter can report: the SCPI overload value
// ±9.9E37 (SCPI-99 vol. 1 §7.2.1.5: ±INF; a meter's "range too small")
// is returned as ±Inf with an error wrapping ErrOverload, and 9.91E37
// (SCPI NaN: "no reading") as NaN with an error wrapping ErrNotANumber;
// both errors name the instrument, the command and the meaning. ReadN
// returns all readings in either case, so a caller may journal them; none
// of them is a measurement.
type MeterDriver struct {
	driverBase
	cmds *MeterCommands

	mu         sync.Mutex
	rangeVolts float64 // last configured; 0 before ConfigureDCVolts
	nplc       float64
	// count is the sample count last sent and acknowledged (0: unknown).
	// ReadN skips re-sending it: on a time-scaled bench most of a point's
	// time is exchanges. Configure forgets it, since CONFigure resets the
	// sample count to 1 on many meters.
	count int
}

// NewMeter binds the Meter role to a session using p's [meter] table.
func NewMeter(s *Session, p *Profile, opts DriverOptions) (*MeterDriver, error) {
	b, err := newBase(s, p, "meter", opts)
	if err != nil {
		return nil, err
	}
	if p.Meter == nil {
		return nil, fmt.Errorf("%s: profile %s (%s) has no [meter] table; it serves %v", b.label, p.Name, p.File, p.Roles())
	}
	return &MeterDriver{driverBase: b, cmds: p.Meter}, nil
}

// Accuracy is the meter's DC accuracy from the profile.
func (m *MeterDriver) Accuracy() MeterAccuracy { return m.cmds.Accuracy }

// RangeVolts is the range last configured (0 before ConfigureDCVolts).
func (m *MeterDriver) RangeVolts() float64 {
	m.mu.Lock()
	defer m.mu.Unlock()
	return m.rangeVolts
}

// ConfigureDCVolts selects DC volts on a fixed range and sets the
// integration time, then sends the profile's format command, if any (the
// data format of the readings, e.g. FORM:DATA REAL,32).
func (m *MeterDriver) ConfigureDCVolts(ctx context.Context, rangeVolts, nplc float64) error {
	if !finite(rangeVolts) || rangeVolts <= 0 {
		return m.errorf("range %v V: must be a positive number of volts", rangeVolts)
	}
	if !finite(nplc) || nplc <= 0 {
		return m.errorf("integration time %v NPLC: must be a positive number of power-line cycles", nplc)
	}
	vals := map[string]string{PhRange: formatNumber(rangeVolts), PhNPLC: formatNumber(nplc), PhUnit: "V"}
	var cmds []string
	for _, tpl := range []string{m.cmds.Configure, m.cmds.NPLC, m.cmds.Format} {
		if tpl == "" {
			continue
		}
		c, err := expandTemplate(tpl, vals)
		if err != nil {
			return m.wrap(err)
		}
		cmds = append(cmds, c)
	}
	err := m.s.Do(ctx, func(tx *Tx) error {
		for _, c := range cmds {
			if err := tx.Write(ctx, c); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return m.wrap(err)
	}
	m.mu.Lock()
	m.rangeVolts, m.nplc, m.count = rangeVolts, nplc, 0
	m.mu.Unlock()
	return m.wrap(m.opts.settle(ctx, m.cmds.Settle))
}

// Read takes one reading in volts.
func (m *MeterDriver) Read(ctx context.Context) (float64, error) {
	v, err := m.ReadN(ctx, 1)
	if len(v) == 1 {
		return v[0], err
	}
	return 0, err
}

// assumedNPLC is used to size the time-out of a READ? before the meter was
// configured: 10 PLC is a common power-on default (common practice, no
// published source).
const assumedNPLC = 10

// meterTrigger is one trigger's commands, expanded.
type meterTrigger struct {
	init, trigger, sync, query string
}

// ReadN takes n readings and returns them in volts, in one transaction.
//
// With a count template: the count (SAMP:COUN n; sent only when it
// changed), then one trigger returning n values. Without one
// (one_per_trigger): n triggers of one value each. A trigger is the read
// query (READ?), or init (INIT), the trigger command (*TRG), the sync
// query (*OPC?, which must answer 1) and the fetch query (FETC? or
// TRAC:DATA?), those the profile gives. Each exchange may take the
// session time-out plus twice its readings × NPLC × 20 ms (one power-line
// cycle at 50 Hz is 20 ms), unless ctx has an earlier deadline.
func (m *MeterDriver) ReadN(ctx context.Context, n int) ([]float64, error) {
	if n < 1 {
		return nil, m.errorf("asked for %d readings; need at least 1", n)
	}
	m.mu.Lock()
	nplc, rng, sentCount := m.nplc, m.rangeVolts, m.count
	m.mu.Unlock()
	if nplc == 0 {
		nplc = assumedNPLC
	}
	counted := m.cmds.Counted()
	per, triggers := n, 1
	if !counted {
		per, triggers = 1, n
	}
	vals := map[string]string{PhCount: fmt.Sprint(per)}
	var countCmd string
	var err error
	if counted {
		if countCmd, err = expandTemplate(m.cmds.Count, vals); err != nil {
			return nil, m.wrap(err)
		}
	}
	tr, err := m.expandTrigger(vals)
	if err != nil {
		return nil, m.wrap(err)
	}
	integration := time.Duration(float64(per) * nplc * float64(20*time.Millisecond))
	ctx = WithCallTimeout(ctx, m.s.Timeout()+2*integration)
	readings := make([]float64, 0, n)
	err = m.s.Do(ctx, func(tx *Tx) error {
		if counted && sentCount != n {
			if err := tx.Write(ctx, countCmd); err != nil {
				return err
			}
		}
		for range triggers {
			vs, err := m.triggerOnce(ctx, tx, tr, per)
			if err != nil {
				return err
			}
			if len(vs) != per {
				if counted {
					return fmt.Errorf("%q returned %d readings, asked for %d with %q", tr.query, len(vs), per, countCmd)
				}
				return fmt.Errorf("%q returned %d readings, want 1: the profile has no count template, so each trigger must take one reading", tr.query, len(vs))
			}
			readings = append(readings, vs...)
		}
		return nil
	})
	if counted {
		m.mu.Lock()
		if err != nil {
			m.count = 0 // the instrument's state is no longer known
		} else {
			m.count = n
		}
		m.mu.Unlock()
	}
	if err != nil {
		return nil, m.wrap(err)
	}
	return readings, m.checkReadings(readings, tr.query, rng)
}

// checkReadings turns the SCPI codes among readings into errors naming
// the instrument (the driver's label), the command and what the code
// means, and refuses finite values beyond MeterOverRangeFactor × range.
func (m *MeterDriver) checkReadings(readings []float64, cmd string, rng float64) error {
	n := len(readings)
	var over, nan int
	for _, v := range readings {
		switch {
		case math.IsInf(v, 0):
			over++
		case math.IsNaN(v):
			nan++
		}
	}
	switch {
	case over > 0:
		return m.errorf("%q: %d of %d readings are the overload code ±9.9E37: the %g V range is too small for the input (choose a larger range): %w",
			cmd, over, n, rng, ErrOverload)
	case nan > 0:
		return m.errorf("%q: %d of %d readings are the not-a-number code 9.91E37: the meter took no reading: %w",
			cmd, nan, n, ErrNotANumber)
	}
	if k, v := beyondRange(readings, rng); k > 0 {
		return m.errorf("%q: %d of %d readings beyond %g × the %g V range (first %g V) and not the overload code: %w",
			cmd, k, n, MeterOverRangeFactor, rng, v, ErrImplausible)
	}
	return nil
}

func (m *MeterDriver) expandTrigger(vals map[string]string) (meterTrigger, error) {
	var t meterTrigger
	q := m.cmds.Read
	if m.cmds.Fetches() {
		q = m.cmds.Fetch
	}
	for _, x := range []struct {
		dst *string
		tpl string
	}{{&t.init, m.cmds.Init}, {&t.trigger, m.cmds.Trigger}, {&t.sync, m.cmds.Sync}, {&t.query, q}} {
		if x.tpl == "" {
			continue
		}
		var err error
		if *x.dst, err = expandTemplate(x.tpl, vals); err != nil {
			return t, err
		}
	}
	return t, nil
}

// meterBlockSlackBytes is the room a meter's binary block may take beyond
// its readings before the header is refused unread; the reading count
// check then names a block that is merely a little long.
const meterBlockSlackBytes = 64

// meterBlockMaxBytes caps the block a trigger of per readings may
// announce: per × 8 bytes (a REAL,64 reading, IEEE 754 binary64; REAL,32
// takes 4) plus meterBlockSlackBytes. The header is the instrument's
// word, so it must not size an allocation beyond what was asked for.
func meterBlockMaxBytes(per int) int {
	return per*8 + meterBlockSlackBytes
}

// triggerOnce takes one trigger's per readings: init, trigger and sync
// where given, then the read or fetch query.
func (m *MeterDriver) triggerOnce(ctx context.Context, tx *Tx, t meterTrigger, per int) ([]float64, error) {
	for _, c := range []string{t.init, t.trigger} {
		if c == "" {
			continue
		}
		if err := tx.Write(ctx, c); err != nil {
			return nil, err
		}
	}
	if t.sync != "" {
		reply, err := tx.Query(ctx, t.sync)
		if err != nil {
			return nil, err
		}
		if !isOne(reply) {
			return nil, &OpError{Instrument: m.s.Name(), Command: t.sync, Err: fmt.Errorf("%w: reply %q, want 1 (operation complete)", ErrBadResponse, clipString(reply))}
		}
	}
	if m.cmds.kind() == WaveASCII {
		return tx.QueryFloats(ctx, t.query)
	}
	data, err := tx.QueryBlockMax(ctx, t.query, meterBlockMaxBytes(per))
	if err != nil {
		return nil, err
	}
	vs, err := DecodeWaveform(data, m.cmds.kind(), m.cmds.order(), 0, 0)
	if err != nil {
		return nil, &OpError{Instrument: m.s.Name(), Command: t.query, Err: fmt.Errorf("%s block (byte_order %s): %w", m.cmds.Data, m.cmds.ByteOrder, err)}
	}
	for i, v := range vs {
		vs[i] = scpiSpecialReal(v, m.cmds.kind())
	}
	return vs, nil
}

// scpiSpecialReal maps the SCPI codes sent as binary reals to what
// ParseNumber makes of them in ASCII: ±9.9E37 → ±Inf (overload), 9.91E37
// → NaN (SCPI-99 vol. 1 §7.2.1.5). In real32 the codes are the nearest
// binary32 values, so they are compared there.
func scpiSpecialReal(v float64, kind WaveformKind) float64 {
	eq := func(code float64) bool {
		if kind == WaveReal32 {
			return float32(v) == float32(code)
		}
		return v == code
	}
	switch {
	case eq(OverloadValue):
		return math.Inf(1)
	case eq(-OverloadValue):
		return math.Inf(-1)
	case eq(NotANumberValue):
		return math.NaN()
	}
	return v
}
