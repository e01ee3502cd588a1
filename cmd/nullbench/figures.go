package main

import (
	"fmt"

	"nullbench/instrument"
	"nullbench/procedure/estimate"
	"nullbench/procedure/plan"
)

// planFigures reads the [figures] tables of the profiles the plan's roles
// name and turns them into the duration and uncertainty model's inputs.
// An exchange's wall time becomes bench time × time_scale (on a simulated
// bench the waits shrink but the exchanges do not). A profile that cannot
// be read leaves its roles at zero cost and is reported.
func planFigures(p *plan.Plan) (estimate.Figures, []string) {
	f := estimate.DefaultFigures()
	scale := p.Bench.TimeScale
	if !(scale > 0) {
		scale = 1
	}
	var problems []string
	loaded := map[string]*instrument.Profile{}
	for _, role := range plan.RoleNames() {
		rb := p.Bench.Roles.Get(role)
		if !rb.Bound() {
			delete(f.Roles, role)
			continue
		}
		spec, ok := p.Bench.Instruments[rb.Instrument]
		if !ok {
			continue
		}
		prof, ok := loaded[spec.Profile]
		if !ok {
			var err error
			prof, err = instrument.ResolveProfile(p.ProfilePath(spec.Profile))
			if err != nil {
				problems = append(problems, fmt.Sprintf("role %s: %v (its timing is not counted)", role, err))
				loaded[spec.Profile] = nil
				continue
			}
			loaded[spec.Profile] = prof
		}
		if prof == nil {
			continue
		}
		fig := prof.Figures
		ex := fig.ExchangeSeconds * scale
		check := 0.0
		if prof.CheckErrors {
			check = ex // SYST:ERR? after every set command
		}
		rf := estimate.RoleFigures{SettleSeconds: prof.Settle.Seconds(), SetSeconds: ex + check, QuerySeconds: ex}
		sel := ""
		switch role {
		case plan.RoleMeter:
			if m := prof.Meter; m != nil {
				rf.SettleSeconds = 0 // only after configure, counted there
				f.LineHz, f.ReadingOverhead, f.TriggerSeconds = fig.LineHz, fig.ReadingOverhead, fig.TriggerSeconds*scale
				f.NoiseNPLC, f.NoiseRelOfRange = fig.NoiseNPLC, fig.NoiseRelOfRange
				f.FloorRelOfRange = fig.FloorRelOfRange
				f.MeterGainPPM, f.MeterOffsetPPMOfRange = m.Accuracy.GainPPM, m.Accuracy.OffsetPPMOfRange
				f.MeterOnePerTrigger = !m.Counted()
				f.MeterTriggerSets, f.MeterTriggerQueries = nonEmpty(m.Init, m.Trigger), nonEmpty(m.Sync)
			}
		case plan.RoleSupplyPos, plan.RoleSupplyNeg:
			if s := prof.Supply; s != nil {
				rf.SettleSeconds, sel = s.Settle.Seconds(), s.Select
			}
		case plan.RoleSourceCM, plan.RoleSourceDiff, plan.RoleSourceRef:
			if s := prof.Source; s != nil {
				rf.SettleSeconds, sel = s.Settle.Seconds(), s.Select
			}
		case plan.RoleSwitch:
			if s := prof.Switch; s != nil {
				rf.SettleSeconds = s.Settle.Seconds()
				if s.QueryClosed != "" {
					rf.SetSeconds += ex // the relay is checked after each move
				}
			}
		case plan.RoleChamber:
			if c := prof.Chamber; c != nil {
				rf.SettleSeconds = c.Settle.Seconds()
				f.ChamberAirTauSeconds = fig.AirTauSeconds
			}
		case plan.RoleThermometer:
			rf.SettleSeconds = 0
		}
		if sel != "" {
			rf.SetSeconds += ex
			rf.QuerySeconds += ex
		}
		f.Roles[role] = rf
	}
	if scale != 1 {
		f.WaitGranularitySeconds, f.WaitOverrunSeconds = hostTimerGranularitySeconds*scale, hostTimerLateSeconds*scale
	}
	return f, problems
}

// hostTimerGranularitySeconds and hostTimerLateSeconds are a host's timer
// in wall seconds: it rounds a wait up to a whole number of granules and
// wakes late by the second. At time_scale N every wait of a simulated run
// costs them × N of bench time; on a real bench (N = 1) they are lost in
// the instruments' own times. Measured on the development machine (Linux
// VM, Go 1.26, two cores, loaded; medians of 41 waits each): waits of
// 0.02, 0.1 and 0.5 ms lasted 1.08–1.1 ms, of 1.2 ms 2.19 ms, of 3 ms
// 3.2 ms and of 5 ms 5.2 ms: rounded up to whole milliseconds and
// 0.1–0.2 ms late (BenchmarkDurationAtTimeScales measures them again
// where it runs).
const (
	hostTimerGranularitySeconds = 0.001
	hostTimerLateSeconds        = 0.00015
)

// nonEmpty counts the templates given.
func nonEmpty(tpls ...string) int {
	n := 0
	for _, t := range tpls {
		if t != "" {
			n++
		}
	}
	return n
}
