package plan

import "fmt"

// TestLine is the line of the i-th (0-based) [[test]] table in the plan
// file, for messages that point the user at it; 0 for a plan built in
// code.
func (p *Plan) TestLine(i int) int { return p.tableLine("test", i) }

// ACTestLine is the same for the i-th [[ac_test]] table.
func (p *Plan) ACTestLine(i int) int { return p.tableLine("ac_test", i) }

// UnitLine is the same for the i-th [[unit]] table.
func (p *Plan) UnitLine(i int) int { return p.tableLine("unit", i) }

func (p *Plan) tableLine(name string, i int) int {
	if p == nil || !p.keys.has(fmt.Sprintf("%s[%d]", name, i+1)) {
		return 0
	}
	return p.keys.line(fmt.Sprintf("%s[%d]", name, i+1))
}
