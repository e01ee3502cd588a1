package instrument_test

import (
	"strings"
	"testing"

	"nullbench/instrument"
)

// Opening claims every channel open only after an accepted open-all
// command; otherwise it names what it opened, whether it read them back,
// what may still be closed and why.
func TestOpeningWords(t *testing.T) {
	tests := []struct {
		name    string
		o       instrument.Opening
		every   bool
		want    []string
		notWant []string
	}{
		{"open-all", instrument.Opening{Profile: "switch", AllCommand: "ROUT:OPEN:ALL"}, true,
			[]string{`every channel open ("ROUT:OPEN:ALL" sent and accepted)`}, []string{"may remain"}},
		{"tracked, read back", instrument.Opening{Profile: "p", Opened: []string{"101", "102"}, Verified: true, QueryClosed: "ROUT:CLOS? (@{channel})"}, false,
			[]string{"opened channel(s) 101, 102 one by one, each read back open with ROUT:CLOS? (@{channel})", "relays this tool did not close may remain closed", "profile p has no open_all"},
			[]string{"every channel open"}},
		{"tracked, no query", instrument.Opening{Profile: "p", Opened: []string{"7"}}, false,
			[]string{"opened channel(s) 7 one by one, not read back (the profile has no query_closed)"}, []string{"every channel open"}},
		{"one failed", instrument.Opening{Profile: "p", Opened: []string{"1"}, Failed: []string{"2"}, QueryClosed: "Q"}, false,
			[]string{"channel(s) 2 may still be CLOSED (opening failed)"}, []string{"every channel open"}},
		{"nothing known", instrument.Opening{Profile: "p"}, false,
			[]string{"no channel known to be closed, none opened", "may remain closed"}, []string{"every channel open"}},
	}
	for _, tc := range tests {
		s := tc.o.String()
		if tc.o.EveryChannelOpen() != tc.every {
			t.Errorf("%s: EveryChannelOpen = %v", tc.name, !tc.every)
		}
		for _, w := range tc.want {
			if !strings.Contains(s, w) {
				t.Errorf("%s: %q does not say %q", tc.name, s, w)
			}
		}
		for _, w := range tc.notWant {
			if strings.Contains(s, w) {
				t.Errorf("%s: %q says %q", tc.name, s, w)
			}
		}
	}
}
