package instrument

import (
	"context"
	"errors"
	"fmt"
)

// ErrNoRedial is returned by Redial on a session that was not opened with
// a way to dial its instrument again (NewSession on a bare Conn).
var ErrNoRedial = errors.New("no way to dial this instrument again")

// SetRedial gives the session a way to dial its instrument again (Open
// sets it from the instrument's address).
func (s *Session) SetRedial(dial func(context.Context) (Conn, error)) { s.redial = dial }

// Redial closes the session's connection and dials the instrument again,
// once, holding the session so no exchange runs meanwhile. Pending stale
// replies go with the old connection. The safe state calls it after a lost
// connection, so a dropped socket does not leave the supplies on.
func (s *Session) Redial(ctx context.Context) error {
	if s.redial == nil {
		return fmt.Errorf("%s: %w", s.name, ErrNoRedial)
	}
	select {
	case s.sem <- struct{}{}:
	case <-ctx.Done():
		return &OpError{Instrument: s.name, Command: "", Err: ctxError(ctx, "waiting for the session")}
	}
	defer func() { <-s.sem }()
	c, err := s.redial(ctx)
	if err != nil {
		return fmt.Errorf("%s: dial again: %w", s.name, err)
	}
	_ = s.conn.Close()
	s.conn, s.resync, s.lost = c, false, nil
	return nil
}
