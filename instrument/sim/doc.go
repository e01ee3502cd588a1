// Package sim is nullbench's simulated bench: five SCPI instruments (a DMM,
// a 2-channel supply, a 3-channel DC source, a relay matrix and a temperature
// chamber) served on loopback TCP (or one of them on a pseudo-terminal),
// around a physical model of the parts under test. It is the demo bench, the
// test oracle of every other package and a training aid, so its physics is
// independent of the measurement code: it imports no other nullbench
// package and never tells the tool an answer — the tool finds it over SCPI
// like on a real bench.
//
// # Instruments
//
// Each instrument has its own server-side SCPI parser (SCPI-99 Vol 1 §6,
// IEEE 488.2 §7–8, §10): LF-terminated lines with an optional
// CR, ';' chaining with the SCPI path rule (a header without a leading ':'
// continues the previous header's path; ";:" returns to the root, so
// "INST:NSEL 2;:VOLT 5" is right and "INST:NSEL 2;VOLT 5" is −113), short
// and long forms, optional nodes, numeric suffixes (SOUR2:VOLT, OUTP3),
// case-insensitive; the IEEE 488.2 common commands; a 10-entry FIFO error
// queue with the standard codes, −350 on overflow, cleared by *CLS and not by
// *RST. The command forms and identities are those of instrument/sim/doc.go.
//
// # Physics
//
// The part's input offset depends only on its own terminal voltages (an
// op-amp has no ground pin; the identity derived in fit/doc.go):
//
//	Vio = Vos(T) + kc·ΔVcm + kp_e·Δ(V+ − V−) + ko·ΔVout (each to V−) + …
//
// so kc + kp + kn + ko = 0 holds by construction, with curvature, edges of
// the input and output ranges, temperature coefficients, self-heating
// (die at θ·P above the case, time constant ~2 s, so a supply step leaves a
// thermal tail), 1/f and white input noise averaged over the meter's
// integration window, and absolute maximum ratings (supply span, input
// beyond a rail by more than 0.3 V, any input drive while unpowered) that
// damage a unit for good. Fixtures: the nulling loop of MIL-STD-883 Method
// 4003 (E0 − Vcm = K·Vio, output held at the source's ch3), a noise-gain
// stage (Vout − Vcm = K·Vio, output free), and a four-resistor difference
// amplifier board (exact bridge algebra with seeded resistor errors).
// Instruments have fixed seeded errors (DMM gain/offset per range, supply
// programming and read-back errors), output slew and settling, current
// limits, relay thermal EMFs and settling tails, and a chamber with a lagged,
// ramp-limited air temperature that the parts follow with their own lag.
//
// # Hand socket
//
// Plans whose units have no switch channels have them swapped by hand. The
// bench has a hand socket for them, wired straight onto the fixture buses
// in parallel with the relay matrix: with no channel closed, the unit in
// the socket is the one measured, with the same physics as on its own
// channel (a contact EMF like a relay path's, no relay tail). A closed
// channel parallels its unit with the socket's (the meter sees the mean,
// as with two closed channels). The person at the bench acts through Go
// only, never over SCPI: Bench.Insert(id), Bench.Remove(), Bench.Socket()
// and Bench.SocketState() (what the panels and a hand-held meter show).
// A unit inserted or pulled out while any contact of the socket is farther
// from 0 V than the part's input_beyond_rail_volts is damaged for good (a
// hand makes the pins in no set order, so an input goes beyond a floating
// rail; JEDEC JESD78; common practice), and the call says so (ErrLiveSocket). `nullbench sim
// --socket` puts these hands on the command's standard input.
//
// # Time
//
// All dynamics follow a Clock: bench time = N × wall time for a
// ScaledClock, or a ManualClock that only moves when told (tests, and
// in-process runs sharing the tool's clock). A DMM reading integrates
// NPLC/50 s of bench time and answers when that time has passed.
//
// # DUT files
//
// ParseDUT/LoadDUT read a TOML description: top-level seed; [part] ratings;
// [lot] id, count and mean/spread; [[unit]] id, cmrr_db, psrr_pos_db,
// psrr_neg_db, optional aol_db (true DC values at 25 °C, mid common mode)
// and secondary keys; [[board]] with a [board.opamp] table. With three
// ratios the open-loop gain is derived with the signs that make it highest;
// with four they are checked against kc+kp+kn+ko = 0. DefaultDUT is the
// invented demo lot (HX-4107, lot L2611-A, board HB-220).
package sim
