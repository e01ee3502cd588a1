package archive

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/stdlib"
)

// Outcome says what Add did.
type Outcome int

// Outcomes of Add.
const (
	Added     Outcome = iota // a new campaign
	Unchanged                // the same journal was stored already
	Replaced                 // a longer journal of the same run replaced the stored one
)

// ShorterJournalError refuses a journal of a stored run that is not
// longer than the stored one: the archive keeps the longer journal.
type ShorterJournalError struct {
	Store    string // the store's name
	Campaign int64  // the stored campaign's id
	Part     string
	Lot      string
	// StoredBytes and Bytes are the two journals' lengths (0: not known,
	// then StoredRows and Rows, the stored results and readings, decide).
	StoredBytes, Bytes int64
	StoredRows, Rows   int64
}

func (e *ShorterJournalError) Error() string {
	size := fmt.Sprintf("%d results and readings, the stored one %d", e.Rows, e.StoredRows)
	if e.StoredBytes > 0 && e.Bytes > 0 {
		size = fmt.Sprintf("%d bytes, the stored one %d", e.Bytes, e.StoredBytes)
	}
	return fmt.Sprintf("a shorter journal of a run stored already (%s): archive %s keeps campaign %d (part %s, lot %s); nothing changed",
		size, e.Store, e.Campaign, e.Part, e.Lot)
}

func (o Outcome) String() string {
	switch o {
	case Added:
		return "added"
	case Unchanged:
		return "already in the archive, unchanged"
	case Replaced:
		return "replaced the earlier, shorter journal of the same run"
	}
	return "?"
}

// Add stores c with all its rows in one transaction. A campaign whose
// journal hash is stored already changes nothing (Unchanged); one whose
// run key is stored with another journal hash replaces it when its journal
// is longer (Replaced) and is refused with a *ShorterJournalError when it
// is not (the stored campaign stays).
// It returns the campaign's id in the store.
func (s *Store) Add(ctx context.Context, c *Campaign) (int64, Outcome, error) {
	if c.JournalHash == "" {
		return 0, 0, errors.New("archive: a campaign without a journal hash cannot be stored")
	}
	seen := map[string]bool{}
	for _, u := range c.Units {
		if seen[u.ID] {
			return 0, 0, fmt.Errorf("archive: campaign %s lists unit %q twice", c.Name, u.ID)
		}
		seen[u.ID] = true
	}
	runKey := c.RunKey
	if runKey == "" {
		runKey = c.JournalHash
	}
	if s.d.name == "postgres" {
		// COPY for the rows: a long multi-row INSERT costs PostgreSQL
		// more to parse and plan than to store.
		var id int64
		var out Outcome
		err := s.withPgxTx(ctx, func(tx pgx.Tx) error {
			var err error
			id, out, err = s.add(ctx, pgxTx{tx}, c, runKey)
			return err
		})
		return id, out, err
	}
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return 0, 0, s.wrap("begin", err)
	}
	defer tx.Rollback()
	id, out, err := s.add(ctx, sqlTx{tx, s}, c, runKey)
	if err != nil || out == Unchanged {
		return id, out, err
	}
	if err := tx.Commit(); err != nil {
		return 0, 0, s.wrap("commit the campaign", err)
	}
	return id, out, nil
}

// addTx is what add needs of a transaction; sqlTx and pgxTx provide it.
type addTx interface {
	// storedRuns runs q and returns its (id, journal hash, journal
	// bytes, rows, part, lot) rows.
	storedRuns(ctx context.Context, q string, args ...any) ([]storedRun, error)
	exec(ctx context.Context, q string, args ...any) error
	// insertID runs an INSERT … RETURNING id; ok is false when it
	// inserted nothing.
	insertID(ctx context.Context, q string, args ...any) (id int64, ok bool, err error)
	// bulk inserts rows into table.
	bulk(ctx context.Context, table string, cols []string, rows [][]any) error
}

// storedRun is a stored campaign of the run being added.
type storedRun struct {
	id        int64
	hash      string
	bytes     int64 // -1: not known (stored before schema version 3)
	rows      int64 // its results and readings
	part, lot string
}

func (f *storedRun) scan(sc func(...any) error) error {
	return sc(&f.id, &f.hash, &f.bytes, &f.rows, &f.part, &f.lot)
}

// longer says whether c's journal is longer than the stored one f: by
// bytes when both are known, else by results and readings.
func longer(c *Campaign, f storedRun) bool {
	if f.bytes > 0 && c.JournalBytes > 0 {
		return c.JournalBytes > f.bytes
	}
	return int64(len(c.Results)+len(c.Readings)+len(c.ACReadings)) > f.rows
}

