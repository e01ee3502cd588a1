package archive

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"reflect"
	"testing"
	"time"
)

func forEachBackend(t *testing.T, f func(t *testing.T, b backend)) {
	for _, b := range backends() {
		t.Run(b.name, func(t *testing.T) { f(t, b) })
	}
}

func count(t *testing.T, s *Store, table string) int {
	t.Helper()
	var n int
	if err := s.db.QueryRow("SELECT COUNT(*) FROM " + table).Scan(&n); err != nil {
		t.Fatal(err)
	}
	return n
}

func TestAddTwiceChangesNothing(t *testing.T) {
	forEachBackend(t, func(t *testing.T, b backend) {
		ctx := context.Background()
		s := openStore(t, b.location(t))
		c := sampleCampaign(1, "L2611", "bench-A", 4, 5)
		id, out, err := s.Add(ctx, c)
		if err != nil || out != Added {
			t.Fatalf("first add: %v, %v", out, err)
		}
		counts := map[string]int{}
		for _, tb := range []string{"campaign", "instrument", "unit", "result", "budget", "reading"} {
			counts[tb] = count(t, s, tb)
		}
		want := map[string]int{"campaign": 1, "instrument": 2, "unit": 4, "result": 24, "budget": 72, "reading": 120}
		if !reflect.DeepEqual(counts, want) {
			t.Fatalf("rows after one add %v, want %v", counts, want)
		}
		id2, out, err := s.Add(ctx, c)
		if err != nil || out != Unchanged || id2 != id {
			t.Fatalf("second add: id %d (first %d), %v, %v; want unchanged", id2, id, out, err)
		}
		for tb, n := range want {
			if got := count(t, s, tb); got != n {
				t.Errorf("%s: %d rows after adding twice, want %d", tb, got, n)
			}
		}
		// Reopening (migrations run again) changes nothing either.
		s.Close()
		s = openStore(t, b.location(t))
		_ = s
	})
}

func TestLoadRebuildsTheCampaign(t *testing.T) {
	forEachBackend(t, func(t *testing.T, b backend) {
		ctx := context.Background()
		s := openStore(t, b.location(t))
		c := sampleCampaign(2, "L2612", "bench-B", 2, 3)
		c.Results[0].Resolved = false
		c.Results[0].RatioDB = math.NaN()
		c.Results[0].LowerBoundDB = 131.5
		c.Results[0].Flags = []string{"settle-timeout", "overload"}
		c.Readings[0].Flags = []string{"implausible"}
		c.Readings[1].MeasuredC = 24.93
		c.Units[1].Skipped = "socket empty"
		c.JournalBytes = 123456
		// A frequency point keeps its phase U, noise floor and coverage
		// probability; a frequency point that could not be analysed has
		// no frequency (NULL, read back as NaN).
		c.Results[1].FrequencyHz, c.Results[1].PhaseDeg, c.Results[1].PhaseExpandedUDeg = 1000, -88.5, 0.7
		c.Results[1].NoiseFloorDB = 142.25
		c.Results[2].FrequencyHz, c.Results[2].Verdict = math.NaN(), "no result"
		c.ACReadings = sampleACReadings()
		id, _, err := s.Add(ctx, c)
		if err != nil {
			t.Fatal(err)
		}
		got, err := s.Load(ctx, id)
		if err != nil {
			t.Fatal(err)
		}
		if d := equalCampaign(got, c); d != "" {
			t.Errorf("loaded campaign differs from the stored one:\n%s", d)
		}
	})
}

// equalCampaign compares a and b as printed: NaN equals NaN, a nil
// slice an empty one, times in UTC. It returns "" when equal, else the
// first difference.
func equalCampaign(a, b *Campaign) string {
	norm := func(c *Campaign) string {
		cp := *c
		cp.Started, cp.Finished = cp.Started.UTC(), cp.Finished.UTC()
		rs := append([]Reading(nil), cp.Readings...)
		for i := range rs {
			rs[i].Time = rs[i].Time.UTC()
		}
		cp.Readings = rs
		return fmt.Sprintf("%+v", cp)
	}
	x, y := norm(a), norm(b)
	if x == y {
		return ""
	}
	i := 0
	for i < len(x) && i < len(y) && x[i] == y[i] {
		i++
	}
	lo := max(0, i-80)
	return fmt.Sprintf("got …%s…\nwant …%s…", x[lo:min(len(x), i+80)], y[lo:min(len(y), i+80)])
}

