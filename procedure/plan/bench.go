package plan

import (
	"fmt"
	"path/filepath"
	"sort"
	"strings"
)

// BenchProfile is what CheckBench needs to know of one instrument's
// profile: which roles it can serve, its channels per role, and its
// supply channels' current rating. cmd fills it from the instrument
// profiles; plan stays free of instrument code.
type BenchProfile struct {
	Roles          map[string]bool // role kinds: "meter", "supply", "source", "switch", "chamber", "thermometer"
	SupplyChannels []string
	SourceChannels []string
	SupplyMaxAmps  float64 // 0: not stated
	// SupplyNegativeChannels are the supply channels that are true
	// negative outputs (the profile's negative_channels): they can serve
	// only supply_neg, bound with negative = true.
	SupplyNegativeChannels []string
	// Templates holds the command templates the profile gives, as
	// "table.key"; nil when not known (no template checks then).
	Templates map[string]bool
}

// ProfileLookup returns the profile a plan's entry (as written) names for
// an instrument, or an error (unknown name, unreadable file). A lookup
// reading files takes a relative entry from the plan's folder
// (Plan.ProfilePath).
type ProfileLookup func(instrument, profile string) (BenchProfile, error)

// IsProfilePath says whether a profile entry names a file rather than a
// built-in profile (as instrument.IsProfilePath).
func isProfilePath(s string) bool {
	return strings.ContainsAny(s, `/\`) || strings.HasSuffix(s, ".toml")
}

// ProfilePath is where a profile entry of the plan is read from: a path
// relative to the plan file's folder, an absolute path or a built-in
// profile name unchanged. A plan and its profiles can so be moved and
// checked from any folder.
func (p *Plan) ProfilePath(entry string) string {
	if !isProfilePath(entry) || filepath.IsAbs(entry) {
		return entry
	}
	return filepath.Join(filepath.Dir(p.Source), filepath.FromSlash(entry))
}

// CheckBench checks the plan's bench against the instruments' profiles,
// before any instrument contact: every profile exists (a relative path
// is taken from the plan file's folder, see ProfilePath), every bound
// channel is one the profile lists, and the supplies' current limit is
// within the channel rating. Each problem names file, line and key.
func CheckBench(p *Plan, lookup ProfileLookup) error {
	var errs Errors
	add := func(key, problem, fix string) {
		errs = append(errs, &Error{File: p.Source, Line: p.keys.line(key), Key: key, Problem: problem, Fix: fix})
	}
	names := make([]string, 0, len(p.Bench.Instruments))
	for n := range p.Bench.Instruments {
		names = append(names, n)
	}
	sort.Strings(names)
	profiles := map[string]BenchProfile{}
	for _, n := range names {
		spec := p.Bench.Instruments[n]
		key := "bench.instrument." + n + ".profile"
		bp, err := lookup(n, spec.Profile)
		if err != nil {
			add(key, fmt.Sprintf("profile %q: %v", spec.Profile, err), "name a built-in profile or an existing profile file")
			continue
		}
		profiles[n] = bp
	}
	type roleCheck struct {
		role, kind string
		channels   func(BenchProfile) []string
	}
	supplyCh := func(b BenchProfile) []string { return b.SupplyChannels }
	sourceCh := func(b BenchProfile) []string { return b.SourceChannels }
	checks := []roleCheck{
		{RoleSupplyPos, "supply", supplyCh}, {RoleSupplyNeg, "supply", supplyCh},
		{RoleSourceCM, "source", sourceCh}, {RoleSourceDiff, "source", sourceCh}, {RoleSourceRef, "source", sourceCh},
	}
	for _, rc := range checks {
		b := p.Bench.Roles.Get(rc.role)
		bp, ok := profiles[b.Instrument]
		if !b.Bound() || !ok {
			continue
		}
		key := "bench.roles." + rc.role
		if !bp.Roles[rc.kind] {
			continue // checkRoleTemplates says so
		}
		chans := rc.channels(bp)
		if b.Channel != "" && len(chans) > 0 && !contains(chans, b.Channel) {
			add(key+".channel", fmt.Sprintf("instrument %s has no channel %q (its profile lists %s)", b.Instrument, b.Channel, strings.Join(chans, ", ")),
				"use one of the channels the profile lists")
		}
		if rc.kind == "supply" && contains(bp.SupplyNegativeChannels, b.Channel) {
			switch {
			case rc.role == RoleSupplyPos:
				add(key+".channel", fmt.Sprintf("channel %q of %s is a negative output (its profile's negative_channels) and cannot make V+", b.Channel, b.Instrument),
					"bind supply_pos to a positive output")
			case !b.Negative:
				add(key, fmt.Sprintf("channel %q of %s is a negative output (its profile's negative_channels) but supply_neg is not marked negative = true", b.Channel, b.Instrument),
					"set negative = true on bench.roles.supply_neg")
			}
		}
		if rc.kind == "supply" && bp.SupplyMaxAmps > 0 && p.Part.CurrentLimitAmps > bp.SupplyMaxAmps {
			add("part.current_limit_amps", fmt.Sprintf("current limit %g A is beyond the %g A rating of %s's channels (its profile's max_amps)", p.Part.CurrentLimitAmps, bp.SupplyMaxAmps, b.Instrument),
				fmt.Sprintf("set at most %g A", bp.SupplyMaxAmps))
		}
	}
	checkRoleTemplates(p, profiles, add)
	if len(errs) == 0 {
		return nil
	}
	return dedupe(errs).sorted()
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

// dedupe drops repeated problems (both rails on one supply).
func dedupe(es Errors) Errors {
	seen := map[string]bool{}
	var out Errors
	for _, e := range es {
		if k := e.Error(); !seen[k] {
			seen[k] = true
			out = append(out, e)
		}
	}
	return out
}