// add does Add's work inside tx, which the caller commits unless the
// outcome is Unchanged.
func (s *Store) add(ctx context.Context, tx addTx, c *Campaign, runKey string) (int64, Outcome, error) {
	outcome := Added
	found, err := tx.storedRuns(ctx, `SELECT c.id, c.journal_hash, COALESCE(c.journal_bytes, -1),
		(SELECT COUNT(*) FROM result r WHERE r.campaign_id = c.id) + (SELECT COUNT(*) FROM reading g WHERE g.campaign_id = c.id)
		+ (SELECT COUNT(*) FROM ac_reading a WHERE a.campaign_id = c.id),
		c.part, c.lot
		FROM campaign c WHERE c.journal_hash = $1 OR c.run_key = $2`, c.JournalHash, runKey)
	if err != nil {
		return 0, 0, s.wrap("look the campaign up", err)
	}
	for _, f := range found {
		if f.hash == c.JournalHash {
			return f.id, Unchanged, nil
		}
	}
	for _, f := range found {
		if !longer(c, f) {
			return 0, 0, &ShorterJournalError{Store: s.name, Campaign: f.id, Part: f.part, Lot: f.lot,
				StoredBytes: max(f.bytes, 0), Bytes: c.JournalBytes, StoredRows: f.rows, Rows: int64(len(c.Results) + len(c.Readings) + len(c.ACReadings))}
		}
	}
	for _, f := range found {
		if err := tx.exec(ctx, `DELETE FROM campaign WHERE id = $1`, f.id); err != nil {
			return 0, 0, s.wrap("replace the earlier journal of the run", err)
		}
		outcome = Replaced
	}

	id, ok, err := tx.insertID(ctx, `INSERT INTO campaign (journal_hash, run_key, journal_path, plan_hash, plan_file, name, part, lot,
		operator, notes, bench, started, finished, added, tool, decision_rule, temperatures_c, incomplete, missing_points, integrity, journal_bytes)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17, $18, $19, $20, $21)
		ON CONFLICT DO NOTHING RETURNING id`,
		c.JournalHash, runKey, c.JournalPath, c.PlanHash, c.PlanFile, c.Name, c.Part, c.Lot,
		c.Operator, c.Notes, c.Bench, timeText(c.Started), timeText(c.Finished), timeText(time.Now()), c.Tool, c.DecisionRule,
		floatsText(c.TemperaturesC), c.Incomplete, c.MissingPoints, c.Integrity, bytesOrNull(c.JournalBytes))
	if err != nil {
		return 0, 0, s.wrap("insert the campaign", err)
	}
	if !ok {
		// Another process stored the same journal between our look-up
		// and the insert (PostgreSQL waits for its commit, then skips).
		return 0, Unchanged, nil
	}
	for _, t := range childRows(c, id) {
		if err := tx.bulk(ctx, t.table, t.cols, t.rows); err != nil {
			return 0, 0, s.wrap("insert into "+t.table, err)
		}
	}
	return id, outcome, nil
}

type tableRows struct {
	table string
	cols  []string
	rows  [][]any
}

// childRows are c's rows of every table but campaign, for campaign id.
func childRows(c *Campaign, id int64) []tableRows {
	var ins, units, results, budgets, readings, acReadings [][]any
	for _, in := range c.Instruments {
		ins = append(ins, []any{id, in.Name, strings.Join(in.Roles, ","), in.Address, in.Identity, in.CalibrationDue})
	}
	for _, u := range c.Units {
		units = append(units, []any{id, u.ID, u.Serial, u.Channel, u.Notes, u.Skipped})
	}
	for i, r := range c.Results {
		results = append(results, []any{id, i, r.Unit, r.Test, r.TemperatureC, num(r.FrequencyHz),
			num(r.CoefficientUVPerV), num(r.CoefficientStdUUVPerV), num(r.CoefficientExpandedUUVPerV),
			num(r.RatioDB), num(r.ExpandedUDB), num(r.CoverageK), num(r.DOFEffective), r.Resolved,
			num(r.LowerBoundDB), num(r.LimitDB), num(r.PhaseDeg), r.Verdict, r.Rule,
			strings.Join(r.Flags, ","), strings.Join(r.Notes, "\n"),
			num(r.PhaseExpandedUDeg), num(r.NoiseFloorDB), num(r.Coverage)})
	}
	for i, b := range c.Budgets {
		budgets = append(budgets, []any{id, i, b.Unit, b.Test, b.TemperatureC, b.FrequencyHz, b.Quantity, b.Component, b.Kind,
			b.Distribution, num(b.Value), b.ValueUnit, num(b.StdUncertainty), num(b.Sensitivity), num(b.Contribution), num(b.DOF)})
	}
	for i, r := range c.Readings {
		readings = append(readings, []any{id, i, timeText(r.Time), num(r.BenchSeconds), r.Unit, r.Test, r.Sweep, r.TemperatureC,
			num(r.MeasuredC), r.Repeat, r.Step, num(r.SetVolts), num(r.ReadVolts), num(r.MeterVolts), num(r.MeterSDVolts),
			r.N, num(r.SettleSeconds), strings.Join(r.Flags, ",")})
	}
	for i, r := range c.ACReadings {
		acReadings = append(acReadings, []any{id, i, timeText(r.Time), num(r.BenchSeconds), r.Unit, r.Test, r.TempIndex,
			r.TemperatureC, r.Session, r.FreqIndex, num(r.FrequencyHz), r.Record, r.Repeat, r.GeneratorChannel,
			num(r.GeneratorPeakVolts), num(r.GeneratorOffsetVolts), r.GeneratorOn, num(r.RateHz), r.Samples, r.Cycles,
			r.ChannelFits, floatsText(r.RMSVolts), strings.Join(r.Flags, ","), r.Problem})
	}
	return []tableRows{
		{"instrument", []string{"campaign_id", "name", "roles", "address", "identity", "calibration_due"}, ins},
		{"unit", []string{"campaign_id", "unit", "serial", "channel", "notes", "skipped"}, units},
		{"result", resultColumns, results},
		{"budget", budgetColumns, budgets},
		{"reading", readingColumns, readings},
		{"ac_reading", acReadingColumns, acReadings},
	}
}

