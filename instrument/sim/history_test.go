package sim

import "testing"

// The history keeps every message each instrument executed, in order
// (per instrument: two connections interleave as they come),
// with the outputs as programmed right after it (V- as a magnitude).
func TestHistoryRecordsEveryMessage(t *testing.T) {
	tb := startBench(t, Config{})
	tb.psu.send("INST:NSEL 2")
	tb.psu.send("VOLT 12")
	tb.psu.send("OUTP ON")
	tb.src.send("VOLT 1.5")
	_ = tb.psu.query("*OPC?")
	_ = tb.src.query("*OPC?")
	var got []Sent
	for _, e := range tb.b.History() {
		if e.Instrument == NameSupply {
			got = append(got, e)
		}
	}
	want := []struct {
		inst, line string
		neg        float64
		negOn      bool
	}{
		{NameSupply, "INST:NSEL 2", 0, false},
		{NameSupply, "VOLT 12", 12, false},
		{NameSupply, "OUTP ON", 12, true},
	}
	if len(got) < len(want) {
		t.Fatalf("history %+v", got)
	}
	for i, w := range want {
		e := got[i]
		if e.Instrument != w.inst || e.Line != w.line || e.Supply[1].ProgrammedVolts != w.neg || e.Supply[1].On != w.negOn {
			t.Errorf("entry %d = %s %q %+v, want %s %q V- %g on %v", i, e.Instrument, e.Line, e.Supply[1], w.inst, w.line, w.neg, w.negOn)
		}
	}
	found := false
	for _, e := range tb.b.History() {
		if e.Instrument == NameSource && e.Line == "VOLT 1.5" && e.Source[0].ProgrammedVolts == 1.5 {
			found = true
		}
	}
	if !found {
		t.Errorf("the source's VOLT 1.5 is not in the history: %+v", got)
	}
}
