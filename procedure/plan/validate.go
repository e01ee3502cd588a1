package plan

import (
	"fmt"
	"math"
	"reflect"
	"sort"
	"strconv"
	"strings"
	"time"
)

// TestKindsFor returns the test kinds a fixture can run:
//
//	nulling_loop: cmrr, psrr_pos, psrr_neg, psrr_sym, aol
//	noise_gain:   cmrr, psrr_pos, psrr_neg, psrr_sym
//	board:        board_cmrr, board_psrr_pos, board_psrr_neg
//
// The open-loop-gain test needs the nulling loop, whose auxiliary amplifier
// holds the part's output at the stepped reference (MIL-STD-883 Method
// 4004 principle); a noise-gain stage cannot hold its output.
func TestKindsFor(fixture string) []string {
	switch fixture {
	case FixtureNullingLoop:
		return []string{TestCMRR, TestPSRRPos, TestPSRRNeg, TestPSRRSym, TestAOL}
	case FixtureNoiseGain:
		return []string{TestCMRR, TestPSRRPos, TestPSRRNeg, TestPSRRSym}
	case FixtureBoard:
		return []string{TestBoardCMRR, TestBoardPSRRPos, TestBoardPSRRNeg}
	}
	return nil
}

// LimitNames lists the result names a [limits] table may judge: every test
// kind, and the derived psrr_worst (the worse of psrr_pos and psrr_neg).
func LimitNames() []string {
	return []string{TestCMRR, TestPSRRPos, TestPSRRNeg, TestPSRRSym, PsrrWorst, TestAOL,
		TestBoardCMRR, TestBoardPSRRPos, TestBoardPSRRNeg}
}

// RoleNeed says that a role must be bound, and why.
type RoleNeed struct {
	Role string
	Why  string
}

// NeededRoles lists the roles the plan uses, each with the first reason
// found, in the order of RoleNames.
func NeededRoles(p *Plan) []RoleNeed {
	why := map[string]string{}
	need := func(role, reason string) {
		if _, ok := why[role]; !ok {
			why[role] = reason
		}
	}
	if len(p.Tests) > 0 {
		need(RoleMeter, "every test reads the fixture's output with the meter")
	}
	need(RoleSupplyPos, "the part's V+ rail")
	need(RoleSupplyNeg, "the part's V- rail")
	for i, t := range p.Tests {
		k := testKey(i) + " (" + t.Kind + ")"
		switch t.Kind {
		case TestCMRR:
			if p.Fixture.CommonMode == CMByInputDrive {
				need(RoleSourceCM, k+" drives the inputs' common mode (common_mode = \"input_drive\")")
			}
		case TestAOL:
			need(RoleSourceRef, k+" steps the reference that holds the part's output")
		case TestBoardCMRR:
			need(RoleSourceCM, k+" drives the board's inputs in common mode")
			need(RoleSourceDiff, k+" drives the board's inputs differentially")
		}
	}
	for _, u := range p.Units {
		if u.Channel != "" {
			need(RoleSwitch, "units are on switch channels")
			break
		}
	}
	acNeeds(p, need)
	switch p.Temperature.Mode {
	case TempChamber:
		need(RoleChamber, "temperature.mode = \"chamber\" sets the chamber")
	case TempThermometer:
		need(RoleThermometer, "temperature.mode = \"thermometer\" reads the thermometer")
	}
	var out []RoleNeed
	for _, r := range RoleNames() {
		if w, ok := why[r]; ok {
			out = append(out, RoleNeed{Role: r, Why: w})
		}
	}
	return out
}

// planChecker collects validation errors with their file positions.
type planChecker struct {
	p         *Plan
	errs      Errors
	nonFinite map[string]bool
}

func (c *planChecker) add(key, fix, format string, args ...any) {
	c.addAt(key, c.p.keys.line(key), fix, format, args...)
}

func (c *planChecker) addAt(key string, line int, fix, format string, args ...any) {
	if c.nonFinite[key] {
		return
	}
	c.errs = append(c.errs, &Error{File: c.p.Source, Line: line, Key: key,
		Problem: fmt.Sprintf(format, args...), Fix: fix})
}

func (c *planChecker) addElem(key string, i int, fix, format string, args ...any) {
	c.addAt(key, c.p.keys.elemLine(key, i), fix, format, args...)
}

