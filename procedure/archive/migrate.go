package archive

import (
	"context"
	"database/sql"
	"fmt"
	"strings"
	"time"
)

// migration is one step of the schema. Its statements are written once
// for both databases; {{id}} stands for the dialect's auto-numbered
// primary key and {{float}} for a double-precision column.
type migration struct {
	Version int
	Name    string
	SQL     []string
}

// migrations is the schema's history: append, never edit a released step.
var migrations = []migration{
	{1, "campaigns, instruments, units, results, budgets, readings", []string{
		`CREATE TABLE campaign (
			id {{id}},
			journal_hash TEXT NOT NULL UNIQUE,
			run_key TEXT NOT NULL UNIQUE,
			journal_path TEXT NOT NULL,
			plan_hash TEXT NOT NULL,
			plan_file TEXT NOT NULL,
			name TEXT NOT NULL,
			part TEXT NOT NULL,
			lot TEXT NOT NULL,
			operator TEXT NOT NULL,
			notes TEXT NOT NULL,
			bench TEXT NOT NULL,
			started TEXT NOT NULL,
			finished TEXT NOT NULL,
			added TEXT NOT NULL,
			tool TEXT NOT NULL,
			decision_rule TEXT NOT NULL,
			temperatures_c TEXT NOT NULL,
			incomplete BOOLEAN NOT NULL,
			missing_points INTEGER NOT NULL,
			integrity TEXT NOT NULL
		)`,
		`CREATE TABLE instrument (
			campaign_id BIGINT NOT NULL REFERENCES campaign(id) ON DELETE CASCADE,
			name TEXT NOT NULL,
			roles TEXT NOT NULL,
			address TEXT NOT NULL,
			identity TEXT NOT NULL,
			calibration_due TEXT NOT NULL
		)`,
		`CREATE TABLE unit (
			campaign_id BIGINT NOT NULL REFERENCES campaign(id) ON DELETE CASCADE,
			unit TEXT NOT NULL,
			serial TEXT NOT NULL,
			channel TEXT NOT NULL,
			notes TEXT NOT NULL,
			skipped TEXT NOT NULL
		)`,
		`CREATE TABLE result (
			campaign_id BIGINT NOT NULL REFERENCES campaign(id) ON DELETE CASCADE,
			seq INTEGER NOT NULL,
			unit TEXT NOT NULL,
			test TEXT NOT NULL,
			temperature_c {{float}} NOT NULL,
			frequency_hz {{float}} NOT NULL,
			coefficient_uv_per_v {{float}},
			std_u_uv_per_v {{float}},
			expanded_u_uv_per_v {{float}},
			ratio_db {{float}},
			expanded_u_db {{float}},
			coverage_k {{float}},
			dof_effective {{float}},
			resolved BOOLEAN NOT NULL,
			lower_bound_db {{float}},
			limit_db {{float}},
			phase_deg {{float}},
			verdict TEXT NOT NULL,
			rule TEXT NOT NULL,
			flags TEXT NOT NULL,
			notes TEXT NOT NULL
		)`,
		`CREATE TABLE budget (
			campaign_id BIGINT NOT NULL REFERENCES campaign(id) ON DELETE CASCADE,
			seq INTEGER NOT NULL,
			unit TEXT NOT NULL,
			test TEXT NOT NULL,
			temperature_c {{float}} NOT NULL,
			frequency_hz {{float}} NOT NULL,
			quantity TEXT NOT NULL,
			component TEXT NOT NULL,
			kind TEXT NOT NULL,
			distribution TEXT NOT NULL,
			value {{float}},
			value_unit TEXT NOT NULL,
			std_uncertainty {{float}},
			sensitivity {{float}},
			contribution {{float}},
			dof {{float}}
		)`,
		`CREATE TABLE reading (
			campaign_id BIGINT NOT NULL REFERENCES campaign(id) ON DELETE CASCADE,
			seq INTEGER NOT NULL,
			time TEXT NOT NULL,
			bench_s {{float}},
			unit TEXT NOT NULL,
			test TEXT NOT NULL,
			sweep TEXT NOT NULL,
			temperature_c {{float}} NOT NULL,
			measured_c {{float}},
			repeat INTEGER NOT NULL,
			step INTEGER NOT NULL,
			set_volts {{float}},
			read_volts {{float}},
			meter_volts {{float}},
			meter_sd_volts {{float}},
			n INTEGER NOT NULL,
			settle_s {{float}},
			flags TEXT NOT NULL
		)`,
	}},
	{2, "indexes for queries and trends", []string{
		`CREATE INDEX campaign_part_lot ON campaign(part, lot)`,
		`CREATE INDEX campaign_started ON campaign(started)`,
		`CREATE INDEX result_campaign ON result(campaign_id)`,
		`CREATE INDEX result_test ON result(test, temperature_c)`,
		`CREATE INDEX budget_campaign ON budget(campaign_id)`,
		`CREATE INDEX reading_campaign ON reading(campaign_id)`,
		`CREATE INDEX instrument_campaign ON instrument(campaign_id)`,
		`CREATE INDEX unit_campaign ON unit(campaign_id)`,
	}},
	// 3: a frequency point that could not be analysed has no frequency
	// (NULL); a frequency point keeps its phase U, noise floor and
	// coverage probability; a campaign keeps its journal's length, so a
	// shorter journal of a stored run is refused. SQLite cannot drop a NOT
	// NULL constraint, so result is rebuilt (the same statements run on
	// PostgreSQL).
	{3, "nullable result frequency, frequency-point context, journal length", []string{
		`CREATE TABLE result_v3 (
			campaign_id BIGINT NOT NULL REFERENCES campaign(id) ON DELETE CASCADE,
			seq INTEGER NOT NULL,
			unit TEXT NOT NULL,
			test TEXT NOT NULL,
			temperature_c {{float}} NOT NULL,
			frequency_hz {{float}},
			coefficient_uv_per_v {{float}},
			std_u_uv_per_v {{float}},
			expanded_u_uv_per_v {{float}},
			ratio_db {{float}},
			expanded_u_db {{float}},
			coverage_k {{float}},
			dof_effective {{float}},
			resolved BOOLEAN NOT NULL,
			lower_bound_db {{float}},
			limit_db {{float}},
			phase_deg {{float}},
			verdict TEXT NOT NULL,
			rule TEXT NOT NULL,
			flags TEXT NOT NULL,
			notes TEXT NOT NULL,
			phase_expanded_u_deg {{float}},
			noise_floor_db {{float}},
			coverage_probability {{float}}
		)`,
		`INSERT INTO result_v3 (campaign_id, seq, unit, test, temperature_c, frequency_hz, coefficient_uv_per_v,
			std_u_uv_per_v, expanded_u_uv_per_v, ratio_db, expanded_u_db, coverage_k, dof_effective, resolved,
			lower_bound_db, limit_db, phase_deg, verdict, rule, flags, notes)
			SELECT campaign_id, seq, unit, test, temperature_c, frequency_hz, coefficient_uv_per_v,
			std_u_uv_per_v, expanded_u_uv_per_v, ratio_db, expanded_u_db, coverage_k, dof_effective, resolved,
			lower_bound_db, limit_db, phase_deg, verdict, rule, flags, notes FROM result`,
		`DROP TABLE result`,
		`ALTER TABLE result_v3 RENAME TO result`,
		`CREATE INDEX result_campaign ON result(campaign_id)`,
		`CREATE INDEX result_test ON result(test, temperature_c)`,
		`ALTER TABLE campaign ADD COLUMN journal_bytes BIGINT`,
	}},
	// 4: the frequency-response records (sine fits or AC voltmeter
	// readings) as the journal holds them, so a frequency result can be
	// refitted from the archive too.
	{4, "frequency-response records", []string{
		`CREATE TABLE ac_reading (
			campaign_id BIGINT NOT NULL REFERENCES campaign(id) ON DELETE CASCADE,
			seq INTEGER NOT NULL,
			time TEXT NOT NULL,
			bench_s {{float}},
			unit TEXT NOT NULL,
			test TEXT NOT NULL,
			temp_index INTEGER NOT NULL,
			temperature_c {{float}} NOT NULL,
			session INTEGER NOT NULL,
			freq_index INTEGER NOT NULL,
			frequency_hz {{float}},
			record TEXT NOT NULL,
			repeat INTEGER NOT NULL,
			generator_channel TEXT NOT NULL,
			generator_peak_volts {{float}},
			generator_offset_volts {{float}},
			generator_on BOOLEAN NOT NULL,
			rate_hz {{float}},
			samples INTEGER NOT NULL,
			cycles INTEGER NOT NULL,
			channel_fits TEXT NOT NULL,
			rms_volts TEXT NOT NULL,
			flags TEXT NOT NULL,
			problem TEXT NOT NULL
		)`,
		`CREATE INDEX ac_reading_campaign ON ac_reading(campaign_id)`,
	}},
}

