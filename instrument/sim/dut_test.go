package sim

import (
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

func fptr(v float64) *float64 { return &v }

// identityHolds: kc+kp+kn+ko = 0 to the rounding of double arithmetic
// (a few ulps of the largest term).
func identityHolds(c coefficients) bool {
	s := c.kc + c.kp + c.kn + c.ko
	m := math.Abs(c.kc) + math.Abs(c.kp) + math.Abs(c.kn) + math.Abs(c.ko)
	return math.Abs(s) <= 4e-16*m
}

// TestDeriveWorkedExample: worked example of fit/doc.go (invented numbers):
// kc = +10, kp = +4, ko = +0.01 µV/V → kn = −14.01 µV/V; CMRR 100.00 dB,
// PSRR+ 107.96 dB, PSRR− 97.07 dB, A_OL 160 dB.
func TestDeriveWorkedExample(t *testing.T) {
	exact := func(u float64) float64 { return ratioDB(u * 1e-6) }
	cases := []struct {
		name               string
		cmrr, psrrP, psrrN float64
		aol                *float64
		wantAOL            float64
		aolTol             float64
	}{
		// Three ratios at full precision: A_OL derived = 160 dB.
		{"three exact", exact(10), exact(4), exact(14.01), nil, 160, 1e-6},
		// The same written to 0.01 dB as printed in the worked example of fit/doc.go: the
		// derived A_OL is ill-conditioned (ko is a small difference of
		// large terms), so only its order is fixed: 0.01 dB on PSRR− is
		// 0.115 % of 14.01 = 0.016 µV/V, more than ko itself.
		{"three rounded", 100.00, 107.96, 97.07, nil, 158.2, 1.0},
		// Four ratios at 0.01 dB: accepted within the tolerance, then
		// spread so the identity is exact.
		{"four rounded", 100.00, 107.96, 97.07, fptr(160), 160, 0.01},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c, err := deriveCoefficients(tc.cmrr, tc.psrrP, tc.psrrN, tc.aol)
			if err != nil {
				t.Fatal(err)
			}
			if !identityHolds(c) {
				t.Errorf("kc+kp+kn+ko = %g, want 0", c.kc+c.kp+c.kn+c.ko)
			}
			if got := signString(c.kc, c.kp, c.kn, c.ko); got != "++-+" {
				t.Errorf("signs %s, want ++-+", got)
			}
			if got := ratioDB(c.ko); math.Abs(got-tc.wantAOL) > tc.aolTol {
				t.Errorf("A_OL %.4f dB, want %.2f ± %g", got, tc.wantAOL, tc.aolTol)
			}
			// Published check values (the identity derived in fit/doc.go), to 0.01 dB.
			for _, chk := range []struct {
				name string
				k    float64
				want float64
			}{{"CMRR", c.kc, 100.00}, {"PSRR+", c.kp, 107.96}, {"PSRR-", c.kn, 97.07}} {
				if got := ratioDB(chk.k); math.Abs(got-chk.want) > 0.006 {
					t.Errorf("%s %.4f dB, want %.2f", chk.name, got, chk.want)
				}
			}
		})
	}
}

// TestDeriveSignsAndRefusals covers the sign choice (highest A_OL the
// identity allows), the cap at 200 dB, the refusal below 80 dB, and four
// ratios that no sign choice reconciles.
func TestDeriveSignsAndRefusals(t *testing.T) {
	db := func(u float64) float64 { return ratioDB(u * 1e-6) }
	t.Run("highest gain", func(t *testing.T) {
		// Magnitudes 3, 2, 4.5 µV/V: |±3 ±2 ±4.5| is smallest (0.5) for
		// 3 + 2 − 4.5 → ko = −0.5 < 0, so its mirror −3 −2 +4.5 → ko = +0.5.
		c, err := deriveCoefficients(db(3), db(2), db(4.5), nil)
		if err != nil {
			t.Fatal(err)
		}
		if got := signString(c.kc, c.kp, c.kn, c.ko); got != "--++" {
			t.Errorf("signs %s, want --++", got)
		}
		if math.Abs(c.ko*1e6-0.5) > 1e-9 {
			t.Errorf("ko %.6g µV/V, want 0.5", c.ko*1e6)
		}
	})
	t.Run("cap at 200 dB", func(t *testing.T) {
		// 3 + 2 = 5 exactly: the identity allows infinite gain.
		c, err := deriveCoefficients(db(3), db(2), db(5), nil)
		if err != nil {
			t.Fatal(err)
		}
		if got := ratioDB(c.ko); math.Abs(got-MaxAOLdB) > 1e-9 {
			t.Errorf("A_OL %.4f dB, want the cap %.0f dB", got, MaxAOLdB)
		}
		if !identityHolds(c) {
			t.Errorf("identity broken by %g", c.kc+c.kp+c.kn+c.ko)
		}
		for _, k := range []struct {
			got, want float64
		}{{c.kc, 3e-6}, {c.kp, 2e-6}, {c.kn, 5e-6}} {
			if d := math.Abs(ratioDB(k.got) - ratioDB(k.want)); d > 1e-4 {
				t.Errorf("a ratio moved by %.2g dB to keep the identity", d)
			}
		}
		if len(c.notes) == 0 || !strings.Contains(c.notes[0], "capped") {
			t.Errorf("notes %q should say the gain was capped", c.notes)
		}
	})
	t.Run("below 80 dB refused", func(t *testing.T) {
		// PSRR− 70 dB (316 µV/V) against 10 + 10 µV/V: |ko| ≥ 296 µV/V.
		_, err := deriveCoefficients(100, 100, 70, nil)
		if err == nil || !strings.Contains(err.Error(), "A_OL") || !strings.Contains(err.Error(), "80 dB") {
			t.Fatalf("want a refusal naming A_OL and 80 dB, got %v", err)
		}
	})
	t.Run("aol below 80 given", func(t *testing.T) {
		_, err := deriveCoefficients(100, 100, 100, fptr(70))
		if err == nil || !strings.Contains(err.Error(), "80 dB") {
			t.Fatalf("want refusal, got %v", err)
		}
	})
	t.Run("four inconsistent", func(t *testing.T) {
		// 10, 4, 14.01 µV/V with A_OL 120 dB (1 µV/V): best residual 0.99.
		_, err := deriveCoefficients(100, db(4), db(14.01), fptr(120))
		if err == nil || !strings.Contains(err.Error(), "kc+kp+kn+ko = 0") {
			t.Fatalf("want an identity refusal, got %v", err)
		}
	})
}

