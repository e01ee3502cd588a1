package sim

import (
	"context"
	"encoding/binary"
	"math"
	"strconv"
	"strings"
)

// Meter dialects: the common ways a DMM hands over n readings. Each one
// changes the simulated DMM's command set and identity; the measurement
// physics (dmm.measure) is the same in all of them, so the same plan must
// measure the same parts to the same results whichever dialect is spoken.
//
//	(none)         SAMP:COUN n, then READ? returns n comma-separated values
//	dmm_single     no sample count: READ? triggers and returns one reading
//	dmm_initfetch  no READ?: INIT starts n readings, FETC? waits and returns them
//	dmm_trigfetch  no READ?: INIT arms, *TRG starts, FETC? waits and returns them
//	dmm_opc        no READ?: INIT starts, FETC? is an error until done (sync with *OPC?)
//	dmm_buffer     no READ?/FETC?: INIT fills a buffer read with TRAC:DATA?,
//	               as ASCII or an IEEE 488.2 definite-length block of
//	               REAL,32 / REAL,64 (FORM:DATA) in either byte order (FORM:BORD)
func meterDialects() []Dialect {
	mk := func(name, doc, idn string, dd dmmDialect) Dialect {
		dd.name = name
		return Dialect{Name: name, Instrument: NameDMM, Doc: doc, apply: func(b *Bench) error {
			b.dmmDev.dialect = dd
			b.dmmDev.resetDialect()
			return b.redefine(NameDMM, idn, name)
		}}
	}
	return []Dialect{
		mk("dmm_single", "meter without a sample count: READ? returns one reading per trigger",
			IDNDMMSingle, dmmDialect{noCount: true}),
		mk("dmm_initfetch", "meter without READ?: INIT starts the readings, FETC? waits for and returns them",
			IDNDMMInitFetch, dmmDialect{noRead: true}),
		mk("dmm_trigfetch", "meter triggered over the bus: INIT arms, *TRG starts, FETC? returns the readings",
			IDNDMMTrigFetch, dmmDialect{noRead: true, busTrigger: true}),
		mk("dmm_opc", "meter whose FETC? does not wait: INIT, then *OPC? before FETC?",
			IDNDMMOPC, dmmDialect{noRead: true, fetchNoWait: true}),
		mk("dmm_buffer", "meter with a reading buffer: INIT, then TRAC:DATA? as ASCII or a binary block (FORM:DATA REAL,32|64; FORM:BORD NORM|SWAP)",
			IDNDMMBuffer, dmmDialect{noRead: true, buffer: true}),
	}
}

// Identities of the meter dialects (invented, like the rest of the bench).
const (
	IDNDMMSingle    = "NULLBENCH-SIM,DMM-1S,SIM0011,1.0"
	IDNDMMInitFetch = "NULLBENCH-SIM,DMM-IF,SIM0012,1.0"
	IDNDMMTrigFetch = "NULLBENCH-SIM,DMM-TF,SIM0013,1.0"
	IDNDMMOPC       = "NULLBENCH-SIM,DMM-OP,SIM0014,1.0"
	IDNDMMBuffer    = "NULLBENCH-SIM,DMM-BF,SIM0015,1.0"
)

// dmmDialect says how the simulated DMM departs from its own command set.
type dmmDialect struct {
	name        string
	noCount     bool // no SAMPle:COUNt; every trigger takes one reading
	noRead      bool // no READ?
	busTrigger  bool // INIT only arms; *TRG starts the readings
	fetchNoWait bool // FETC? during a measurement fails with -230
	buffer      bool // no FETC?; TRACe:DATA? returns the buffer in the FORMat
}

// dmmFormat is the buffer's data format (FORM:DATA, FORM:BORD).
type dmmFormat struct {
	bits    int  // 0: ASCII; 32 or 64: IEEE 754 binary reals
	swapped bool // least significant byte first
}

// resetDialect is the dialect part of *RST.
func (d *dmm) resetDialect() {
	d.mm.Lock()
	d.format, d.armed = dmmFormat{}, false
	d.mm.Unlock()
}

// busTrigger is *TRG: it starts the readings INIT armed.
func (d *dmm) busTrigger(ctx context.Context) error {
	if !d.dialect.busTrigger {
		return newErr(errUndefHeader, "*TRG")
	}
	d.mm.Lock()
	armed := d.armed
	d.armed = false
	d.mm.Unlock()
	if !armed {
		return newErr(errTriggerIgnored, "not armed: send INIT first")
	}
	return d.start()
}

