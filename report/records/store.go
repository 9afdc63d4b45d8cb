// Package records is failframe's build record store: one SQLite database
// file holding each build (the tower as built: mass, sizes, bracing, wood,
// glue, notes, tags) and its tests (the analysis results attached from report
// folders), plus a content-addressed object store beside the database that
// keeps every attached report file under its SHA-256 name, stored once.
//
// Every write runs in one immediate transaction; the database runs in WAL
// mode with a busy timeout, so several processes may write at once. A problem
// with what the caller asked for (unknown or duplicate build id, a bad field,
// a folder that is not a failframe report, an archive that is not a failframe
// export) is returned as an *Error and nothing is written.
package records

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"net/url"
	"os"
	"path/filepath"
	"strings"
	"time"

	"modernc.org/sqlite" // the pure-Go SQLite driver, registered as "sqlite"
	sqlite3 "modernc.org/sqlite/lib"
)

// BusyTimeout is how long a writer waits for another writer's lock before
// giving up.
const BusyTimeout = 30 * time.Second

// busyTimeout is BusyTimeout, shortened by tests.
var busyTimeout = BusyTimeout

// ErrBusy means another process held the store's write lock for longer than
// BusyTimeout.
var ErrBusy = errors.New("the store is busy: another failframe has been writing to it for too long; try again")

// DefaultPath returns the database path used when none is given: $FAILFRAME_DB,
// else $XDG_DATA_HOME/failframe/builds.db, else
// ~/.local/share/failframe/builds.db. getenv is os.Getenv in production.
func DefaultPath(getenv func(string) string) (string, error) {
	if p := getenv("FAILFRAME_DB"); p != "" {
		return p, nil
	}
	if d := getenv("XDG_DATA_HOME"); d != "" {
		return filepath.Join(d, "failframe", "builds.db"), nil
	}
	home := getenv("HOME")
	if home == "" {
		h, err := os.UserHomeDir()
		if err != nil {
			return "", fmt.Errorf("records: no database path: set --db, FAILFRAME_DB or HOME: %w", err)
		}
		home = h
	}
	return filepath.Join(home, ".local", "share", "failframe", "builds.db"), nil
}

// Store is an open build record store. It is safe for concurrent use.
type Store struct {
	path    string
	objects string
	db      *sql.DB
}

// Open opens the store at path, creating the database file (and its folder)
// if needed, and brings its schema up to date. The object store is the
// folder "objects" beside the database file.
func Open(path string) (*Store, error) {
	return openAt(path, len(migrations))
}

// openAt opens the store and migrates it to schema version target (tests
// use it to create stores of an old schema).
func openAt(path string, target int) (*Store, error) {
	if path == "" {
		return nil, errors.New("records: empty database path")
	}
	abs, err := filepath.Abs(path)
	if err != nil {
		return nil, fmt.Errorf("records: database path %s: %w", path, err)
	}
	dir := filepath.Dir(abs)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("records: create folder for %s: %w", path, err)
	}
	if fi, err := os.Stat(abs); err == nil && fi.IsDir() {
		return nil, &Error{Path: path, Err: kinded(ErrInvalid, "is a folder, not a database file")}
	}
	db, err := sql.Open("sqlite", dsn(abs))
	if err != nil {
		return nil, fmt.Errorf("records: open %s: %w", path, err)
	}
	db.SetMaxOpenConns(4)
	s := &Store{path: abs, objects: filepath.Join(dir, "objects"), db: db}
	if err := s.migrate(context.Background(), target); err != nil {
		db.Close()
		return nil, fmt.Errorf("records: open %s: %w", path, err)
	}
	return s, nil
}

// dsn is the driver's connection string: WAL journal, a busy timeout, foreign
// keys on, full sync, and BEGIN IMMEDIATE for write transactions so that two
// writers queue on the lock rather than fail on a stale snapshot.
func dsn(abs string) string {
	q := url.Values{}
	q.Set("_busy_timeout", fmt.Sprint(busyTimeout.Milliseconds()))
	q.Set("_journal_mode", "WAL")
	q.Set("_foreign_keys", "1")
	q.Set("_synchronous", "FULL")
	q.Set("_txlock", "immediate")
	// SQLite decodes %HH in URI file names and stops the name at '?' or '#'.
	name := strings.NewReplacer("%", "%25", "?", "%3f", "#", "%23").Replace(abs)
	return "file:" + name + "?" + q.Encode()
}