func TestParseDUTErrors(t *testing.T) {
	cases := []struct {
		name, src string
		want      []string // substrings of the error
	}{
		{"unknown key", "seed = 1\n[[unit]]\nid = \"A\"\ncmrr_dbb = 100\n", []string{"x.toml:4", "unit.cmrr_dbb"}},
		{"unknown table", "seed = 1\n[wrong]\nx = 1\n", []string{"x.toml:", "wrong"}},
		{"syntax", "seed = = 1\n", []string{"x.toml:1"}},
		{"bad ratio", "[[unit]]\nid = \"A\"\n\ncmrr_db = 5\n", []string{"x.toml:4", "unit.0.cmrr_db", "20..240"}},
		{"aol alone", "[[unit]]\nid = \"A\"\naol_db = 120\n", []string{"x.toml:3", "aol_db needs"}},
		{"needs low gain", "[[unit]]\nid = \"A\"\ncmrr_db = 100\npsrr_pos_db = 100\npsrr_neg_db = 70\n", []string{"x.toml:", "A_OL", "80 dB"}},
		{"duplicate id", "[[unit]]\nid = \"A\"\n[[unit]]\nid = \"A\"\n", []string{"x.toml:4", "duplicate id"}},
		{"channel bank", "[[unit]]\nid = \"A\"\nchannel = \"201\"\n", []string{"x.toml:3", "101..140"}},
		{"fixture", "[[unit]]\nfixture = \"board\"\n", []string{"x.toml:2", "unknown fixture"}},
		{"resistor errors", "[[board]]\nresistor_tolerance = 0.001\nresistor_errors = [0.002, 0, 0, 0]\n", []string{"x.toml:3", "exceeds the tolerance"}},
		{"noise gain vs aol", "[[unit]]\nfixture = \"noise_gain\"\nnoise_gain = 20000\ncmrr_db = 100\npsrr_pos_db = 100\npsrr_neg_db = 100\naol_db = 100\n", []string{"0.1·A_OL"}},
		{"empty", "seed = 3\n", []string{"no units"}},
		{"count mismatch", "[lot]\ncount = 3\n[[unit]]\nid = \"A\"\n", []string{"x.toml:2", "count = 3"}},
		{"part span", "[part]\nnominal_pos_volts = 20\nnominal_neg_volts = -20\n[[unit]]\n", []string{"absolute maximum"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ParseDUT([]byte(tc.src), "x.toml")
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q lacks %q", err, w)
				}
			}
		})
	}
}

