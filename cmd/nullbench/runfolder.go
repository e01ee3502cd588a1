package main

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"nullbench/report"
	"os"
	"path/filepath"
	"slices"
	"sort"

	"nullbench/instrument"
	"nullbench/procedure/journal"
	"nullbench/procedure/plan"
)

// A run folder holds everything a run needs to be re-reported on its own:
//
//	plan.toml      the plan as measured, byte for byte (its SHA-256 is the journal's plan hash)
//	profiles/      a copy of every instrument profile the plan names (built-in ones too)
//	journal.jsonl  the journal (hash-chained, see procedure/journal/chain.go)
//	run.json       the manifest: plan and profile hashes, the journal's seal, output hashes
//	campaign.xlsx, results.csv, readings.csv, results.jsonl, readings.jsonl
//
// "nullbench report DIR" reads the plan and profiles from the folder, and
// compares the journal against the seal the manifest recorded when the
// outputs were last written.
const (
	runManifestName = "run.json"
	runPlanName     = "plan.toml"
	runJournalName  = "journal.jsonl"
	runProfilesDir  = "profiles"
)

type manifestFile struct {
	File   string `json:"file"` // relative to the run folder
	SHA256 string `json:"sha256"`
}

type manifestProfile struct {
	Instrument string `json:"instrument"`
	Profile    string `json:"profile"` // as the plan names it
	manifestFile
}

type runManifest struct {
	Tool     string            `json:"tool"`
	Plan     manifestFile      `json:"plan"`
	PlanPath string            `json:"plan_path"` // the plan file as given to run
	Profiles []manifestProfile `json:"profiles"`
	Journal  struct {
		File string `json:"file"`
		journal.Seal
	} `json:"journal"`
	Complete      bool           `json:"complete"`
	MissingPoints int            `json:"missing_points"`
	Outputs       []manifestFile `json:"outputs,omitempty"`
	// Journals is set only in an output folder's manifest (outputManifest),
	// never in a run folder's.
	Journals []manifestJournal `json:"journals,omitempty"`
}

// outputManifest is the manifest of a folder that holds outputs but is
// not one run's folder (the demo's, or a report written elsewhere): one
// entry per journal reported, each with its own plan, seal and
// completeness, and the outputs' hashes. It names no single plan or
// journal, so report never takes the folder for a run folder.
type outputManifest struct {
	Tool     string            `json:"tool"`
	Journals []manifestJournal `json:"journals"`
	Outputs  []manifestFile    `json:"outputs,omitempty"`
}

// manifestJournal is one journal of an output folder: its file (relative
// to the folder when inside it), the plan it was measured with (the path
// recorded in the journal, and the plan's hash), its seal when the outputs
// were written, and whether every planned point was measured.
type manifestJournal struct {
	File string       `json:"file"`
	Plan manifestFile `json:"plan"`
	journal.Seal
	Complete      bool `json:"complete"`
	MissingPoints int  `json:"missing_points"`
}

func sha256Hex(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

func readManifest(dir string) (*runManifest, error) {
	b, err := os.ReadFile(filepath.Join(dir, runManifestName))
	if err != nil {
		return nil, err
	}
	var m runManifest
	if err := json.Unmarshal(b, &m); err != nil {
		return nil, fmt.Errorf("run folder %s: %s is not a nullbench manifest: %w", dir, runManifestName, err)
	}
	return &m, nil
}

func writeManifest(dir string, m *runManifest) error {
	b, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		return err
	}
	return os.WriteFile(filepath.Join(dir, runManifestName), append(b, '\n'), 0o644)
}

// isRunOf reports whether dir holds a run of the plan with hash planHash
// (by its manifest, or by its journal's start record).
func isRunOf(dir, planHash string) bool {
	if m, err := readManifest(dir); err == nil {
		for _, j := range m.Journals {
			if j.Plan.SHA256 == planHash {
				return true
			}
		}
		return m.Plan.SHA256 == planHash
	}
	if c, err := journal.ReadFile(filepath.Join(dir, runJournalName)); err == nil {
		return c.Header.PlanHash == planHash
	}
	return false
}

