package records

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
	"time"
)

var hashPattern = regexp.MustCompile(`^[0-9a-f]{64}$`)

// objectPath returns where the object with the SHA-256 hex name lives:
// objects/ab/abcdef....
func (s *Store) objectPath(sum string) string {
	return filepath.Join(s.objects, sum[:2], sum)
}

// putObject copies r into the object store under its SHA-256 name and
// returns the name and size. An object already present is kept (content
// addressing makes the copies identical). The copy goes through a temporary
// file in the store, synced, then renamed, so a crash never leaves a partial
// object under a real name.
func (s *Store) putObject(r io.Reader) (sum string, size int64, err error) {
	if err := os.MkdirAll(s.objects, 0o755); err != nil {
		return "", 0, fmt.Errorf("create object store: %w", err)
	}
	tmp, err := os.CreateTemp(s.objects, ".incoming-*")
	if err != nil {
		return "", 0, fmt.Errorf("create object: %w", err)
	}
	defer func() {
		if tmp != nil {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	h := sha256.New()
	size, err = io.Copy(io.MultiWriter(tmp, h), r)
	if err != nil {
		return "", 0, err
	}
	sum = hex.EncodeToString(h.Sum(nil))
	dst := s.objectPath(sum)
	if ok, _ := fileHashIs(dst, sum); ok {
		// Mark the object as fresh so Prune's grace period protects it
		// until the record that uses it commits.
		t := time.Now()
		os.Chtimes(dst, t, t)
		return sum, size, nil
	}
	if err := tmp.Sync(); err != nil {
		return "", 0, fmt.Errorf("sync object: %w", err)
	}
	if err := tmp.Chmod(0o444); err != nil {
		return "", 0, fmt.Errorf("object mode: %w", err)
	}
	if err := tmp.Close(); err != nil {
		return "", 0, fmt.Errorf("close object: %w", err)
	}
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		return "", 0, fmt.Errorf("create object folder: %w", err)
	}
	// A present but damaged object is replaced by the good copy.
	if err := os.Rename(tmp.Name(), dst); err != nil {
		return "", 0, fmt.Errorf("store object %s: %w", sum, err)
	}
	tmp = nil
	syncDir(filepath.Dir(dst))
	return sum, size, nil
}

// putFile copies the file at path into the object store.
func (s *Store) putFile(path string) (string, int64, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", 0, err
	}
	defer f.Close()
	sum, n, err := s.putObject(f)
	if err != nil {
		return "", 0, fmt.Errorf("copy %s: %w", path, err)
	}
	return sum, n, nil
}

// hashFile returns the SHA-256 hex digest and size of the file at path.
func hashFile(path string) (string, int64, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", 0, err
	}
	defer f.Close()
	h := sha256.New()
	n, err := io.Copy(h, f)
	if err != nil {
		return "", 0, fmt.Errorf("read %s: %w", path, err)
	}
	return hex.EncodeToString(h.Sum(nil)), n, nil
}

// fileHashIs reports whether the file exists and has the digest.
func fileHashIs(path, sum string) (bool, error) {
	got, _, err := hashFile(path)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return false, nil
		}
		return false, err
	}
	return got == sum, nil
}

// syncDir flushes a folder's entries so a rename survives a crash; errors
// are ignored (some file systems refuse to sync folders).
func syncDir(dir string) {
	if d, err := os.Open(dir); err == nil {
		d.Sync()
		d.Close()
	}
}

// OpenObject opens the stored object with the SHA-256 hex name.
func (s *Store) OpenObject(sum string) (*os.File, error) {
	if !hashPattern.MatchString(sum) {
		return nil, &Error{Err: kinded(ErrInvalid, "%q is not a SHA-256 hex digest", sum)}
	}
	return os.Open(s.objectPath(sum))
}

// sha256Hex returns the hex SHA-256 of b.
func sha256Hex(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

// hashWriter is a SHA-256 writer with a hex result.
type hashWriter struct{ h hash.Hash }

func newHashWriter() *hashWriter                  { return &hashWriter{h: sha256.New()} }
func (w *hashWriter) Write(p []byte) (int, error) { return w.h.Write(p) }
func (w *hashWriter) hex() string                 { return hex.EncodeToString(w.h.Sum(nil)) }
