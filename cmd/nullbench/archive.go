package main

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"

	"github.com/spf13/cobra"

	"nullbench/procedure/archive"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
	"nullbench/report"
)

// archiveEnv names the archive used when --db is not given; benchEnv the
// bench name stored with campaigns when --bench is not given.
const (
	archiveEnv = "NULLBENCH_ARCHIVE"
	benchEnv   = "NULLBENCH_BENCH"
)

// defaultArchivePath is the archive file in the user's data folder:
// $XDG_DATA_HOME/nullbench/archive.db, else ~/.local/share/nullbench on
// Linux and the BSDs (XDG Base Directory Specification), else the
// folder os.UserConfigDir names (macOS: ~/Library/Application Support,
// Windows: %AppData%).
func defaultArchivePath() (string, error) {
	if d := os.Getenv("XDG_DATA_HOME"); d != "" && filepath.IsAbs(d) {
		return filepath.Join(d, "nullbench", "archive.db"), nil
	}
	if runtime.GOOS != "darwin" && runtime.GOOS != "windows" {
		if home, err := os.UserHomeDir(); err == nil {
			return filepath.Join(home, ".local", "share", "nullbench", "archive.db"), nil
		}
	}
	d, err := os.UserConfigDir()
	if err != nil {
		return "", fmt.Errorf("no --db given and no user data folder to keep the archive in: %w", err)
	}
	return filepath.Join(d, "nullbench", "archive.db"), nil
}

// archiveLocation is --db, else $NULLBENCH_ARCHIVE, else the default file.
func archiveLocation(db string) (string, error) {
	if db != "" {
		return db, nil
	}
	if e := os.Getenv(archiveEnv); e != "" {
		return e, nil
	}
	return defaultArchivePath()
}

func openArchive(ctx context.Context, db string) (*archive.Store, error) {
	loc, err := archiveLocation(db)
	if err != nil {
		return nil, withCode(exitUsage, err)
	}
	s, err := archive.Open(ctx, loc)
	if err != nil {
		return nil, withCode(exitFailure, err)
	}
	return s, nil
}

// queryArchive opens the archive db, returns the results f selects and
// the archive's name for messages, and closes it again.
func queryArchive(ctx context.Context, db string, f archive.Filter) ([]archive.Row, string, error) {
	s, err := openArchive(ctx, db)
	if err != nil {
		return nil, "", err
	}
	defer s.Close()
	rows, err := s.Query(ctx, f)
	if err != nil {
		return nil, "", withCode(exitFailure, err)
	}
	return rows, s.Name(), nil
}

// addArchiveFlag adds --archive to run, resume and demo.
func addArchiveFlag(cmd *cobra.Command, o *outputOptions) {
	cmd.Flags().StringVar(&o.Archive, "archive", "", `add the finished campaign to this results archive (an SQLite file or a postgres:// URL; "default": the one "nullbench archive" uses)`)
}

// archiveMeasured adds the measured records to the archive at db (finish,
// after the workbook): only a run that finished (runErr nil) is added; the
// journal keeps everything, so "archive add" can add it later.
func archiveMeasured(std streams, db string, runErr error, measured []campaignRecord) error {
	if db == "" || len(measured) == 0 {
		return nil
	}
	if runErr != nil {
		fmt.Fprintf(std.Err, "not archived: the run did not finish; resume it with --archive %s, or add it as it is with \"nullbench archive add\"\n", db)
		return nil
	}
	if db == "default" {
		db = ""
	}
	ctx := context.Background() // the run's context may be cancelled by now
	s, err := openArchive(ctx, db)
	if err != nil {
		return withCode(exitFailure, fmt.Errorf("the campaign was measured and its workbook written, but not archived: %w; add it later with \"nullbench archive add %s\"", err, filepath.Dir(measured[0].JournalPath)))
	}
	defer s.Close()
	for _, rec := range measured {
		if err := archiveRecord(ctx, std.Err, s, rec, ""); err != nil {
			return withCode(exitFailure, fmt.Errorf("the campaign was measured and its workbook written, but not archived: %w; add it later with \"nullbench archive add %s\"", err, rec.JournalPath))
		}
	}
	return nil
}

