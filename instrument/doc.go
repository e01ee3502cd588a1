// Package instrument talks to bench instruments over SCPI and presents
// them to procedures as small role interfaces.
//
// # Layers
//
// From the wire up:
//
//   - Conn (conn.go, tcp.go, serial.go) moves bytes: it writes program
//     messages and reads response messages up to their terminator, with a
//     context on every call. Two transports: a raw TCP socket
//     ("tcp://HOST[:PORT]", port 5025 by default, the LXI/IANA "scpi-raw"
//     port) and a serial line ("serial:///dev/ttyUSB0?baud=115200") via
//     go.bug.st/serial. ParseAddress reads both forms; Dial opens them.
//   - Session (session.go) speaks IEEE 488.2 and SCPI on a Conn: queries,
//     numeric and block responses, the error queue (SYSTem:ERRor?),
//     *IDN?, *RST, *CLS, *OPC?, a per-exchange time-out, and recovery
//     after a time-out (drain, then re-synchronise with *OPC?). Do groups
//     exchanges that must not be interleaved ("INST:NSEL 2" then "VOLT 5").
//   - Profile (profile.go, profiles/*.toml) describes one kind of
//     instrument in TOML: command templates per role, terminator,
//     time-out, settle time, and the accuracy figures the uncertainty
//     budget needs. The built-in profiles use only SCPI-99 standard forms.
//   - Drivers (driver.go) implement the roles of roles.go (Meter, Supply,
//     Source, Switch, Chamber, Thermometer) from a Session and a Profile.
//     A negative supply rail wired floating is programmed as a magnitude
//     and read back with its sign. The meter (driver_meter.go,
//     profile_meter.go) takes n readings however its profile says: a
//     count then one query, n triggers of one reading, init/trigger/
//     *OPC?/fetch, or a buffer as ASCII or a block of binary reals;
//     overloads (9.9E37) come back as ±Inf with an error wrapping
//     ErrOverload, 9.91E37 as NaN with ErrNotANumber. For frequency response
//     (driver_generator.go, driver_digitizer.go, driver_acvm.go): a
//     generator output's sine (SCPI-99 SOURce forms, peak volts converted
//     to the profile's VPP or VPK), a digitizer's records as ASCII or
//     IEEE 488.2 definite-length blocks of int16 codes or real32 volts in
//     either byte order (waveform.go), its sample rate read back and
//     checked, clipped samples flagged (ErrClipped), and an AC voltmeter.
//
// Open (open.go) does the usual sequence for the application: parse the
// address, resolve the profile, dial, identify, check the identity against
// the profile, read stale errors. Probe (probe.go) reports what is at an
// address. Only the application opens and closes instruments; procedures
// receive roles. This package imports nothing of procedure, fit or report
// (its external tests use the simulated bench and fit's IEEE 1057 sine fit
// to check captures end to end).
//
// Package instrumenttest plays back scripted SCPI exchanges as a Conn so
// that driver tests read like a bench log.
//
// # Standards followed
//
//   - IEEE 488.2: common commands *IDN?, *RST, *CLS, *OPC? (§10);
//     numeric response forms NR1/NR2/NR3; arbitrary block responses,
//     definite "#<n><len><bytes>" and indefinite "#0<bytes>NL^END"
//     (§8.7.9-10); the Standard Event Status Register bit each error
//     class sets. Clause numbers are from a secondary restatement and
//     are still to be checked against the standard.
//   - SCPI-99 (SCPI Consortium, 1999): command forms of Vol 2 (CONFigure,
//     READ?, [SENSe:]VOLTage:DC:NPLCycles, SAMPle:COUNt, INSTrument:NSELect,
//     [SOURce:]VOLTage, OUTPut, MEASure, ROUTe:CLOSe/OPEN, TEMPerature;
//     SOURce:FUNCtion, :FREQuency, :VOLTage:UNIT, :VOLTage:OFFSet,
//     SENSe:SWEep:POINts, :TINTerval, FORMat:DATA, FORMat:BORDer, TRACe:DATA?);
//     the error queue reply <code>,"<text>[;<info>]" and the standard
//     error numbers of Vol 2 §21.8 (StandardErrors); the special values
//     9.9E37 (+INF, overload), -9.9E37 (-INF) and 9.91E37 (NaN).
//   - LXI Consortium, "LXI Ports, Protocols, and Services": raw SCPI socket
//     port 5025 ("scpi-raw").
//   - On a raw socket there is no END signal: LF ends a message and an
//     optional CR before it is dropped (common practice, no published
//     source).
//
// The command forms and identities the simulated bench answers are
// described in instrument/sim/doc.go.
package instrument