var (
	resultColumns = []string{"campaign_id", "seq", "unit", "test", "temperature_c", "frequency_hz",
		"coefficient_uv_per_v", "std_u_uv_per_v", "expanded_u_uv_per_v", "ratio_db", "expanded_u_db", "coverage_k",
		"dof_effective", "resolved", "lower_bound_db", "limit_db", "phase_deg", "verdict", "rule", "flags", "notes",
		"phase_expanded_u_deg", "noise_floor_db", "coverage_probability"}
	budgetColumns = []string{"campaign_id", "seq", "unit", "test", "temperature_c", "frequency_hz", "quantity", "component", "kind",
		"distribution", "value", "value_unit", "std_uncertainty", "sensitivity", "contribution", "dof"}
	readingColumns = []string{"campaign_id", "seq", "time", "bench_s", "unit", "test", "sweep", "temperature_c",
		"measured_c", "repeat", "step", "set_volts", "read_volts", "meter_volts", "meter_sd_volts",
		"n", "settle_s", "flags"}
	acReadingColumns = []string{"campaign_id", "seq", "time", "bench_s", "unit", "test", "temp_index", "temperature_c",
		"session", "freq_index", "frequency_hz", "record", "repeat", "generator_channel", "generator_peak_volts",
		"generator_offset_volts", "generator_on", "rate_hz", "samples", "cycles", "channel_fits", "rms_volts", "flags", "problem"}
)

// rowScanner is what *sql.Rows and pgx.Rows share.
type rowScanner interface {
	Next() bool
	Scan(dest ...any) error
	Err() error
}

// collectRuns reads every storedRun rows holds.
func collectRuns(rows rowScanner) ([]storedRun, error) {
	var out []storedRun
	for rows.Next() {
		var f storedRun
		if err := f.scan(rows.Scan); err != nil {
			return nil, err
		}
		out = append(out, f)
	}
	return out, rows.Err()
}

// sqlTx is a database/sql transaction (SQLite).
type sqlTx struct {
	tx *sql.Tx
	s  *Store
}

func (t sqlTx) storedRuns(ctx context.Context, q string, args ...any) ([]storedRun, error) {
	rows, err := t.tx.QueryContext(ctx, q, args...)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	return collectRuns(rows)
}

func (t sqlTx) exec(ctx context.Context, q string, args ...any) error {
	_, err := t.tx.ExecContext(ctx, q, args...)
	return err
}

func (t sqlTx) insertID(ctx context.Context, q string, args ...any) (int64, bool, error) {
	var id int64
	err := t.tx.QueryRowContext(ctx, q, args...).Scan(&id)
	if errors.Is(err, sql.ErrNoRows) {
		return 0, false, nil
	}
	return id, err == nil, err
}

