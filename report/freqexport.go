package report

import (
	"bufio"
	"encoding/json"
	"fmt"
	"io"
	"strconv"
	"strings"
)

// freqCSVHeader is the header of WriteFreqResultsCSV; the names match the
// JSON-lines keys of WriteFreqResultsJSONL. Every figure is the
// input-referred one at frequency_hz:
//
//	coefficient_uv_per_v  |k(f)| in µV/V
//	ratio_db              20·log10(10⁶/|k(f)|) (JEDEC JESD99B); empty
//	                      when not resolved (then lower_bound_db)
//	u_db                  expanded uncertainty U = k·u of ratio_db, dB
//	coverage_k, coverage  k and its two-sided coverage probability
//	phase_deg, u_phase_deg  arg k(f) in degrees (response leading the
//	                      stimulus positive) and its expanded uncertainty;
//	                      empty for an AC voltmeter (magnitude only)
//	noise_floor_db        the largest ratio the setup resolves at f
//	limit_db, decision, rule  the limit at f, the verdict and the decision
//	                      rule (ILAC-G8)
//	note                  the analysis's notes, joined by NotesSeparator
var freqCSVHeader = []string{
	"unit", "part", "lot", "test", "quantity", "temperature_c", "frequency_hz", "instrument",
	"coefficient_uv_per_v", "ratio_db", "u_db", "coverage_k", "coverage", "dof_effective",
	"resolved", "lower_bound_db", "reported_db", "noise_floor_db",
	"phase_deg", "u_phase_deg", "limit_db", "decision", "rule", "flags", "note",
}

// WriteFreqResultsCSV writes one row per frequency-response result
// (unit × test × temperature × frequency) as RFC 4180 CSV, with the
// conventions of WriteResultsCSV (NaN an empty field, shortest float form).
func WriteFreqResultsCSV(w io.Writer, results []FreqResult, opt CSVOptions) error {
	cw := newCSV(w)
	t := opt.text
	if err := cw.Write(freqCSVHeader); err != nil {
		return fmt.Errorf("report: frequency results CSV header: %w", err)
	}
	for i := range results {
		r := &results[i]
		rec := []string{
			t(r.Unit), t(r.Part), t(r.Lot), t(r.Test), t(r.QuantityName()), fnum(r.TemperatureC), fnum(r.FrequencyHz), t(r.Instrument),
			fnum(r.CoefficientUVPerV), fnum(r.RatioDB), fnum(r.ExpandedUDB), fnum(r.CoverageK), fnum(r.Coverage), fnum(r.DOFEffective),
			strconv.FormatBool(r.Resolved), fnum(r.LowerBoundDB), fnum(r.ReportedDB()), fnum(r.NoiseFloorDB),
			fnum(r.PhaseDeg), fnum(r.PhaseExpandedUDeg), fnum(r.LimitDB), t(r.Verdict), t(r.Rule),
			t(strings.Join(r.Flags, ";")), t(strings.Join(r.Notes, NotesSeparator)),
		}
		if err := cw.Write(rec); err != nil {
			return fmt.Errorf("report: frequency results CSV row %d (unit %q): %w", i+1, r.Unit, err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("report: frequency results CSV: %w", err)
	}
	return nil
}

// freqJSON is one line of WriteFreqResultsJSONL (see freqCSVHeader): every
// key of a DC result line (resultJSON, so that a program reading --json
// reads both), then the frequency keys; u_db, decision and note repeat
// expanded_u_db, verdict and notes under the frequency table's names.
type freqJSON struct {
	resultJSON
	Part         string   `json:"part,omitempty"`
	Lot          string   `json:"lot,omitempty"`
	Quantity     string   `json:"quantity"`
	FrequencyHz  jnum     `json:"frequency_hz"`
	Instrument   string   `json:"instrument"`
	UDB          jnum     `json:"u_db"`
	Coverage     jnum     `json:"coverage"`
	NoiseFloorDB jnum     `json:"noise_floor_db"`
	PhaseDeg     jnum     `json:"phase_deg"`
	UPhaseDeg    jnum     `json:"u_phase_deg"`
	Decision     string   `json:"decision"`
	Note         []string `json:"note"`
}

// WriteFreqResultsJSONL writes one JSON object per frequency-response
// result per line: the fields of WriteFreqResultsCSV, NaN and infinities
// as null, note as a list (empty when there is none).
func WriteFreqResultsJSONL(w io.Writer, results []FreqResult) error {
	bw := bufio.NewWriter(w)
	enc := json.NewEncoder(bw)
	enc.SetEscapeHTML(false)
	for i := range results {
		r := &results[i]
		if err := enc.Encode(freqJSON{
			resultJSON: resultLine(&r.Result),
			Part:       r.Part, Lot: r.Lot, Quantity: r.QuantityName(),
			FrequencyHz: jnum(r.FrequencyHz), Instrument: r.Instrument,
			UDB: jnum(r.ExpandedUDB), Coverage: jnum(r.Coverage),
			NoiseFloorDB: jnum(r.NoiseFloorDB), PhaseDeg: jnum(r.PhaseDeg), UPhaseDeg: jnum(r.PhaseExpandedUDeg),
			Decision: r.Verdict, Note: notesOrEmpty(r.Notes),
		}); err != nil {
			return fmt.Errorf("report: frequency results JSON line %d (unit %q): %w", i+1, r.Unit, err)
		}
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("report: frequency results JSON lines: %w", err)
	}
	return nil
}
