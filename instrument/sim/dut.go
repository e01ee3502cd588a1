package sim

import (
	"bytes"
	_ "embed"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strconv"
	"strings"

	"github.com/pelletier/go-toml/v2"
)

// Fixture kinds a unit may sit in (instrument/sim/doc.go, Physics).
const (
	FixtureNullingLoop = "nulling_loop" // auxiliary-amplifier loop, MIL-STD-883 Method 4003
	FixtureNoiseGain   = "noise_gain"   // closed-loop stage with noise gain K, output free
	FixtureBoard       = "board"        // finished difference amplifier (boards only)
)

// Limits of the DUT description.
const (
	// MinAOLdB is the lowest open-loop gain a simulated op-amp may have.
	MinAOLdB = 80.0
	// MaxAOLdB caps a derived open-loop gain; see deriveCoefficients.
	MaxAOLdB = 200.0
	// identityTolerance is the relative tolerance of kc+kp+kn+ko = 0 when all
	// four ratios are given: |Σ k| ≤ identityTolerance·Σ|k|. 2×10⁻³ covers
	// ratios written to 0.01 dB (each rounding is ≤ 0.058 % in k).
	identityTolerance = 2e-3
	// Switch banks: op-amps on 101..140, boards on 201..240.
	opampBankFirst, opampBankLast = 101, 140
	boardBankFirst, boardBankLast = 201, 240
)

// DUTFile is a resolved description of the parts on the simulated bench:
// every value the physics needs, with defaults and lot draws filled in and
// the coefficients derived. LoadDUT/ParseDUT build it; DefaultDUT returns the
// demo lot.
type DUTFile struct {
	Name   string // file name, for messages
	Seed   int64
	Part   PartSpec
	LotID  string
	Units  []UnitSpec
	Boards []BoardSpec
}

// PartSpec is the op-amp type's ratings and physical constants (the [part]
// table). Voltages in volts, current in amps, times in seconds of bench time.
type PartSpec struct {
	Number                string
	NominalPosVolts       float64 // reference operating point: V+ (default +15)
	NominalNegVolts       float64 // and V− (default −15)
	MaxSupplySpanVolts    float64 // absolute maximum V+ − V− (default 36)
	CMHeadroomPosVolts    float64 // input range top = V+ − this (default 2)
	CMHeadroomNegVolts    float64 // input range bottom = V− + this (default 2)
	OutputHeadroomVolts   float64 // output swing to each rail (default 1.5)
	InputBeyondRailVolts  float64 // absolute maximum input beyond a rail (default 0.3, JEDEC JESD78; common practice)
	MinOperatingSpanVolts float64 // below this span the part does not work (default 4)
	QuiescentAmps         float64 // supply current (default 2 mA)
	ThetaCPerWatt         float64 // die-to-case thermal resistance (default 100 °C/W)
	DieTauSeconds         float64 // die thermal time constant (default 2 s)
	CaseTauSeconds        float64 // case-to-chamber-air time constant (default 90 s)
	GBWHz                 float64 // gain-bandwidth of the type, for units that give none (0: none)
}

// OpAmpSpec is one op-amp's DC error model. The ratios are magnitudes in dB
// at 25 °C, DC, at the reference operating point (nominal rails, mid
// common-mode, output at 0 V); the signed coefficients Kc, Kp, Kn, Ko are
// in V/V with Kc+Kp+Kn+Ko = 0 exactly (the identity derived in fit/doc.go).
type OpAmpSpec struct {
	CMRRdB, PSRRPosdB, PSRRNegdB, AOLdB float64
	Kc, Kp, Kn, Ko                      float64
	AOLDerived                          bool     // A_OL came from the three ratios
	Notes                               []string // how the coefficients were settled

	VosUV            float64 // input offset at the reference point, 25 °C
	DriftUVPerC      float64 // dVos/dT of the die
	GradientUVPerC   float64 // offset per °C of die-to-case disequilibrium (thermal tail)
	CMRRTCdBPerC     float64 // d(CMRR dB)/dT of the case (negative: worse when hot)
	PSRRTCdBPerC     float64 // d(PSRR+ dB)/dT; PSRR− follows from the identity
	AOLTCdBPerC      float64 // d(A_OL dB)/dT
	CurvatureUVPerV2 float64 // Vio += q·(Vcm − (V+ + V−)/2)²
	CMEdgeUV         float64 // Vio departure at the top end of the input range (0.8× at the bottom)
	OutEdgeUV        float64 // Vio departure at the output swing limits
	NoiseNVPerRtHz   float64 // white input noise density
	FlickerCornerHz  float64 // 1/f corner

	// Frequency dependence (optional keys cmrr_pole_hz, psrr_pos_pole_hz,
	// psrr_neg_pole_hz, gbw_hz; 0 = none). Above its pole a coefficient
	// rises 20 dB per decade, k(f) = k_dc·(1 + j·f/f_p), so
	// |k(f)| = |k_dc|·√(1 + (f/f_p)²) and the ratio in dB falls by
	// 10·log10(1 + (f/f_p)²) (a single pole of the ratio; Sedra & Smith,
	// Microelectronic Circuits, single-time-constant networks). GBWHz is
	// the part's gain-bandwidth product: a fixture of noise gain K has the
	// closed-loop response 1/(1 + j·f·K/GBW) (ibid., frequency response of
	// the non-inverting amplifier). The output term ko keeps its DC value
	// (the open-loop gain's own roll-off is not modelled).
	CMRRPoleHz, PSRRPosPoleHz, PSRRNegPoleHz float64
	GBWHz                                    float64
}

