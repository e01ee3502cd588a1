package archive

import (
	"context"
	"database/sql"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
)

// Filter selects campaigns and results; zero fields select everything.
// Text fields match exactly. Temperature matches within 0.005 °C, the
// resolution the report joins temperatures at; frequency within 0.1 %
// (and 0.005 Hz), since swept frequencies are rarely round numbers.
type Filter struct {
	Part, Lot, Unit, Test, Bench string
	// Verdict matches the stored verdict ("pass", "conditional pass",
	// "conditional fail", "fail", "not judged", "no result").
	Verdict      string
	TemperatureC *float64
	FrequencyHz  *float64 // 0 selects DC results
	// From and To bound the campaign's start (From inclusive, To
	// exclusive); zero: unbounded.
	From, To time.Time
	// Campaign selects one campaign by id (0: any).
	Campaign int64
}

// CampaignInfo is one stored campaign without its rows.
type CampaignInfo struct {
	ID            int64
	JournalHash   string
	RunKey        string
	JournalPath   string
	JournalBytes  int64 // 0: not known
	PlanHash      string
	PlanFile      string
	Name          string
	Part          string
	Lot           string
	Operator      string
	Notes         string
	Bench         string
	Started       time.Time
	Finished      time.Time
	Added         time.Time
	Tool          string
	DecisionRule  string
	TemperaturesC []float64
	Incomplete    bool
	MissingPoints int
	Integrity     string
	Results       int // stored results
	Readings      int // stored readings
	ACReadings    int // stored frequency-response records
}

// Row is one stored result with the campaign it belongs to.
type Row struct {
	Campaign    int64
	Part        string
	Lot         string
	Bench       string
	Started     time.Time
	PlanHash    string
	JournalHash string
	// Serial is the unit's serial number from the campaign's unit list
	// ("" when not given): what matches a unit measured again in another
	// campaign or on another bench.
	Serial string
	Result
}

type where struct {
	clauses []string
	args    []any
}

func (w *where) add(clause string, args ...any) {
	for range args {
		clause = strings.Replace(clause, "?", "$"+strconv.Itoa(len(w.args)+1), 1)
		w.args = append(w.args, args[0])
		args = args[1:]
	}
	w.clauses = append(w.clauses, clause)
}

func (w *where) String() string {
	if len(w.clauses) == 0 {
		return ""
	}
	return " WHERE " + strings.Join(w.clauses, " AND ")
}

func campaignWhere(w *where, f Filter) {
	if f.Campaign != 0 {
		w.add("c.id = ?", f.Campaign)
	}
	if f.Part != "" {
		w.add("c.part = ?", f.Part)
	}
	if f.Lot != "" {
		w.add("c.lot = ?", f.Lot)
	}
	if f.Bench != "" {
		w.add("c.bench = ?", f.Bench)
	}
	if !f.From.IsZero() {
		w.add("c.started >= ?", timeText(f.From))
	}
	if !f.To.IsZero() {
		w.add("c.started < ?", timeText(f.To))
	}
}

func resultWhere(w *where, f Filter) {
	campaignWhere(w, f)
	if f.Unit != "" {
		w.add("r.unit = ?", f.Unit)
	}
	if f.Test != "" {
		w.add("r.test = ?", f.Test)
	}
	if f.Verdict != "" {
		w.add("r.verdict = ?", f.Verdict)
	}
	if f.TemperatureC != nil {
		w.add("r.temperature_c BETWEEN ? AND ?", *f.TemperatureC-0.005, *f.TemperatureC+0.005)
	}
	if f.FrequencyHz != nil {
		// Swept frequencies are rarely round (37.2759… Hz): within 0.1 %
		// (and 0.005 Hz) of the one asked for.
		fz := *f.FrequencyHz
		w.add("r.frequency_hz BETWEEN ? AND ?", fz-math.Abs(fz)*1e-3-0.005, fz+math.Abs(fz)*1e-3+0.005)
	}
}

