package fit

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"text/tabwriter"
)

// ReadPointsCSV reads hand-taken readings: one reading per line, comma
// separated, columns
//
//	stimulus volts, measured volts [, time seconds]
//
// An optional header row (first non-comment line whose first field is not
// a number) is skipped; lines starting with '#' and blank lines are
// ignored. Every data row must have the column count of the first (2 or 3).
// Errors name the line: "line 7: field 2 "1.2.3" is not a number".
func ReadPointsCSV(r io.Reader) (Points, error) {
	cr := csv.NewReader(r)
	cr.Comment = '#'
	cr.FieldsPerRecord = -1
	cr.TrimLeadingSpace = true
	cr.ReuseRecord = true
	var p Points
	ncol := 0
	first := true
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			var pe *csv.ParseError
			if errors.As(err, &pe) {
				return Points{}, fmt.Errorf("line %d: %v", pe.Line, pe.Err)
			}
			return Points{}, err
		}
		line, _ := cr.FieldPos(0)
		if len(rec) == 1 && strings.TrimSpace(rec[0]) == "" {
			continue
		}
		if first {
			first = false
			if _, err := strconv.ParseFloat(strings.TrimSpace(rec[0]), 64); err != nil {
				continue // header row
			}
		}
		if ncol == 0 {
			if len(rec) != 2 && len(rec) != 3 {
				return Points{}, fmt.Errorf("line %d: %d fields; want stimulus volts, measured volts[, time seconds]", line, len(rec))
			}
			ncol = len(rec)
		}
		if len(rec) != ncol {
			return Points{}, fmt.Errorf("line %d: %d fields, earlier rows have %d", line, len(rec), ncol)
		}
		var v [3]float64
		for i := 0; i < ncol; i++ {
			f := strings.TrimSpace(rec[i])
			x, err := strconv.ParseFloat(f, 64)
			if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
				return Points{}, fmt.Errorf("line %d: field %d %q is not a finite number", line, i+1, f)
			}
			v[i] = x
		}
		p.StimulusVolts = append(p.StimulusVolts, v[0])
		p.MeasuredVolts = append(p.MeasuredVolts, v[1])
		if ncol == 3 {
			p.TimeSeconds = append(p.TimeSeconds, v[2])
		}
	}
	if len(p.StimulusVolts) == 0 {
		return Points{}, errors.New("no readings (want rows of stimulus volts, measured volts[, time seconds])")
	}
	return p, nil
}

// HandFit analyses hand-taken readings: a straight line (with a drift term
// when the readings carry times) of measured volts against stimulus volts,
// the input-referred coefficient k = slope/Gain in µV/V, its GUM budget
// (CoefficientBudget: Type A from the fit, Type B rectangular rows for the
// gain tolerance and, if given, meter and stimulus accuracy) and the ratio
// in dB (RejectionFromBudget), or a lower bound when the coefficient is not
// distinguishable from zero. opt.Stimulus "cm" gives CMRR, "supply" PSRR.
func HandFit(p Points, opt HandOptions) (HandResult, error) {
	if len(p.StimulusVolts) != len(p.MeasuredVolts) || (p.TimeSeconds != nil && len(p.TimeSeconds) != len(p.StimulusVolts)) {
		panic(fmt.Sprintf("fit.HandFit: %d stimulus, %d measured, %d time values", len(p.StimulusVolts), len(p.MeasuredVolts), len(p.TimeSeconds)))
	}
	var quantity string
	switch opt.Stimulus {
	case "cm":
		quantity = "CMRR"
	case "supply":
		quantity = "PSRR"
	default:
		return HandResult{}, fmt.Errorf("stimulus %q: want \"cm\" or \"supply\": %w", opt.Stimulus, ErrBadInput)
	}
	if !(opt.Gain > 0) || math.IsInf(opt.Gain, 0) {
		return HandResult{}, fmt.Errorf("gain %v must be > 0 (1 when the meter reads the input-referred offset directly): %w", opt.Gain, ErrBadInput)
	}
	lf, err := Line(p.StimulusVolts, p.MeasuredVolts, LineOptions{Time: p.TimeSeconds})
	if err != nil {
		return HandResult{}, err
	}
	rej, err := CoefficientRejection(lf, BudgetInputs{
		NoiseGain: opt.Gain, NoiseGainTolRel: opt.GainTol,
		MeterGainPPM: opt.MeterGainPPM, StimulusGainPPM: opt.StimulusGainPPM,
		StimulusOffsetVolts: opt.StimulusOffsetVolts, Coverage: opt.Coverage,
	})
	if err != nil {
		return HandResult{}, err
	}
	return HandResult{
		Stimulus: opt.Stimulus, Quantity: quantity, N: lf.N, Gain: opt.Gain,
		DriftFitted: lf.HasDrift, Slope: lf.Slope.Value, SlopeU: lf.Slope.StdErr,
		Intercept: lf.Intercept.Value, DriftVoltsPerS: lf.Drift.Value,
		ResidualSD: lf.ResidualSD, DOF: lf.DOF,
		CoefficientUVPerV: rej.CoefficientUVPerV, CoefficientStdUUVPerV: rej.StdUncUVPerV,
		RatioDB: rej.RatioDB, ExpandedUDB: rej.ExpandedUDB, LowerDB: rej.LowerDB, UpperDB: rej.UpperDB,
		CoverageK: rej.CoverageK, EffectiveDOF: rej.EffectiveDOF,
		Resolved: rej.Resolved, LowerBoundDB: rej.LowerBoundDB, Budget: rej.Budget.Rows,
	}, nil
}

// WriteText writes a short human-readable summary and the budget table.
func (h HandResult) WriteText(w io.Writer) error {
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "%s from %d readings (stimulus %s, gain %g V/V", h.Quantity, h.N, h.Stimulus, h.Gain)
	if h.DriftFitted {
		fmt.Fprintf(tw, ", drift fitted: %.4g V/s", h.DriftVoltsPerS)
	}
	fmt.Fprintln(tw, ")")
	fmt.Fprintf(tw, "slope\t%.6g V/V\tu = %.3g V/V, residual SD %.3g V, %d dof\n", h.Slope, h.SlopeU, h.ResidualSD, h.DOF)
	fmt.Fprintf(tw, "coefficient\t%.4g µV/V\tu = %.3g µV/V, ν_eff = %s\n", h.CoefficientUVPerV, h.CoefficientStdUUVPerV, dofText(h.EffectiveDOF))
	if h.Resolved {
		fmt.Fprintf(tw, "%s\t%.2f dB\tU = %.2g dB (k = %.3f: %.3f to %.3f dB)\n", h.Quantity, h.RatioDB, h.ExpandedUDB, h.CoverageK, h.LowerDB, h.UpperDB)
	} else {
		fmt.Fprintf(tw, "%s\t≥ %.1f dB\tnot resolved: the coefficient is within its expanded uncertainty of zero\n", h.Quantity, h.LowerBoundDB)
	}
	fmt.Fprintln(tw, "\nbudget\ttype\tdistribution\tvalue\tu\tunit\tc\tcontribution µV/V\tdof")
	for _, r := range h.Budget {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%.6g\t%.3g\t%s\t%.4g\t%.3g\t%s\n", r.Name, r.Kind, r.Distribution, r.Value, r.StdUncertainty, r.Unit, r.Sensitivity, r.Contribution, dofText(r.DOF))
	}
	return tw.Flush()
}

func dofText(d DOF) string {
	if d.IsInf() {
		return "inf"
	}
	return strconv.FormatFloat(float64(d), 'f', 1, 64)
}