// UnitSpec is one op-amp of the lot and where it sits.
type UnitSpec struct {
	ID        string
	Fixture   string  // FixtureNullingLoop or FixtureNoiseGain
	Channel   int     // switch channel, 101..140
	NoiseGain float64 // K = 1 + Rf/Ri, nominal
	// NoiseGainTolerance: the actual K is drawn uniformly within
	// NoiseGain·(1 ± NoiseGainTolerance) when the bench is built.
	NoiseGainTolerance float64
	OpAmp              OpAmpSpec
}

// BoardSpec is one four-resistor difference amplifier board. Its resistors
// are R1 (inverting input), R2 (feedback), R3 (non-inverting input), R4 (to
// ground), nominally R2/R1 = R4/R3 = Gain, each off by ResistorErrors (relative).
type BoardSpec struct {
	ID                string
	Number            string
	Channel           int // 201..240
	Gain              float64
	ResistorTolerance float64
	ResistorErrors    [4]float64
	InputOhms         float64 // nominal R1 = R3
	OpAmp             OpAmpSpec
}

// --- TOML shapes ----------------------------------------------------------

type rawDUT struct {
	Seed   *int64     `toml:"seed"`
	Part   rawPart    `toml:"part"`
	Lot    rawLot     `toml:"lot"`
	Units  []rawUnit  `toml:"unit"`
	Boards []rawBoard `toml:"board"`
}

type rawPart struct {
	Number                string   `toml:"number"`
	NominalPosVolts       *float64 `toml:"nominal_pos_volts"`
	NominalNegVolts       *float64 `toml:"nominal_neg_volts"`
	MaxSupplySpanVolts    *float64 `toml:"max_supply_span_volts"`
	CMHeadroomPosVolts    *float64 `toml:"cm_headroom_pos_volts"`
	CMHeadroomNegVolts    *float64 `toml:"cm_headroom_neg_volts"`
	OutputHeadroomVolts   *float64 `toml:"output_headroom_volts"`
	InputBeyondRailVolts  *float64 `toml:"input_beyond_rail_volts"`
	MinOperatingSpanVolts *float64 `toml:"min_operating_span_volts"`
	QuiescentAmps         *float64 `toml:"quiescent_amps"`
	ThetaCPerWatt         *float64 `toml:"theta_c_per_w"`
	DieTauSeconds         *float64 `toml:"die_tau_s"`
	CaseTauSeconds        *float64 `toml:"case_tau_s"`
	GBWHz                 *float64 `toml:"gbw_hz"`
}

type rawLot struct {
	ID        string   `toml:"id"`
	Count     *int     `toml:"count"`
	Fixture   string   `toml:"fixture"`
	NoiseGain *float64 `toml:"noise_gain"`
	// NoiseGainTolerance is the relative half-width within which each
	// unit's actual K is drawn (uniform) about noise_gain: the fixture
	// resistors' tolerance, which the tool only knows from the plan.
	NoiseGainTolerance *float64 `toml:"noise_gain_tolerance"`
	CMRRdBMean         *float64 `toml:"cmrr_db_mean"`
	CMRRdBSD           *float64 `toml:"cmrr_db_sd"`
	PSRRPosdBMean      *float64 `toml:"psrr_pos_db_mean"`
	PSRRPosdBSD        *float64 `toml:"psrr_pos_db_sd"`
	PSRRNegdBMean      *float64 `toml:"psrr_neg_db_mean"`
	PSRRNegdBSD        *float64 `toml:"psrr_neg_db_sd"`
	VosUVSD            *float64 `toml:"vos_uv_sd"`
	DriftUVPerCSD      *float64 `toml:"drift_uv_per_c_sd"`
}

// rawAmp holds the keys shared by [[unit]] and [board.opamp].
type rawAmp struct {
	CMRRdB           *float64 `toml:"cmrr_db"`
	PSRRPosdB        *float64 `toml:"psrr_pos_db"`
	PSRRNegdB        *float64 `toml:"psrr_neg_db"`
	AOLdB            *float64 `toml:"aol_db"`
	VosUV            *float64 `toml:"vos_uv"`
	DriftUVPerC      *float64 `toml:"drift_uv_per_c"`
	GradientUVPerC   *float64 `toml:"gradient_uv_per_c"`
	CMRRTCdBPerC     *float64 `toml:"cmrr_tc_db_per_c"`
	PSRRTCdBPerC     *float64 `toml:"psrr_tc_db_per_c"`
	AOLTCdBPerC      *float64 `toml:"aol_tc_db_per_c"`
	CurvatureUVPerV2 *float64 `toml:"curvature_uv_per_v2"`
	CMEdgeUV         *float64 `toml:"cm_edge_uv"`
	OutEdgeUV        *float64 `toml:"out_edge_uv"`
	NoiseNVPerRtHz   *float64 `toml:"noise_nv_per_rthz"`
	FlickerCornerHz  *float64 `toml:"flicker_corner_hz"`
	CMRRPoleHz       *float64 `toml:"cmrr_pole_hz"`
	PSRRPosPoleHz    *float64 `toml:"psrr_pos_pole_hz"`
	PSRRNegPoleHz    *float64 `toml:"psrr_neg_pole_hz"`
	GBWHz            *float64 `toml:"gbw_hz"`
}