// List returns the campaigns that f selects (its result fields ignored),
// oldest first.
func (s *Store) List(ctx context.Context, f Filter) ([]CampaignInfo, error) {
	var w where
	campaignWhere(&w, f)
	q := `SELECT c.id, c.journal_hash, c.run_key, c.journal_path, c.plan_hash, c.plan_file, c.name, c.part, c.lot,
		c.operator, c.notes, c.bench, c.started, c.finished, c.added, c.tool, c.decision_rule, c.temperatures_c,
		c.incomplete, c.missing_points, c.integrity, COALESCE(c.journal_bytes, 0),
		(SELECT COUNT(*) FROM result r WHERE r.campaign_id = c.id),
		(SELECT COUNT(*) FROM reading g WHERE g.campaign_id = c.id),
		(SELECT COUNT(*) FROM ac_reading a WHERE a.campaign_id = c.id)
		FROM campaign c` + w.String() + ` ORDER BY c.started, c.id`
	rows, err := s.db.QueryContext(ctx, q, w.args...)
	if err != nil {
		return nil, s.wrap("list campaigns", err)
	}
	defer rows.Close()
	var out []CampaignInfo
	for rows.Next() {
		var c CampaignInfo
		var started, finished, added, temps string
		if err := rows.Scan(&c.ID, &c.JournalHash, &c.RunKey, &c.JournalPath, &c.PlanHash, &c.PlanFile, &c.Name, &c.Part, &c.Lot,
			&c.Operator, &c.Notes, &c.Bench, &started, &finished, &added, &c.Tool, &c.DecisionRule, &temps,
			&c.Incomplete, &c.MissingPoints, &c.Integrity, &c.JournalBytes, &c.Results, &c.Readings, &c.ACReadings); err != nil {
			return nil, s.wrap("list campaigns", err)
		}
		c.Started, c.Finished, c.Added = parseTime(started), parseTime(finished), parseTime(added)
		c.TemperaturesC = parseFloats(temps)
		out = append(out, c)
	}
	if err := rows.Err(); err != nil {
		return nil, s.wrap("list campaigns", err)
	}
	return out, nil
}

// Query returns the results that f selects, ordered by campaign start
// and, within a campaign, as they were added.
func (s *Store) Query(ctx context.Context, f Filter) ([]Row, error) {
	var w where
	resultWhere(&w, f)
	q := `SELECT c.id, c.part, c.lot, c.bench, c.started, c.plan_hash, c.journal_hash,
		r.unit, r.test, r.temperature_c, r.frequency_hz, r.coefficient_uv_per_v, r.std_u_uv_per_v, r.expanded_u_uv_per_v,
		r.ratio_db, r.expanded_u_db, r.coverage_k, r.dof_effective, r.resolved, r.lower_bound_db, r.limit_db, r.phase_deg,
		r.verdict, r.rule, r.flags, r.notes, COALESCE(u.serial, ''), r.phase_expanded_u_deg, r.noise_floor_db, r.coverage_probability
		FROM result r JOIN campaign c ON c.id = r.campaign_id
		LEFT JOIN unit u ON u.campaign_id = r.campaign_id AND u.unit = r.unit` + w.String() +
		` ORDER BY c.started, c.id, r.seq`
	rows, err := s.db.QueryContext(ctx, q, w.args...)
	if err != nil {
		return nil, s.wrap("query results", err)
	}
	defer rows.Close()
	var out []Row
	for rows.Next() {
		var r Row
		var started, flags, notes string
		var fz, coef, stdU, expU, ratio, uDB, k, dof, lower, limit, phase, uPhase, floor, cov sql.NullFloat64
		if err := rows.Scan(&r.Campaign, &r.Part, &r.Lot, &r.Bench, &started, &r.PlanHash, &r.JournalHash,
			&r.Unit, &r.Test, &r.TemperatureC, &fz, &coef, &stdU, &expU,
			&ratio, &uDB, &k, &dof, &r.Resolved, &lower, &limit, &phase,
			&r.Verdict, &r.Rule, &flags, &notes, &r.Serial, &uPhase, &floor, &cov); err != nil {
			return nil, s.wrap("query results", err)
		}
		r.Started = parseTime(started)
		r.CoefficientUVPerV, r.CoefficientStdUUVPerV, r.CoefficientExpandedUUVPerV = val(coef), val(stdU), val(expU)
		r.RatioDB, r.ExpandedUDB, r.CoverageK, r.DOFEffective = val(ratio), val(uDB), val(k), val(dof)
		r.LowerBoundDB, r.LimitDB, r.PhaseDeg = val(lower), val(limit), val(phase)
		r.FrequencyHz, r.PhaseExpandedUDeg, r.NoiseFloorDB, r.Coverage = val(fz), val(uPhase), val(floor), val(cov)
		r.Flags, r.Notes = splitList(flags, ","), splitList(notes, "\n")
		out = append(out, r)
	}
	if err := rows.Err(); err != nil {
		return nil, s.wrap("query results", err)
	}
	return out, nil
}

