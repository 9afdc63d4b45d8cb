package records

import (
	"context"
	"database/sql"
	"fmt"
	"sort"
	"strings"
)

// migration brings the schema from version n-1 to n (n = index + 1). Each
// runs in its own transaction together with the PRAGMA user_version bump.
type migration func(tx *sql.Tx) error

// migrations are applied in order; never edit one that has shipped, add a
// new one.
var migrations = []migration{
	migrate1,
	migrate2,
}

// LatestSchema is the schema version this package writes.
var LatestSchema = len(migrations)

// migrate applies migrations up to version target. Several processes may
// open the same store at once: each step re-reads the version inside its
// immediate transaction, so a step is applied exactly once.
func (s *Store) migrate(ctx context.Context, target int) error {
	for {
		done := false
		err := s.write(ctx, func(tx *sql.Tx) error {
			var v int
			if err := tx.QueryRow("PRAGMA user_version").Scan(&v); err != nil {
				return fmt.Errorf("read schema version: %w", err)
			}
			if v > len(migrations) {
				return &Error{Path: s.path, Err: kinded(ErrInvalid, "schema version %d is newer than this failframe knows (%d); use a newer failframe", v, len(migrations))}
			}
			if v >= target {
				done = true
				return nil
			}
			if err := migrations[v](tx); err != nil {
				return fmt.Errorf("migration %d: %w", v+1, err)
			}
			// PRAGMA takes no bind parameters; v+1 is our own integer.
			if _, err := tx.Exec(fmt.Sprintf("PRAGMA user_version = %d", v+1)); err != nil {
				return fmt.Errorf("migration %d: set version: %w", v+1, err)
			}
			return nil
		})
		if err != nil || done {
			return err
		}
	}
}

// migrate1 is the first schema: builds with tags as one comma-separated
// text column, member groups, tests (attached reports) and their files.
func migrate1(tx *sql.Tx) error {
	_, err := tx.Exec(`
CREATE TABLE builds (
	id         TEXT PRIMARY KEY,
	name       TEXT NOT NULL,
	date       TEXT NOT NULL,
	mass_g     REAL NOT NULL CHECK (mass_g > 0),
	height_mm  REAL NOT NULL DEFAULT 0 CHECK (height_mm >= 0),
	base_mm    REAL NOT NULL DEFAULT 0 CHECK (base_mm >= 0),
	top_mm     REAL NOT NULL DEFAULT 0 CHECK (top_mm >= 0),
	bracing    TEXT NOT NULL,
	glue       TEXT NOT NULL DEFAULT '',
	notes      TEXT NOT NULL DEFAULT '',
	tags       TEXT NOT NULL DEFAULT '',
	created_at TEXT NOT NULL,
	updated_at TEXT NOT NULL
);
CREATE TABLE members (
	build_id TEXT NOT NULL REFERENCES builds(id) ON DELETE CASCADE,
	pos      INTEGER NOT NULL,
	grp      TEXT NOT NULL,
	wood     TEXT NOT NULL,
	section  TEXT NOT NULL,
	PRIMARY KEY (build_id, pos)
);
CREATE TABLE tests (
	id            INTEGER PRIMARY KEY,
	build_id      TEXT NOT NULL REFERENCES builds(id) ON DELETE CASCADE,
	seq           INTEGER NOT NULL,
	report_sha256 TEXT NOT NULL UNIQUE,
	attached_at   TEXT NOT NULL,
	source_dir    TEXT NOT NULL DEFAULT '',
	tool          TEXT NOT NULL DEFAULT '',
	created_at    TEXT NOT NULL DEFAULT '',
	peak_load_g   REAL,
	efficiency    REAL,
	mass_g        REAL,
	first_member  TEXT NOT NULL DEFAULT '',
	failure_mode  TEXT NOT NULL DEFAULT '',
	account       TEXT NOT NULL DEFAULT '',
	alignment     TEXT NOT NULL DEFAULT '',
	UNIQUE (build_id, seq)
);
CREATE TABLE files (
	test_id INTEGER NOT NULL REFERENCES tests(id) ON DELETE CASCADE,
	path    TEXT NOT NULL,
	sha256  TEXT NOT NULL,
	size    INTEGER NOT NULL,
	PRIMARY KEY (test_id, path)
);
CREATE INDEX files_sha256 ON files(sha256);
`)
	return err
}

// migrate2 moves tags into their own table (so builds can be selected by
// tag with an index, and a tag may contain any character) and splits the
// test's alignment, kept as JSON text in schema 1, into real columns.
func migrate2(tx *sql.Tx) error {
	if _, err := tx.Exec(`
CREATE TABLE build_tags (
	build_id TEXT NOT NULL REFERENCES builds(id) ON DELETE CASCADE,
	tag      TEXT NOT NULL,
	PRIMARY KEY (build_id, tag)
);
CREATE INDEX build_tags_tag ON build_tags(tag);
ALTER TABLE tests ADD COLUMN align_method TEXT;
ALTER TABLE tests ADD COLUMN align_offset_s REAL;
ALTER TABLE tests ADD COLUMN align_uncertainty_s REAL;
ALTER TABLE tests ADD COLUMN align_detail TEXT;
`); err != nil {
		return err
	}
	// Tags: split the old comma-separated column.
	rows, err := tx.Query(`SELECT id, tags FROM builds`)
	if err != nil {
		return err
	}
	type bt struct{ id, tags string }
	var all []bt
	for rows.Next() {
		var r bt
		if err := rows.Scan(&r.id, &r.tags); err != nil {
			rows.Close()
			return err
		}
		all = append(all, r)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return err
	}
	for _, r := range all {
		for _, tag := range normTags(strings.Split(r.tags, ",")) {
			if _, err := tx.Exec(`INSERT INTO build_tags(build_id, tag) VALUES (?, ?)`, r.id, tag); err != nil {
				return err
			}
		}
	}
	// Alignment: parse the schema-1 JSON text into columns.
	arows, err := tx.Query(`SELECT id, alignment FROM tests WHERE alignment != ''`)
	if err != nil {
		return err
	}
	type ta struct {
		id   int64
		text string
	}
	var tas []ta
	for arows.Next() {
		var r ta
		if err := arows.Scan(&r.id, &r.text); err != nil {
			arows.Close()
			return err
		}
		tas = append(tas, r)
	}
	arows.Close()
	if err := arows.Err(); err != nil {
		return err
	}
	for _, r := range tas {
		a, err := parseAlignmentV1(r.text)
		if err != nil {
			return fmt.Errorf("test %d alignment: %w", r.id, err)
		}
		if _, err := tx.Exec(`UPDATE tests SET align_method=?, align_offset_s=?, align_uncertainty_s=?, align_detail=? WHERE id=?`,
			a.Method, a.OffsetS, a.UncertaintyS, a.Detail, r.id); err != nil {
			return err
		}
	}
	_, err = tx.Exec(`ALTER TABLE builds DROP COLUMN tags; ALTER TABLE tests DROP COLUMN alignment;`)
	return err
}

// normTags trims, drops empty and duplicate tags, and sorts them.
func normTags(in []string) []string {
	seen := map[string]bool{}
	var out []string
	for _, t := range in {
		t = strings.TrimSpace(t)
		if t == "" || seen[t] {
			continue
		}
		seen[t] = true
		out = append(out, t)
	}
	sort.Strings(out)
	return out
}