// Validate checks a plan's structure: known kinds, the roles each test
// needs bound to instruments that exist, units, levels, limits and the
// temperature plan. It returns Errors listing every problem, or nil.
// Electrical limits (spans, common-mode range, current limits, stimulus
// size, hazardous voltage) are safety.CheckSafety's business.
func Validate(p *Plan) error {
	c := &planChecker{p: p, nonFinite: map[string]bool{}}
	c.finite(reflect.ValueOf(p).Elem(), "")
	c.bench()
	c.fixture()
	c.part()
	c.decision()
	c.tests()
	c.acTests()
	c.units()
	c.temperature()
	c.limits()
	c.calibrationDates()
	c.bounds()
	c.minValidPoints()
	if r := p.Safety.RampStepVolts; r < 0.01 || r > 10 {
		c.add("safety.ramp_step_volts", "give a step between 0.01 and 10 V, e.g. 1 (steps ≤ 1 V with settling are common practice)",
			"ramp step %g V is out of range", r)
	}
	if len(c.errs) == 0 {
		return nil
	}
	return c.errs.sorted()
}

// finite reports every float in the plan that is NaN or infinite (TOML
// allows nan and inf).
func (c *planChecker) finite(v reflect.Value, path string) {
	switch v.Kind() {
	case reflect.Struct:
		t := v.Type()
		for i := 0; i < t.NumField(); i++ {
			f := t.Field(i)
			tag := strings.Split(f.Tag.Get("toml"), ",")[0]
			if !f.IsExported() || tag == "" || tag == "-" {
				continue
			}
			c.finite(v.Field(i), joinKey(path, tag))
		}
	case reflect.Slice:
		for i := 0; i < v.Len(); i++ {
			e := v.Index(i)
			if e.Kind() == reflect.Float64 {
				if x := e.Float(); math.IsNaN(x) || math.IsInf(x, 0) {
					c.addElem(path, i, "write a finite number", "element %d is %v; nan and inf are not allowed", i+1, x)
					c.nonFinite[path] = true
				}
				continue
			}
			c.finite(e, path+"["+strconv.Itoa(i+1)+"]")
		}
	case reflect.Map:
		keys := v.MapKeys()
		sort.Slice(keys, func(i, j int) bool { return keys[i].String() < keys[j].String() })
		for _, k := range keys {
			c.finite(v.MapIndex(k), joinKey(path, k.String()))
		}
	case reflect.Float64:
		if x := v.Float(); math.IsNaN(x) || math.IsInf(x, 0) {
			c.add(path, "write a finite number", "value %v is not allowed (nan and inf are not numbers a bench can set)", x)
			c.nonFinite[path] = true
		}
	}
}

func (c *planChecker) bench() {
	b := &c.p.Bench
	if b.TimeScale <= 0 {
		c.add("bench.time_scale", "use 1 on a real bench, or the simulator's --time-scale",
			"time scale %g must be positive", b.TimeScale)
	}
	names := make([]string, 0, len(b.Instruments))
	for n := range b.Instruments {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		in := b.Instruments[n]
		k := joinKey("bench.instrument", n)
		switch {
		case in.Address == "":
			c.add(k+".address", `give its address, e.g. "tcp://127.0.0.1:5025" or "serial:///dev/ttyUSB0?baud=115200"`,
				"instrument %q has no address", n)
		case !strings.HasPrefix(in.Address, "tcp://") && !strings.HasPrefix(in.Address, "serial://"):
			c.add(k+".address", `start it with tcp:// or serial://, e.g. "tcp://127.0.0.1:5025"`,
				"address %q has no known scheme", in.Address)
		}
		if in.Profile == "" {
			c.add(k+".profile", "name a built-in profile (dmm, supply2, source3, switch, chamber) or a profile file",
				"instrument %q has no profile", n)
		}
	}
	list := strings.Join(names, ", ")
	if list == "" {
		list = "none defined"
	}
	used := map[string]string{} // instrument/channel -> role
	for _, role := range RoleNames() {
		rb := b.Roles.Get(role)
		k := "bench.roles." + role
		if !rb.Bound() {
			if rb.Channel != "" || rb.Negative {
				c.add(k+".instrument", "name the instrument that serves this role",
					"role %s has a channel or negative flag but no instrument", role)
			}
			continue
		}
		if _, ok := b.Instruments[rb.Instrument]; !ok {
			c.add(k+".instrument", fmt.Sprintf("add [bench.instrument.%s] or correct the name (instruments: %s)", rb.Instrument, list),
				"role %s names instrument %q, which is not defined", role, rb.Instrument)
		}
		if rb.Negative && role != RoleSupplyNeg {
			c.add(k+".negative", "remove it: only supply_neg can be a channel wired as the negative rail",
				"negative = true on role %s", role)
		}
		switch role {
		case RoleSupplyPos, RoleSupplyNeg, RoleSourceCM, RoleSourceDiff, RoleSourceRef:
			if rb.Channel == "" {
				c.add(k+".channel", fmt.Sprintf(`add channel = "1" (the output of %s that serves %s)`, rb.Instrument, role),
					"role %s needs a channel", role)
				continue
			}
			id := rb.Instrument + "/" + rb.Channel
			if other, ok := used[id]; ok {
				c.add(k+".channel", "give each supply and source role its own channel",
					"%s channel %s is already bound to %s", rb.Instrument, rb.Channel, other)
			}
			used[id] = role
		}
	}
	for _, need := range NeededRoles(c.p) {
		if !b.Roles.Get(need.Role).Bound() {
			c.add("bench.roles."+need.Role, fmt.Sprintf(`bind it: %s = { instrument = "..." } under [bench.roles]`, need.Role),
				"role %s is not bound, but %s", need.Role, need.Why)
		}
	}
}