type archiveOptions struct {
	DB string
}

func newArchiveCmd(std streams) *cobra.Command {
	var o archiveOptions
	cmd := &cobra.Command{
		Use:   "archive",
		Short: "Keep campaigns in a results archive (SQLite file or PostgreSQL) and query them across lots, benches and years",
		Long: `archive keeps finished campaigns in one store: an SQLite file in your data
folder by default, or a PostgreSQL database shared by several benches
(--db postgres://USER@HOST/DATABASE). Each campaign keeps its plan hash,
journal hash, bench, instrument identities, part, lot and dates, and each
result its value (µV/V and dB), expanded uncertainty U and coverage factor
k, decision, decision rule, notes and budget rows (a frequency point also
its phase with U, noise floor and coverage probability); the DC readings
and the frequency-response records (sine fits or AC voltmeter readings) are
kept too, so any result can be refitted.

Adding the same journal twice changes nothing; a resumed run's longer
journal replaces the shorter one, and a shorter journal of a stored run is
refused, naming the campaign kept. "run", "resume" and "demo" add what they
measured with --archive DB. "trend" writes lot-to-lot control charts,
yields, tolerance bounds and bench repeatability into a workbook.

Default store: --db, else $NULLBENCH_ARCHIVE, else
$XDG_DATA_HOME/nullbench/archive.db (~/.local/share/nullbench/archive.db).`,
	}
	cmd.PersistentFlags().StringVar(&o.DB, "db", "", "the archive: an SQLite file path or a postgres:// URL (default: $NULLBENCH_ARCHIVE, else the file in your data folder)")
	cmd.AddCommand(newArchiveAddCmd(std, &o), newArchiveListCmd(std, &o), newArchiveQueryCmd(std, &o), newArchiveTrendCmd(std, &o))
	return cmd
}

type archiveAddOptions struct {
	Paths []string
	Plan  string
	Bench string
}

func newArchiveAddCmd(std streams, ao *archiveOptions) *cobra.Command {
	var o archiveAddOptions
	cmd := &cobra.Command{
		Use:   "add RUN-FOLDER|JOURNAL [...]",
		Short: "Add campaigns to the archive from run folders or journals",
		Long: `add refits each journal exactly as "report" does (with the run folder's
own plan and profiles when given a run folder) and stores the campaign
with its results, budgets and readings. A folder without journal.jsonl
(a demo folder) adds every *-journal.jsonl in it. Adding a journal that is
stored already changes nothing.

The bench is --bench, else $NULLBENCH_BENCH, else a name made from the
instruments' identities ("bench-" and 8 hex digits of their hash), so
campaigns from one set of instruments group together.`,
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			o.Paths = args
			return failed(runArchiveAdd(cmd.Context(), std, ao.DB, o))
		},
	}
	cmd.Flags().StringVar(&o.Plan, "plan", "", "the plan file, when there is one journal (default: the run folder's copy, else the path recorded in the journal)")
	cmd.Flags().StringVar(&o.Bench, "bench", "", "the bench's name (default: $NULLBENCH_BENCH, else made from the instruments' identities)")
	return cmd
}

// journalsIn lists the journals a path names: the path itself, a run
// folder's journal.jsonl, or every *-journal.jsonl of another folder.
func journalsIn(path string) ([]string, error) {
	fi, err := os.Stat(path)
	if err != nil {
		return nil, withCode(exitUsage, err)
	}
	if !fi.IsDir() {
		return []string{path}, nil
	}
	j := filepath.Join(path, runJournalName)
	if _, err := os.Stat(j); err == nil {
		return []string{j}, nil
	}
	list, err := filepath.Glob(filepath.Join(path, "*-journal.jsonl"))
	if err != nil {
		return nil, withCode(exitUsage, err)
	}
	if len(list) == 0 {
		return nil, withCode(exitUsage, fmt.Errorf("%s: no %s and no *-journal.jsonl in this folder", path, runJournalName))
	}
	sort.Strings(list)
	return list, nil
}

