package records

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"regexp"
	"strings"
	"time"
)

// Bracing patterns a build may record.
var Bracings = []string{"horizontal", "diagonal", "z", "x", "other"}

// DateLayout is the layout of Build.Date (YYYY-MM-DD).
const DateLayout = "2006-01-02"

// Build is one tower or bridge as built.
type Build struct {
	// ID is the builder's short name for the build (letters, digits, '.', '_', '-'; up to 64).
	ID string `json:"id"`
	// Name is a longer human name.
	Name string `json:"name"`
	// Date is the build date, YYYY-MM-DD.
	Date string `json:"date"`
	// MassG is the structure's own mass in grams (> 0).
	MassG float64 `json:"mass_g"`
	// HeightMM is the height in mm; 0 = not recorded.
	HeightMM float64 `json:"height_mm"`
	// BaseMM is the base width in mm; 0 = not recorded.
	BaseMM float64 `json:"base_mm"`
	// TopMM is the top width in mm; 0 = not recorded.
	TopMM float64 `json:"top_mm"`
	// Bracing is one of Bracings.
	Bracing string `json:"bracing"`
	// Members lists the wood and section per member group, in the order given.
	Members []Member `json:"members"`
	// Glue is the glue used.
	Glue string `json:"glue"`
	// Notes are the builder's notes.
	Notes string `json:"notes"`
	// Tags are free labels, trimmed, without duplicates, sorted.
	Tags []string `json:"tags"`
	// CreatedAt and UpdatedAt are RFC 3339 UTC times kept by the store.
	CreatedAt string `json:"created_at"`
	UpdatedAt string `json:"updated_at"`
}

// Member is the wood and cross-section used for one group of members.
type Member struct {
	// Group names the members, e.g. "legs", "braces", "horizontals".
	Group string `json:"group"`
	// Wood is the material, e.g. "balsa".
	Wood string `json:"wood"`
	// Section is the cross-section as written, e.g. "3x3 mm".
	Section string `json:"section"`
}

var idPattern = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$`)

// ValidID reports whether id may name a build.
func ValidID(id string) bool { return idPattern.MatchString(id) }

// Normalize trims text fields, sorts and de-duplicates tags, and checks
// every field, returning an *Error naming the first bad one.
func (b *Build) Normalize() error {
	bad := func(field, format string, a ...any) error {
		return &Error{BuildID: b.ID, Field: field, Err: kinded(ErrInvalid, format, a...)}
	}
	b.ID = strings.TrimSpace(b.ID)
	if !ValidID(b.ID) {
		id := b.ID
		b.ID = ""
		return bad("id", "%q: use 1-64 letters, digits, '.', '_' or '-', starting with a letter or digit", id)
	}
	b.Name = strings.TrimSpace(b.Name)
	if b.Name == "" {
		return bad("name", "empty")
	}
	b.Date = strings.TrimSpace(b.Date)
	if _, err := time.Parse(DateLayout, b.Date); err != nil {
		return bad("date", "%q is not a date YYYY-MM-DD", b.Date)
	}
	if math.IsNaN(b.MassG) || math.IsInf(b.MassG, 0) || b.MassG <= 0 {
		return bad("mass_g", "%v: the mass must be more than 0 g", b.MassG)
	}
	for _, f := range []struct {
		name string
		v    float64
	}{{"height_mm", b.HeightMM}, {"base_mm", b.BaseMM}, {"top_mm", b.TopMM}} {
		if math.IsNaN(f.v) || math.IsInf(f.v, 0) || f.v < 0 {
			return bad(f.name, "%v: must be 0 (not recorded) or more", f.v)
		}
	}
	b.Bracing = strings.ToLower(strings.TrimSpace(b.Bracing))
	ok := false
	for _, p := range Bracings {
		ok = ok || p == b.Bracing
	}
	if !ok {
		return bad("bracing", "%q: use one of %s", b.Bracing, strings.Join(Bracings, ", "))
	}
	groups := map[string]bool{}
	for i := range b.Members {
		m := &b.Members[i]
		m.Group, m.Wood, m.Section = strings.TrimSpace(m.Group), strings.TrimSpace(m.Wood), strings.TrimSpace(m.Section)
		if m.Group == "" || m.Wood == "" || m.Section == "" {
			return bad("members", "entry %d needs a group, a wood and a section", i+1)
		}
		if groups[m.Group] {
			return bad("members", "group %q given twice", m.Group)
		}
		groups[m.Group] = true
	}
	if b.Members == nil {
		b.Members = []Member{}
	}
	b.Glue = strings.TrimSpace(b.Glue)
	b.Notes = strings.TrimSpace(b.Notes)
	b.Tags = normTags(b.Tags)
	if b.Tags == nil {
		b.Tags = []string{}
	}
	return nil
}

// now is the store's clock, a variable so tests can pin it.
var now = func() time.Time { return time.Now().UTC() }

// Add stores a new build. A bad field or an id already in use is an *Error
// and nothing is written.
func (s *Store) Add(b Build) (*Build, error) {
	if err := b.Normalize(); err != nil {
		return nil, err
	}
	t := now().Format(time.RFC3339)
	b.CreatedAt, b.UpdatedAt = t, t
	err := s.write(context.Background(), func(tx *sql.Tx) error {
		return insertBuild(tx, &b)
	})
	if err != nil {
		return nil, err
	}
	return &b, nil
}

// insertBuild writes a normalized build with its members and tags.
func insertBuild(tx *sql.Tx, b *Build) error {
	var n int
	if err := tx.QueryRow(`SELECT count(*) FROM builds WHERE id = ?`, b.ID).Scan(&n); err != nil {
		return err
	}
	if n > 0 {
		return &Error{BuildID: b.ID, Err: kinded(ErrDuplicate, "a build with this id is already recorded; choose another id")}
	}
	if _, err := tx.Exec(`INSERT INTO builds(id, name, date, mass_g, height_mm, base_mm, top_mm, bracing, glue, notes, created_at, updated_at)
		VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
		b.ID, b.Name, b.Date, b.MassG, b.HeightMM, b.BaseMM, b.TopMM, b.Bracing, b.Glue, b.Notes, b.CreatedAt, b.UpdatedAt); err != nil {
		return fmt.Errorf("insert build %s: %w", b.ID, err)
	}
	return writeChildren(tx, b)
}