func (c *planChecker) fixture() {
	f := &c.p.Fixture
	switch f.Kind {
	case FixtureNullingLoop, FixtureNoiseGain:
		switch f.CommonMode {
		case CMBySupplyShift, CMByInputDrive:
		case "":
			c.add("fixture.common_mode", `add common_mode = "supply_shift" (rails shifted, inputs at ground) or "input_drive"`,
				"the fixture does not say how common mode is applied")
		default:
			c.add("fixture.common_mode", `use "supply_shift" or "input_drive"`, "unknown common-mode method %q", f.CommonMode)
		}
		if f.NoiseGain < 1 {
			c.add("fixture.noise_gain", "give K = 1 + Rf/Ri of the fixture, e.g. 1000",
				"noise gain %g must be at least 1 (K = 1 + Rf/Ri)", f.NoiseGain)
		}
		if f.BoardGain != 0 || f.ResistorTolerance != 0 || f.OpAmpCMRRdB != 0 {
			c.add("fixture.board_gain", "remove board_gain, resistor_tolerance and opamp_cmrr_db, or set kind = \"board\"",
				"board keys on a %s fixture", f.Kind)
		}
	case FixtureBoard:
		if f.CommonMode != CMByInputDrive {
			c.add("fixture.common_mode", `use "input_drive" (or leave it out): a board's common mode is driven at its inputs`,
				"common mode %q cannot be applied to a board", f.CommonMode)
		}
		if f.BoardGain <= 0 {
			c.add("fixture.board_gain", "give the board's nominal differential gain, e.g. 10",
				"board gain %g must be positive", f.BoardGain)
		}
		if f.ResistorTolerance < 0 || f.ResistorTolerance >= 0.5 {
			c.add("fixture.resistor_tolerance", "give it as a fraction, e.g. 0.001 for 0.1 %",
				"resistor tolerance %g is outside [0, 0.5)", f.ResistorTolerance)
		}
		if f.OpAmpCMRRdB < 0 {
			c.add("fixture.opamp_cmrr_db", "give the op-amp's datasheet CMRR in dB, or leave it out",
				"op-amp CMRR %g dB is negative", f.OpAmpCMRRdB)
		}
		if f.NoiseGain != 0 {
			c.add("fixture.noise_gain", "remove it: a board's gain is board_gain", "noise_gain on a board fixture")
		}
	case "":
		c.add("fixture.kind", `add kind = "nulling_loop", "noise_gain" or "board" under [fixture]`, "the fixture kind is missing")
	default:
		c.add("fixture.kind", `use "nulling_loop", "noise_gain" or "board"`, "unknown fixture kind %q", f.Kind)
	}
	if f.NoiseGainTolerance < 0 || f.NoiseGainTolerance >= 0.5 {
		c.add("fixture.noise_gain_tolerance", "give it as a fraction, e.g. 0.001 for 0.1 %",
			"noise gain tolerance %g is outside [0, 0.5)", f.NoiseGainTolerance)
	}
	if f.MaxStimulusVolts < 0 {
		c.add("fixture.max_stimulus_volts", "give the largest |voltage| the fixture accepts from a source, e.g. 12",
			"max stimulus %g V is negative", f.MaxStimulusVolts)
	}
}

