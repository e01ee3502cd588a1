package instrument

import (
	"context"
	"fmt"
	"io"
	"slices"
	"strings"
	"time"
)

// ProbeReport is what Probe found at an address.
type ProbeReport struct {
	Address  string
	Identity Identity
	// Profile is the first profile whose idn_pattern matched (the extra
	// ones first, then the built-in ones), nil if none did.
	Profile *Profile
	// Errors are the entries drained from the error queue.
	Errors []QueueEntry
	// Round-trip times of *OPC? queries: how long one exchange takes.
	Rounds                    int
	RTTMin, RTTMedian, RTTMax time.Duration
}

// DefaultProbeRounds is the number of *OPC? round trips Probe times when
// asked for none.
const DefaultProbeRounds = 10

// Probe connects to addr, asks *IDN?, finds the matching profile among
// extra and the built-in profiles, drains and lists the error queue, and
// times rounds *OPC? round trips. On an error after connecting it returns
// the report filled so far.
func Probe(ctx context.Context, addr string, extra []*Profile, rounds int) (ProbeReport, error) {
	r := ProbeReport{Address: addr}
	a, err := ParseAddress(addr)
	if err != nil {
		return r, err
	}
	r.Address = a.String()
	if rounds <= 0 {
		rounds = DefaultProbeRounds
	}
	c, err := Dial(ctx, a, DialOptions{})
	if err != nil {
		return r, err
	}
	defer c.Close()
	s := NewSession("probe "+a.String(), c, SessionOptions{})
	if err := c.Drain(ctx); err != nil {
		return r, err
	}
	id, err := s.Identify(ctx)
	r.Identity = id
	if err != nil {
		return r, err
	}
	builtin, err := BuiltinProfiles()
	if err != nil {
		return r, err
	}
	r.Profile, _ = MatchProfile(id.Raw, append(slices.Clone(extra), builtin...))
	if r.Errors, err = s.Errors(ctx); err != nil {
		return r, err
	}
	rtts := make([]time.Duration, 0, rounds)
	for range rounds {
		start := time.Now()
		if err := s.WaitComplete(ctx); err != nil {
			return r, err
		}
		rtts = append(rtts, time.Since(start))
	}
	r.Rounds = len(rtts)
	r.RTTMin, r.RTTMedian, r.RTTMax = durationStats(rtts)
	return r, nil
}

// durationStats returns the minimum, median and maximum (the median of an
// even count is the mean of the two middle values).
func durationStats(d []time.Duration) (lo, med, hi time.Duration) {
	if len(d) == 0 {
		return 0, 0, 0
	}
	s := slices.Clone(d)
	slices.Sort(s)
	n := len(s)
	med = s[n/2]
	if n%2 == 0 {
		med = (s[n/2-1] + s[n/2]) / 2
	}
	return s[0], med, s[n-1]
}

// Write prints the report for a person.
func (r ProbeReport) Write(w io.Writer) error {
	_, err := io.WriteString(w, r.String())
	return err
}

func (r ProbeReport) String() string {
	var sb strings.Builder
	fmt.Fprintf(&sb, "address:   %s\n", r.Address)
	if r.Identity.Raw == "" {
		sb.WriteString("identity:  (no reply to *IDN?)\n")
	} else {
		fmt.Fprintf(&sb, "identity:  %s\n", r.Identity.Raw)
		fmt.Fprintf(&sb, "           maker %q, model %q, serial %q, firmware %q\n",
			r.Identity.Maker, r.Identity.Model, r.Identity.Serial, r.Identity.Firmware)
	}
	if r.Profile != nil {
		fmt.Fprintf(&sb, "profile:   %s (%s), roles: %s\n", r.Profile.Name, r.Profile.File, strings.Join(r.Profile.Roles(), ", "))
	} else if r.Identity.Raw != "" {
		sb.WriteString("profile:   none matches; write one (see instrument/profiles/*.toml) with an idn_pattern for this reply\n")
	}
	if len(r.Errors) == 0 {
		sb.WriteString("errors:    queue empty\n")
	} else {
		fmt.Fprintf(&sb, "errors:    %d drained from the queue:\n", len(r.Errors))
		for _, e := range r.Errors {
			fmt.Fprintf(&sb, "           %s  (%s)\n", e, describeCode(e.Code))
		}
	}
	if r.Rounds > 0 {
		fmt.Fprintf(&sb, "*OPC? RTT: median %s, min %s, max %s over %d round trips\n",
			roundDur(r.RTTMedian), roundDur(r.RTTMin), roundDur(r.RTTMax), r.Rounds)
	}
	return sb.String()
}

func roundDur(d time.Duration) time.Duration {
	switch {
	case d >= time.Second:
		return d.Round(time.Millisecond)
	case d >= time.Millisecond:
		return d.Round(time.Microsecond)
	}
	return d
}