// writeChildren (re)writes a build's member groups and tags.
func writeChildren(tx *sql.Tx, b *Build) error {
	if _, err := tx.Exec(`DELETE FROM members WHERE build_id = ?`, b.ID); err != nil {
		return err
	}
	if _, err := tx.Exec(`DELETE FROM build_tags WHERE build_id = ?`, b.ID); err != nil {
		return err
	}
	for i, m := range b.Members {
		if _, err := tx.Exec(`INSERT INTO members(build_id, pos, grp, wood, section) VALUES (?, ?, ?, ?, ?)`,
			b.ID, i, m.Group, m.Wood, m.Section); err != nil {
			return fmt.Errorf("insert members of %s: %w", b.ID, err)
		}
	}
	for _, t := range b.Tags {
		if _, err := tx.Exec(`INSERT INTO build_tags(build_id, tag) VALUES (?, ?)`, b.ID, t); err != nil {
			return fmt.Errorf("insert tags of %s: %w", b.ID, err)
		}
	}
	return nil
}

// querier is what *sql.Tx and *sql.DB share.
type querier interface {
	QueryRow(query string, args ...any) *sql.Row
	Query(query string, args ...any) (*sql.Rows, error)
}

// getBuild reads one build; an unknown id is an *Error wrapping ErrUnknownBuild.
func getBuild(q querier, id string) (*Build, error) {
	b := &Build{ID: id}
	err := q.QueryRow(`SELECT name, date, mass_g, height_mm, base_mm, top_mm, bracing, glue, notes, created_at, updated_at
		FROM builds WHERE id = ?`, id).Scan(&b.Name, &b.Date, &b.MassG, &b.HeightMM, &b.BaseMM, &b.TopMM,
		&b.Bracing, &b.Glue, &b.Notes, &b.CreatedAt, &b.UpdatedAt)
	if errors.Is(err, sql.ErrNoRows) {
		return nil, &Error{BuildID: id, Err: ErrUnknownBuild}
	}
	if err != nil {
		return nil, fmt.Errorf("read build %s: %w", id, err)
	}
	b.Members = []Member{}
	rows, err := q.Query(`SELECT grp, wood, section FROM members WHERE build_id = ? ORDER BY pos`, id)
	if err != nil {
		return nil, err
	}
	for rows.Next() {
		var m Member
		if err := rows.Scan(&m.Group, &m.Wood, &m.Section); err != nil {
			rows.Close()
			return nil, err
		}
		b.Members = append(b.Members, m)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, err
	}
	b.Tags = []string{}
	rows, err = q.Query(`SELECT tag FROM build_tags WHERE build_id = ? ORDER BY tag`, id)
	if err != nil {
		return nil, err
	}
	for rows.Next() {
		var t string
		if err := rows.Scan(&t); err != nil {
			rows.Close()
			return nil, err
		}
		b.Tags = append(b.Tags, t)
	}
	rows.Close()
	return b, rows.Err()
}

