package plan

// Keys and lines for messages outside this package (the safety rules in
// procedure/safety name the plan key and line they refuse).

// TestKey is the key of the plan's test i (0-based): "test[1]" for i = 0.
func TestKey(i int) string { return testKey(i) }

// ACTestKey is the key of the plan's ac_test i (0-based): "ac_test[1]".
func ACTestKey(i int) string { return acTestKey(i) }

// KeyLine is the line of key (a dotted path such as "part.max_supply_span")
// in the plan's source file, or 0 for a plan built in code.
func (p *Plan) KeyLine(key string) int { return p.keys.line(key) }

// ElemLine is the line of element i (0-based) of the array at key, or the
// line of the key itself; 0 for a plan built in code.
func (p *Plan) ElemLine(key string, i int) int { return p.keys.elemLine(key, i) }

// Sorted orders the errors by line, those without a line last.
func (es Errors) Sorted() Errors { return es.sorted() }