// checkOutDir refuses an output folder that exists, is not empty and is
// not a run of the same plan, unless force: a folder of someone else's
// files is never written into by mistake. The files named in own (the
// journal being reported and its plan) are not someone else's.
func checkOutDir(dir string, p *plan.Plan, force bool, own ...string) error {
	all, err := os.ReadDir(dir)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return withCode(exitUsage, fmt.Errorf("output folder %s: %w", dir, err))
	}
	var entries []os.DirEntry
	for _, e := range all {
		if !slices.ContainsFunc(own, func(f string) bool { return f != "" && sameFileOK(f, filepath.Join(dir, e.Name())) }) {
			entries = append(entries, e)
		}
	}
	if len(entries) == 0 || force || isRunOf(dir, p.Hash) {
		return nil
	}
	return withCode(exitUsage, fmt.Errorf("output folder %s exists and is not a run of plan %s (it holds %d entries, e.g. %s); "+
		"choose a new folder, or give --force to write over files of the same names", dir, p.Source, len(entries), entries[0].Name()))
}

// clearRun removes the journal and manifest of an earlier run in dir
// (run --force into a run folder): the new run starts its own journal.
func clearRun(dir string) error {
	for _, n := range []string{runJournalName, runManifestName} {
		if err := os.Remove(filepath.Join(dir, n)); err != nil && !errors.Is(err, os.ErrNotExist) {
			return err
		}
	}
	return nil
}

// copyRunInputs copies the plan (byte for byte, checked against the hash
// it was loaded with) and every profile it names into dir, and writes the
// first manifest. It runs before the first instrument contact, so even a
// run killed at once leaves a folder that report can read.
func copyRunInputs(dir string, p *plan.Plan) error {
	data, err := os.ReadFile(p.Source)
	if err != nil {
		return fmt.Errorf("copy the plan into %s: %w", dir, err)
	}
	if h := sha256Hex(data); h != p.Hash {
		return fmt.Errorf("plan %s changed on disk since it was checked (sha256 %s, checked %s); run again", p.Source, h[:12], p.Hash[:12])
	}
	planPath := p.Source
	if abs, err := filepath.Abs(planPath); err == nil {
		planPath = abs
	}
	m := &runManifest{Tool: "nullbench " + version, Plan: manifestFile{File: runPlanName, SHA256: p.Hash}, PlanPath: planPath}
	m.Journal.File = runJournalName
	if same, _ := sameFile(p.Source, filepath.Join(dir, runPlanName)); !same {
		if err := os.WriteFile(filepath.Join(dir, runPlanName), data, 0o644); err != nil {
			return fmt.Errorf("copy the plan into %s: %w", dir, err)
		}
	}
	names := make([]string, 0, len(p.Bench.Instruments))
	for n := range p.Bench.Instruments {
		names = append(names, n)
	}
	sort.Strings(names)
	if len(names) > 0 {
		if err := os.MkdirAll(filepath.Join(dir, runProfilesDir), 0o755); err != nil {
			return err
		}
	}
	for _, n := range names {
		spec := p.Bench.Instruments[n]
		var pdata []byte
		if instrument.IsProfilePath(spec.Profile) {
			pdata, err = os.ReadFile(p.ProfilePath(spec.Profile))
		} else {
			pdata, err = instrument.BuiltinProfileSource(spec.Profile)
		}
		if err != nil {
			return fmt.Errorf("plan %s, [bench.instrument.%s] profile: %w", p.Source, n, err)
		}
		rel := filepath.Join(runProfilesDir, n+".toml")
		if err := os.WriteFile(filepath.Join(dir, rel), pdata, 0o644); err != nil {
			return err
		}
		m.Profiles = append(m.Profiles, manifestProfile{Instrument: n, Profile: spec.Profile, manifestFile: manifestFile{File: filepath.ToSlash(rel), SHA256: sha256Hex(pdata)}})
	}
	return writeManifest(dir, m)
}