// SchemaVersion is the version migrate brings a store to.
func SchemaVersion() int { return migrations[len(migrations)-1].Version }

func (d dialect) ddl(s string) string {
	r := strings.NewReplacer("{{id}}", d.idColumn, "{{float}}", d.floatColumn)
	return r.Replace(s)
}

// migrate brings the store to version target (SchemaVersion for use),
// one transaction per step, each recorded in schema_version. Concurrent
// callers are serialised (SQLite: the immediate write lock; PostgreSQL:
// an advisory lock), so a step is applied once.
func (s *Store) migrate(ctx context.Context, target int) error {
	if err := s.createVersionTable(ctx); err != nil {
		return err
	}
	for _, m := range migrations {
		if m.Version > target {
			break
		}
		if err := s.applyMigration(ctx, m); err != nil {
			return err
		}
	}
	v, err := s.Version(ctx)
	if err != nil {
		return err
	}
	if v > SchemaVersion() {
		return fmt.Errorf("archive %s has schema version %d, newer than this nullbench knows (%d); use a newer nullbench", s.name, v, SchemaVersion())
	}
	return nil
}

// createVersionTable creates schema_version when missing. On PostgreSQL
// two sessions creating the same table at once collide in the catalogue
// even with IF NOT EXISTS, so the creation holds the migration lock.
func (s *Store) createVersionTable(ctx context.Context) error {
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return s.wrap("begin", err)
	}
	defer tx.Rollback()
	if err := s.lockMigrations(ctx, tx); err != nil {
		return err
	}
	if _, err := tx.ExecContext(ctx, `CREATE TABLE IF NOT EXISTS schema_version (
		version INTEGER PRIMARY KEY,
		name TEXT NOT NULL,
		applied TEXT NOT NULL)`); err != nil {
		return s.wrap("create the schema_version table", err)
	}
	if err := tx.Commit(); err != nil {
		return s.wrap("create the schema_version table", err)
	}
	return nil
}