func TestParseDUTLot(t *testing.T) {
	src := `seed = 5
[lot]
id = "L1"
count = 8
cmrr_db_mean = 110
cmrr_db_sd = 6
psrr_pos_db_mean = 112
psrr_pos_db_sd = 5
psrr_neg_db_mean = 108
psrr_neg_db_sd = 5
`
	a, err := ParseDUT([]byte(src), "lot.toml")
	if err != nil {
		t.Fatal(err)
	}
	b, _ := ParseDUT([]byte(src), "lot.toml")
	if len(a.Units) != 8 || a.LotID != "L1" {
		t.Fatalf("got %d units, lot %q", len(a.Units), a.LotID)
	}
	var mean float64
	for i, u := range a.Units {
		if !reflect.DeepEqual(u.OpAmp, b.Units[i].OpAmp) {
			t.Errorf("unit %d differs between two parses of the same seed", i)
		}
		o := u.OpAmp
		if s := o.Kc + o.Kp + o.Kn + o.Ko; math.Abs(s) > 1e-20 {
			t.Errorf("unit %s: identity off by %g", u.ID, s)
		}
		if o.AOLdB < MinAOLdB || o.Ko <= 0 {
			t.Errorf("unit %s: A_OL %.1f dB, ko %g", u.ID, o.AOLdB, o.Ko)
		}
		if u.Channel != 101+i || u.ID == "" || u.Fixture != FixtureNullingLoop || u.NoiseGain != 1000 {
			t.Errorf("unit %d: %+v", i, u)
		}
		mean += o.CMRRdB / 8
	}
	if math.Abs(mean-110) > 6 {
		t.Errorf("lot CMRR mean %.1f dB, drawn around 110", mean)
	}
}

// TestDefaultDUT checks the demo lot is one that exercises every
// verdict: ten HX-4107 op-amps of the invented lot L2611-A with CMRR
// spread over ~95..130 dB and PSRRs over ~95..125 dB (so some pass and
// some fail), marginal units near a 100 dB limit (so conditional verdicts
// appear), and one HB-220 board with G = 10, 0.1 % resistors and an
// op-amp CMRR of 110 dB.
func TestDefaultDUT(t *testing.T) {
	d := DefaultDUT()
	if len(d.Units) != 10 || len(d.Boards) != 1 || d.Part.Number != "HX-4107" || d.LotID != "L2611-A" {
		t.Fatalf("demo lot: %d units, %d boards, part %q, lot %q", len(d.Units), len(d.Boards), d.Part.Number, d.LotID)
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	marginal := 0
	for _, u := range d.Units {
		o := u.OpAmp
		lo, hi = math.Min(lo, o.CMRRdB), math.Max(hi, o.CMRRdB)
		for _, p := range []float64{o.PSRRPosdB, o.PSRRNegdB} {
			if p < 95 || p > 130 {
				t.Errorf("unit %s PSRR %.1f dB outside 95..130", u.ID, p)
			}
		}
		if math.Abs(o.CMRRdB-100) < 1 {
			marginal++
		}
		if o.AOLdB < 120 || o.AOLdB > 145 {
			t.Errorf("unit %s A_OL %.1f dB", u.ID, o.AOLdB)
		}
	}
	if lo > 100 || hi < 125 {
		t.Errorf("CMRR spread %.1f..%.1f dB, want about 95..130", lo, hi)
	}
	if marginal < 1 || marginal > 2 {
		t.Errorf("%d marginal units near 100 dB, want 1 or 2", marginal)
	}
	b := d.Boards[0]
	if b.Number != "HB-220" || b.Gain != 10 || b.ResistorTolerance != 0.001 || math.Abs(b.OpAmp.CMRRdB-110) > 1e-9 {
		t.Errorf("board %+v", b)
	}
}

// TestDUTFiles parses the DUT files under testdata/ (also the fuzz seeds).
func TestDUTFiles(t *testing.T) {
	files, _ := filepath.Glob("testdata/*.toml")
	if len(files) == 0 {
		t.Skip("no testdata/*.toml")
	}
	for _, f := range files {
		_, err := LoadDUT(f)
		bad := strings.Contains(filepath.Base(f), "bad")
		if bad != (err != nil) {
			t.Errorf("%s: err = %v", f, err)
		}
	}
}

func FuzzParseDUT(f *testing.F) {
	f.Add(demoLotTOML)
	f.Add([]byte("seed = 1\n[[unit]]\ncmrr_db = 100\npsrr_pos_db = 107.96\npsrr_neg_db = 97.07\naol_db = 160\n"))
	f.Add([]byte("[lot]\ncount = 3\ncmrr_db_mean = 110\ncmrr_db_sd = 40\n"))
	f.Add([]byte("[[board]]\nresistor_errors = [0.001, -0.001, 0, 1e-4]\n[board.opamp]\ncmrr_db = 1e300\n"))
	if files, _ := filepath.Glob("testdata/*.toml"); len(files) > 0 {
		for _, p := range files {
			if b, err := os.ReadFile(p); err == nil {
				f.Add(b)
			}
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		d, err := ParseDUT(data, "fuzz.toml")
		if err != nil {
			return
		}
		for _, u := range d.Units {
			o := u.OpAmp
			s := o.Kc + o.Kp + o.Kn + o.Ko
			if math.IsNaN(s) || math.Abs(s) > 1e-12 || o.Ko <= 0 {
				t.Fatalf("unit %s: identity %g, ko %g", u.ID, s, o.Ko)
			}
		}
	})
}
