package instrument

import (
	"context"
	"errors"
	"fmt"
)

// Instrument is one opened instrument: its connection, the profile that
// drives it and what it said it was. Only the application (cmd) holds it
// and closes it; procedures get the role drivers built on its Session.
type Instrument struct {
	Name     string
	Address  Address
	Profile  *Profile
	Session  *Session
	Identity Identity
	// Stale holds the entries found in the error queue on opening (left
	// by earlier work); they are read so that the first checked command
	// is not blamed for them.
	Stale []QueueEntry
}

// OpenOptions adjust Open.
type OpenOptions struct {
	// Dial overrides transport settings; its Terminator, when empty, is
	// the profile's.
	Dial DialOptions
	// AllowMismatch accepts an instrument whose *IDN? reply the
	// profile's idn_pattern does not match (the error is then only
	// reported in Mismatch).
	AllowMismatch bool
}

// ErrWrongInstrument is wrapped when an instrument's *IDN? reply does not
// match the profile chosen for it.
var ErrWrongInstrument = errors.New("instrument identity does not match its profile")

// Open dials address, wraps it in a Session set up from the profile (a
// built-in name or a file path, see ResolveProfile), drains stale input,
// identifies the instrument, checks the reply against the profile's
// idn_pattern, and reads out any stale error-queue entries.
func Open(ctx context.Context, name, address, profile string, opts OpenOptions) (*Instrument, error) {
	addr, err := ParseAddress(address)
	if err != nil {
		return nil, fmt.Errorf("instrument %s: %w", name, err)
	}
	p, err := ResolveProfile(profile)
	if err != nil {
		return nil, fmt.Errorf("instrument %s: %w", name, err)
	}
	return OpenWith(ctx, name, addr, p, opts)
}

// OpenWith is Open with a parsed address and a loaded profile.
func OpenWith(ctx context.Context, name string, addr Address, p *Profile, opts OpenOptions) (*Instrument, error) {
	dopts := opts.Dial
	if dopts.Terminator == "" {
		dopts.Terminator = p.Terminator
	}
	c, err := Dial(ctx, addr, dopts)
	if err != nil {
		return nil, fmt.Errorf("instrument %s: %w", name, err)
	}
	s := NewSession(name, c, p.SessionOptions())
	s.SetRedial(func(ctx context.Context) (Conn, error) {
		nc, err := Dial(ctx, addr, dopts)
		if err == nil {
			if err = nc.Drain(ctx); err != nil {
				_ = nc.Close()
				return nil, err
			}
		}
		return nc, err
	})
	in := &Instrument{Name: name, Address: addr, Profile: p, Session: s}
	fail := func(err error) (*Instrument, error) {
		_ = c.Close()
		return nil, &OpenError{Name: name, Address: addr.String(), Err: err}
	}
	if err := c.Drain(ctx); err != nil {
		return fail(err)
	}
	id, err := s.Identify(ctx)
	if err != nil {
		return fail(err)
	}
	in.Identity = id
	if p.IDNPattern != "" && !p.Matches(id.Raw) && !opts.AllowMismatch {
		return fail(fmt.Errorf("%w: *IDN? answered %q, profile %s (%s) expects idn_pattern %q; check the address or choose the right profile",
			ErrWrongInstrument, id.Raw, p.Name, p.File, p.IDNPattern))
	}
	if in.Stale, err = s.Errors(ctx); err != nil {
		return fail(err)
	}
	return in, nil
}

// Close closes the connection.
func (in *Instrument) Close() error { return in.Session.Close() }