func (c *planChecker) part() {
	pt := &c.p.Part
	if strings.TrimSpace(pt.Number) == "" {
		c.add("part.number", `name the part, e.g. number = "HX-4107"`, "the part number is missing")
	}
	if pt.NominalPosVolts <= 0 {
		c.add("part.nominal_pos_volts", "give the nominal V+ rail, e.g. 15",
			"nominal V+ %g V must be above ground (the bench holds the inputs near ground)", pt.NominalPosVolts)
	}
	if pt.NominalNegVolts > 0 {
		c.add("part.nominal_neg_volts", "give the nominal V- rail as a negative voltage, e.g. -15 (or 0 for a single supply)",
			"nominal V- %g V must not be above ground", pt.NominalNegVolts)
	}
	if pt.CMMarginVolts < 0 {
		c.add("part.cm_margin_volts", "give a margin ≥ 0 inside the common-mode range, e.g. 0.5",
			"common-mode margin %g V is negative", pt.CMMarginVolts)
	}
	if pt.InputBeyondRailVolts < 0 {
		c.add("part.input_beyond_rail_volts", "give the absolute maximum of an input beyond a rail, e.g. 0.3",
			"%g V is negative", pt.InputBeyondRailVolts)
	}
	if pt.AOLMinDB < 0 || pt.AOLMinDB > 250 || math.IsNaN(pt.AOLMinDB) {
		c.add("part.aol_min_db", "give the datasheet's minimum open-loop gain in dB, e.g. 110, or leave it out",
			"rated open-loop gain %g dB is out of range", pt.AOLMinDB)
	}
}

func (c *planChecker) decision() {
	switch c.p.Decision.Rule {
	case RuleSimple, RuleGuarded:
	default:
		c.add("decision.rule", `use "guarded" (guard band w = U, ILAC-G8 §4.2.2) or "simple"`,
			"unknown decision rule %q", c.p.Decision.Rule)
	}
}

func (c *planChecker) tests() {
	p := c.p
	if len(p.Tests) == 0 {
		if len(p.ACTests) == 0 {
			c.add("test", "add at least one [[test]] table with kind and levels (or an [[ac_test]])", "the plan has no tests")
		}
		return
	}
	allowed := TestKindsFor(p.Fixture.Kind)
	seen := map[string]int{}
	for i := range p.Tests {
		t := &p.Tests[i]
		k := testKey(i)
		switch {
		case t.Kind == "":
			c.add(k+".kind", "add kind = one of "+planQuoteList(allowed), "the test has no kind")
		case t.Kind == PsrrWorst:
			c.add(k+".kind", "measure psrr_pos and psrr_neg; psrr_worst is derived from them and may only appear under [limits]",
				"psrr_worst is not a test kind")
		case !planHas(allowed, t.Kind):
			fix := "use one of " + planQuoteList(allowed)
			if t.Kind == TestAOL && p.Fixture.Kind != "" {
				fix = "measure aol on a nulling_loop fixture, whose auxiliary amplifier holds the output; remove this test"
			} else if planHas(LimitNames(), t.Kind) {
				fix = "use a " + p.Fixture.Kind + " test: " + planQuoteList(allowed)
			}
			c.add(k+".kind", fix, "test kind %q is not available on a %q fixture", t.Kind, p.Fixture.Kind)
		}
		if j, dup := seen[t.Kind]; dup && t.Kind != "" {
			c.add(k+".kind", "merge the two tests (more levels or repeats) or remove one",
				"test kind %q already measured by %s; results and limits are named by kind", t.Kind, testKey(j))
		} else {
			seen[t.Kind] = i
		}
		c.levels(k+".levels", t.Levels, true)
		if t.Kind == TestBoardCMRR {
			c.levels(k+".diff_levels", t.DiffLevels, true)
		} else if len(t.DiffLevels) > 0 {
			c.add(k+".diff_levels", "remove it: only board_cmrr has a differential sweep", "diff_levels on a %s test", t.Kind)
		}
		switch t.Order {
		case OrderZigzag, OrderSymmetric, OrderAscending:
		default:
			c.add(k+".order", `use "zigzag" (default), "symmetric" or "ascending"`, "unknown order %q", t.Order)
		}
		if t.Order == OrderAscending && t.DriftTerm && t.Repeats <= 1 {
			c.add(k+".order", `use order = "zigzag" (or "symmetric"), whose time does not track the level, or set drift_term = false`,
				"ascending order in one pass with drift_term: time rises with the level, so drift and slope cannot be told apart")
		}
		if t.Repeats < 1 || t.Repeats > 1000 {
			c.add(k+".repeats", "give 1 to 1000 passes", "repeats %d is out of range", t.Repeats)
		}
		if t.Readings < 1 || t.Readings > 1000 {
			c.add(k+".readings", "give 1 to 1000 readings averaged per point (the common SAMP:COUN range; with 1, settling compares successive single readings)",
				"readings %d is out of range", t.Readings)
		}
		if t.NPLC <= 0 || t.NPLC > 100 {
			c.add(k+".nplc", "give 0.02 to 100 power-line cycles, e.g. 10", "nplc %g is out of range", t.NPLC)
		}
		if t.RangeVolts <= 0 {
			c.add(k+".range_volts", "give the meter's full-scale range, e.g. 10", "range %g V must be positive", t.RangeVolts)
		}
		if t.DwellSeconds < 0 {
			c.add(k+".dwell_s", "give a wait ≥ 0 s", "dwell %g s is negative", t.DwellSeconds)
		}
		if t.SettleVolts <= 0 {
			c.add(k+".settle_volts", "give the agreement between successive readings that counts as settled, e.g. 50e-6",
				"settle threshold %g V must be positive", t.SettleVolts)
		}
		if t.SettleTimeoutSeconds <= 0 {
			c.add(k+".settle_timeout_s", "give a time-out in seconds, e.g. 30", "settle time-out %g s must be positive", t.SettleTimeoutSeconds)
		}
	}
}