type rawUnit struct {
	ID        string   `toml:"id"`
	Fixture   string   `toml:"fixture"`
	Channel   string   `toml:"channel"`
	NoiseGain *float64 `toml:"noise_gain"`
	rawAmp
}

type rawBoard struct {
	ID                string    `toml:"id"`
	Number            string    `toml:"number"`
	Channel           string    `toml:"channel"`
	Gain              *float64  `toml:"gain"`
	ResistorTolerance *float64  `toml:"resistor_tolerance"`
	ResistorErrors    []float64 `toml:"resistor_errors"`
	InputOhms         *float64  `toml:"input_resistor_ohms"`
	OpAmp             rawAmp    `toml:"opamp"`
}

//go:embed demo_lot.toml
var demoLotTOML []byte

// DefaultDUT returns the embedded demo lot (invented): ten "HX-4107"
// op-amps of lot "L2611-A" in nulling loops on channels 101..110 and one
// "HB-220" board on channel 201. Each call returns a fresh copy.
func DefaultDUT() *DUTFile {
	d, err := ParseDUT(demoLotTOML, "demo_lot.toml")
	if err != nil {
		panic("sim: embedded demo lot is invalid: " + err.Error())
	}
	return d
}

// LoadDUT reads and resolves a DUT file.
func LoadDUT(path string) (*DUTFile, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("sim: reading DUT file: %w", err)
	}
	return ParseDUT(data, path)
}

// ParseDUT decodes a DUT description (TOML) and resolves it. name is used in
// messages. Unknown keys are errors naming the file, line and key.
func ParseDUT(data []byte, name string) (*DUTFile, error) {
	var raw rawDUT
	dec := toml.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&raw); err != nil {
		return nil, dutDecodeError(name, err)
	}
	loc := newKeyLocator(data)
	r := &resolver{name: name, loc: loc}
	return r.resolve(&raw)
}

func dutDecodeError(name string, err error) error {
	var sm *toml.StrictMissingError
	if errors.As(err, &sm) {
		var msgs []string
		for _, e := range sm.Errors {
			row, _ := e.Position()
			msgs = append(msgs, fmt.Sprintf("%s:%d: unknown key %q", name, row, strings.Join(e.Key(), ".")))
		}
		return fmt.Errorf("sim: DUT file: %s", strings.Join(msgs, "; "))
	}
	var de *toml.DecodeError
	if errors.As(err, &de) {
		row, col := de.Position()
		key := strings.Join(de.Key(), ".")
		if key != "" {
			return fmt.Errorf("sim: DUT file %s:%d:%d: key %q: %s", name, row, col, key, de.Error())
		}
		return fmt.Errorf("sim: DUT file %s:%d:%d: %s", name, row, col, de.Error())
	}
	return fmt.Errorf("sim: DUT file %s: %w", name, err)
}

// keyLocator finds the line of a key for messages about values (the decoder
// reports positions only for syntax and unknown keys). It understands the
// subset of TOML a DUT file uses: [table], [[array]], [a.b] and key = value.
type keyLocator struct {
	lines map[string]int // "unit.2.cmrr_db" -> line; "unit.2" -> header line
}

func newKeyLocator(data []byte) *keyLocator {
	kl := &keyLocator{lines: map[string]int{}}
	counts := map[string]int{}
	prefix := ""
	for i, line := range strings.Split(string(data), "\n") {
		s := strings.TrimSpace(line)
		if j := strings.IndexByte(s, '#'); j >= 0 && !strings.Contains(s[:j], "\"") {
			s = strings.TrimSpace(s[:j])
		}
		switch {
		case strings.HasPrefix(s, "[["):
			name := strings.TrimSpace(strings.Trim(s, "[]"))
			counts[name]++
			prefix = fmt.Sprintf("%s.%d", name, counts[name]-1)
			kl.lines[prefix] = i + 1
		case strings.HasPrefix(s, "["):
			name := strings.TrimSpace(strings.Trim(s, "[]"))
			// A sub-table of the last array element: [board.opamp].
			if head, tail, ok := strings.Cut(name, "."); ok && counts[head] > 0 {
				name = fmt.Sprintf("%s.%d.%s", head, counts[head]-1, tail)
			}
			prefix = name
			kl.lines[prefix] = i + 1
		default:
			if k, _, ok := strings.Cut(s, "="); ok {
				key := strings.Trim(strings.TrimSpace(k), "\"")
				full := key
				if prefix != "" {
					full = prefix + "." + key
				}
				if _, seen := kl.lines[full]; !seen {
					kl.lines[full] = i + 1
				}
			}
		}
	}
	return kl
}

