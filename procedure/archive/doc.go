// Package archive is the results store across campaigns: one schema for an
// embedded SQLite file (the pure-Go driver modernc.org/sqlite, no C
// toolchain) and for PostgreSQL (github.com/jackc/pgx/v5 through its
// database/sql adapter), created and upgraded by numbered migrations
// (migrate.go, recorded in the schema_version table).
//
// A stored campaign keeps what a later reader needs to rebuild any
// result's statement: the plan hash, the journal hash, the bench and its
// instruments' identities, part, lot, dates, and per result the value
// (µV/V and dB), expanded uncertainty U and coverage factor k, the
// decision, the decision rule and the analysis notes (a frequency point
// also its phase U, noise floor and coverage probability), with the budget
// rows, every DC reading and every frequency-response record (sine fits
// or AC voltmeter readings; what a later refit needs).
//
// Adding is idempotent: a campaign is keyed by the SHA-256 of its journal
// (unique in the schema), and one transaction inserts the campaign with
// all its rows or nothing. A journal that grew (a resumed run) has a new
// hash but the same run key (the hash of its start record); adding it
// replaces the shorter version, and adding a journal of a stored run that
// is not longer (in bytes; by stored rows for a campaign stored before
// schema version 3) is refused with a *ShorterJournalError. Two processes adding at once are
// serialised by the database (SQLite: BEGIN IMMEDIATE with a busy time-out;
// PostgreSQL: the unique index), so nothing is lost or stored twice.
//
// The package imports nothing of ours: the caller maps its results into
// Campaign.
package archive