func runArchiveAdd(ctx context.Context, std streams, db string, o archiveAddOptions) error {
	var journals []string
	for _, p := range o.Paths {
		js, err := journalsIn(p)
		if err != nil {
			return err
		}
		journals = append(journals, js...)
	}
	if o.Plan != "" && len(journals) > 1 {
		return withCode(exitUsage, fmt.Errorf("--plan applies to one journal; %d given", len(journals)))
	}
	var recs []campaignRecord
	for _, j := range journals {
		rec, err := loadJournalRecord(j, o.Plan)
		if err != nil {
			return err
		}
		recs = append(recs, rec)
	}
	s, err := openArchive(ctx, db)
	if err != nil {
		return err
	}
	defer s.Close()
	for _, rec := range recs {
		if err := archiveRecord(ctx, std.Out, s, rec, o.Bench); err != nil {
			return err
		}
	}
	return nil
}

// loadJournalRecord reads one journal with its plan the way report does:
// a run folder's own copy of the plan unless planPath is given.
func loadJournalRecord(j, planPath string) (campaignRecord, error) {
	var (
		folder *runFolder
		p      *plan.Plan
		jc     *journal.Contents
		err    error
	)
	if rf, ferr := openRunFolder(filepath.Dir(j)); ferr == nil && planPath == "" {
		folder = rf
		p, jc, err = planFromFolder(rf, j)
	} else {
		p, jc, err = planForJournal(j, planPath)
	}
	if err != nil {
		return campaignRecord{}, err
	}
	return campaignRecord{Plan: p, Readings: jc.Readings, ACReadings: jc.ACReadings, Identities: jc.Identities,
		Started: jc.Header.Started, JournalPath: j, Folder: folder}, nil
}

// analyseRecord refits one record as finish does: journal state, the DC
// analysis and the frequency response.
func analyseRecord(rec *campaignRecord) error {
	journalState(streams{Out: io.Discard, Err: io.Discard}, rec)
	var resolve profileResolver
	if rec.Folder != nil {
		resolve = rec.Folder.resolver()
	}
	res, err := analyseWith(rec.Plan, rec.Readings, resolve)
	if err != nil {
		return err
	}
	rec.Results = res
	return analyseFreq(rec, resolve)
}

// archiveRecord analyses rec (unless finish did) and adds it to s,
// printing one line of what happened.
func archiveRecord(ctx context.Context, w io.Writer, s *archive.Store, rec campaignRecord, bench string) error {
	if rec.Results == nil {
		if len(rec.Readings) == 0 && len(rec.ACReadings) == 0 {
			fmt.Fprintf(w, "%s: no readings, nothing to archive\n", rec.JournalPath)
			return nil
		}
		if err := analyseRecord(&rec); err != nil {
			return withCode(exitFailure, fmt.Errorf("%s: %w", rec.JournalPath, err))
		}
	}
	c, err := toArchive(rec, toReport(rec), bench)
	if err != nil {
		return withCode(exitFailure, err)
	}
	if c.Integrity != "" {
		fmt.Fprintf(w, "%s: %s; archived with that note\n", rec.JournalPath, c.Integrity)
	}
	id, out, err := s.Add(ctx, c)
	if err != nil {
		// A shorter journal of a stored run is refused by name (the
		// archive keeps the longer one).
		return withCode(exitFailure, fmt.Errorf("%s: %w", rec.JournalPath, err))
	}
	what := fmt.Sprintf("campaign %d (%s, lot %s, bench %s, %d results, %d readings, %d frequency records)", id, c.Part, c.Lot, c.Bench,
		len(c.Results), len(c.Readings), len(c.ACReadings))
	switch out {
	case archive.Added:
		fmt.Fprintf(w, "%s: added to %s as %s\n", rec.JournalPath, s.Name(), what)
	case archive.Unchanged:
		fmt.Fprintf(w, "%s: already in %s as %s; nothing changed\n", rec.JournalPath, s.Name(), what)
	case archive.Replaced:
		fmt.Fprintf(w, "%s: longer than the stored journal of the same run; replaced it in %s, now %s\n", rec.JournalPath, s.Name(), what)
	}
	return nil
}