// line returns the line of key (or of its table), 0 if unknown.
func (kl *keyLocator) line(key string) int {
	for k := key; k != ""; {
		if n, ok := kl.lines[k]; ok {
			return n
		}
		i := strings.LastIndexByte(k, '.')
		if i < 0 {
			break
		}
		k = k[:i]
	}
	return 0
}

type resolver struct {
	name    string
	loc     *keyLocator
	partGBW float64 // [part] gbw_hz, the default of each op-amp's
}

// errAt formats a value error with file, line and key.
func (r *resolver) errAt(key, format string, args ...any) error {
	msg := fmt.Sprintf(format, args...)
	if n := r.loc.line(key); n > 0 {
		return fmt.Errorf("sim: DUT file %s:%d: key %q: %s", r.name, n, key, msg)
	}
	return fmt.Errorf("sim: DUT file %s: key %q: %s", r.name, key, msg)
}

func pick(p *float64, def float64) float64 {
	if p != nil {
		return *p
	}
	return def
}

func (r *resolver) resolve(raw *rawDUT) (*DUTFile, error) {
	d := &DUTFile{Name: r.name, Seed: 1}
	if raw.Seed != nil {
		d.Seed = *raw.Seed
	}
	p := raw.Part
	d.Part = PartSpec{
		Number:                p.Number,
		NominalPosVolts:       pick(p.NominalPosVolts, 15),
		NominalNegVolts:       pick(p.NominalNegVolts, -15),
		MaxSupplySpanVolts:    pick(p.MaxSupplySpanVolts, 36),
		CMHeadroomPosVolts:    pick(p.CMHeadroomPosVolts, 2),
		CMHeadroomNegVolts:    pick(p.CMHeadroomNegVolts, 2),
		OutputHeadroomVolts:   pick(p.OutputHeadroomVolts, 1.5),
		InputBeyondRailVolts:  pick(p.InputBeyondRailVolts, 0.3),
		MinOperatingSpanVolts: pick(p.MinOperatingSpanVolts, 4),
		QuiescentAmps:         pick(p.QuiescentAmps, 2e-3),
		ThetaCPerWatt:         pick(p.ThetaCPerWatt, 100),
		DieTauSeconds:         pick(p.DieTauSeconds, 2),
		CaseTauSeconds:        pick(p.CaseTauSeconds, 90),
		GBWHz:                 pick(p.GBWHz, 0),
	}
	if g := d.Part.GBWHz; !(g >= 0 && g <= 1e10) {
		return nil, r.errAt("part.gbw_hz", "%g Hz is outside 0..1e10 Hz", g)
	}
	r.partGBW = d.Part.GBWHz
	if d.Part.Number == "" {
		d.Part.Number = "HX-4107"
	}
	if err := r.checkPart(&d.Part); err != nil {
		return nil, err
	}
	lot := raw.Lot
	d.LotID = lot.ID
	if lot.Fixture != "" && lot.Fixture != FixtureNullingLoop && lot.Fixture != FixtureNoiseGain {
		return nil, r.errAt("lot.fixture", "unknown fixture %q (want %q or %q)", lot.Fixture, FixtureNullingLoop, FixtureNoiseGain)
	}
	for _, c := range []struct {
		key string
		v   *float64
		lo  float64
		hi  float64
	}{
		{"lot.cmrr_db_mean", lot.CMRRdBMean, 40, 200}, {"lot.psrr_pos_db_mean", lot.PSRRPosdBMean, 40, 200},
		{"lot.psrr_neg_db_mean", lot.PSRRNegdBMean, 40, 200}, {"lot.cmrr_db_sd", lot.CMRRdBSD, 0, 30},
		{"lot.psrr_pos_db_sd", lot.PSRRPosdBSD, 0, 30}, {"lot.psrr_neg_db_sd", lot.PSRRNegdBSD, 0, 30},
		{"lot.vos_uv_sd", lot.VosUVSD, 0, 1e4}, {"lot.drift_uv_per_c_sd", lot.DriftUVPerCSD, 0, 100},
		{"lot.noise_gain", lot.NoiseGain, 1, 1e5}, {"lot.noise_gain_tolerance", lot.NoiseGainTolerance, 0, 0.1},
	} {
		if c.v != nil && !(*c.v >= c.lo && *c.v <= c.hi) {
			return nil, r.errAt(c.key, "%g is outside %g..%g", *c.v, c.lo, c.hi)
		}
	}
	count := len(raw.Units)
	if lot.Count != nil {
		if *lot.Count < 0 || *lot.Count > opampBankLast-opampBankFirst+1 {
			return nil, r.errAt("lot.count", "%d units do not fit the switch bank %d..%d", *lot.Count, opampBankFirst, opampBankLast)
		}
		if len(raw.Units) > 0 && *lot.Count != len(raw.Units) {
			return nil, r.errAt("lot.count", "count = %d but %d [[unit]] tables are given; drop count or make them agree", *lot.Count, len(raw.Units))
		}
		count = *lot.Count
	}
	if count > opampBankLast-opampBankFirst+1 {
		return nil, r.errAt("unit", "%d units do not fit the switch bank %d..%d", count, opampBankFirst, opampBankLast)
	}
	used := map[int]string{}
	ids := map[string]bool{}
	for i := 0; i < count; i++ {
		var ru rawUnit
		if i < len(raw.Units) {
			ru = raw.Units[i]
		}
		key := fmt.Sprintf("unit.%d", i)
		rng := rand.New(rand.NewPCG(uint64(d.Seed), uint64(1000+i)))
		u := UnitSpec{ID: ru.ID, Fixture: ru.Fixture, NoiseGain: pick(ru.NoiseGain, pick(lot.NoiseGain, 1000)),
			NoiseGainTolerance: pick(lot.NoiseGainTolerance, 0)}
		if u.ID == "" {
			u.ID = fmt.Sprintf("U%02d", i+1)
		}
		if ids[u.ID] {
			return nil, r.errAt(key+".id", "duplicate id %q", u.ID)
		}
		ids[u.ID] = true
		if u.Fixture == "" {
			u.Fixture = lot.Fixture
		}
		if u.Fixture == "" {
			u.Fixture = FixtureNullingLoop
		}
		if u.Fixture != FixtureNullingLoop && u.Fixture != FixtureNoiseGain {
			return nil, r.errAt(key+".fixture", "unknown fixture %q for an op-amp (want %q or %q)", u.Fixture, FixtureNullingLoop, FixtureNoiseGain)
		}
		if !(u.NoiseGain >= 1 && u.NoiseGain <= 1e5) {
			return nil, r.errAt(key+".noise_gain", "noise gain K = %g is outside 1..1e5", u.NoiseGain)
		}
		ch, err := r.channel(key+".channel", ru.Channel, opampBankFirst+i, opampBankFirst, opampBankLast, used, u.ID)
		if err != nil {
			return nil, err
		}
		u.Channel = ch
		amp, err := r.opamp(key, &ru.rawAmp, &lot, rng, lotDefaults{cmrr: 110, psrrPos: 110, psrrNeg: 104})
		if err != nil {
			return nil, err
		}
		u.OpAmp = amp
		if u.Fixture == FixtureNoiseGain && u.NoiseGain*amp.Ko > 0.1 {
			return nil, r.errAt(key+".noise_gain", "unit %s: noise gain K = %g exceeds 0.1·A_OL = %g (A_OL %.1f dB); the stage's gain error would not be small (keep K ≤ 0.1·A_OL, MIL-STD-883 Method 4001 figure note, secondary source per MIL-STD-883 Methods 4001.1/4003)",
				u.ID, u.NoiseGain, 0.1/amp.Ko, amp.AOLdB)
		}
		d.Units = append(d.Units, u)
	}
	for i, rb := range raw.Boards {
		key := fmt.Sprintf("board.%d", i)
		rng := rand.New(rand.NewPCG(uint64(d.Seed), uint64(5000+i)))
		b := BoardSpec{ID: rb.ID, Number: rb.Number, Gain: pick(rb.Gain, 10),
			ResistorTolerance: pick(rb.ResistorTolerance, 1e-3), InputOhms: pick(rb.InputOhms, 10e3)}
		if b.ID == "" {
			b.ID = fmt.Sprintf("B%02d", i+1)
		}
		if ids[b.ID] {
			return nil, r.errAt(key+".id", "duplicate id %q", b.ID)
		}
		ids[b.ID] = true
		if b.Number == "" {
			b.Number = "HB-220"
		}
		if !(b.Gain >= 1 && b.Gain <= 1000) {
			return nil, r.errAt(key+".gain", "gain %g is outside 1..1000", b.Gain)
		}
		if !(b.ResistorTolerance >= 0 && b.ResistorTolerance <= 0.05) {
			return nil, r.errAt(key+".resistor_tolerance", "%g is outside 0..0.05 (relative, e.g. 0.001 for 0.1 %%)", b.ResistorTolerance)
		}
		if !(b.InputOhms >= 100 && b.InputOhms <= 1e7) {
			return nil, r.errAt(key+".input_resistor_ohms", "%g Ω is outside 100..1e7", b.InputOhms)
		}
		switch len(rb.ResistorErrors) {
		case 0:
			for k := range b.ResistorErrors {
				b.ResistorErrors[k] = b.ResistorTolerance * (2*rng.Float64() - 1)
			}
		case 4:
			for k, e := range rb.ResistorErrors {
				if math.Abs(e) > b.ResistorTolerance*(1+1e-9) {
					return nil, r.errAt(key+".resistor_errors", "R%d error %g exceeds the tolerance %g", k+1, e, b.ResistorTolerance)
				}
				b.ResistorErrors[k] = e
			}
		default:
			return nil, r.errAt(key+".resistor_errors", "want 4 relative errors [R1, R2, R3, R4], got %d", len(rb.ResistorErrors))
		}
		ch, err := r.channel(key+".channel", rb.Channel, boardBankFirst+i, boardBankFirst, boardBankLast, used, b.ID)
		if err != nil {
			return nil, err
		}
		b.Channel = ch
		amp, err := r.opamp(key+".opamp", &rb.OpAmp, &rawLot{}, rng, lotDefaults{cmrr: 110, psrrPos: 106, psrrNeg: 104})
		if err != nil {
			return nil, err
		}
		b.OpAmp = amp
		d.Boards = append(d.Boards, b)
	}
	if len(d.Units) == 0 && len(d.Boards) == 0 {
		return nil, fmt.Errorf("sim: DUT file %s: no units: give [[unit]] tables, [lot] count, or [[board]] tables", r.name)
	}
	return d, nil
}

