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
)

// Outcome says what Add did.
type Outcome int

// Outcomes of Add.
const (
	Added     Outcome = iota // a new campaign
	Unchanged                // the same journal was stored already
	Replaced                 // a longer journal of the same run replaced the stored one
)

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
// run key is stored with another journal hash replaces it (Replaced).
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
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return 0, 0, s.wrap("begin", err)
	}
	defer tx.Rollback()

	outcome := Added
	rows, err := tx.QueryContext(ctx, `SELECT id, journal_hash FROM campaign WHERE journal_hash = $1 OR run_key = $2`, c.JournalHash, runKey)
	if err != nil {
		return 0, 0, s.wrap("look the campaign up", err)
	}
	var replace []int64
	for rows.Next() {
		var id int64
		var h string
		if err := rows.Scan(&id, &h); err != nil {
			rows.Close()
			return 0, 0, s.wrap("look the campaign up", err)
		}
		if h == c.JournalHash {
			rows.Close()
			return id, Unchanged, nil
		}
		replace = append(replace, id)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return 0, 0, s.wrap("look the campaign up", err)
	}
	for _, id := range replace {
		if _, err := tx.ExecContext(ctx, `DELETE FROM campaign WHERE id = $1`, id); err != nil {
			return 0, 0, s.wrap("replace the earlier journal of the run", err)
		}
		outcome = Replaced
	}

	var id int64
	err = tx.QueryRowContext(ctx, `INSERT INTO campaign (journal_hash, run_key, journal_path, plan_hash, plan_file, name, part, lot,
		operator, notes, bench, started, finished, added, tool, decision_rule, temperatures_c, incomplete, missing_points, integrity)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17, $18, $19, $20)
		ON CONFLICT DO NOTHING RETURNING id`,
		c.JournalHash, runKey, c.JournalPath, c.PlanHash, c.PlanFile, c.Name, c.Part, c.Lot,
		c.Operator, c.Notes, c.Bench, timeText(c.Started), timeText(c.Finished), timeText(time.Now()), c.Tool, c.DecisionRule,
		floatsText(c.TemperaturesC), c.Incomplete, c.MissingPoints, c.Integrity).Scan(&id)
	if errors.Is(err, sql.ErrNoRows) {
		// Another process stored the same journal between our look-up
		// and the insert (PostgreSQL waits for its commit, then skips).
		return 0, Unchanged, nil
	}
	if err != nil {
		return 0, 0, s.wrap("insert the campaign", err)
	}

	var ins [][]any
	for _, in := range c.Instruments {
		ins = append(ins, []any{id, in.Name, strings.Join(in.Roles, ","), in.Address, in.Identity, in.CalibrationDue})
	}
	if err := s.insertRows(ctx, tx, "instrument", []string{"campaign_id", "name", "roles", "address", "identity", "calibration_due"}, ins); err != nil {
		return 0, 0, err
	}
	ins = ins[:0]
	for _, u := range c.Units {
		ins = append(ins, []any{id, u.ID, u.Serial, u.Channel, u.Notes, u.Skipped})
	}
	if err := s.insertRows(ctx, tx, "unit", []string{"campaign_id", "unit", "serial", "channel", "notes", "skipped"}, ins); err != nil {
		return 0, 0, err
	}
	ins = ins[:0]
	for i, r := range c.Results {
		ins = append(ins, []any{id, i, r.Unit, r.Test, r.TemperatureC, r.FrequencyHz,
			num(r.CoefficientUVPerV), num(r.CoefficientStdUUVPerV), num(r.CoefficientExpandedUUVPerV),
			num(r.RatioDB), num(r.ExpandedUDB), num(r.CoverageK), num(r.DOFEffective), r.Resolved,
			num(r.LowerBoundDB), num(r.LimitDB), num(r.PhaseDeg), r.Verdict, r.Rule,
			strings.Join(r.Flags, ","), strings.Join(r.Notes, "\n")})
	}
	if err := s.insertRows(ctx, tx, "result", resultColumns, ins); err != nil {
		return 0, 0, err
	}
	ins = ins[:0]
	for i, b := range c.Budgets {
		ins = append(ins, []any{id, i, b.Unit, b.Test, b.TemperatureC, b.FrequencyHz, b.Quantity, b.Component, b.Kind,
			b.Distribution, num(b.Value), b.ValueUnit, num(b.StdUncertainty), num(b.Sensitivity), num(b.Contribution), num(b.DOF)})
	}
	if err := s.insertRows(ctx, tx, "budget", budgetColumns, ins); err != nil {
		return 0, 0, err
	}
	ins = ins[:0]
	for i, r := range c.Readings {
		ins = append(ins, []any{id, i, timeText(r.Time), num(r.BenchSeconds), r.Unit, r.Test, r.Sweep, r.TemperatureC,
			num(r.MeasuredC), r.Repeat, r.Step, num(r.SetVolts), num(r.ReadVolts), num(r.MeterVolts), num(r.MeterSDVolts),
			r.N, num(r.SettleSeconds), strings.Join(r.Flags, ",")})
	}
	if err := s.insertRows(ctx, tx, "reading", readingColumns, ins); err != nil {
		return 0, 0, err
	}
	if err := tx.Commit(); err != nil {
		return 0, 0, s.wrap("commit the campaign", err)
	}
	return id, outcome, nil
}

var (
	resultColumns = []string{"campaign_id", "seq", "unit", "test", "temperature_c", "frequency_hz",
		"coefficient_uv_per_v", "std_u_uv_per_v", "expanded_u_uv_per_v", "ratio_db", "expanded_u_db", "coverage_k",
		"dof_effective", "resolved", "lower_bound_db", "limit_db", "phase_deg", "verdict", "rule", "flags", "notes"}
	budgetColumns = []string{"campaign_id", "seq", "unit", "test", "temperature_c", "frequency_hz", "quantity", "component", "kind",
		"distribution", "value", "value_unit", "std_uncertainty", "sensitivity", "contribution", "dof"}
	readingColumns = []string{"campaign_id", "seq", "time", "bench_s", "unit", "test", "sweep", "temperature_c",
		"measured_c", "repeat", "step", "set_volts", "read_volts", "meter_volts", "meter_sd_volts",
		"n", "settle_s", "flags"}
)

// insertRows inserts rows in multi-row statements of up to maxParams
// parameters each.
func (s *Store) insertRows(ctx context.Context, tx *sql.Tx, table string, cols []string, rows [][]any) error {
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
				return s.wrap("prepare insert into "+table, err)
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
			return s.wrap("insert into "+table, err)
		}
	}
	return nil
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
