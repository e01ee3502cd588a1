package procedure

import (
	"context"

	"nullbench/instrument"
)

// switchOpener is the optional ability of a switch to say what its
// OpenAll did (instrument.SwitchDriver has it).
type switchOpener interface {
	OpenAllReport(ctx context.Context) (instrument.Opening, error)
}

// relayState is what the runner knows about the switch's relays after it
// tried to open them.
type relayState struct {
	tried bool   // OpenAll was tried
	every bool   // every channel is known open (an accepted open-all)
	words string // what is known, for messages ("every channel open (...)")
}

// openSwitch opens the switch's relays and says what is known afterwards.
// A switch that cannot say what it did (a role implemented without
// OpenAllReport) is not claimed to have every channel open.
func openSwitch(ctx context.Context, sw instrument.Switch) (relayState, error) {
	if so, ok := sw.(switchOpener); ok {
		o, err := so.OpenAllReport(ctx)
		return relayState{tried: true, every: err == nil && o.EveryChannelOpen(), words: o.String()}, err
	}
	if err := sw.OpenAll(ctx); err != nil {
		return relayState{tried: true, words: "open-all failed: relays may still be closed"}, err
	}
	return relayState{tried: true, words: "open-all returned without error; the switch driver does not say which channels it opened, so relays may remain closed"}, nil
}
