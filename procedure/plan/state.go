package plan

import "math"

// BenchState is what the bench applies to the part at one point, in volts
// to ground. Level semantics (all from the plan's nominal rails Vp0, Vn0):
//
//	cmrr, supply_shift:  V+ = Vp0 - L, V- = Vn0 - L, inputs at ground.
//	                     The inputs then sit at +L from the rails' centre
//	                     (equivalent V_CM = -(V+ + V-)/2 + (Vp0 + Vn0)/2),
//	                     the convention of MIL-M-38510/114 Table III
//	                     (Group A): ±20 V rails, L = +15 gives +5/-35 V.
//	cmrr, input_drive:   V_CM = L at the inputs (source_cm), rails nominal.
//	psrr_pos:            V+ = Vp0 + d (V- nominal).
//	psrr_neg:            V- = Vn0 - d: a positive d grows the rail's
//	                     magnitude, like psrr_pos (V+ nominal).
//	psrr_sym:            V+ = Vp0 + d/2, V- = Vn0 - d/2: the span grows by d.
//	aol:                 source_ref = r holds the part's output at r; rails
//	                     nominal, inputs at ground.
//	board_cmrr:          levels: V_CM = L from source_cm (V_d = 0);
//	                     diff_levels: V_d from source_diff (V_CM = 0).
//	board_psrr_pos/neg:  as psrr_pos/neg.
//
// MIL-M-38510/114 tests 14 and 15 (+10/-20 V and +20/-10 V from ±20 V) are
// psrr_pos and psrr_neg at d = -10 V.
type BenchState struct {
	PosVolts  float64 // V+ rail
	NegVolts  float64 // V- rail (negative on a split supply)
	CMVolts   float64 // source_cm: the inputs' common-mode node (0 when unused)
	DiffVolts float64 // source_diff: a board's differential drive
	RefVolts  float64 // source_ref: where the nulling loop holds the output
}

// NominalState is the bench at the part's nominal rails with every source
// at 0 V: where power-up ends and every test starts and ends.
func NominalState(p *Plan) BenchState {
	return BenchState{PosVolts: p.Part.NominalPosVolts, NegVolts: p.Part.NominalNegVolts}
}

// StateAt returns the bench state at one level of a test (part is "" or,
// for board_cmrr, PartCM or PartDiff). See BenchState for the semantics.
func StateAt(p *Plan, t *Test, part string, level float64) BenchState {
	s := NominalState(p)
	switch t.Kind {
	case TestCMRR:
		if p.Fixture.CommonMode == CMByInputDrive {
			s.CMVolts = level
		} else {
			s.PosVolts -= level
			s.NegVolts -= level
		}
	case TestPSRRPos, TestBoardPSRRPos:
		s.PosVolts += level
	case TestPSRRNeg, TestBoardPSRRNeg:
		s.NegVolts -= level
	case TestPSRRSym:
		s.PosVolts += level / 2
		s.NegVolts -= level / 2
	case TestAOL:
		s.RefVolts = level
	case TestBoardCMRR:
		if part == PartDiff {
			s.DiffVolts = level
		} else {
			s.CMVolts = level
		}
	}
	return s
}

// Terminals are the voltages to ground at the part's pins.
type Terminals struct {
	PosVolts    float64 // V+
	NegVolts    float64 // V-
	InHighVolts float64 // the highest input pin
	InLowVolts  float64 // the lowest input pin
	OutVolts    float64 // the output, as far as the plan fixes it
}

// TerminalsOf derives the pin voltages from a bench state. The inputs of
// an op-amp fixture sit at the common-mode node. A board's inputs are taken
// at V_CM ± |V_d|, which covers both a drive split about the common mode
// and a drive on one input. The output is the held reference in a nulling
// loop, follows the inputs in a noise-gain stage (plus K·V_IO, ignored),
// and is G·V_d on a board (its common-mode gain ignored).
func TerminalsOf(p *Plan, s BenchState) Terminals {
	t := Terminals{PosVolts: s.PosVolts, NegVolts: s.NegVolts, InHighVolts: s.CMVolts, InLowVolts: s.CMVolts}
	switch p.Fixture.Kind {
	case FixtureNullingLoop:
		t.OutVolts = s.RefVolts
	case FixtureNoiseGain:
		t.OutVolts = s.CMVolts
	case FixtureBoard:
		d := math.Abs(s.DiffVolts)
		t.InHighVolts, t.InLowVolts = s.CMVolts+d, s.CMVolts-d
		t.OutVolts = p.Fixture.BoardGain * s.DiffVolts
	}
	return t
}

// MaxToGroundVolts is the largest |voltage| of any pin or source to ground.
func (t Terminals) MaxToGroundVolts(s BenchState) float64 {
	m := 0.0
	for _, v := range t.all(s) {
		m = math.Max(m, math.Abs(v))
	}
	return m
}

// AcrossVolts is the largest voltage between any two pins, sources or
// ground.
func (t Terminals) AcrossVolts(s BenchState) float64 {
	lo, hi := 0.0, 0.0
	for _, v := range t.all(s) {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	return hi - lo
}

func (t Terminals) all(s BenchState) []float64 {
	return []float64{t.PosVolts, t.NegVolts, t.InHighVolts, t.InLowVolts, t.OutVolts, s.CMVolts, s.DiffVolts, s.RefVolts}
}