func TestQueryFilters(t *testing.T) {
	forEachBackend(t, func(t *testing.T, b backend) {
		ctx := context.Background()
		s := openStore(t, b.location(t))
		for i, lot := range []string{"L1", "L2", "L3"} {
			bench := "bench-A"
			if i == 2 {
				bench = "bench-B"
			}
			if _, _, err := s.Add(ctx, sampleCampaign(i, lot, bench, 4, 1)); err != nil {
				t.Fatal(err)
			}
		}
		t85, t25, dc := 85.0, 25.0, 0.0
		f37, f37off := 37.28, 37.2759372*1.002
		// One frequency-response result at a swept (not round) frequency.
		fr := sampleCampaign(9, "LF", "bench-F", 1, 0)
		fr.Results = fr.Results[:1]
		fr.Results[0].FrequencyHz = 37.2759372
		fr.Part, fr.Started = "HX-FREQ", time.Date(2026, 2, 1, 0, 0, 0, 0, time.UTC)
		fr.Results[0].Test, fr.Results[0].TemperatureC = "cmrr_ac", 30
		if _, _, err := s.Add(ctx, fr); err != nil {
			t.Fatal(err)
		}
		day := func(d int) time.Time { return time.Date(2026, 3, d, 0, 0, 0, 0, time.UTC) }
		for _, tc := range []struct {
			name string
			f    Filter
			want int
		}{
			{"all", Filter{}, 3*4*3*2 + 1},
			{"lot", Filter{Lot: "L2"}, 24},
			{"part", Filter{Part: "HX-4107"}, 72},
			{"other part", Filter{Part: "HX-9999"}, 0},
			{"unit", Filter{Unit: "U02"}, 18},
			{"test", Filter{Test: "psrr_pos"}, 24},
			{"temperature", Filter{TemperatureC: &t85}, 36},
			{"temperature and test", Filter{TemperatureC: &t25, Test: "cmrr"}, 12},
			{"DC", Filter{FrequencyHz: &dc}, 72},
			{"swept frequency, rounded", Filter{FrequencyHz: &f37}, 1},
			{"swept frequency, 0.2 % off", Filter{FrequencyHz: &f37off}, 0},
			{"bench", Filter{Bench: "bench-B"}, 24},
			{"verdict", Filter{Verdict: "conditional pass"}, 18},
			{"date range", Filter{From: day(2), To: day(3)}, 24}, // seed 1 started 2026-03-02 08:00
			{"from", Filter{From: day(2)}, 48},
			{"lot unit test temperature", Filter{Lot: "L3", Unit: "U01", Test: "cmrr", TemperatureC: &t85}, 1},
		} {
			rows, err := s.Query(ctx, tc.f)
			if err != nil {
				t.Fatalf("%s: %v", tc.name, err)
			}
			if len(rows) != tc.want {
				t.Errorf("%s: %d rows, want %d", tc.name, len(rows), tc.want)
			}
			for _, r := range rows {
				if (tc.f.Lot != "" && r.Lot != tc.f.Lot) || (tc.f.Unit != "" && r.Unit != tc.f.Unit) ||
					(tc.f.Test != "" && r.Test != tc.f.Test) || (tc.f.Bench != "" && r.Bench != tc.f.Bench) ||
					(tc.f.Verdict != "" && r.Verdict != tc.f.Verdict) ||
					(tc.f.TemperatureC != nil && r.TemperatureC != *tc.f.TemperatureC) {
					t.Errorf("%s: row %+v does not match the filter", tc.name, r)
					break
				}
			}
		}
		if rows, _ := s.Query(ctx, Filter{Lot: "L2", Unit: "U03"}); len(rows) == 0 || rows[0].Serial != "S1-03" {
			t.Errorf("serial of L2/U03: %+v", rows)
		}
		list, err := s.List(ctx, Filter{Bench: "bench-A"})
		if err != nil {
			t.Fatal(err)
		}
		if len(list) != 2 || list[0].Lot != "L1" || list[1].Lot != "L2" || list[0].Results != 24 || list[0].Readings != 24 {
			t.Errorf("list bench-A: %+v", list)
		}
	})
}

