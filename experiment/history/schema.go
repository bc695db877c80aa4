package history

import (
	"context"
	"database/sql"
	"fmt"
)

// migrations are the schema's versions in order: migrations[i] takes a file
// from version i to version i+1. A released migration is never edited; a
// change of schema is a new one at the end.
var migrations = [][]string{
	// Version 1: looks, per-arm counts, per-comparison sequential state.
	{
		`CREATE TABLE looks (
			experiment TEXT NOT NULL,
			look_at TEXT NOT NULL,       -- the look's key: data freshness or --as-of, UTC, fixed width
			key_kind TEXT NOT NULL,      -- 'freshness' or 'as-of'
			written_at TEXT NOT NULL,
			PRIMARY KEY (experiment, look_at)
		)`,
		`CREATE TABLE arm_looks (
			experiment TEXT NOT NULL,
			look_at TEXT NOT NULL,
			metric TEXT NOT NULL,
			arm TEXT NOT NULL,
			units INTEGER NOT NULL,
			conversions INTEGER NOT NULL,
			PRIMARY KEY (experiment, look_at, metric, arm),
			FOREIGN KEY (experiment, look_at) REFERENCES looks (experiment, look_at) ON DELETE CASCADE
		)`,
		`CREATE TABLE comparison_looks (
			experiment TEXT NOT NULL,
			look_at TEXT NOT NULL,
			metric TEXT NOT NULL,
			arm TEXT NOT NULL,           -- the treatment
			control TEXT NOT NULL,
			method TEXT NOT NULL,        -- 'group-sequential', 'mixture' or 'fixed'
			statistic REAL,
			information_fraction REAL,
			boundary REAL,
			alpha_spent REAL,
			crossed INTEGER NOT NULL,
			always_valid_p REAL,
			sequence_lower REAL,
			sequence_upper REAL,
			PRIMARY KEY (experiment, look_at, metric, arm),
			FOREIGN KEY (experiment, look_at) REFERENCES looks (experiment, look_at) ON DELETE CASCADE
		)`,
	},
	// Version 2: per-arm daily exposures (for the charts) and the nominal
	// p-value at the boundary.
	{
		`CREATE TABLE daily_exposures (
			experiment TEXT NOT NULL,
			look_at TEXT NOT NULL,
			arm TEXT NOT NULL,
			day TEXT NOT NULL,           -- YYYY-MM-DD, UTC
			units INTEGER NOT NULL,
			PRIMARY KEY (experiment, look_at, arm, day),
			FOREIGN KEY (experiment, look_at) REFERENCES looks (experiment, look_at) ON DELETE CASCADE
		)`,
		`ALTER TABLE comparison_looks ADD COLUMN boundary_nominal_p REAL`,
	},
	// Version 3: the readout's warning codes at each look, so a run can
	// say which warnings are new since the previous look. A look written
	// before version 3 has warnings_recorded 0: its warnings are unknown,
	// not absent.
	{
		`CREATE TABLE look_warnings (
			experiment TEXT NOT NULL,
			look_at TEXT NOT NULL,
			code TEXT NOT NULL,          -- the JSON readout's warning code
			PRIMARY KEY (experiment, look_at, code),
			FOREIGN KEY (experiment, look_at) REFERENCES looks (experiment, look_at) ON DELETE CASCADE
		)`,
		`ALTER TABLE looks ADD COLUMN warnings_recorded INTEGER NOT NULL DEFAULT 0`,
	},
}

// SchemaVersion is the schema version this package writes: len(migrations).
const SchemaVersion = 3

// migrate brings the file to version upTo (at most SchemaVersion) in one
// immediate transaction, so two runs opening the same new file at once
// migrate it once: the second waits for the first and finds the work
// done. A file of a newer version than upTo is an error.
func migrate(ctx context.Context, db *sql.DB, upTo int) error {
	tx, err := db.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("begin migration: %w", err)
	}
	defer tx.Rollback()
	if _, err := tx.ExecContext(ctx, `CREATE TABLE IF NOT EXISTS schema_version (version INTEGER NOT NULL)`); err != nil {
		return fmt.Errorf("create schema_version: %w", err)
	}
	var version int
	switch err := tx.QueryRowContext(ctx, `SELECT version FROM schema_version`).Scan(&version); {
	case err == sql.ErrNoRows:
		if _, err := tx.ExecContext(ctx, `INSERT INTO schema_version (version) VALUES (0)`); err != nil {
			return fmt.Errorf("set schema version: %w", err)
		}
	case err != nil:
		return fmt.Errorf("read schema version: %w", err)
	}
	if version > upTo {
		return fmt.Errorf("schema version %d is newer than this armtally's %d", version, upTo)
	}
	for v := version; v < upTo; v++ {
		for _, stmt := range migrations[v] {
			if _, err := tx.ExecContext(ctx, stmt); err != nil {
				return fmt.Errorf("migrate to version %d: %w", v+1, err)
			}
		}
	}
	if _, err := tx.ExecContext(ctx, `UPDATE schema_version SET version = ?`, upTo); err != nil {
		return fmt.Errorf("set schema version: %w", err)
	}
	return tx.Commit()
}