// val maps NULL back to NaN.
func val(x sql.NullFloat64) float64 {
	if !x.Valid {
		return math.NaN()
	}
	return x.Float64
}

// Load reads one stored campaign with all its rows: enough to rebuild
// every result's statement, its budget, and to refit from the readings.
func (s *Store) Load(ctx context.Context, id int64) (*Campaign, error) {
	list, err := s.List(ctx, Filter{Campaign: id})
	if err != nil {
		return nil, err
	}
	if len(list) == 0 {
		return nil, fmt.Errorf("archive %s: no campaign %d", s.name, id)
	}
	ci := list[0]
	c := &Campaign{JournalHash: ci.JournalHash, RunKey: ci.RunKey, JournalBytes: ci.JournalBytes, JournalPath: ci.JournalPath, PlanHash: ci.PlanHash,
		PlanFile: ci.PlanFile, Name: ci.Name, Part: ci.Part, Lot: ci.Lot, Operator: ci.Operator, Notes: ci.Notes,
		Bench: ci.Bench, Started: ci.Started, Finished: ci.Finished, Tool: ci.Tool, DecisionRule: ci.DecisionRule,
		TemperaturesC: ci.TemperaturesC, Incomplete: ci.Incomplete, MissingPoints: ci.MissingPoints, Integrity: ci.Integrity}

	rows, err := s.Query(ctx, Filter{Campaign: id})
	if err != nil {
		return nil, err
	}
	for _, r := range rows {
		c.Results = append(c.Results, r.Result)
	}
	if err := s.each(ctx, `SELECT name, roles, address, identity, calibration_due FROM instrument WHERE campaign_id = $1 ORDER BY name`, id,
		func(sc func(...any) error) error {
			var in Instrument
			var roles string
			if err := sc(&in.Name, &roles, &in.Address, &in.Identity, &in.CalibrationDue); err != nil {
				return err
			}
			in.Roles = splitList(roles, ",")
			c.Instruments = append(c.Instruments, in)
			return nil
		}); err != nil {
		return nil, err
	}
	if err := s.each(ctx, `SELECT unit, serial, channel, notes, skipped FROM unit WHERE campaign_id = $1 ORDER BY unit`, id,
		func(sc func(...any) error) error {
			var u Unit
			if err := sc(&u.ID, &u.Serial, &u.Channel, &u.Notes, &u.Skipped); err != nil {
				return err
			}
			c.Units = append(c.Units, u)
			return nil
		}); err != nil {
		return nil, err
	}
	if err := s.each(ctx, `SELECT unit, test, temperature_c, frequency_hz, quantity, component, kind, distribution, value, value_unit,
		std_uncertainty, sensitivity, contribution, dof FROM budget WHERE campaign_id = $1 ORDER BY seq`, id,
		func(sc func(...any) error) error {
			var b BudgetRow
			var v, u, sens, contrib, dof sql.NullFloat64
			if err := sc(&b.Unit, &b.Test, &b.TemperatureC, &b.FrequencyHz, &b.Quantity, &b.Component, &b.Kind, &b.Distribution,
				&v, &b.ValueUnit, &u, &sens, &contrib, &dof); err != nil {
				return err
			}
			b.Value, b.StdUncertainty, b.Sensitivity, b.Contribution, b.DOF = val(v), val(u), val(sens), val(contrib), val(dof)
			c.Budgets = append(c.Budgets, b)
			return nil
		}); err != nil {
		return nil, err
	}
	if err := s.each(ctx, `SELECT time, bench_s, unit, test, sweep, temperature_c, measured_c, repeat, step, set_volts, read_volts,
		meter_volts, meter_sd_volts, n, settle_s, flags FROM reading WHERE campaign_id = $1 ORDER BY seq`, id,
		func(sc func(...any) error) error {
			var r Reading
			var t, flags string
			var bs, mc, sv, rv, mv, msd, settle sql.NullFloat64
			if err := sc(&t, &bs, &r.Unit, &r.Test, &r.Sweep, &r.TemperatureC, &mc, &r.Repeat, &r.Step, &sv, &rv,
				&mv, &msd, &r.N, &settle, &flags); err != nil {
				return err
			}
			r.Time = parseTime(t)
			r.BenchSeconds, r.MeasuredC, r.SetVolts, r.ReadVolts = val(bs), val(mc), val(sv), val(rv)
			r.MeterVolts, r.MeterSDVolts, r.SettleSeconds = val(mv), val(msd), val(settle)
			r.Flags = splitList(flags, ",")
			c.Readings = append(c.Readings, r)
			return nil
		}); err != nil {
		return nil, err
	}
	if err := s.each(ctx, `SELECT time, bench_s, unit, test, temp_index, temperature_c, session, freq_index, frequency_hz,
		record, repeat, generator_channel, generator_peak_volts, generator_offset_volts, generator_on, rate_hz, samples, cycles,
		channel_fits, rms_volts, flags, problem FROM ac_reading WHERE campaign_id = $1 ORDER BY seq`, id,
		func(sc func(...any) error) error {
			var r ACReading
			var t, rms, flags string
			var bs, fz, peak, off, rate sql.NullFloat64
			if err := sc(&t, &bs, &r.Unit, &r.Test, &r.TempIndex, &r.TemperatureC, &r.Session, &r.FreqIndex, &fz,
				&r.Record, &r.Repeat, &r.GeneratorChannel, &peak, &off, &r.GeneratorOn, &rate, &r.Samples, &r.Cycles,
				&r.ChannelFits, &rms, &flags, &r.Problem); err != nil {
				return err
			}
			r.Time = parseTime(t)
			r.BenchSeconds, r.FrequencyHz, r.GeneratorPeakVolts, r.GeneratorOffsetVolts, r.RateHz = val(bs), val(fz), val(peak), val(off), val(rate)
			r.RMSVolts, r.Flags = parseFloats(rms), splitList(flags, ",")
			c.ACReadings = append(c.ACReadings, r)
			return nil
		}); err != nil {
		return nil, err
	}
	return c, nil
}

// each runs q with id and calls row for every row.
func (s *Store) each(ctx context.Context, q string, id int64, row func(scan func(...any) error) error) error {
	rows, err := s.db.QueryContext(ctx, q, id)
	if err != nil {
		return s.wrap("load campaign", err)
	}
	defer rows.Close()
	for rows.Next() {
		if err := row(rows.Scan); err != nil {
			return s.wrap("load campaign", err)
		}
	}
	if err := rows.Err(); err != nil {
		return s.wrap("load campaign", err)
	}
	return nil
}