func TestLongerJournalOfTheSameRunReplacesTheShorter(t *testing.T) {
	forEachBackend(t, func(t *testing.T, b backend) {
		ctx := context.Background()
		s := openStore(t, b.location(t))
		short := sampleCampaign(3, "L5", "bench-A", 2, 2)
		short.Incomplete, short.MissingPoints = true, 12
		short.JournalBytes = 9000
		if _, out, err := s.Add(ctx, short); err != nil || out != Added {
			t.Fatal(out, err)
		}
		long := sampleCampaign(3, "L5", "bench-A", 4, 2)
		long.JournalHash = hashOf("the resumed journal")
		long.JournalBytes = 20000
		_, out, err := s.Add(ctx, long)
		if err != nil || out != Replaced {
			t.Fatalf("add the resumed journal: %v, %v", out, err)
		}
		list, err := s.List(ctx, Filter{})
		if err != nil {
			t.Fatal(err)
		}
		if len(list) != 1 || list[0].JournalHash != long.JournalHash || list[0].Incomplete || list[0].Results != len(long.Results) {
			t.Errorf("after replacing: %+v", list)
		}
		if n := count(t, s, "reading"); n != len(long.Readings) {
			t.Errorf("%d readings, want %d (the shorter journal's gone)", n, len(long.Readings))
		}
	})
}

func TestMigrateFromEmpty(t *testing.T) {
	forEachBackend(t, func(t *testing.T, b backend) {
		s := openStore(t, b.location(t))
		v, err := s.Version(context.Background())
		if err != nil || v != SchemaVersion() {
			t.Fatalf("version %d, %v; want %d", v, err, SchemaVersion())
		}
		if n := count(t, s, "schema_version"); n != len(migrations) {
			t.Errorf("%d schema_version rows, want %d", n, len(migrations))
		}
		for _, tb := range []string{"campaign", "instrument", "unit", "result", "budget", "reading", "ac_reading"} {
			if n := count(t, s, tb); n != 0 {
				t.Errorf("%s has %d rows in a new store", tb, n)
			}
		}
		if got := indexCount(t, s); got != len(migrations[1].SQL) {
			t.Errorf("%d query indexes, want %d", got, len(migrations[1].SQL))
		}
	})
}

// indexCount counts the indexes migration 2 creates.
func indexCount(t *testing.T, s *Store) int {
	t.Helper()
	q := `SELECT COUNT(*) FROM sqlite_master WHERE type = 'index' AND name IN ('campaign_part_lot', 'campaign_started', 'result_campaign', 'result_test', 'budget_campaign', 'reading_campaign', 'instrument_campaign', 'unit_campaign')`
	if s.d.name == "postgres" {
		q = `SELECT COUNT(*) FROM pg_indexes WHERE indexname IN ('campaign_part_lot', 'campaign_started', 'result_campaign', 'result_test', 'budget_campaign', 'reading_campaign', 'instrument_campaign', 'unit_campaign')`
	}
	var n int
	if err := s.db.QueryRow(q).Scan(&n); err != nil {
		t.Fatal(err)
	}
	return n
}