// bulk inserts rows in multi-row statements of up to maxParams
// parameters each.
func (t sqlTx) bulk(ctx context.Context, table string, cols []string, rows [][]any) error {
	s, tx := t.s, t.tx
	if len(rows) == 0 {
		return nil
	}
	per := s.d.maxParams / len(cols)
	if per > 500 {
		per = 500
	}
	head := "INSERT INTO " + table + " (" + strings.Join(cols, ", ") + ") VALUES "
	var stmt *sql.Stmt
	stmtRows := 0
	defer func() {
		if stmt != nil {
			stmt.Close()
		}
	}()
	args := make([]any, 0, per*len(cols))
	for start := 0; start < len(rows); start += per {
		end := min(start+per, len(rows))
		n := end - start
		if stmt == nil || stmtRows != n {
			if stmt != nil {
				stmt.Close()
			}
			var b strings.Builder
			b.WriteString(head)
			p := 1
			for i := 0; i < n; i++ {
				if i > 0 {
					b.WriteString(", ")
				}
				b.WriteByte('(')
				for j := range cols {
					if j > 0 {
						b.WriteString(", ")
					}
					// SQLite looks a named parameter ($N) up by a
					// linear scan, quadratic in a long statement; its
					// anonymous ? binds by position.
					if s.d.name == "sqlite" {
						b.WriteByte('?')
					} else {
						b.WriteByte('$')
						b.WriteString(strconv.Itoa(p))
					}
					p++
				}
				b.WriteByte(')')
			}
			var err error
			if stmt, err = tx.PrepareContext(ctx, b.String()); err != nil {
				return err
			}
			stmtRows = n
		}
		args = args[:0]
		for _, r := range rows[start:end] {
			if len(r) != len(cols) {
				return fmt.Errorf("archive: internal: %d values for %d columns of %s", len(r), len(cols), table)
			}
			args = append(args, r...)
		}
		if _, err := stmt.ExecContext(ctx, args...); err != nil {
			return err
		}
	}
	return nil
}

// bytesOrNull maps an unknown journal length (0) to NULL.
func bytesOrNull(n int64) any {
	if n <= 0 {
		return nil
	}
	return n
}

// num maps NaN ("not available") to NULL.
func num(x float64) any {
	if math.IsNaN(x) {
		return nil
	}
	return x
}

const timeLayout = "2006-01-02T15:04:05.000000000Z"

// timeText is t in UTC with fixed-width nanoseconds, so that text order
// is time order; "" for the zero time.
func timeText(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Format(timeLayout)
}

func parseTime(s string) time.Time {
	if s == "" {
		return time.Time{}
	}
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return time.Time{}
	}
	return t
}

func floatsText(xs []float64) string {
	parts := make([]string, len(xs))
	for i, x := range xs {
		parts[i] = strconv.FormatFloat(x, 'g', -1, 64)
	}
	return strings.Join(parts, ",")
}

func parseFloats(s string) []float64 {
	if s == "" {
		return nil
	}
	var out []float64
	for _, p := range strings.Split(s, ",") {
		if x, err := strconv.ParseFloat(p, 64); err == nil {
			out = append(out, x)
		}
	}
	return out
}

func splitList(s, sep string) []string {
	if s == "" {
		return nil
	}
	return strings.Split(s, sep)
}

// pgxTx is a PostgreSQL transaction on pgx's own connection, for COPY.
type pgxTx struct{ tx pgx.Tx }

func (t pgxTx) storedRuns(ctx context.Context, q string, args ...any) ([]storedRun, error) {
	rows, err := t.tx.Query(ctx, q, args...)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	return collectRuns(rows)
}

func (t pgxTx) exec(ctx context.Context, q string, args ...any) error {
	_, err := t.tx.Exec(ctx, q, args...)
	return err
}

func (t pgxTx) insertID(ctx context.Context, q string, args ...any) (int64, bool, error) {
	var id int64
	err := t.tx.QueryRow(ctx, q, args...).Scan(&id)
	if errors.Is(err, pgx.ErrNoRows) {
		return 0, false, nil
	}
	return id, err == nil, err
}

func (t pgxTx) bulk(ctx context.Context, table string, cols []string, rows [][]any) error {
	if len(rows) == 0 {
		return nil
	}
	_, err := t.tx.CopyFrom(ctx, pgx.Identifier{table}, cols, pgx.CopyFromRows(rows))
	return err
}

// withPgxTx runs f in a transaction on one of the pool's connections,
// unwrapped to pgx's own, and commits when f succeeds.
func (s *Store) withPgxTx(ctx context.Context, f func(pgx.Tx) error) error {
	conn, err := s.db.Conn(ctx)
	if err != nil {
		return s.wrap("connect", err)
	}
	defer conn.Close()
	return conn.Raw(func(dc any) error {
		pc, ok := dc.(*stdlib.Conn)
		if !ok {
			return fmt.Errorf("archive: internal: driver connection %T", dc)
		}
		tx, err := pc.Conn().Begin(ctx)
		if err != nil {
			return s.wrap("begin", err)
		}
		defer tx.Rollback(ctx)
		if err := f(tx); err != nil {
			return err
		}
		if err := tx.Commit(ctx); err != nil {
			return s.wrap("commit the campaign", err)
		}
		return nil
	})
}
