package plan

// Step is one point of one pass of a test, as StepTable lays it out.
type Step struct {
	Test       int     // index into Plan.Tests
	Kind       string  // the test kind
	Part       string  // "" or, for board_cmrr, PartCM or PartDiff
	Index      int     // position in the ordered sweep (Reading.Step)
	LevelVolts float64 // the stimulus (see BenchState for its meaning)
	State      BenchState
	Pins       Terminals
	// CMVolts is the inputs' common-mode voltage to ground; CMRelVolts the
	// same relative to the rails' centre (V+ + V-)/2.
	CMVolts    float64
	CMRelVolts float64
	// ToPosVolts = V+ - highest input and ToNegVolts = lowest input - V-:
	// the common mode's distance to each rail (the plan requires at least
	// cm_headroom + cm_margin on each side).
	ToPosVolts       float64
	ToNegVolts       float64
	MaxToGroundVolts float64 // the highest |voltage| any pin or source sees
}

// Key is the work key of this step for one temperature, unit and repeat.
func (s Step) Key(tempIndex int, unit string, repeat int) WorkKey {
	return WorkKey{TempIndex: tempIndex, Unit: unit, Test: s.Kind, Repeat: repeat, Part: s.Part, Step: s.Index}
}

// TestSteps lays out one pass of test i: its sweeps in order, each level in
// the order it is visited.
func TestSteps(p *Plan, i int) []Step {
	t := &p.Tests[i]
	var out []Step
	for _, sw := range Sweeps(t) {
		for j, l := range sw.Levels {
			s := StateAt(p, t, sw.Part, l)
			pins := TerminalsOf(p, s)
			out = append(out, Step{
				Test: i, Kind: t.Kind, Part: sw.Part, Index: j, LevelVolts: l,
				State: s, Pins: pins,
				CMVolts:          (pins.InHighVolts + pins.InLowVolts) / 2,
				CMRelVolts:       (pins.InHighVolts+pins.InLowVolts)/2 - (s.PosVolts+s.NegVolts)/2,
				ToPosVolts:       s.PosVolts - pins.InHighVolts,
				ToNegVolts:       pins.InLowVolts - s.NegVolts,
				MaxToGroundVolts: pins.MaxToGroundVolts(s),
			})
		}
	}
	return out
}

// StepTable lays out one pass of every test, in plan order.
func StepTable(p *Plan) []Step {
	var out []Step
	for i := range p.Tests {
		out = append(out, TestSteps(p, i)...)
	}
	return out
}