// levels checks one level list: at least 3 distinct values, no value
// twice. A straight-line fit gives its slope and a residual standard
// deviation only with n ≥ 3 points (n - 2 degrees of freedom, GUM H.3).
func (c *planChecker) levels(key string, v []float64, required bool) {
	if c.nonFinite[key] {
		return
	}
	if len(v) == 0 {
		if required {
			c.add(key, "list at least 3 distinct levels in volts, e.g. [-10, -5, 0, 5, 10]", "no levels")
		}
		return
	}
	first := map[float64]int{}
	for i, x := range v {
		if j, ok := first[x]; ok {
			c.addElem(key, i, "list each level once; the level order already returns to every level (use repeats for more passes)",
				"level %g V is listed twice (elements %d and %d)", x, j+1, i+1)
			continue
		}
		first[x] = i
	}
	if len(first) < 3 {
		c.add(key, "list at least 3 distinct levels, e.g. [-10, 0, 10]",
			"only %d distinct level(s): a slope and the residual standard deviation of its fit need n ≥ 3 (n - 2 degrees of freedom, GUM H.3)", len(first))
	}
}

func (c *planChecker) units() {
	p := c.p
	if len(p.Units) == 0 {
		c.add("unit", `add at least one [[unit]] with id = "..." (and channel = "101" on a switch)`, "the plan has no units")
		return
	}
	ids := map[string]int{}
	chans := map[string]int{}
	with := 0
	for i, u := range p.Units {
		k := unitKey(i)
		if strings.TrimSpace(u.ID) == "" {
			c.add(k+".id", `give the unit an id, e.g. id = "U01"`, "unit without id")
		} else if j, ok := ids[u.ID]; ok {
			c.add(k+".id", "give each unit its own id", "unit id %q already used by %s", u.ID, unitKey(j))
		} else {
			ids[u.ID] = i
		}
		if u.Channel != "" {
			with++
			if j, ok := chans[CanonicalChannel(u.Channel)]; ok {
				c.add(k+".channel", "give each unit its own switch channel (closing two parallels the units)",
					"channel %s already used by %s", u.Channel, unitKey(j))
			} else {
				chans[CanonicalChannel(u.Channel)] = i
			}
		}
	}
	if with > 0 && with < len(p.Units) {
		for i, u := range p.Units {
			if u.Channel == "" {
				c.add(unitKey(i)+".channel", "give every unit a switch channel, or none (units swapped by hand)",
					"unit %q has no channel while others have", u.ID)
			}
		}
	}
}