// lockMigrations serialises migrators on PostgreSQL until tx ends (an
// advisory lock; the number is this package's own). SQLite's immediate
// transactions are serialised already.
func (s *Store) lockMigrations(ctx context.Context, tx *sql.Tx) error {
	if s.d.name != "postgres" {
		return nil
	}
	if _, err := tx.ExecContext(ctx, `SELECT pg_advisory_xact_lock(7461029)`); err != nil {
		return s.wrap("lock for migration", err)
	}
	return nil
}

func (s *Store) applyMigration(ctx context.Context, m migration) error {
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return s.wrap("begin migration", err)
	}
	defer tx.Rollback()
	if err := s.lockMigrations(ctx, tx); err != nil {
		return err
	}
	var n int
	if err := tx.QueryRowContext(ctx, `SELECT COUNT(*) FROM schema_version WHERE version = $1`, m.Version).Scan(&n); err != nil {
		return s.wrap("read schema_version", err)
	}
	if n > 0 {
		return nil
	}
	for _, q := range m.SQL {
		if _, err := tx.ExecContext(ctx, s.d.ddl(q)); err != nil {
			return s.wrap(fmt.Sprintf("migration %d (%s)", m.Version, m.Name), err)
		}
	}
	if _, err := tx.ExecContext(ctx, `INSERT INTO schema_version (version, name, applied) VALUES ($1, $2, $3)`,
		m.Version, m.Name, time.Now().UTC().Format(time.RFC3339)); err != nil {
		return s.wrap("record migration", err)
	}
	if err := tx.Commit(); err != nil {
		return s.wrap(fmt.Sprintf("commit migration %d", m.Version), err)
	}
	return nil
}

// Version is the store's schema version (0: empty).
func (s *Store) Version(ctx context.Context) (int, error) {
	var v sql.NullInt64
	if err := s.db.QueryRowContext(ctx, `SELECT MAX(version) FROM schema_version`).Scan(&v); err != nil {
		return 0, s.wrap("read schema_version", err)
	}
	return int(v.Int64), nil
}
