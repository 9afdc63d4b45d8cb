package records

import (
	"archive/zip"
	"context"
	"database/sql"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path"
	"path/filepath"
	"time"
)

// ArchiveFormat and ArchiveVersion identify a build archive's manifest.
const (
	ArchiveFormat  = "failframe-build"
	ArchiveVersion = 1
	// ArchiveManifest is the manifest's name inside the archive.
	ArchiveManifest = "failframe-build.json"
)

// Archive is the manifest of a build archive: the build record and its
// tests with their file lists. Test n's files are stored in the archive as
// tests/n/<path>, so the archive opens as ordinary report folders.
type Archive struct {
	// Format is ArchiveFormat.
	Format string `json:"format"`
	// Version is ArchiveVersion.
	Version int `json:"version"`
	// ExportedAt is when the archive was written, RFC 3339 UTC.
	ExportedAt string `json:"exported_at"`
	// Build is the build record.
	Build Build `json:"build"`
	// Tests are the build's tests in order.
	Tests []Test `json:"tests"`
}

// archiveName is where a test's file sits in the archive.
func archiveName(seq int, p string) string { return fmt.Sprintf("tests/%d/%s", seq, p) }

// Export writes the build, its tests and all their files as a zip archive
// to w.
func (s *Store) Export(buildID string, w io.Writer) error {
	var a Archive
	err := s.read(context.Background(), func(tx *sql.Tx) error {
		b, err := getBuild(tx, buildID)
		if err != nil {
			return err
		}
		a.Build = *b
		a.Tests, err = scanTests(tx, `SELECT `+testColumns+` FROM tests WHERE build_id = ? ORDER BY seq`, buildID)
		return err
	})
	if err != nil {
		return err
	}
	a.Format, a.Version, a.ExportedAt = ArchiveFormat, ArchiveVersion, now().Format(time.RFC3339)
	if a.Tests == nil {
		a.Tests = []Test{}
	}
	zw := zip.NewWriter(w)
	man, err := json.MarshalIndent(&a, "", "  ")
	if err != nil {
		return err
	}
	stamp, _ := time.Parse(time.RFC3339, a.ExportedAt)
	mw, err := zw.CreateHeader(&zip.FileHeader{Name: ArchiveManifest, Method: zip.Deflate, Modified: stamp})
	if err != nil {
		return err
	}
	if _, err := mw.Write(append(man, '\n')); err != nil {
		return err
	}
	for _, t := range a.Tests {
		for _, f := range t.Files {
			if err := s.copyObjectTo(zw, archiveName(t.Seq, f.Path), f.SHA256, stamp); err != nil {
				return fmt.Errorf("export %s test %d %s: %w", buildID, t.Seq, f.Path, err)
			}
		}
	}
	return zw.Close()
}

// copyObjectTo adds the object as a zip entry, checking its hash on the way.
func (s *Store) copyObjectTo(zw *zip.Writer, name, sum string, stamp time.Time) error {
	f, err := s.OpenObject(sum)
	if err != nil {
		return err
	}
	defer f.Close()
	w, err := zw.CreateHeader(&zip.FileHeader{Name: name, Method: zip.Deflate, Modified: stamp})
	if err != nil {
		return err
	}
	h := newHashWriter()
	if _, err := io.Copy(io.MultiWriter(w, h), f); err != nil {
		return err
	}
	if got := h.hex(); got != sum {
		return fmt.Errorf("object %s is corrupt (content hashes to %s); run failframe build check", sum, got)
	}
	return nil
}

// ExportFile writes the archive to path atomically (temporary file, then
// rename); an existing file is replaced only when the export succeeds.
func (s *Store) ExportFile(buildID, path string) error {
	return writeAtomic(path, func(w io.Writer) error { return s.Export(buildID, w) })
}

// writeAtomic writes a file through a temporary file in the same folder.
func writeAtomic(path string, fn func(w io.Writer) error) error {
	dir := filepath.Dir(path)
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	name := tmp.Name()
	defer os.Remove(name)
	if err := fn(tmp); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := os.Chmod(name, 0o644); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := os.Rename(name, path); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	syncDir(dir)
	return nil
}