// Path returns the database file's absolute path.
func (s *Store) Path() string { return s.path }

// ObjectsDir returns the folder of the content-addressed object store.
func (s *Store) ObjectsDir() string { return s.objects }

// Close closes the database.
func (s *Store) Close() error { return s.db.Close() }

// SchemaVersion returns the database's schema version (PRAGMA user_version).
func (s *Store) SchemaVersion() (int, error) {
	var v int
	err := s.db.QueryRow("PRAGMA user_version").Scan(&v)
	return v, err
}

// write runs fn in one immediate transaction, committing when fn returns nil.
func (s *Store) write(ctx context.Context, fn func(tx *sql.Tx) error) error {
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return busy(fmt.Errorf("begin: %w", err))
	}
	if err := fn(tx); err != nil {
		tx.Rollback()
		return busy(err)
	}
	if err := tx.Commit(); err != nil {
		return busy(fmt.Errorf("commit: %w", err))
	}
	return nil
}

// busy adds ErrBusy to an SQLITE_BUSY or SQLITE_LOCKED error.
func busy(err error) error {
	var se *sqlite.Error
	if errors.As(err, &se) {
		if c := se.Code() & 0xff; c == sqlite3.SQLITE_BUSY || c == sqlite3.SQLITE_LOCKED {
			return fmt.Errorf("records: %w (%w)", ErrBusy, err)
		}
	}
	return err
}

// read runs fn in one read transaction so that it sees a single snapshot.
func (s *Store) read(ctx context.Context, fn func(tx *sql.Tx) error) error {
	tx, err := s.db.BeginTx(ctx, &sql.TxOptions{ReadOnly: true})
	if err != nil {
		return fmt.Errorf("begin: %w", err)
	}
	defer tx.Rollback()
	return fn(tx)
}

// Sentinel errors, wrapped in *Error; test with errors.Is.
var (
	// ErrUnknownBuild means no build has the given id.
	ErrUnknownBuild = errors.New("no such build")
	// ErrDuplicate means a build with the id already exists, or the report is
	// already attached to another build.
	ErrDuplicate = errors.New("already exists")
	// ErrInvalid means a field's value is not allowed.
	ErrInvalid = errors.New("invalid")
	// ErrNotReport means a folder is not a failframe report folder.
	ErrNotReport = errors.New("not a failframe report")
	// ErrNotExport means a file is not a failframe build archive.
	ErrNotExport = errors.New("not a failframe build archive")
)

// Error is a problem with what the caller asked for; nothing was written.
type Error struct {
	// BuildID is the build concerned, when there is one.
	BuildID string
	// Path is the file or folder concerned, when there is one.
	Path string
	// Field is the build field concerned, when there is one.
	Field string
	// Err is the problem; it wraps one of the sentinel errors.
	Err error
}

// Error names the file, build and field concerned, then the problem.
func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString("records: ")
	if e.Path != "" {
		b.WriteString(e.Path)
		b.WriteString(": ")
	}
	if e.BuildID != "" {
		fmt.Fprintf(&b, "build %q: ", e.BuildID)
	}
	if e.Field != "" {
		b.WriteString(e.Field)
		b.WriteString(": ")
	}
	b.WriteString(e.Err.Error())
	return b.String()
}

// Unwrap returns the underlying problem.
func (e *Error) Unwrap() error { return e.Err }

// kindError is a message that matches a sentinel error with errors.Is
// without repeating the sentinel's text.
type kindError struct {
	kind error
	msg  string
}

func (e *kindError) Error() string        { return e.msg }
func (e *kindError) Is(target error) bool { return target == e.kind }

// kinded returns a formatted error that errors.Is matches to kind.
func kinded(kind error, format string, a ...any) error {
	return &kindError{kind: kind, msg: fmt.Sprintf(format, a...)}
}
