package instrument

import (
	"context"
	"errors"
	"fmt"
	"strings"
)

// Opening says what a switch's OpenAll did and, from that, what is known
// about its relays afterwards. Only an accepted open-all command proves
// every channel open: without one the driver can open only the relays it
// knows of (those it closed, and those adopted from the plan), and a relay
// closed by other means on another channel may still be closed.
type Opening struct {
	Instrument string // the session's name, e.g. "mux"
	Profile    string // the profile's name
	// AllCommand is the open-all command sent and accepted; "" when the
	// profile has none (or it was refused: then Err is set).
	AllCommand string
	// AllFailed is the open-all command that was sent and failed (Err
	// returned); the relays this driver closed (Failed) may still be
	// closed.
	AllFailed string
	// Opened lists the channels opened one by one (no open-all), sorted;
	// Failed those whose opening failed.
	Opened, Failed []string
	// Verified: every channel in Opened read back open with the
	// profile's query_closed (QueryClosed, the template).
	Verified    bool
	QueryClosed string
}

// EveryChannelOpen reports whether every relay of the switch is known
// open: only after an accepted open-all command.
func (o Opening) EveryChannelOpen() bool { return o.AllCommand != "" }

// KnownOpen reports whether every relay the tool knows of (closed by it
// or named by the plan) is open; with Verified it was read back so.
func (o Opening) KnownOpen() bool { return o.EveryChannelOpen() || len(o.Failed) == 0 }

// String says in words what is known, for the safe state and `off`:
// "every channel open" only when EveryChannelOpen; otherwise which
// channels were opened, whether they were read back, and why other relays
// may remain closed.
func (o Opening) String() string {
	if o.EveryChannelOpen() {
		return fmt.Sprintf("every channel open (%q sent and accepted)", o.AllCommand)
	}
	var b strings.Builder
	if o.AllFailed != "" {
		fmt.Fprintf(&b, "%q failed: ", o.AllFailed)
		if len(o.Failed) > 0 {
			fmt.Fprintf(&b, "channel(s) %s, closed by this tool, may still be CLOSED, and any relay closed by other means", strings.Join(o.Failed, ", "))
		} else {
			b.WriteString("any relay may still be closed")
		}
		return b.String()
	}
	switch {
	case len(o.Opened) == 0 && len(o.Failed) == 0:
		b.WriteString("no channel known to be closed, none opened")
	case len(o.Opened) > 0:
		fmt.Fprintf(&b, "opened channel(s) %s one by one", strings.Join(o.Opened, ", "))
		if o.Verified {
			fmt.Fprintf(&b, ", each read back open with %s", o.QueryClosed)
		} else {
			b.WriteString(", not read back (the profile has no query_closed)")
		}
	}
	if len(o.Failed) > 0 {
		if len(o.Opened) > 0 {
			b.WriteString("; ")
		}
		fmt.Fprintf(&b, "channel(s) %s may still be CLOSED (opening failed)", strings.Join(o.Failed, ", "))
	}
	fmt.Fprintf(&b, "; relays this tool did not close may remain closed: profile %s has no open_all, so only the channels this tool closed and the plan's unit channels are opened", o.Profile)
	return b.String()
}

// OpenAllReport is OpenAll that also says what it did (Opening). With the
// profile's open_all it sends it; without, it opens each relay the driver
// closed or adopted, in channel order, every one tried even when an
// earlier one fails (the errors are joined), each checked with
// query_closed where the profile gives one.
func (d *SwitchDriver) OpenAllReport(ctx context.Context) (Opening, error) {
	o := Opening{Instrument: d.s.Name(), Profile: d.p.Name, QueryClosed: d.cmds.QueryClosed}
	if d.cmds.OpenAll != "" {
		cmd, err := expandTemplate(d.cmds.OpenAll, nil)
		if err != nil {
			return o, d.wrap(err)
		}
		if err := d.s.Write(ctx, cmd); err != nil {
			o.AllFailed, o.Failed = cmd, d.Tracked()
			return o, d.wrap(err)
		}
		o.AllCommand = cmd
		d.mu.Lock()
		clear(d.closed)
		d.mu.Unlock()
		return o, d.wrap(d.opts.settle(ctx, d.cmds.Settle))
	}
	var errs []error
	for _, ch := range d.Tracked() {
		if err := d.send(ctx, d.cmds.Open, ch, false); err != nil {
			o.Failed = append(o.Failed, ch)
			errs = append(errs, err)
			continue
		}
		o.Opened = append(o.Opened, ch)
	}
	o.Verified = d.cmds.QueryClosed != "" && len(o.Opened) > 0
	if len(errs) > 0 {
		return o, d.errorf("no open_all in profile %s; opening the relays closed one by one: %w", d.p.Name, errors.Join(errs...))
	}
	if len(o.Opened) == 0 {
		return o, nil
	}
	return o, d.wrap(d.opts.settle(ctx, d.cmds.Settle))
}