func TestShorterJournalOfAStoredRunIsRefused(t *testing.T) {
	forEachBackend(t, func(t *testing.T, b backend) {
		ctx := context.Background()
		s := openStore(t, b.location(t))
		long := sampleCampaign(3, "L6", "bench-A", 4, 2)
		long.JournalBytes = 20000
		id, out, err := s.Add(ctx, long)
		if err != nil || out != Added {
			t.Fatal(out, err)
		}
		for _, tc := range []struct {
			name  string
			bytes int64 // 0: not known, the stored rows decide
		}{{"shorter by bytes", 9000}, {"as long", 20000}, {"fewer rows, length not known", 0}} {
			short := sampleCampaign(3, "L6", "bench-A", 2, 2)
			short.JournalHash = hashOf("the first half of the journal " + tc.name)
			short.JournalBytes = tc.bytes
			_, _, err := s.Add(ctx, short)
			var se *ShorterJournalError
			if !errors.As(err, &se) || se.Campaign != id || se.Lot != "L6" {
				t.Fatalf("%s: add the shorter journal: %v; want a ShorterJournalError naming campaign %d", tc.name, err, id)
			}
			list, err := s.List(ctx, Filter{})
			if err != nil {
				t.Fatal(err)
			}
			if len(list) != 1 || list[0].JournalHash != long.JournalHash || list[0].Results != len(long.Results) {
				t.Errorf("%s: the stored longer journal changed: %+v", tc.name, list)
			}
		}
	})
}

func TestMigrateFromThePreviousVersion(t *testing.T) {
	forEachBackend(t, func(t *testing.T, b backend) {
		for from := 2; from < SchemaVersion(); from++ {
			t.Run(fmt.Sprintf("from_%d", from), func(t *testing.T) { testMigrateFrom(t, b, from) })
		}
	})
}

func testMigrateFrom(t *testing.T, b backend, from int) {
	ctx := context.Background()
	loc := b.location(t)
	// A store at an earlier version, with a campaign in it, as that
	// release left it (version 2: result without the frequency-point
	// columns, frequency_hz NOT NULL, no journal length; before 4: no
	// frequency-response records).
	old := openAt(t, loc, from)
	c := sampleCampaign(4, "L7", "bench-A", 3, 2)
	c.JournalBytes = 5000
	if err := addAtVersion(old, c, from); err != nil {
		t.Fatal(err)
	}
	if v, _ := old.Version(ctx); v != from {
		t.Fatalf("old store at version %d", v)
	}
	nan := c.Results[0]
	nan.FrequencyHz = math.NaN()
	nanCampaign := sampleCampaign(5, "L8", "bench-A", 1, 1)
	nanCampaign.Results = []Result{nan}
	if err := addAtVersion(old, nanCampaign, from); (err == nil) != (from >= 3) {
		t.Fatalf("version %d store adding a result without a frequency: %v", from, err)
	}
	old.Close()

	s := openStore(t, loc)
	if v, _ := s.Version(ctx); v != SchemaVersion() {
		t.Fatalf("upgraded store at version %d, want %d", v, SchemaVersion())
	}
	if n := indexCount(t, s); n != len(migrations[1].SQL) {
		t.Errorf("upgraded store has %d indexes, want %d", n, len(migrations[1].SQL))
	}
	list, err := s.List(ctx, Filter{Lot: "L7"})
	if err != nil || len(list) != 1 {
		t.Fatalf("list after upgrade: %v, %v", list, err)
	}
	got, err := s.Load(ctx, list[0].ID)
	if err != nil {
		t.Fatal(err)
	}
	want := *c
	if from < 3 {
		// Version 2 kept neither the coverage probability nor the
		// journal's length.
		want.Results = append([]Result(nil), c.Results...)
		for i := range want.Results {
			want.Results[i].Coverage = math.NaN()
		}
		want.JournalBytes = 0
	}
	if d := equalCampaign(got, &want); d != "" {
		t.Errorf("the campaign stored at version %d changed in the upgrade:\n%s", from, d)
	}
	if _, out, err := s.Add(ctx, c); err != nil || out != Unchanged {
		t.Errorf("re-add after upgrade: %v, %v", out, err)
	}
	if from < 3 {
		if _, out, err := s.Add(ctx, nanCampaign); err != nil || out != Added {
			t.Errorf("add a result without a frequency after upgrade: %v, %v", out, err)
		}
	}
	ac := sampleCampaign(6, "L9", "bench-A", 1, 1)
	ac.ACReadings = sampleACReadings()
	if _, out, err := s.Add(ctx, ac); err != nil || out != Added {
		t.Errorf("add frequency-response records after upgrade: %v, %v", out, err)
	}
}

