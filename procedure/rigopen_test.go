// OpenRig is a test helper: the tool itself opens instruments only in
// cmd/nullbench, and procedures get roles. The tests that run against the
// simulated bench use it to build a Rig from a plan.

package procedure

import (
	"context"
	"errors"
	"fmt"
	"sort"
	"time"

	"nullbench/instrument"
	"nullbench/procedure/estimate"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// RigOptions adjust OpenRig.
type RigOptions struct {
	// Sleep is handed to the drivers for their settle waits after set
	// commands: pass the run's Clock.Sleep so that a time-scaled bench
	// settles in scaled time. nil sleeps in real time.
	Sleep func(ctx context.Context, d time.Duration) error
	// Open adjusts the connections (transport settings, identity check).
	Open instrument.OpenOptions
	// Timeout, when positive, replaces every profile's per-exchange
	// time-out (a slow instrument, or a test that wants faults fast).
	Timeout time.Duration
}

// OpenRig is a helper for cmd: it opens every instrument of the plan's
// [bench] that some role uses (instrument.Open: dial, identify, check the
// identity against the profile), binds each role to its profile-driven
// driver on the named channel, and fills the identities and the accuracy
// figures from the profiles. The returned close function closes every
// connection; the caller owns it (the procedure never closes anything).
// On an error every connection opened so far is closed again.
func OpenRig(ctx context.Context, p *plan.Plan, opt RigOptions) (*Rig, func() error, error) {
	b := &p.Bench
	roles := map[string][]string{} // instrument -> roles
	for _, role := range plan.RoleNames() {
		if rb := b.Roles.Get(role); rb.Bound() {
			roles[rb.Instrument] = append(roles[rb.Instrument], role)
		}
	}
	names := make([]string, 0, len(roles))
	for n := range roles {
		names = append(names, n)
	}
	sort.Strings(names)

	opened := map[string]*instrument.Instrument{}
	closeAll := func() error {
		var errs []error
		for _, n := range names {
			if in := opened[n]; in != nil {
				if err := in.Close(); err != nil {
					errs = append(errs, fmt.Errorf("instrument %s: close: %w", n, err))
				}
			}
		}
		return errors.Join(errs...)
	}
	fail := func(err error) (*Rig, func() error, error) {
		_ = closeAll()
		return nil, nil, err
	}
	rig := &Rig{StimulusByRole: map[string]estimate.Accuracy{}}
	dopts := instrument.DriverOptions{Sleep: opt.Sleep}
	for _, n := range names {
		def, ok := b.Instruments[n]
		if !ok {
			return fail(fmt.Errorf("bench: role(s) %v name instrument %q, which [bench.instrument] does not define", roles[n], n))
		}
		addr, err := instrument.ParseAddress(def.Address)
		if err != nil {
			return fail(fmt.Errorf("bench.instrument.%s.address: %w", n, err))
		}
		prof, err := instrument.ResolveProfile(def.Profile)
		if err != nil {
			return fail(fmt.Errorf("bench.instrument.%s.profile: %w", n, err))
		}
		if opt.Timeout > 0 {
			cp := *prof
			cp.Timeout = opt.Timeout
			prof = &cp
		}
		in, err := instrument.OpenWith(ctx, n, addr, prof, opt.Open)
		if err != nil {
			return fail(err)
		}
		opened[n] = in
		rig.Identities = append(rig.Identities, journal.Identity{Instrument: n, Roles: roles[n], Address: def.Address, IDN: in.Identity.Raw})
		for _, role := range roles[n] {
			if err := rig.bind(p, role, b.Roles.Get(role), in, dopts); err != nil {
				return fail(fmt.Errorf("bench.roles.%s: %w", role, err))
			}
		}
	}
	return rig, closeAll, nil
}

// bind creates the driver of one role on an opened instrument.
func (r *Rig) bind(p *plan.Plan, role string, rb plan.RoleBinding, in *instrument.Instrument, o instrument.DriverOptions) error {
	s, prof := in.Session, in.Profile
	readback := func(a instrument.SupplyAccuracy) estimate.Accuracy {
		return estimate.Accuracy{GainPPM: a.ReadbackGainPPM, OffsetVolts: a.ReadbackOffsetVolts}
	}
	switch role {
	case plan.RoleMeter:
		m, err := instrument.NewMeter(s, prof, o)
		if err != nil {
			return err
		}
		r.Meter = m
		// The offset term is specified in ppm of range; taken on the 10 V
		// range, the default of the plans (DefaultRangeVolts).
		a := m.Accuracy()
		r.MeterAccuracy = estimate.Accuracy{GainPPM: a.GainPPM, OffsetVolts: a.OffsetPPMOfRange * 1e-6 * plan.DefaultRangeVolts}
	case plan.RoleSupplyPos, plan.RoleSupplyNeg:
		d, err := instrument.NewSupply(s, prof, rb.Channel, rb.Negative, o)
		if err != nil {
			return err
		}
		if role == plan.RoleSupplyPos {
			r.SupplyPos = d
		} else {
			r.SupplyNeg = d
		}
		r.StimulusByRole[role] = readback(d.Accuracy())
	case plan.RoleSourceCM, plan.RoleSourceDiff, plan.RoleSourceRef:
		d, err := instrument.NewSource(s, prof, rb.Channel, o)
		if err != nil {
			return err
		}
		switch role {
		case plan.RoleSourceCM:
			r.SourceCM = d
		case plan.RoleSourceDiff:
			r.SourceDiff = d
		default:
			r.SourceRef = d
		}
		r.StimulusByRole[role] = readback(d.Accuracy())
	case plan.RoleSwitch:
		d, err := instrument.NewSwitch(s, prof, o)
		if err != nil {
			return err
		}
		r.Switch = d
	case plan.RoleChamber:
		d, err := instrument.NewChamber(s, prof, o)
		if err != nil {
			return err
		}
		r.Chamber = d
	case plan.RoleThermometer:
		d, err := instrument.NewThermometer(s, prof, o)
		if err != nil {
			return err
		}
		r.Thermometer = d
	case plan.RoleGenerator:
		r.Generators = map[string]instrument.Generator{}
		for _, ch := range plan.GeneratorChannels(p) {
			g, err := instrument.NewGenerator(s, prof, ch, o)
			if err != nil {
				return err
			}
			r.Generators[ch] = g
		}
	case plan.RoleDigitizer:
		d, err := instrument.NewDigitizer(s, prof, o)
		if err != nil {
			return err
		}
		r.Digitizer = d
	case plan.RoleACMeter:
		r.ACMeters = nil
		for _, ch := range []string{"1", "2"} {
			m, err := instrument.NewACVoltmeter(s, prof, ch, o)
			if err != nil {
				return err
			}
			r.ACMeters = append(r.ACMeters, m)
		}
	default:
		return fmt.Errorf("unknown role %q", role)
	}
	// The largest stimulus accuracy figures stand for roles not listed.
	for _, a := range r.StimulusByRole {
		r.StimulusAccuracy.GainPPM = max(r.StimulusAccuracy.GainPPM, a.GainPPM)
		r.StimulusAccuracy.OffsetVolts = max(r.StimulusAccuracy.OffsetVolts, a.OffsetVolts)
	}
	return nil
}
