package records

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"time"
)

// Problem is one thing Check found wrong.
type Problem struct {
	// Kind is "missing" (object file absent), "corrupt" (content does not
	// match its hash) or "database" (SQLite integrity or foreign-key check).
	Kind string `json:"kind"`
	// BuildID, Seq and Path say which test file is affected, when one is.
	BuildID string `json:"build_id,omitempty"`
	Seq     int    `json:"seq,omitempty"`
	Path    string `json:"path,omitempty"`
	// Object is the object file's path in the store.
	Object string `json:"object,omitempty"`
	// Detail says what was found.
	Detail string `json:"detail"`
}

// String describes the problem on one line.
func (p Problem) String() string {
	if p.BuildID != "" {
		return fmt.Sprintf("%s: build %s test %d file %s: %s (%s)", p.Kind, p.BuildID, p.Seq, p.Path, p.Detail, p.Object)
	}
	return fmt.Sprintf("%s: %s", p.Kind, p.Detail)
}

// CheckReport is the outcome of Check.
type CheckReport struct {
	// Builds, Tests and Files count what the database holds.
	Builds, Tests, Files int
	// Objects is the number of distinct objects referenced and checked.
	Objects int
	// Unreferenced counts objects in the store that no test refers to
	// (left by removed builds or interrupted attaches); not a problem.
	Unreferenced int
	// Problems lists everything wrong; empty when the store is sound.
	Problems []Problem
}

// IntegrityError is returned by Check when it finds problems.
type IntegrityError struct {
	// Problems are what was found.
	Problems []Problem
}

// Error counts the problems and names the first.
func (e *IntegrityError) Error() string {
	return fmt.Sprintf("records: the store has %d problem(s); first: %s", len(e.Problems), e.Problems[0])
}

// Check verifies the database (SQLite integrity and foreign keys) and the
// SHA-256 of every referenced evidence object. It returns the report and,
// when anything is wrong, an *IntegrityError listing the problems.
func (s *Store) Check() (*CheckReport, error) {
	r := &CheckReport{}
	type ref struct {
		build string
		seq   int
		path  string
		sum   string
	}
	var refs []ref
	err := s.read(context.Background(), func(tx *sql.Tx) error {
		rows, err := tx.Query(`PRAGMA integrity_check`)
		if err != nil {
			return err
		}
		for rows.Next() {
			var line string
			if err := rows.Scan(&line); err != nil {
				rows.Close()
				return err
			}
			if line != "ok" {
				r.Problems = append(r.Problems, Problem{Kind: "database", Detail: "integrity_check: " + line})
			}
		}
		rows.Close()
		rows, err = tx.Query(`PRAGMA foreign_key_check`)
		if err != nil {
			return err
		}
		for rows.Next() {
			var table, parent string
			var rowid sql.NullInt64
			var fkid int
			if err := rows.Scan(&table, &rowid, &parent, &fkid); err != nil {
				rows.Close()
				return err
			}
			r.Problems = append(r.Problems, Problem{Kind: "database", Detail: fmt.Sprintf("row %d of %s refers to a missing %s row", rowid.Int64, table, parent)})
		}
		rows.Close()
		for _, c := range []struct {
			n *int
			q string
		}{{&r.Builds, `SELECT count(*) FROM builds`}, {&r.Tests, `SELECT count(*) FROM tests`}, {&r.Files, `SELECT count(*) FROM files`}} {
			if err := tx.QueryRow(c.q).Scan(c.n); err != nil {
				return err
			}
		}
		rows, err = tx.Query(`SELECT t.build_id, t.seq, f.path, f.sha256 FROM files f JOIN tests t ON t.id = f.test_id ORDER BY t.build_id, t.seq, f.path`)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var x ref
			if err := rows.Scan(&x.build, &x.seq, &x.path, &x.sum); err != nil {
				return err
			}
			refs = append(refs, x)
		}
		return rows.Err()
	})
	if err != nil {
		return nil, fmt.Errorf("records: check %s: %w", s.path, err)
	}
	verdict := map[string]string{} // sum -> "" ok, else problem kind + detail
	kind := map[string]string{}
	for _, x := range refs {
		if _, done := verdict[x.sum]; !done {
			r.Objects++
			k, detail := s.checkObject(x.sum)
			verdict[x.sum], kind[x.sum] = detail, k
		}
		if d := verdict[x.sum]; d != "" {
			r.Problems = append(r.Problems, Problem{Kind: kind[x.sum], BuildID: x.build, Seq: x.seq, Path: x.path, Object: s.objectPath(x.sum), Detail: d})
		}
	}
	// Count objects nobody refers to.
	filepath.WalkDir(s.objects, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() || !hashPattern.MatchString(d.Name()) {
			return nil
		}
		if _, ok := verdict[d.Name()]; !ok {
			r.Unreferenced++
		}
		return nil
	})
	if len(r.Problems) > 0 {
		return r, &IntegrityError{Problems: r.Problems}
	}
	return r, nil
}

// checkObject hashes one object; it returns "" when sound, else a kind and detail.
func (s *Store) checkObject(sum string) (kind, detail string) {
	if !hashPattern.MatchString(sum) {
		return "corrupt", fmt.Sprintf("recorded hash %q is not a SHA-256 hex digest", sum)
	}
	got, _, err := hashFile(s.objectPath(sum))
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return "missing", "the evidence file is missing from the object store"
	case err != nil:
		return "missing", err.Error()
	case got != sum:
		return "corrupt", fmt.Sprintf("content hashes to %s, recorded %s", got, sum)
	}
	return "", ""
}

// PruneGrace is how old an unreferenced object must be before Prune removes
// it: younger ones may belong to an attach or import still in progress.
const PruneGrace = time.Hour

// Prune deletes objects (and leftover temporary files) that no test refers
// to and that were last written more than grace ago. It returns how many
// files it removed and their total size.
func (s *Store) Prune(grace time.Duration) (int, int64, error) {
	used := map[string]bool{}
	err := s.read(context.Background(), func(tx *sql.Tx) error {
		rows, err := tx.Query(`SELECT DISTINCT sha256 FROM files`)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var sum string
			if err := rows.Scan(&sum); err != nil {
				return err
			}
			used[sum] = true
		}
		return rows.Err()
	})
	if err != nil {
		return 0, 0, fmt.Errorf("records: prune %s: %w", s.objects, err)
	}
	var n int
	var size int64
	cutoff := time.Now().Add(-grace)
	err = filepath.WalkDir(s.objects, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			if errors.Is(err, fs.ErrNotExist) {
				return nil
			}
			return err
		}
		name := d.Name()
		if d.IsDir() || used[name] || !(hashPattern.MatchString(name) || strings.HasPrefix(name, ".incoming-")) {
			return nil
		}
		fi, err := os.Stat(p) // fresh stat: an attach may have just touched it
		if err != nil || fi.ModTime().After(cutoff) {
			return nil
		}
		if err := os.Remove(p); err != nil {
			return err
		}
		n++
		size += fi.Size()
		return nil
	})
	if err != nil {
		return n, size, fmt.Errorf("records: prune %s: %w", s.objects, err)
	}
	return n, size, nil
}