// journalKeys are the journal's SHA-256, its run key (the SHA-256 of its
// first line, the start record, which a resume leaves as it is) and its
// length in bytes.
func journalKeys(path string) (hash, runKey string, size int64, err error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return "", "", 0, fmt.Errorf("%w: archive: read journal", err)
	}
	h := sha256.Sum256(b)
	first := b
	if i := bytes.IndexByte(b, '\n'); i >= 0 {
		first = b[:i]
	}
	k := sha256.Sum256(first)
	return hex.EncodeToString(h[:]), hex.EncodeToString(k[:]), int64(len(b)), nil
}

// benchName is bench, else $NULLBENCH_BENCH, else "bench-" and 8 hex
// digits of the hash of the instruments' names and *IDN? answers.
func benchName(bench string, ins []report.InstrumentInfo) string {
	if bench != "" {
		return bench
	}
	if e := os.Getenv(benchEnv); e != "" {
		return e
	}
	lines := make([]string, 0, len(ins))
	for _, in := range ins {
		lines = append(lines, in.Name+"\x00"+in.Identity)
	}
	sort.Strings(lines)
	h := sha256.Sum256([]byte(strings.Join(lines, "\n")))
	return "bench-" + hex.EncodeToString(h[:4])
}

// toArchive maps one record's report into the archive's campaign.
func toArchive(rec campaignRecord, c *report.Campaign, bench string) (*archive.Campaign, error) {
	a := &archive.Campaign{
		JournalPath: rec.JournalPath, PlanHash: rec.Plan.Hash, PlanFile: c.PlanFile, Name: c.Name, Part: c.Part, Lot: c.Lot,
		Operator: c.Operator, Notes: c.Notes, Bench: benchName(bench, c.Instruments), Started: c.Started, Finished: c.Finished,
		Tool: c.Generator, DecisionRule: c.DecisionRule, TemperaturesC: rec.Plan.TemperaturePoints(),
		Incomplete: c.Incomplete, MissingPoints: c.MissingPoints, Integrity: c.Integrity,
	}
	if rec.JournalPath == "" {
		return nil, fmt.Errorf("archive: a campaign without a journal cannot be archived")
	}
	var err error
	if a.JournalHash, a.RunKey, a.JournalBytes, err = journalKeys(rec.JournalPath); err != nil {
		return nil, err
	}
	if abs, err := filepath.Abs(rec.JournalPath); err == nil {
		a.JournalPath = abs
	}
	for _, in := range c.Instruments {
		a.Instruments = append(a.Instruments, archive.Instrument{Name: in.Name, Roles: in.Roles, Address: in.Address,
			Identity: in.Identity, CalibrationDue: in.CalibrationDue})
	}
	for _, u := range c.Units {
		a.Units = append(a.Units, archive.Unit{ID: u.ID, Serial: u.Serial, Channel: u.Channel, Notes: u.Notes, Skipped: u.Skipped})
	}
	nan := math.NaN()
	for _, r := range c.Results {
		a.Results = append(a.Results, archiveResult(r, 0, nan, nan, nan, nan))
	}
	for _, r := range c.FreqResults {
		ph, uPh := nan, nan
		if r.HasPhase {
			ph, uPh = r.PhaseDeg, r.PhaseExpandedUDeg
		}
		// A point that could not be analysed has no frequency (NaN,
		// stored as NULL).
		a.Results = append(a.Results, archiveResult(r.Result, r.FrequencyHz, ph, uPh, r.NoiseFloorDB, r.Coverage))
	}
	for _, b := range c.Budgets {
		a.Budgets = append(a.Budgets, archiveBudget(b, 0, ""))
	}
	for _, b := range c.FreqBudgets {
		q := b.Quantity
		if q == "magnitude" {
			q = ""
		}
		a.Budgets = append(a.Budgets, archiveBudget(b.BudgetRow, b.FrequencyHz, q))
	}
	for _, r := range c.Readings {
		a.Readings = append(a.Readings, archive.Reading{Time: r.Time, BenchSeconds: r.BenchSeconds, Unit: r.Unit, Test: r.Test,
			Sweep: r.Sweep, TemperatureC: r.TemperatureC, MeasuredC: r.MeasuredC, Repeat: r.Repeat, Step: r.Step,
			SetVolts: r.SetVolts, ReadVolts: r.ReadVolts, MeterVolts: r.MeterVolts, MeterSDVolts: r.MeterSDVolts,
			N: r.N, SettleSeconds: r.SettleSeconds, Flags: r.Flags})
	}
	for _, r := range rec.ACReadings {
		ar, err := archiveACReading(r)
		if err != nil {
			return nil, err
		}
		a.ACReadings = append(a.ACReadings, ar)
	}
	return a, nil
}