// withDialect edits the DMM's own command set for its dialect.
func (d *dmm) withDialect(cmds []command) []command {
	dd := d.dialect
	if dd.name == "" {
		return cmds
	}
	var out []command
	for _, c := range cmds {
		switch {
		case c.pattern == "SAMPle:COUNt" && dd.noCount:
			continue
		case c.pattern == "READ" && dd.noRead:
			continue
		case c.pattern == "FETCh[:VOLTage][:DC]" && dd.buffer:
			continue
		case c.pattern == "FETCh[:VOLTage][:DC]" && dd.fetchNoWait:
			fetch := c.fn
			c.fn = func(cl *call) (string, error) {
				if d.measuring() {
					return "", newErr(errDataStale, "measurement in progress; wait with *OPC?")
				}
				return fetch(cl)
			}
		case c.pattern == "INITiate[:IMMediate]" && dd.busTrigger:
			c.fn = func(*call) (string, error) {
				if d.measuring() {
					return "", newErr(errInitIgnored, "measurement in progress")
				}
				d.mm.Lock()
				d.armed, d.readings, d.hasData = true, nil, false
				d.mm.Unlock()
				return "", nil
			}
		}
		out = append(out, c)
	}
	if dd.buffer {
		out = append(out, d.bufferCommands()...)
	}
	return out
}

// measuring reports whether an INIT's readings are still being taken.
func (d *dmm) measuring() bool {
	d.mm.Lock()
	defer d.mm.Unlock()
	if d.pending == nil {
		return false
	}
	select {
	case <-d.pending.done:
		return false
	default:
		return true
	}
}

func (d *dmm) bufferCommands() []command {
	return []command{
		{pattern: "FORMat[:DATA]", minParams: 1, maxParams: 2, fn: func(c *call) (string, error) {
			var f dmmFormat
			switch charParam(c.params[0]) {
			case "ASC", "ASCII":
				if len(c.params) == 2 {
					return "", newErr(errParamNotAllowed, c.params[1])
				}
			case "REAL":
				f.bits = 64
				if len(c.params) == 2 {
					switch strings.TrimSpace(c.params[1]) {
					case "32":
						f.bits = 32
					case "64":
					default:
						return "", newErr(errOutOfRange, c.params[1])
					}
				}
			default:
				return "", newErr(errIllegalValue, c.params[0])
			}
			d.mm.Lock()
			f.swapped = d.format.swapped
			d.format = f
			d.mm.Unlock()
			return "", nil
		}},
		{pattern: "FORMat[:DATA]", query: true, fn: func(*call) (string, error) {
			d.mm.Lock()
			defer d.mm.Unlock()
			if d.format.bits == 0 {
				return "ASC,0", nil
			}
			return "REAL," + strconv.Itoa(d.format.bits), nil
		}},
		{pattern: "FORMat:BORDer", minParams: 1, maxParams: 1, fn: func(c *call) (string, error) {
			var sw bool
			switch charParam(c.params[0]) {
			case "NORM", "NORMAL":
			case "SWAP", "SWAPPED":
				sw = true
			default:
				return "", newErr(errIllegalValue, c.params[0])
			}
			d.mm.Lock()
			d.format.swapped = sw
			d.mm.Unlock()
			return "", nil
		}},
		{pattern: "FORMat:BORDer", query: true, fn: func(*call) (string, error) {
			d.mm.Lock()
			defer d.mm.Unlock()
			if d.format.swapped {
				return "SWAP", nil
			}
			return "NORM", nil
		}},
		{pattern: "TRACe:DATA", query: true, fn: func(c *call) (string, error) {
			if err := d.waitPending(c.ctx); err != nil {
				return "", err
			}
			d.mm.Lock()
			defer d.mm.Unlock()
			if !d.hasData {
				return "", newErr(errDataStale, "buffer empty: send INIT first")
			}
			return encodeReadings(d.readings, d.format), nil
		}},
		{pattern: "TRACe:POINts:ACTual", query: true, fn: func(*call) (string, error) {
			d.mm.Lock()
			defer d.mm.Unlock()
			return nr1(len(d.readings)), nil
		}},
	}
}

// encodeReadings writes readings in format f: NR3 values separated by
// commas, or an IEEE 488.2 definite-length arbitrary block (IEEE 488.2
// §8.7.9: "#", one digit n, n digits of length, the bytes) of IEEE 754
// binary reals, most significant byte first unless swapped. Overload and
// not-a-number are the SCPI values ±9.9E37 and 9.91E37 (SCPI-99 vol. 1
// §7.2.1.5), as the nearest float32 in REAL,32.
func encodeReadings(vs []float64, f dmmFormat) string {
	if f.bits == 0 {
		return formatReadings(vs)
	}
	size := f.bits / 8
	var order binary.ByteOrder = binary.BigEndian
	if f.swapped {
		order = binary.LittleEndian
	}
	data := make([]byte, len(vs)*size)
	for i, v := range vs {
		switch {
		case math.IsNaN(v):
			v = 9.91e37
		case math.IsInf(v, 0):
			v = math.Copysign(9.9e37, v)
		}
		if size == 4 {
			order.PutUint32(data[i*4:], math.Float32bits(float32(v)))
		} else {
			order.PutUint64(data[i*8:], math.Float64bits(v))
		}
	}
	n := strconv.Itoa(len(data))
	return "#" + strconv.Itoa(len(n)) + n + string(data)
}