// sameFileOK reports whether a and b name one existing file.
func sameFileOK(a, b string) bool {
	s, err := sameFile(a, b)
	return err == nil && s
}

func sameFile(a, b string) (bool, error) {
	fa, err := os.Stat(a)
	if err != nil {
		return false, err
	}
	fb, err := os.Stat(b)
	if err != nil {
		return false, err
	}
	return os.SameFile(fa, fb), nil
}

// runFolder is a run folder opened by report.
type runFolder struct {
	Dir      string
	Manifest *runManifest
}

// openRunFolder opens dir as a run folder: its manifest, plan copy
// (checked against the hash recorded) and profile copies.
func openRunFolder(dir string) (*runFolder, error) {
	m, err := readManifest(dir)
	if err != nil {
		return nil, err
	}
	if m.Plan.File == "" {
		return nil, fmt.Errorf("%s holds a report, not a run (no plan copy)", dir)
	}
	return &runFolder{Dir: dir, Manifest: m}, nil
}

// loadPlan loads the folder's copy of the plan.
func (rf *runFolder) loadPlan() (*plan.Plan, error) {
	p, err := plan.Load(filepath.Join(rf.Dir, filepath.FromSlash(rf.Manifest.Plan.File)))
	if err != nil {
		return nil, err
	}
	if p.Hash != rf.Manifest.Plan.SHA256 {
		return nil, fmt.Errorf("run folder %s: %s was changed after the run (sha256 %s, the manifest records %s)", rf.Dir, rf.Manifest.Plan.File, p.Hash[:12], shortHex(rf.Manifest.Plan.SHA256))
	}
	return p, nil
}

// resolver resolves the plan's profile entries to the folder's copies,
// each checked against the hash recorded.
func (rf *runFolder) resolver() profileResolver {
	byName := map[string]manifestProfile{}
	for _, mp := range rf.Manifest.Profiles {
		byName[mp.Instrument] = mp
	}
	return func(instrumentName, profile string) (*instrument.Profile, error) {
		mp, ok := byName[instrumentName]
		if !ok || mp.Profile != profile {
			return nil, fmt.Errorf("run folder %s holds no copy of the profile %q of instrument %s", rf.Dir, profile, instrumentName)
		}
		file := filepath.Join(rf.Dir, filepath.FromSlash(mp.File))
		data, err := os.ReadFile(file)
		if err != nil {
			return nil, err
		}
		if sha256Hex(data) != mp.SHA256 {
			return nil, fmt.Errorf("run folder %s: %s was changed after the run", rf.Dir, mp.File)
		}
		return instrument.ParseProfile(data, file)
	}
}

func shortHex(h string) string {
	if len(h) > 12 {
		return h[:12]
	}
	return h
}

// profileResolver turns a plan's profile entry for an instrument into a
// profile.
type profileResolver func(instrumentName, profile string) (*instrument.Profile, error)

// planProfiles resolves p's profile entries: built-in names, absolute
// paths, and paths relative to the plan file's folder.
func planProfiles(p *plan.Plan) profileResolver {
	return func(_ string, profile string) (*instrument.Profile, error) {
		return instrument.ResolveProfile(p.ProfilePath(profile))
	}
}

// sealRunFolder records, after the outputs are written, the journal's seal
// (record count and last running hash), completeness and the outputs'
// hashes in the manifest. A journal that no longer matches the previous
// seal keeps the previous seal: a report never blesses an edited journal.
func sealRunFolder(dir, journalPath string, jc *journal.Contents, k journal.Completeness, outputs []string) error {
	m, err := readManifest(dir)
	if err != nil || m.Plan.File == "" || m.Journal.File != filepath.Base(journalPath) {
		return nil // not this journal's run folder: nothing to seal
	}
	if jc.CheckIntegrity(m.Journal.Seal) == nil {
		m.Journal.Seal = jc.Seal()
	}
	m.Complete, m.MissingPoints = k.Complete(), k.Missing
	m.Outputs = m.Outputs[:0]
	for _, o := range outputs {
		data, err := os.ReadFile(filepath.Join(dir, o))
		if err != nil {
			return err
		}
		m.Outputs = append(m.Outputs, manifestFile{File: o, SHA256: sha256Hex(data)})
	}
	return writeManifest(dir, m)
}

