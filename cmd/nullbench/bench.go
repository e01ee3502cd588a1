package main

import (
	"context"
	"errors"
	"fmt"
	"sort"
	"strings"
	"time"

	"nullbench/instrument"
	"nullbench/procedure"
	"nullbench/procedure/estimate"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// openBench connects to every instrument the plan's bench section names,
// checks each identity against its profile, and binds the roles. Only cmd
// opens connections; the returned close function closes them all.
//
// sleep is the clock's wait, so that drivers settle in bench time.
func openBench(ctx context.Context, p *plan.Plan, profiles profileResolver, sleep func(context.Context, time.Duration) error) (*procedure.Rig, func(), error) {
	opened := map[string]*instrument.Instrument{}
	closeAll := func() {
		for _, in := range opened {
			_ = in.Close()
		}
	}
	roles := roleBindings(p)
	names := make([]string, 0, len(p.Bench.Instruments))
	for name := range p.Bench.Instruments {
		if usedBy(roles, name) != nil {
			names = append(names, name)
		}
	}
	sort.Strings(names)
	for _, name := range names {
		spec := p.Bench.Instruments[name]
		prof, err := profiles(name, spec.Profile)
		if err != nil {
			closeAll()
			return nil, nil, fmt.Errorf("plan %s, [bench.instrument.%s]: instrument %s: %w", p.Source, name, name, err)
		}
		addr, err := instrument.ParseAddress(spec.Address)
		if err != nil {
			closeAll()
			return nil, nil, fmt.Errorf("plan %s, [bench.instrument.%s]: instrument %s: %w", p.Source, name, name, err)
		}
		octx, cancel := context.WithTimeout(ctx, 15*time.Second)
		in, err := instrument.OpenWith(octx, name, addr, prof, instrument.OpenOptions{})
		cancel()
		if err != nil {
			closeAll()
			return nil, nil, fmt.Errorf("plan %s, [bench.instrument.%s]: %w", p.Source, name, err)
		}
		opened[name] = in
	}

	rig := &procedure.Rig{}
	opts := instrument.DriverOptions{Sleep: sleep}
	for _, name := range names {
		in := opened[name]
		rig.Identities = append(rig.Identities, journal.Identity{
			Instrument: name,
			Roles:      usedBy(roles, name),
			Address:    in.Address.String(),
			IDN:        in.Identity.Raw,
		})
	}
	for _, rb := range roles {
		if rb.binding.Instrument == "" {
			continue
		}
		in := opened[rb.binding.Instrument]
		if in == nil {
			closeAll()
			return nil, nil, fmt.Errorf("plan %s: role %s names instrument %q, which [bench.instrument] does not define", p.Source, rb.role, rb.binding.Instrument)
		}
		if err := bindRole(p, rig, rb.role, rb.binding, in, opts); err != nil {
			closeAll()
			return nil, nil, fmt.Errorf("plan %s, [bench.roles] %s = instrument %q (profile %s): %w", p.Source, rb.role, rb.binding.Instrument, in.Profile.File, err)
		}
	}
	return rig, closeAll, nil
}

type roleBinding struct {
	role    string
	binding plan.RoleBinding
}

func roleBindings(p *plan.Plan) []roleBinding {
	r := p.Bench.Roles
	return []roleBinding{
		{"meter", r.Meter}, {"supply_pos", r.SupplyPos}, {"supply_neg", r.SupplyNeg},
		{"source_cm", r.SourceCM}, {"source_diff", r.SourceDiff}, {"source_ref", r.SourceRef},
		{"switch", r.Switch}, {"chamber", r.Chamber}, {"thermometer", r.Thermometer},
		{"generator", r.Generator}, {"digitizer", r.Digitizer}, {"ac_meter", r.ACMeter},
	}
}

func usedBy(roles []roleBinding, name string) []string {
	var out []string
	for _, rb := range roles {
		if rb.binding.Instrument == name {
			out = append(out, rb.role)
		}
	}
	return out
}

// planChannels lists the switch channels of the plan's units.
func planChannels(p *plan.Plan) []string {
	var chs []string
	for _, u := range p.Units {
		if u.Channel != "" {
			chs = append(chs, u.Channel)
		}
	}
	return chs
}

func bindRole(p *plan.Plan, rig *procedure.Rig, role string, b plan.RoleBinding, in *instrument.Instrument, opts instrument.DriverOptions) error {
	s, prof := in.Session, in.Profile
	switch role {
	case "meter":
		m, err := instrument.NewMeter(s, prof, opts)
		if err != nil {
			return err
		}
		rig.Meter = m
		acc := m.Accuracy()
		// The offset term of a DMM cancels in a slope; it is kept for the
		// budget's record at the 10 V range, the one the plans use most.
		rig.MeterAccuracy = estimate.Accuracy{GainPPM: acc.GainPPM, OffsetVolts: acc.OffsetPPMOfRange * 1e-6 * 10}
	case "supply_pos", "supply_neg":
		d, err := instrument.NewSupply(s, prof, b.Channel, b.Negative, opts)
		if err != nil {
			return err
		}
		if role == "supply_pos" {
			rig.SupplyPos = d
		} else {
			rig.SupplyNeg = d
		}
		widenStimulus(rig, d.Accuracy())
	case "source_cm", "source_diff", "source_ref":
		d, err := instrument.NewSource(s, prof, b.Channel, opts)
		if err != nil {
			return err
		}
		switch role {
		case "source_cm":
			rig.SourceCM = d
		case "source_diff":
			rig.SourceDiff = d
		default:
			rig.SourceRef = d
		}
		widenStimulus(rig, d.Accuracy())
	case "switch":
		d, err := instrument.NewSwitch(s, prof, opts)
		if err != nil {
			return err
		}
		if prof.Switch.OpenAll == "" {
			// No open-all: the driver opens what it closed, and the
			// plan's channels too, which an earlier run may have left
			// closed.
			if err := d.Adopt(planChannels(p)...); err != nil {
				return err
			}
		}
		rig.Switch = d
	case "chamber":
		d, err := instrument.NewChamber(s, prof, opts)
		if err != nil {
			return err
		}
		rig.Chamber = d
	case "thermometer":
		d, err := instrument.NewThermometer(s, prof, opts)
		if err != nil {
			return err
		}
		rig.Thermometer = d
	case "generator":
		rig.Generators = map[string]instrument.Generator{}
		for _, ch := range plan.GeneratorChannels(p) {
			g, err := instrument.NewGenerator(s, prof, ch, opts)
			if err != nil {
				return err
			}
			rig.Generators[ch] = g
		}
	case "digitizer":
		d, err := instrument.NewDigitizer(s, prof, opts)
		if err != nil {
			return err
		}
		rig.Digitizer = d
	case "ac_meter":
		rig.ACMeters = nil
		for _, ch := range []string{"1", "2"} {
			m, err := instrument.NewACVoltmeter(s, prof, ch, opts)
			if err != nil {
				return err
			}
			rig.ACMeters = append(rig.ACMeters, m)
		}
	default:
		return errors.New("unknown role " + role)
	}
	return nil
}

// widenStimulus keeps the worst read-back accuracy of the stimulus
// instruments: the fit uses read-back values, so their accuracy is the
// stimulus's (a Type B row of the budget).
func widenStimulus(rig *procedure.Rig, a instrument.SupplyAccuracy) {
	if a.ReadbackGainPPM > rig.StimulusAccuracy.GainPPM {
		rig.StimulusAccuracy.GainPPM = a.ReadbackGainPPM
	}
	if a.ReadbackOffsetVolts > rig.StimulusAccuracy.OffsetVolts {
		rig.StimulusAccuracy.OffsetVolts = a.ReadbackOffsetVolts
	}
}

// identitiesText lists the instruments for a summary.
func identitiesText(ids []journal.Identity) string {
	var b strings.Builder
	for _, id := range ids {
		fmt.Fprintf(&b, "  %-8s %-28s %s\n", id.Instrument, strings.Join(id.Roles, ","), id.IDN)
	}
	return b.String()
}
