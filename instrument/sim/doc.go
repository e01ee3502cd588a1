// Package sim is nullbench's simulated bench: eight SCPI instruments (a DMM,
// a 2-channel supply, a 3-channel DC source, a relay matrix, a temperature
// chamber, a 3-output function generator, a 2-channel digitizer and an AC
// voltmeter) served on loopback TCP (or one of them on a pseudo-terminal),
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
// # Frequency response
//
// The generator GEN-3CH (instrument "gen", profile "generator") has three
// outputs, wired (ac.go): output 1 into the common-mode node (summed into
// source ch1 through a unity-gain input), output 2 into an injector in
// series with the V+ rail, output 3 into one in series with V− (nominal
// coupling gain InjectorCouplingGain = 1, actual within ±5 %, a 2 Hz
// magnetising and a ~500 kHz leakage corner: the real ripple must be
// measured). One output may be on at a time. Forms (SCPI-99 SOURce and
// OUTPut): SOURn:FUNC SIN|DC, SOURn:FREQ <Hz> (HZ, KHZ, MHZ suffixes),
// SOURn:VOLT <amplitude>, SOURn:VOLT:UNIT VPP|VPK|VRMS, SOURn:VOLT:OFFS <V>,
// OUTPn ON|OFF, OUTPn:LOAD <ohms>|INF; each with its query. The amplitude
// is across the load setting behind 50 Ω; the fixture's inputs are 10 kΩ,
// so a 50 Ω setting nearly doubles the voltage. Fixed errors: amplitude
// ±0.5 %, frequency ±10 ppm, offset ±2 mV, a 30 MHz output pole. |offset| +
// peak beyond 20 V open circuit is −221.
//
// The digitizer DIG-2CH ("dig", profile "digitizer"): channel 1 on the
// stimulus-sense line (the node of the output that is on: the common-mode
// node, or the V+ or V− pin), channel 2 on the fixture output (what the
// DMM reads at DC), or on the sense line too while switch channel 190 (the
// through relay, ThroughChannel) is closed. Forms: SENSn:VOLT:RANG <V>
// (0.02..20 V peak, rounded up), INPn:COUP AC|DC, SWE:POIN <n> (16 ..
// 262144), SWE:TINT <s> (a whole number of 100 ns periods of the 10 MHz
// clock), FORM[:DATA] ASC|INT,16|REAL,32, FORM:BORD NORM|SWAP, INIT, ABOR,
// *OPC? (waits for the record), TRAC[:DATA]? CH1|CH2 (ASCII NR3 volts or an
// IEEE 488.2 definite-length block), SENSn:VOLT:RES? (volts per code),
// SENSn:VOLT:OFFS? (0). 16-bit codes clip at ±32767. Fixed errors per
// channel: gain ±0.3 %, offset ±5e-4 of range, a 2 MHz ±10 % input pole,
// a 1.5 Hz ±20 % AC-coupling corner, ±1 ns sampling skew; the sample clock
// ±20 ppm; noise 5e-5 of range (10 µV floor) per sample. Config.DigitizerMismatch
// adds a gain and phase to channel 2. The record is computed from the state
// at INIT.
//
// The AC voltmeter ACV-2 ("acvm", profile "acvm"): true RMS, AC coupled,
// inputs wired as the digitizer's channels, chosen with ROUT:CLOS (@1|2);
// CONF:VOLT:AC <range>, DET:BAND <Hz> (3, 20 or 200 Hz filters), READ?.
//
// The part's small-signal coefficients follow the DUT keys cmrr_pole_hz,
// psrr_pos_pole_hz, psrr_neg_pole_hz: k(f) = k_dc·(1 + j·f/f_p), so
// |k(f)| = |k_dc|·√(1 + (f/f_p)²) and the ratio falls by
// 10·log10(1 + (f/f_p)²) dB; gbw_hz gives each fixture its closed-loop
// response 1/(1 + j·f·K/GBW) for noise gain K (the board's 1 + R2/R1). The
// output term ko keeps its DC value (the open-loop gain's own roll-off is
// not modelled) and the slow self-heating path does not follow a sine. The
// fixture output carries the part's white noise over the closed loop's
// noise bandwidth. A sine's peaks count in the absolute-maximum checks.
//
// # DUT files
//
// ParseDUT/LoadDUT read a TOML description: top-level seed; [part] ratings;
// [lot] id, count and mean/spread; [[unit]] id, cmrr_db, psrr_pos_db,
// psrr_neg_db, optional aol_db (true DC values at 25 °C, mid common mode),
// optional cmrr_pole_hz, psrr_pos_pole_hz, psrr_neg_pole_hz, gbw_hz (also
// in [part] as the type's default) and secondary keys; [[board]] with a [board.opamp] table. With three
// ratios the open-loop gain is derived with the signs that make it highest;
// with four they are checked against kc+kp+kn+ko = 0. DefaultDUT is the
// invented demo lot (HX-4107, lot L2611-A, board HB-220).
package sim