// runOutputs are the files writeOutputs writes into the output folder;
// freqOutputs the ones it adds for a campaign with frequency-response
// results.
var (
	runOutputs  = []string{"campaign.xlsx", "results.csv", "readings.csv", "results.jsonl", "readings.jsonl", "problems.jsonl"}
	freqOutputs = []string{"freq_results.csv", "freq_results.jsonl"}
)

// outputsOf lists the files writeOutputs wrote for c.
func outputsOf(c *report.Campaign) []string {
	if len(c.FreqResults) == 0 {
		return runOutputs
	}
	return append(append([]string(nil), runOutputs...), freqOutputs...)
}

func sameDir(a, b string) bool {
	if s, err := sameFile(a, b); err == nil {
		return s
	}
	return filepath.Clean(a) == filepath.Clean(b)
}

// journalState reads a record's journal again (finish): completeness with
// skipped units, events, start and end times, and integrity against the
// run folder's seal. A journal that cannot be read is reported and the
// record keeps what it has.
func journalState(std streams, rec *campaignRecord) {
	if rec.JournalPath == "" {
		return
	}
	jc, err := journal.ReadFile(rec.JournalPath)
	if err != nil {
		fmt.Fprintf(std.Err, "%v\n", err)
		return
	}
	rec.Journal = jc
	k := journal.CompletenessOf(rec.Plan, jc)
	rec.Completeness = &k
	var seal journal.Seal
	if m, err := readManifest(filepath.Dir(rec.JournalPath)); err == nil && m.Journal.File == filepath.Base(rec.JournalPath) {
		seal = m.Journal.Seal
		if rec.Folder == nil && m.Plan.SHA256 == rec.Plan.Hash && m.Plan.File != "" {
			rec.Folder = &runFolder{Dir: filepath.Dir(rec.JournalPath), Manifest: m}
		}
	}
	if err := jc.CheckIntegrity(seal); err != nil {
		rec.Integrity = err
		fmt.Fprintf(std.Err, "%s: %v\n", rec.JournalPath, err)
	}
	if !jc.Header.Started.IsZero() {
		rec.Started = jc.Header.Started
	}
	if !jc.LastTime.IsZero() {
		rec.Finished = jc.LastTime
	}
	rec.Identities = jc.Identities
	rec.Readings = jc.Readings
}

// writeOutputManifest writes the manifest of an output folder that is not
// a run folder: one entry per record's journal, sealed as it was read, and
// the hashes of the outputs written.
func writeOutputManifest(dir string, recs []campaignRecord, outputs []string) error {
	m := outputManifest{Tool: "nullbench " + version}
	for _, r := range recs {
		e := manifestJournal{File: r.JournalPath, Plan: manifestFile{File: r.Plan.Source, SHA256: r.Plan.Hash}}
		if rel, err := filepath.Rel(dir, r.JournalPath); err == nil && filepath.IsLocal(rel) {
			e.File = filepath.ToSlash(rel)
		}
		if rel, err := filepath.Rel(dir, r.Plan.Source); err == nil && filepath.IsLocal(rel) {
			e.Plan.File = filepath.ToSlash(rel)
		}
		if r.Journal != nil {
			e.Seal = r.Journal.Seal()
		}
		if r.Completeness != nil {
			e.Complete, e.MissingPoints = r.Completeness.Complete(), r.Completeness.Missing
		}
		m.Journals = append(m.Journals, e)
	}
	for _, o := range outputs {
		data, err := os.ReadFile(filepath.Join(dir, o))
		if err != nil {
			return err
		}
		m.Outputs = append(m.Outputs, manifestFile{File: o, SHA256: sha256Hex(data)})
	}
	b, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		return err
	}
	return os.WriteFile(filepath.Join(dir, runManifestName), append(b, '\n'), 0o644)
}
