package records

import (
	"archive/zip"
	"errors"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

func TestExportImportIdentical(t *testing.T) {
	src := newStore(t)
	b, err := src.Add(sampleBuild("T7"))
	if err != nil {
		t.Fatal(err)
	}
	for i, mode := range []string{"brace_buckling", "leg_between_braces"} {
		if _, err := src.Attach("T7", fakeReport(t, t.TempDir(), uint8(10+i), 9000-float64(i)*500, mode, "AB-d1")); err != nil {
			t.Fatal(err)
		}
	}
	zipPath := filepath.Join(t.TempDir(), "T7.zip")
	if err := src.ExportFile("T7", zipPath); err != nil {
		t.Fatal(err)
	}
	// The archive opens as plain report folders for someone without failframe.
	zr, err := zip.OpenReader(zipPath)
	if err != nil {
		t.Fatal(err)
	}
	names := map[string]bool{}
	for _, f := range zr.File {
		names[f.Name] = true
	}
	zr.Close()
	for _, n := range []string{ArchiveManifest, "tests/1/report.json", "tests/2/evidence/first.png", "tests/2/report.html"} {
		if !names[n] {
			t.Errorf("archive lacks %s (has %v)", n, names)
		}
	}

	dst := newStore(t)
	got, err := dst.Import(zipPath)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, b) {
		t.Errorf("imported build %+v, want %+v", got, b)
	}
	re, _ := dst.Get("T7")
	if !reflect.DeepEqual(re, b) {
		t.Errorf("stored imported build %+v, want %+v", re, b)
	}
	wantTests, _ := src.Tests("T7")
	gotTests, err := dst.Tests("T7")
	if err != nil || !reflect.DeepEqual(gotTests, wantTests) {
		t.Errorf("imported tests differ:\n got %+v\nwant %+v (%v)", gotTests, wantTests, err)
	}
	if rep, err := dst.Check(); err != nil || rep.Objects == 0 {
		t.Errorf("check of the imported store: %+v, %v", rep, err)
	}
	// Evidence bytes are the same in both stores.
	for _, f := range gotTests[1].Files {
		a, _ := os.ReadFile(filepath.Join(src.ObjectsDir(), f.SHA256[:2], f.SHA256))
		c, _ := os.ReadFile(filepath.Join(dst.ObjectsDir(), f.SHA256[:2], f.SHA256))
		if len(a) == 0 || string(a) != string(c) {
			t.Errorf("object of %s differs", f.Path)
		}
	}
	// Importing again is a duplicate id, nothing written.
	before := snapshot(t, dst)
	if _, err := dst.Import(zipPath); !errors.Is(err, ErrDuplicate) {
		t.Errorf("second import: %v", err)
	}
	if after := snapshot(t, dst); after != before {
		t.Errorf("refused import wrote: %v -> %v", before, after)
	}
	// Unknown build.
	if err := src.ExportFile("NOPE", filepath.Join(t.TempDir(), "x.zip")); !errors.Is(err, ErrUnknownBuild) {
		t.Errorf("export unknown: %v", err)
	}
}

// rewriteZip copies an archive, letting change alter or drop entries.
func rewriteZip(t *testing.T, from, to string, change func(name string, data []byte) ([]byte, bool)) {
	t.Helper()
	zr, err := zip.OpenReader(from)
	if err != nil {
		t.Fatal(err)
	}
	defer zr.Close()
	out, err := os.Create(to)
	if err != nil {
		t.Fatal(err)
	}
	zw := zip.NewWriter(out)
	for _, f := range zr.File {
		rc, _ := f.Open()
		data, _ := io.ReadAll(rc)
		rc.Close()
		data, keep := change(f.Name, data)
		if !keep {
			continue
		}
		w, _ := zw.Create(f.Name)
		w.Write(data)
	}
	zw.Close()
	out.Close()
}