func (c *planChecker) temperature() {
	t := &c.p.Temperature
	switch t.Mode {
	case TempNone:
		if len(t.PointsCelsius) > 0 {
			c.add("temperature.points_c", `set mode = "chamber", "thermometer" or "manual", or remove the points`,
				"temperature points given but mode is \"none\"")
		}
	case TempChamber:
		if len(t.PointsCelsius) == 0 {
			c.add("temperature.points_c", "list the set points in °C, e.g. [25, -40, 85]", "chamber mode without points")
		}
	case TempThermometer, TempManual:
	default:
		c.add("temperature.mode", `use "none", "chamber", "thermometer" or "manual"`, "unknown temperature mode %q", t.Mode)
	}
	for i, x := range t.PointsCelsius {
		if x < -100 || x > 250 {
			c.addElem("temperature.points_c", i, "give a temperature in °C between -100 and 250", "point %g °C is implausible", x)
		}
	}
	if t.SoakToleranceC <= 0 {
		c.add("temperature.soak_tolerance_c", "give a tolerance in °C, e.g. 0.5", "soak tolerance %g °C must be positive", t.SoakToleranceC)
	}
	if t.SoakSeconds < 0 {
		c.add("temperature.soak_s", "give a soak time ≥ 0 s", "soak %g s is negative", t.SoakSeconds)
	}
	if t.SoakTimeoutSeconds < t.SoakSeconds {
		c.add("temperature.soak_timeout_s", "make the time-out at least the soak time",
			"soak time-out %g s is shorter than the soak %g s", t.SoakTimeoutSeconds, t.SoakSeconds)
	}
	if t.RampMaxCPerMinute < 0 {
		c.add("temperature.ramp_max_c_per_min", "give a rate ≥ 0 °C/min", "ramp rate %g is negative", t.RampMaxCPerMinute)
	}
	if t.AmbientCelsius < -50 || t.AmbientCelsius > 100 {
		c.add("temperature.ambient_c", "give the room temperature in °C, e.g. 25", "ambient %g °C is implausible", t.AmbientCelsius)
	}
}

// calibrationDates checks the instruments' calibration_due dates.
func (c *planChecker) calibrationDates() {
	names := make([]string, 0, len(c.p.Bench.Instruments))
	for n := range c.p.Bench.Instruments {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		d := c.p.Bench.Instruments[n].CalibrationDue
		if d == "" {
			continue
		}
		if _, err := time.Parse("2006-01-02", d); err != nil {
			c.add(joinKey(joinKey("bench.instrument", n), "calibration_due"), `give the date as YYYY-MM-DD, e.g. "2027-03-31"`, "calibration date %q is not a date", d)
		}
	}
}

func (c *planChecker) limits() {
	c.limitTable("limits", c.p.Limits)
	c.limitTable("limits_full_range", c.p.LimitsFullRange)
}

func (c *planChecker) limitTable(table string, lims Limits) {
	p := c.p
	kinds := map[string]bool{}
	for _, t := range p.Tests {
		kinds[t.Kind] = true
	}
	names := make([]string, 0, len(lims))
	for n := range lims {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		v := lims[n]
		k := joinKey(table, n)
		if !planHas(LimitNames(), n) {
			fix := "use one of " + planQuoteList(LimitNames())
			if s := closestKey(n, LimitNames()); s != "" {
				fix = fmt.Sprintf("did you mean %q? Names: %s", s, planQuoteList(LimitNames()))
			}
			c.add(k, fix, "unknown result name %q", n)
			continue
		}
		if v <= 0 || v > 300 {
			c.add(k, "give the minimum acceptable ratio in dB, e.g. 85", "limit %g dB is out of range (0, 300]", v)
		}
		switch {
		case n == PsrrWorst:
			if !kinds[TestPSRRPos] || !kinds[TestPSRRNeg] {
				c.add(k, "add psrr_pos and psrr_neg tests, or remove this limit",
					"psrr_worst is the worse of psrr_pos and psrr_neg, and the plan lacks one of them")
			}
		case !kinds[n]:
			c.add(k, "add that test or remove the limit", "limit for %s, but the plan has no %s test", n, n)
		}
	}
}

func planHas(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}

func planQuoteList(list []string) string {
	q := make([]string, len(list))
	for i, s := range list {
		q[i] = strconv.Quote(s)
	}
	return strings.Join(q, ", ")
}