// Get returns the build with the id; an unknown id is an *Error wrapping
// ErrUnknownBuild.
func (s *Store) Get(id string) (*Build, error) {
	var b *Build
	err := s.read(context.Background(), func(tx *sql.Tx) error {
		var err error
		b, err = getBuild(tx, id)
		return err
	})
	return b, err
}

// List returns the builds, ordered by date then id; with a tag only those
// carrying it.
func (s *Store) List(tag string) ([]Build, error) {
	var out []Build
	err := s.read(context.Background(), func(tx *sql.Tx) error {
		q := `SELECT id FROM builds ORDER BY date, id`
		args := []any{}
		if tag != "" {
			q = `SELECT b.id FROM builds b JOIN build_tags t ON t.build_id = b.id WHERE t.tag = ? ORDER BY b.date, b.id`
			args = append(args, tag)
		}
		rows, err := tx.Query(q, args...)
		if err != nil {
			return err
		}
		var ids []string
		for rows.Next() {
			var id string
			if err := rows.Scan(&id); err != nil {
				rows.Close()
				return err
			}
			ids = append(ids, id)
		}
		rows.Close()
		if err := rows.Err(); err != nil {
			return err
		}
		for _, id := range ids {
			b, err := getBuild(tx, id)
			if err != nil {
				return err
			}
			out = append(out, *b)
		}
		return nil
	})
	return out, err
}

// Edit changes a build in one transaction: fn receives the stored build and
// changes it in place; the id cannot change. A bad field or unknown id is an
// *Error and nothing is written.
func (s *Store) Edit(id string, fn func(b *Build) error) (*Build, error) {
	var out *Build
	err := s.write(context.Background(), func(tx *sql.Tx) error {
		b, err := getBuild(tx, id)
		if err != nil {
			return err
		}
		if err := fn(b); err != nil {
			return err
		}
		if b.ID != id {
			return &Error{BuildID: id, Field: "id", Err: kinded(ErrInvalid, "the id of a build cannot change")}
		}
		if err := b.Normalize(); err != nil {
			return err
		}
		b.UpdatedAt = now().Format(time.RFC3339)
		if _, err := tx.Exec(`UPDATE builds SET name=?, date=?, mass_g=?, height_mm=?, base_mm=?, top_mm=?, bracing=?, glue=?, notes=?, updated_at=? WHERE id=?`,
			b.Name, b.Date, b.MassG, b.HeightMM, b.BaseMM, b.TopMM, b.Bracing, b.Glue, b.Notes, b.UpdatedAt, b.ID); err != nil {
			return fmt.Errorf("update build %s: %w", id, err)
		}
		if err := writeChildren(tx, b); err != nil {
			return err
		}
		out = b
		return nil
	})
	return out, err
}

// Remove deletes a build and its tests and returns how many tests went with
// it. Evidence objects stay in the object store (another test may share
// them); Check counts the unreferenced ones.
func (s *Store) Remove(id string) (int, error) {
	var n int
	err := s.write(context.Background(), func(tx *sql.Tx) error {
		if _, err := getBuild(tx, id); err != nil {
			return err
		}
		if err := tx.QueryRow(`SELECT count(*) FROM tests WHERE build_id = ?`, id).Scan(&n); err != nil {
			return err
		}
		_, err := tx.Exec(`DELETE FROM builds WHERE id = ?`, id)
		return err
	})
	return n, err
}