// addAtVersion stores c in a store at an earlier schema version with the
// columns and tables that version had.
func addAtVersion(s *Store, c *Campaign, version int) error {
	ctx := context.Background()
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return err
	}
	defer tx.Rollback()
	var id int64
	cols := `journal_hash, run_key, journal_path, plan_hash, plan_file, name, part, lot,
		operator, notes, bench, started, finished, added, tool, decision_rule, temperatures_c, incomplete, missing_points, integrity`
	params := "$1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14, $15, $16, $17, $18, $19, $20"
	args := []any{c.JournalHash, c.RunKey, c.JournalPath, c.PlanHash, c.PlanFile, c.Name, c.Part, c.Lot,
		c.Operator, c.Notes, c.Bench, timeText(c.Started), timeText(c.Finished), timeText(time.Now()), c.Tool, c.DecisionRule,
		floatsText(c.TemperaturesC), c.Incomplete, c.MissingPoints, c.Integrity}
	if version >= 3 {
		cols, params, args = cols+", journal_bytes", params+", $21", append(args, bytesOrNull(c.JournalBytes))
	}
	if err := tx.QueryRowContext(ctx, `INSERT INTO campaign (`+cols+`) VALUES (`+params+`) RETURNING id`, args...).Scan(&id); err != nil {
		return err
	}
	for _, tr := range childRows(c, id) {
		if tr.table == "ac_reading" && version < 4 {
			continue
		}
		if tr.table == "result" && version < 3 {
			// Version 3 added the last three columns.
			n := len(tr.cols) - 3
			tr.cols = tr.cols[:n]
			for i := range tr.rows {
				tr.rows[i] = tr.rows[i][:n]
			}
		}
		if err := (sqlTx{tx, s}).bulk(ctx, tr.table, tr.cols, tr.rows); err != nil {
			return fmt.Errorf("insert into %s: %w", tr.table, err)
		}
	}
	return tx.Commit()
}

// sampleACReadings are two invented frequency-response records: a
// digitizer record with its channel fits and an AC voltmeter record.
func sampleACReadings() []ACReading {
	at := time.Date(2026, 3, 9, 10, 0, 0, 0, time.UTC)
	return []ACReading{
		{Time: at, BenchSeconds: 12.5, Unit: "U01", Test: "cmrr", TempIndex: 1, TemperatureC: 85, Session: 1, FreqIndex: 2,
			FrequencyHz: 1000, Record: "stimulus", Repeat: 0, GeneratorChannel: "1", GeneratorPeakVolts: 1, GeneratorOffsetVolts: math.NaN(),
			GeneratorOn: true, RateHz: 100000, Samples: 4000, Cycles: 40,
			ChannelFits: `[{"channel":1,"a":0.99,"b":0.01,"c":0}]`, Flags: []string{"clipped"}},
		{Time: at.Add(time.Second), BenchSeconds: 13.5, Unit: "U01", Test: "psrr_pos", FrequencyHz: 60, Record: "floor",
			GeneratorPeakVolts: 0.5, GeneratorOffsetVolts: 0, RateHz: math.NaN(), RMSVolts: []float64{1.25e-3, 3.5e-9}, Problem: "overload"},
	}
}

// openAt opens location and migrates it only up to version.
func openAt(t *testing.T, location string, version int) *Store {
	t.Helper()
	s := &Store{name: location}
	var err error
	if IsPostgres(location) {
		s.d = postgresDialect
		s.db, err = sql.Open("pgx", location)
	} else {
		s.d = sqliteDialect
		s.db, err = sql.Open("sqlite", "file:"+location+"?_pragma=foreign_keys(1)&_txlock=immediate")
	}
	if err != nil {
		t.Fatal(err)
	}
	if err := s.migrate(context.Background(), version); err != nil {
		t.Fatal(err)
	}
	return s
}
