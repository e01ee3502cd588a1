package sim

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// The hand socket: a fixture position for units swapped by the person at
// the bench (plans whose units have no switch channels).
//
// Wiring. The socket is wired straight onto the fixture buses (V+, V−, the
// common-mode node, the differential drive and the loop reference, and the
// meter) in parallel with the relay matrix's output, so a unit in it is
// measured whenever no switch channel is closed, exactly as on its own
// channel: same fixture (its DUT file's), same physics. Closing a switch
// channel while a unit is in the socket parallels the two, like two closed
// channels: the meter sees their mean (garbage; never in a valid plan).
// A unit put in the socket has left its matrix position for good: closing
// its own channel afterwards connects nothing.
//
// Contacts. In place of a relay path the socket's contacts add a thermal
// EMF of the same size and slow wander as a relay path's (Cu–Cu order,
// typical data-sheet figures, common practice), with no settling tail (there is no relay coil).
//
// Hot swapping. A hand never makes or breaks a part's pins all at once,
// and in no set order: while some pins touch the socket, the others float,
// and a floating rail follows the connected pins through the part's input
// protection, so an input ends up beyond a rail — the absolute maximum
// rating that forward-biases the ESD diodes, back-powers the chip and can
// latch it up (JEDEC JESD78; common practice, JEDEC JESD78). The model keeps this simple:
// a part inserted into, or pulled out of, a socket with any bus farther
// from 0 V than the part's input_beyond_rail_volts is damaged for good
// (honestly reported in Inspect and Truth). A real part may survive some
// hot swaps; this one never does. The relay matrix switches all of a
// unit's lines together and is not a hot swap in this sense.
//
// Temperature. Every unit, wherever it is, sits in the chamber air (one
// chamber, instrument/sim/doc.go); a unit on the bench mat is not modelled apart.

// socketPathKey keys the socket's contact EMF draw (switch channels are
// 101.. and 201.., so it never collides with a relay path's).
const socketPathKey = 0

// newSocketPath draws the socket contacts' EMF: a relay path's numbers
// without the settling tail.
func newSocketPath(seed int64) *relayPath {
	rp := newRelayPath(seed, socketPathKey)
	rp.tailVolts = 0
	return rp
}

// ErrLiveSocket is wrapped by the error Insert or Remove return when the
// socket was live: the move was made and the unit is damaged.
var ErrLiveSocket = errors.New("the socket was live")

// SocketState is what the person at the bench can see of the hand socket:
// the unit in it and the voltages on its contacts (as the supply and source
// front panels and a hand-held meter would show them).
type SocketState struct {
	Unit         string // "" when empty
	Damaged      bool   // the unit in the socket is damaged
	DamageReason string
	// Live: some contact is farther from 0 V than the parts'
	// input_beyond_rail_volts; inserting or removing a part now damages it.
	Live     bool
	Contacts string // "V+ 0.000 V, V− 0.000 V, common mode 0.000 V, differential 0.000 V, loop reference 0.000 V"
}

// Insert puts the unit with this id into the hand socket, as the person at
// the bench does; it is never reachable over SCPI. It refuses an unknown id
// and an occupied socket (nothing changes). If the socket is live (see
// SocketState) the unit goes in and is damaged, and the error wraps
// ErrLiveSocket and says why.
func (b *Bench) Insert(unitID string) error {
	b.mu.Lock()
	defer b.mu.Unlock()
	m := b.m
	m.advance(b.benchSeconds())
	u := m.unitByID(unitID)
	if u == nil {
		return fmt.Errorf("sim: no unit %q in the DUT file %s (its units: %s)", unitID, b.dut.Name, m.unitIDs())
	}
	if m.socket != nil {
		if m.socket == u {
			return fmt.Errorf("sim: unit %s is already in the socket", unitID)
		}
		return fmt.Errorf("sim: the socket holds unit %s; remove it first", m.socket.id)
	}
	m.offMatrix[u] = true
	m.socket = u
	err := m.hotSwap(u, "inserted")
	m.checkDamage(m.connected())
	return err
}

// Remove takes the unit out of the hand socket, as the person at the bench
// does; it is never reachable over SCPI. An empty socket is an error. If
// the socket is live the unit comes out damaged, and the error wraps
// ErrLiveSocket and says why.
func (b *Bench) Remove() error {
	b.mu.Lock()
	defer b.mu.Unlock()
	m := b.m
	m.advance(b.benchSeconds())
	u := m.socket
	if u == nil {
		return errors.New("sim: the socket is empty")
	}
	err := m.hotSwap(u, "pulled out")
	m.socket = nil
	return err
}

// Socket returns the id of the unit in the hand socket, "" when empty.
func (b *Bench) Socket() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	if b.m.socket == nil {
		return ""
	}
	return b.m.socket.id
}

// SocketState returns the socket's unit and contacts at the present bench
// time.
func (b *Bench) SocketState() SocketState {
	b.mu.Lock()
	defer b.mu.Unlock()
	m := b.m
	m.advance(b.benchSeconds())
	live, contacts := m.socketLive(&b.dut.Part)
	s := SocketState{Live: live, Contacts: contacts}
	if u := m.socket; u != nil {
		s.Unit, s.Damaged, s.DamageReason = u.id, u.amp.damaged, u.amp.damageReason
	}
	return s
}

func (m *model) unitByID(id string) *unit {
	for _, u := range m.units {
		if u.id == id {
			return u
		}
	}
	return nil
}

func (m *model) unitIDs() string {
	ids := make([]string, len(m.units))
	for i, u := range m.units {
		ids[i] = u.id
	}
	return strings.Join(ids, ", ")
}

// socketLive reports whether any bus on the socket's contacts is farther
// from 0 V than part's input_beyond_rail_volts, and lists the contacts.
func (m *model) socketLive(part *PartSpec) (bool, string) {
	vp, vn, vcm, vd, vref := m.nodes()
	lim := part.InputBeyondRailVolts
	live := false
	var sb strings.Builder
	for i, c := range []struct {
		name  string
		volts float64
	}{{"V+", vp}, {"V−", vn}, {"common mode", vcm}, {"differential", vd}, {"loop reference", vref}} {
		if i > 0 {
			sb.WriteString(", ")
		}
		v := math.Round(c.volts*1e3) / 1e3
		if v == 0 {
			v = 0 // no "-0.000 V"
		}
		fmt.Fprintf(&sb, "%s %.3f V", c.name, v)
		if math.Abs(c.volts) > lim {
			live = true
		}
	}
	return live, sb.String()
}

// hotSwap damages u if the socket is live as it is "inserted" or "pulled
// out" (verb).
func (m *model) hotSwap(u *unit, verb string) error {
	o := u.amp
	live, contacts := m.socketLive(o.part)
	if !live {
		return nil
	}
	o.markDamaged(m.t, "%s with the socket live (%s): a hand makes and breaks its pins in no set order, so an input went beyond a floating rail by more than %.2g V",
		verb, contacts, o.part.InputBeyondRailVolts)
	return fmt.Errorf("sim: unit %s was %s while %w (%s): the unit is DAMAGED; power the bench down before swapping parts", u.id, verb, ErrLiveSocket, contacts)
}