func (r *resolver) checkPart(p *PartSpec) error {
	checks := []struct {
		key    string
		v      float64
		lo, hi float64
	}{
		{"part.nominal_pos_volts", p.NominalPosVolts, 1, 40},
		{"part.nominal_neg_volts", p.NominalNegVolts, -40, -1},
		{"part.max_supply_span_volts", p.MaxSupplySpanVolts, 2, 80},
		{"part.cm_headroom_pos_volts", p.CMHeadroomPosVolts, 0, 10},
		{"part.cm_headroom_neg_volts", p.CMHeadroomNegVolts, 0, 10},
		{"part.output_headroom_volts", p.OutputHeadroomVolts, 0, 10},
		{"part.input_beyond_rail_volts", p.InputBeyondRailVolts, 0, 5},
		{"part.min_operating_span_volts", p.MinOperatingSpanVolts, 0.5, 40},
		{"part.quiescent_amps", p.QuiescentAmps, 1e-6, 0.1},
		{"part.theta_c_per_w", p.ThetaCPerWatt, 0, 1000},
		{"part.die_tau_s", p.DieTauSeconds, 0.01, 100},
		{"part.case_tau_s", p.CaseTauSeconds, 1, 3600},
	}
	for _, c := range checks {
		if !(c.v >= c.lo && c.v <= c.hi) {
			return r.errAt(c.key, "%g is outside %g..%g", c.v, c.lo, c.hi)
		}
	}
	span := p.NominalPosVolts - p.NominalNegVolts
	if span > p.MaxSupplySpanVolts {
		return r.errAt("part.max_supply_span_volts", "nominal span %g V exceeds the absolute maximum %g V", span, p.MaxSupplySpanVolts)
	}
	if span < p.MinOperatingSpanVolts || span-p.CMHeadroomPosVolts-p.CMHeadroomNegVolts < 1 {
		return r.errAt("part.nominal_pos_volts", "nominal rails %g/%g V leave no input common-mode range", p.NominalPosVolts, p.NominalNegVolts)
	}
	return nil
}