// archiveACReading maps one frequency-response record; its channel fits
// are kept as the journal's JSON, so a refit reads them back unchanged.
func archiveACReading(r journal.ACReading) (archive.ACReading, error) {
	fits := ""
	if len(r.Channels) > 0 {
		b, err := json.Marshal(r.Channels)
		if err != nil {
			return archive.ACReading{}, fmt.Errorf("%w: archive: the channel fits of %s %s at %g Hz", err, r.Unit, r.Test, r.FrequencyHz)
		}
		fits = string(b)
	}
	return archive.ACReading{Time: r.Time, BenchSeconds: r.BenchSeconds, Unit: r.Unit, Test: r.Test, TempIndex: r.TempIndex,
		TemperatureC: r.TemperatureC, Session: r.Session, FreqIndex: r.FreqIndex, FrequencyHz: r.FrequencyHz, Record: r.Record,
		Repeat: r.Repeat, GeneratorChannel: r.GeneratorChannel, GeneratorPeakVolts: r.GeneratorPeakVolts,
		GeneratorOffsetVolts: r.GeneratorOffsetVolts, GeneratorOn: r.GeneratorOn, RateHz: r.RateHz, Samples: r.Samples,
		Cycles: r.Cycles, ChannelFits: fits, RMSVolts: r.RMSVolts, Flags: r.Flags, Problem: r.Problem}, nil
}

// archiveResult maps one result; a DC result passes NaN for the
// frequency-point fields (phase, its U, noise floor, coverage probability).
func archiveResult(r report.Result, freqHz, phaseDeg, phaseUDeg, floorDB, coverage float64) archive.Result {
	return archive.Result{Unit: r.Unit, Test: r.Test, TemperatureC: r.TemperatureC, FrequencyHz: freqHz,
		CoefficientUVPerV: r.CoefficientUVPerV, CoefficientStdUUVPerV: r.CoefficientStdUUVPerV,
		CoefficientExpandedUUVPerV: r.CoefficientExpandedUUVPerV, RatioDB: r.RatioDB, ExpandedUDB: r.ExpandedUDB,
		CoverageK: r.CoverageK, DOFEffective: r.DOFEffective, Resolved: r.Resolved, LowerBoundDB: r.LowerBoundDB,
		LimitDB: r.LimitDB, PhaseDeg: phaseDeg, PhaseExpandedUDeg: phaseUDeg, NoiseFloorDB: floorDB, Coverage: coverage, Verdict: r.Verdict, Rule: r.Rule, Flags: r.Flags, Notes: r.Notes}
}

func archiveBudget(b report.BudgetRow, freqHz float64, quantity string) archive.BudgetRow {
	return archive.BudgetRow{Unit: b.Unit, Test: b.Test, TemperatureC: b.TemperatureC, FrequencyHz: freqHz, Quantity: quantity,
		Component: b.Component, Kind: b.Kind, Distribution: b.Distribution, Value: b.Value, ValueUnit: b.ValueUnit,
		StdUncertainty: b.StdUncertainty, Sensitivity: b.Sensitivity, Contribution: b.Contribution, DOF: b.DOF}
}