// Import reads a build archive written by Export into the store: the same
// build record, tests and files. A file that is not a build archive, a
// file whose content does not match its recorded hash, a build id already
// in the store or a report already attached elsewhere is an *Error and
// nothing is recorded.
func (s *Store) Import(file string) (*Build, error) {
	bad := func(format string, a ...any) error {
		return &Error{Path: file, Err: fmt.Errorf("%w: "+format, append([]any{ErrNotExport}, a...)...)}
	}
	zr, err := zip.OpenReader(file)
	if err != nil {
		if _, serr := os.Stat(file); serr != nil {
			return nil, &Error{Path: file, Err: fmt.Errorf("%w: %w", ErrNotExport, serr)}
		}
		return nil, bad("not a zip archive (%v)", err)
	}
	defer zr.Close()
	entries := map[string]*zip.File{}
	for _, f := range zr.File {
		entries[f.Name] = f
	}
	mf, ok := entries[ArchiveManifest]
	if !ok {
		return nil, bad("no %s inside", ArchiveManifest)
	}
	rc, err := mf.Open()
	if err != nil {
		return nil, bad("%s: %v", ArchiveManifest, err)
	}
	var a Archive
	err = json.NewDecoder(io.LimitReader(rc, 64<<20)).Decode(&a)
	rc.Close()
	if err != nil {
		return nil, bad("%s: %v", ArchiveManifest, err)
	}
	if a.Format != ArchiveFormat || a.Version < 1 || a.Version > ArchiveVersion {
		return nil, bad("%s has format %q version %d; this failframe reads %q version 1 to %d", ArchiveManifest, a.Format, a.Version, ArchiveFormat, ArchiveVersion)
	}
	b := a.Build
	created, updated := b.CreatedAt, b.UpdatedAt
	if err := b.Normalize(); err != nil {
		return nil, &Error{Path: file, Err: err}
	}
	b.CreatedAt, b.UpdatedAt = created, updated
	seqs := map[int]bool{}
	for i := range a.Tests {
		t := &a.Tests[i]
		t.BuildID = b.ID
		if t.Seq < 1 || seqs[t.Seq] {
			return nil, bad("test %d: bad or repeated sequence number", t.Seq)
		}
		seqs[t.Seq] = true
		if !hashPattern.MatchString(t.ReportSHA256) {
			return nil, bad("test %d: bad report hash %q", t.Seq, t.ReportSHA256)
		}
		for _, f := range t.Files {
			if !hashPattern.MatchString(f.SHA256) || path.Clean(f.Path) != f.Path || path.IsAbs(f.Path) || f.Path == ".." || len(f.Path) >= 3 && f.Path[:3] == "../" {
				return nil, bad("test %d: bad file entry %q", t.Seq, f.Path)
			}
			if _, ok := entries[archiveName(t.Seq, f.Path)]; !ok {
				return nil, bad("test %d: %s is missing from the archive", t.Seq, archiveName(t.Seq, f.Path))
			}
		}
	}
	// Refuse early (before copying objects) when the id is taken.
	if _, err := s.Get(b.ID); err == nil {
		return nil, &Error{Path: file, BuildID: b.ID, Err: kinded(ErrDuplicate, "a build with this id is already recorded")}
	}
	for _, t := range a.Tests {
		for _, f := range t.Files {
			name := archiveName(t.Seq, f.Path)
			rc, err := entries[name].Open()
			if err != nil {
				return nil, bad("%s: %v", name, err)
			}
			sum, size, err := s.putObject(rc)
			rc.Close()
			if err != nil {
				return nil, bad("%s: %v", name, err)
			}
			if sum != f.SHA256 || size != f.Size {
				return nil, bad("%s is corrupt: content hashes to %s (%d bytes), the record says %s (%d bytes)", name, sum, size, f.SHA256, f.Size)
			}
		}
	}
	err = s.write(context.Background(), func(tx *sql.Tx) error {
		if err := insertBuild(tx, &b); err != nil {
			return err
		}
		for i := range a.Tests {
			t := &a.Tests[i]
			if old, err := testBySum(tx, t.ReportSHA256); err != nil {
				return err
			} else if old != nil {
				return &Error{Path: file, Err: kinded(ErrDuplicate, "test %d's report is already attached to build %q as test %d", t.Seq, old.BuildID, old.Seq)}
			}
			if err := insertTest(tx, t); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	return &b, nil
}