func (r *resolver) channel(key, given string, def, lo, hi int, used map[int]string, id string) (int, error) {
	ch := def
	if given != "" {
		v, err := strconv.Atoi(strings.TrimSpace(given))
		if err != nil {
			return 0, r.errAt(key, "channel %q is not a number like \"%d\"", given, def)
		}
		ch = v
	}
	if ch < lo || ch > hi {
		return 0, r.errAt(key, "channel %d is outside this bank %d..%d", ch, lo, hi)
	}
	if other, ok := used[ch]; ok {
		return 0, r.errAt(key, "channel %d is already used by %s", ch, other)
	}
	used[ch] = id
	return ch, nil
}

type lotDefaults struct{ cmrr, psrrPos, psrrNeg float64 }

// opamp resolves one op-amp: ratios given, drawn from the lot, or defaults;
// then the signed coefficients (deriveCoefficients) and the secondary
// parameters (given or drawn from seeded typical ranges, typical data-sheet figures, common practice).
func (r *resolver) opamp(key string, ra *rawAmp, lot *rawLot, rng *rand.Rand, def lotDefaults) (OpAmpSpec, error) {
	var a OpAmpSpec
	for _, c := range []struct {
		k string
		v *float64
	}{{"cmrr_db", ra.CMRRdB}, {"psrr_pos_db", ra.PSRRPosdB}, {"psrr_neg_db", ra.PSRRNegdB}, {"aol_db", ra.AOLdB}} {
		if c.v != nil && !(*c.v >= 20 && *c.v <= 240) {
			return a, r.errAt(key+"."+c.k, "%g dB is outside 20..240 dB", *c.v)
		}
	}
	if ra.AOLdB != nil && (ra.CMRRdB == nil || ra.PSRRPosdB == nil || ra.PSRRNegdB == nil) {
		return a, r.errAt(key+".aol_db", "aol_db needs cmrr_db, psrr_pos_db and psrr_neg_db in the same table: the four are tied by kc+kp+kn+ko = 0 (the identity derived in fit/doc.go), so A_OL alone cannot be combined with drawn ratios")
	}
	draw := func(given *float64, mean *float64, sd *float64, dflt float64) float64 {
		if given != nil {
			return *given
		}
		m := pick(mean, dflt)
		s := pick(sd, 0)
		return math.Min(160, math.Max(60, m+s*rng.NormFloat64()))
	}
	var co coefficients
	var err error
	for attempt := 0; ; attempt++ {
		cm := draw(ra.CMRRdB, lot.CMRRdBMean, lot.CMRRdBSD, def.cmrr)
		pp := draw(ra.PSRRPosdB, lot.PSRRPosdBMean, lot.PSRRPosdBSD, def.psrrPos)
		pn := draw(ra.PSRRNegdB, lot.PSRRNegdBMean, lot.PSRRNegdBSD, def.psrrNeg)
		co, err = deriveCoefficients(cm, pp, pn, ra.AOLdB)
		allGiven := ra.CMRRdB != nil && ra.PSRRPosdB != nil && ra.PSRRNegdB != nil
		if err == nil {
			if attempt > 0 {
				co.notes = append(co.notes, fmt.Sprintf("lot draw repeated %d time(s): earlier draws needed A_OL < %.0f dB", attempt, MinAOLdB))
			}
			break
		}
		if allGiven || attempt >= 200 {
			return a, r.errAt(key+".cmrr_db", "%v", err)
		}
	}
	a.Kc, a.Kp, a.Kn, a.Ko = co.kc, co.kp, co.kn, co.ko
	a.CMRRdB, a.PSRRPosdB, a.PSRRNegdB, a.AOLdB = ratioDB(co.kc), ratioDB(co.kp), ratioDB(co.kn), ratioDB(co.ko)
	a.AOLDerived = co.derived
	a.Notes = co.notes

	signed := func(lo, hi float64) float64 {
		v := lo + (hi-lo)*rng.Float64()
		if rng.IntN(2) == 0 {
			return -v
		}
		return v
	}
	uniform := func(lo, hi float64) float64 { return lo + (hi-lo)*rng.Float64() }
	vosSD := pick(lot.VosUVSD, 30)
	a.VosUV = pick(ra.VosUV, vosSD*rng.NormFloat64())
	if lot.DriftUVPerCSD != nil && ra.DriftUVPerC == nil {
		a.DriftUVPerC = *lot.DriftUVPerCSD * rng.NormFloat64()
	} else {
		a.DriftUVPerC = pick(ra.DriftUVPerC, signed(0.5, 5))
	}
	a.GradientUVPerC = pick(ra.GradientUVPerC, signed(1, 4))
	a.CMRRTCdBPerC = pick(ra.CMRRTCdBPerC, uniform(-0.05, -0.02))
	a.PSRRTCdBPerC = pick(ra.PSRRTCdBPerC, uniform(-0.05, -0.02))
	a.AOLTCdBPerC = pick(ra.AOLTCdBPerC, uniform(-0.04, -0.01))
	a.CurvatureUVPerV2 = pick(ra.CurvatureUVPerV2, signed(0.002, 0.02))
	a.CMEdgeUV = pick(ra.CMEdgeUV, signed(100, 400))
	a.OutEdgeUV = pick(ra.OutEdgeUV, signed(20, 60))
	a.NoiseNVPerRtHz = pick(ra.NoiseNVPerRtHz, 10)
	a.FlickerCornerHz = pick(ra.FlickerCornerHz, 3)
	a.CMRRPoleHz = pick(ra.CMRRPoleHz, 0)
	a.PSRRPosPoleHz = pick(ra.PSRRPosPoleHz, 0)
	a.PSRRNegPoleHz = pick(ra.PSRRNegPoleHz, 0)
	a.GBWHz = pick(ra.GBWHz, r.partGBW)
	for _, c := range []struct {
		k      string
		v      float64
		lo, hi float64
	}{
		{"vos_uv", a.VosUV, -1e4, 1e4}, {"drift_uv_per_c", a.DriftUVPerC, -100, 100},
		{"gradient_uv_per_c", a.GradientUVPerC, -100, 100},
		{"cmrr_tc_db_per_c", a.CMRRTCdBPerC, -1, 1}, {"psrr_tc_db_per_c", a.PSRRTCdBPerC, -1, 1},
		{"aol_tc_db_per_c", a.AOLTCdBPerC, -1, 1}, {"curvature_uv_per_v2", a.CurvatureUVPerV2, -10, 10},
		{"cm_edge_uv", a.CMEdgeUV, -1e4, 1e4}, {"out_edge_uv", a.OutEdgeUV, -1e4, 1e4},
		{"noise_nv_per_rthz", a.NoiseNVPerRtHz, 0, 1000}, {"flicker_corner_hz", a.FlickerCornerHz, 0, 1000},
		{"cmrr_pole_hz", a.CMRRPoleHz, 0, 1e9}, {"psrr_pos_pole_hz", a.PSRRPosPoleHz, 0, 1e9},
		{"psrr_neg_pole_hz", a.PSRRNegPoleHz, 0, 1e9}, {"gbw_hz", a.GBWHz, 0, 1e10},
	} {
		if !(c.v >= c.lo && c.v <= c.hi) {
			return a, r.errAt(key+"."+c.k, "%g is outside %g..%g", c.v, c.lo, c.hi)
		}
	}
	return a, nil
}