func TestImportBadArchivesWriteNothing(t *testing.T) {
	src := newStore(t)
	if _, err := src.Add(sampleBuild("T7")); err != nil {
		t.Fatal(err)
	}
	if _, err := src.Attach("T7", fakeReport(t, t.TempDir(), 1, 9000, "brace_buckling", "AB-d1")); err != nil {
		t.Fatal(err)
	}
	good := filepath.Join(t.TempDir(), "T7.zip")
	if err := src.ExportFile("T7", good); err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	tampered := filepath.Join(dir, "tampered.zip")
	rewriteZip(t, good, tampered, func(n string, d []byte) ([]byte, bool) {
		if n == "tests/1/plots/load.png" {
			d[len(d)-5] ^= 0xff
		}
		return d, true
	})
	missing := filepath.Join(dir, "missing.zip")
	rewriteZip(t, good, missing, func(n string, d []byte) ([]byte, bool) { return d, n != "tests/1/report.html" })
	negMass := filepath.Join(dir, "negmass.zip")
	rewriteZip(t, good, negMass, func(n string, d []byte) ([]byte, bool) {
		if n == ArchiveManifest {
			d = []byte(strings.Replace(string(d), `"mass_g": 21.4`, `"mass_g": -21.4`, 1))
		}
		return d, true
	})
	notZip := filepath.Join(dir, "plain.zip")
	os.WriteFile(notZip, []byte("frame,load\n1,2\n"), 0o644)
	noManifest := filepath.Join(dir, "nomanifest.zip")
	rewriteZip(t, good, noManifest, func(n string, d []byte) ([]byte, bool) { return d, n != ArchiveManifest })

	tests := []struct {
		name, file string
		want       error
		mention    string
	}{
		{"tampered evidence", tampered, ErrNotExport, "load.png"},
		{"missing evidence", missing, ErrNotExport, "report.html"},
		{"negative mass", negMass, ErrInvalid, "mass_g"},
		{"not a zip", notZip, ErrNotExport, "plain.zip"},
		{"no manifest", noManifest, ErrNotExport, ArchiveManifest},
		{"absent file", filepath.Join(dir, "absent.zip"), ErrNotExport, "absent.zip"},
	}
	dst := newStore(t)
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := dst.Import(tt.file)
			if !errors.Is(err, tt.want) || !strings.Contains(err.Error(), tt.mention) {
				t.Errorf("Import: %v; want %v mentioning %q", err, tt.want, tt.mention)
			}
			if c := snapshot(t, dst); c != [5]int{} {
				t.Errorf("rows written: %v", c)
			}
		})
	}
}

func TestExportRefusesCorruptEvidenceAndKeepsOldArchive(t *testing.T) {
	s := newStore(t)
	if _, err := s.Add(sampleBuild("T7")); err != nil {
		t.Fatal(err)
	}
	res, err := s.Attach("T7", fakeReport(t, t.TempDir(), 1, 9000, "brace_buckling", "AB-d1"))
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "T7.zip")
	if err := os.WriteFile(out, []byte("older archive"), 0o644); err != nil {
		t.Fatal(err)
	}
	f := res.Test.Files[0]
	obj := filepath.Join(s.ObjectsDir(), f.SHA256[:2], f.SHA256)
	os.Chmod(obj, 0o644)
	if err := os.WriteFile(obj, []byte("damaged"), 0o644); err != nil {
		t.Fatal(err)
	}
	err = s.ExportFile("T7", out)
	if err == nil || !strings.Contains(err.Error(), "corrupt") || !strings.Contains(err.Error(), f.Path) {
		t.Errorf("export of damaged evidence: %v", err)
	}
	if b, _ := os.ReadFile(out); string(b) != "older archive" {
		t.Errorf("failed export replaced the old archive: %q", b)
	}
	if ents, _ := os.ReadDir(filepath.Dir(out)); len(ents) != 1 {
		t.Errorf("temporary files left: %v", ents)
	}
}