// ratioDB converts a coefficient (V/V) to a rejection ratio in dB:
// 20·log10(1/|k|) (JESD99B k_SVR/k_SVS).
func ratioDB(k float64) float64 { return -20 * math.Log10(math.Abs(k)) }

// coefFromDB converts a ratio in dB to a coefficient magnitude (V/V).
func coefFromDB(db float64) float64 { return math.Pow(10, -db/20) }

type coefficients struct {
	kc, kp, kn, ko float64
	derived        bool
	notes          []string
}

// deriveCoefficients settles the signed coefficients from the ratios
// (the identity derived in fit/doc.go: kc + kp + kn + ko = 0).
//
// Sign convention: ko = +1/A_OL > 0 (the input offset needed to hold the
// output rises with the output, as in the worked example of fit/doc.go).
//
// Three ratios (aol nil): among the sign choices of kc, kp, kn, take the one
// that leaves the smallest positive ko = −(kc + kp + kn), i.e. the highest
// open-loop gain the identity allows. If that gain would exceed MaxAOLdB, ko
// is set to 10^(−MaxAOLdB/20) and the residual is spread over kc, kp, kn in
// proportion to their magnitudes (every ratio moves by the same tiny relative
// amount, far below 0.001 dB), so the identity stays exact. A needed gain
// below MinAOLdB is refused.
//
// Four ratios: the sign choice with the smallest |kc + kp + kn + ko| must
// be within identityTolerance·Σ|k|; the residual is then spread the same
// way so the identity holds exactly. Otherwise the four are refused.
func deriveCoefficients(cmrrDB, psrrPosDB, psrrNegDB float64, aolDB *float64) (coefficients, error) {
	mc, mp, mn := coefFromDB(cmrrDB), coefFromDB(psrrPosDB), coefFromDB(psrrNegDB)
	var out coefficients
	signs := []float64{1, -1}
	if aolDB == nil {
		best := math.Inf(1)
		for _, sc := range signs {
			for _, sp := range signs {
				for _, sn := range signs {
					ko := -(sc*mc + sp*mp + sn*mn)
					if ko >= 0 && ko < best {
						best = ko
						out.kc, out.kp, out.kn = sc*mc, sp*mp, sn*mn
					}
				}
			}
		}
		out.ko = best
		out.derived = true
		if best > coefFromDB(MinAOLdB) {
			return out, fmt.Errorf("CMRR %.2f dB, PSRR+ %.2f dB and PSRR− %.2f dB can hold together only with A_OL ≤ %.1f dB (kc+kp+kn+ko = 0, the identity derived in fit/doc.go: |ko| ≥ the smallest |±kc±kp±kn| = %.3g µV/V); the sim's op-amps need A_OL ≥ %.0f dB — raise the smallest ratio or lower the others",
				cmrrDB, psrrPosDB, psrrNegDB, ratioDB(best), best*1e6, MinAOLdB)
		}
		capK := coefFromDB(MaxAOLdB)
		if best < capK {
			out.ko = capK
			spreadResidual(&out)
			out.notes = append(out.notes, fmt.Sprintf("the three ratios allow A_OL above %.0f dB; A_OL capped at %.0f dB and the residual %.3g µV/V spread over kc, kp, kn in proportion to their size so kc+kp+kn+ko = 0 stays exact",
				MaxAOLdB, MaxAOLdB, (capK-best)*1e6))
		} else {
			out.notes = append(out.notes, fmt.Sprintf("A_OL derived from the three ratios with the signs that give the highest gain: %.2f dB", ratioDB(out.ko)))
		}
		return out, nil
	}
	if *aolDB < MinAOLdB {
		return out, fmt.Errorf("aol_db %.2f dB is below the %.0f dB the sim's op-amps need", *aolDB, MinAOLdB)
	}
	mo := coefFromDB(*aolDB)
	bestRes := math.Inf(1)
	for _, sc := range signs {
		for _, sp := range signs {
			for _, sn := range signs {
				res := sc*mc + sp*mp + sn*mn + mo
				if math.Abs(res) < bestRes {
					bestRes = math.Abs(res)
					out.kc, out.kp, out.kn = sc*mc, sp*mp, sn*mn
				}
			}
		}
	}
	out.ko = mo
	sum := mc + mp + mn + mo
	if bestRes > identityTolerance*sum {
		return out, fmt.Errorf("CMRR %.3f dB, PSRR+ %.3f dB, PSRR− %.3f dB and A_OL %.3f dB break kc+kp+kn+ko = 0 (the identity derived in fit/doc.go) for every sign choice: the best leaves %.4g µV/V, more than %.1g of Σ|k| = %.4g µV/V; drop aol_db to derive it, or correct one ratio",
			cmrrDB, psrrPosDB, psrrNegDB, *aolDB, bestRes*1e6, identityTolerance, sum*1e6)
	}
	spreadResidual(&out)
	out.notes = append(out.notes, fmt.Sprintf("four ratios given; signs chosen so the identity holds; residual %.3g µV/V spread over the four in proportion to their size", bestRes*1e6))
	return out, nil
}

// spreadResidual makes kc+kp+kn+ko exactly zero by moving each coefficient
// by −r·|k_i|/Σ|k| (r the residual), which changes every ratio by the same
// relative amount. ko is left alone when it is the capped value.
func spreadResidual(c *coefficients) {
	r := c.kc + c.kp + c.kn + c.ko
	if r == 0 {
		return
	}
	abs := math.Abs(c.kc) + math.Abs(c.kp) + math.Abs(c.kn)
	if !c.derived {
		abs += math.Abs(c.ko)
		c.ko -= r * math.Abs(c.ko) / abs
	}
	kc := c.kc - r*math.Abs(c.kc)/abs
	kp := c.kp - r*math.Abs(c.kp)/abs
	c.kc, c.kp = kc, kp
	// The last one closes the identity to the last bit.
	c.kn = -(c.kc + c.kp + c.ko)
}
