package records

import (
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/failframe/failframe/report"
)

// TestSHA256KnownVectors checks the hashing path used for object names
// against published digests: FIPS 180-2, Appendix B.1 (one-block message
// "abc") and B.2 (two-block message), the values also reproduced by
// coreutils sha256sum when it is installed.
func TestSHA256KnownVectors(t *testing.T) {
	vectors := []struct{ msg, want string }{
		{"abc", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"},
		{"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq", "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"},
	}
	s := newStore(t)
	for _, v := range vectors {
		sum, size, err := s.putObject(strings.NewReader(v.msg))
		if err != nil {
			t.Fatal(err)
		}
		if sum != v.want || size != int64(len(v.msg)) {
			t.Errorf("putObject(%q) = %s (%d bytes), want %s", v.msg, sum, size, v.want)
		}
		// The object is stored under objects/ab/abcdef....
		p := filepath.Join(s.ObjectsDir(), v.want[:2], v.want)
		if b, err := os.ReadFile(p); err != nil || string(b) != v.msg {
			t.Errorf("object %s: %q, %v", p, b, err)
		}
		// Independent implementation: coreutils sha256sum.
		if _, err := exec.LookPath("sha256sum"); err == nil {
			out, err := exec.Command("sha256sum", p).Output()
			if err != nil || !strings.HasPrefix(string(out), v.want) {
				t.Errorf("sha256sum %s = %q, %v", p, out, err)
			}
		}
	}
}

func TestAttachStoresResultAndEvidence(t *testing.T) {
	s := newStore(t)
	if _, err := s.Add(sampleBuild("T7")); err != nil {
		t.Fatal(err)
	}
	dir := fakeReport(t, t.TempDir(), 1, 9200, "brace_buckling", "AB-d1")
	res, err := s.Attach("T7", dir)
	if err != nil {
		t.Fatal(err)
	}
	if !res.Created || res.Test.Seq != 1 || len(res.Warnings) != 0 {
		t.Errorf("first attach: %+v", res)
	}
	ts, err := s.Tests("T7")
	if err != nil || len(ts) != 1 {
		t.Fatalf("Tests = %v, %v", ts, err)
	}
	got := ts[0]
	raw, _ := os.ReadFile(filepath.Join(dir, "report.json"))
	rs := sha256.Sum256(raw)
	if got.ReportSHA256 != hex.EncodeToString(rs[:]) {
		t.Errorf("report hash %s", got.ReportSHA256)
	}
	wantAlign := &report.Alignment{Method: "auto", OffsetS: 1.25, UncertaintyS: 0.01, Detail: "load drop matched to collapse"}
	if *got.PeakLoadG != 9200 || *got.MassG != 21.4 || *got.Efficiency != 9200/21.4 || got.FailureMode != "brace_buckling" ||
		got.FirstMember != "AB-d1" || !strings.Contains(got.Account, "AB-d1") || !reflect.DeepEqual(got.Alignment, wantAlign) ||
		got.Tool != "failframe test" || got.CreatedAt != "2026-03-15T10:00:00Z" {
		t.Errorf("stored test: %+v", got)
	}
	// Every file of the folder is recorded with the hash of its content and
	// its object holds exactly that content.
	wantPaths := []string{"evidence/first.png", "plots/load.png", "report.html", "report.json"}
	if len(got.Files) != len(wantPaths) {
		t.Fatalf("files %+v", got.Files)
	}
	for i, f := range got.Files {
		if f.Path != wantPaths[i] {
			t.Errorf("file %d path %s, want %s", i, f.Path, wantPaths[i])
		}
		orig, _ := os.ReadFile(filepath.Join(dir, filepath.FromSlash(f.Path)))
		h := sha256.Sum256(orig)
		if f.SHA256 != hex.EncodeToString(h[:]) || f.Size != int64(len(orig)) {
			t.Errorf("%s: recorded %s/%d, content %x/%d", f.Path, f.SHA256, f.Size, h, len(orig))
		}
		obj, err := os.ReadFile(filepath.Join(s.ObjectsDir(), f.SHA256[:2], f.SHA256))
		if err != nil || string(obj) != string(orig) {
			t.Errorf("object of %s differs from the original (%v)", f.Path, err)
		}
	}
	if rep, err := s.Check(); err != nil || rep.Objects != 4 || rep.Files != 4 {
		t.Errorf("Check after attach: %+v, %v", rep, err)
	}
}

func TestAttachIdempotentAndSecondTest(t *testing.T) {
	s := newStore(t)
	if _, err := s.Add(sampleBuild("T7")); err != nil {
		t.Fatal(err)
	}
	dir := fakeReport(t, t.TempDir(), 1, 9200, "brace_buckling", "AB-d1")
	first, err := s.Attach("T7", dir)
	if err != nil {
		t.Fatal(err)
	}
	before := snapshot(t, s)
	again, err := s.Attach("T7", dir)
	if err != nil {
		t.Fatal(err)
	}
	if again.Created || again.Test.Seq != 1 || again.Test.AttachedAt != first.Test.AttachedAt {
		t.Errorf("re-attach should be a no-op: %+v", again)
	}
	if after := snapshot(t, s); after != before {
		t.Errorf("re-attach wrote rows: %v -> %v", before, after)
	}
	// A different report of the same build is its second test; the PNG it
	// shares with the first (same seed) is stored once.
	dir2 := fakeReport(t, t.TempDir(), 1, 8100, "leg_between_braces", "leg-B")
	second, err := s.Attach("T7", dir2)
	if err != nil {
		t.Fatal(err)
	}
	if !second.Created || second.Test.Seq != 2 || second.Test.Label() != "T7#2" {
		t.Errorf("second test: %+v", second.Test)
	}
	rep, err := s.Check()
	if err != nil {
		t.Fatal(err)
	}
	// 8 file rows; report.json differs, report.html and both PNGs are shared.
	if rep.Files != 8 || rep.Objects != 5 {
		t.Errorf("check: %d files, %d objects; want 8 files in 5 objects", rep.Files, rep.Objects)
	}
	// The same report cannot become a test of another build.
	if _, err := s.Add(sampleBuild("T8")); err != nil {
		t.Fatal(err)
	}
	before = snapshot(t, s)
	if _, err := s.Attach("T8", dir); !errors.Is(err, ErrDuplicate) || !strings.Contains(err.Error(), `"T7"`) {
		t.Errorf("attaching T7's report to T8: %v", err)
	}
	if after := snapshot(t, s); after != before {
		t.Errorf("refused attach wrote rows: %v -> %v", before, after)
	}
}

func TestAttachBadInputWritesNothing(t *testing.T) {
	s := newStore(t)
	if _, err := s.Add(sampleBuild("T7")); err != nil {
		t.Fatal(err)
	}
	good := fakeReport(t, t.TempDir(), 3, 5000, "tower_twist", "")
	mk := func(name, content string) string {
		d := t.TempDir()
		if content != "" {
			if err := os.WriteFile(filepath.Join(d, name), []byte(content), 0o644); err != nil {
				t.Fatal(err)
			}
		}
		return d
	}
	missingListed := fakeReport(t, t.TempDir(), 4, 5000, "tower_twist", "")
	os.Remove(filepath.Join(missingListed, "plots", "load.png"))
	tests := []struct {
		name, build, dir string
		want             error
		mention          string
	}{
		{"unknown build", "NOPE", good, ErrUnknownBuild, `"NOPE"`},
		{"empty folder", "T7", mk("x", ""), ErrNotReport, "report.json"},
		{"missing folder", "T7", filepath.Join(t.TempDir(), "gone"), ErrNotReport, "gone"},
		{"not JSON", "T7", mk("report.json", "clip,frames\n"), ErrNotReport, "report.json"},
		{"JSON without version", "T7", mk("report.json", `{"tool":"other"}`), ErrNotReport, "report.json"},
		{"unknown version", "T7", mk("report.json", `{"version":42}`), ErrNotReport, "version 42"},
		{"negative load", "T7", mk("report.json", `{"version":1,"peak_load_g":-5}`), ErrNotReport, "report.json"},
		{"listed file missing", "T7", missingListed, ErrNotReport, "load.png"},
		{"listed file outside", "T7", mk("report.json", `{"version":1,"files":["../x"]}`), ErrNotReport, "../x"},
	}
	before := snapshot(t, s)
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, err := s.Attach(tt.build, tt.dir)
			var re *Error
			if !errors.Is(err, tt.want) || !errors.As(err, &re) {
				t.Fatalf("Attach: %v, want *Error wrapping %v", err, tt.want)
			}
			if !strings.Contains(err.Error(), tt.mention) {
				t.Errorf("message %q does not mention %q", err, tt.mention)
			}
			if after := snapshot(t, s); after != before {
				t.Errorf("rows written: %v -> %v", before, after)
			}
		})
	}
	if ents, _ := os.ReadDir(s.ObjectsDir()); len(ents) != 0 {
		t.Errorf("refused attaches left %d entries in the object store", len(ents))
	}
}

func TestCheckFindsChangedAndMissingEvidence(t *testing.T) {
	s := newStore(t)
	if _, err := s.Add(sampleBuild("T7")); err != nil {
		t.Fatal(err)
	}
	res, err := s.Attach("T7", fakeReport(t, t.TempDir(), 1, 9200, "brace_buckling", "AB-d1"))
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.Check(); err != nil {
		t.Fatalf("fresh store: %v", err)
	}
	var png, html File
	for _, f := range res.Test.Files {
		switch f.Path {
		case "plots/load.png":
			png = f
		case "report.html":
			html = f
		}
	}
	// Change one byte of an evidence file.
	p := filepath.Join(s.ObjectsDir(), png.SHA256[:2], png.SHA256)
	os.Chmod(p, 0o644)
	b, _ := os.ReadFile(p)
	b[len(b)/2] ^= 0x01
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
	// Lose another.
	if err := os.Remove(filepath.Join(s.ObjectsDir(), html.SHA256[:2], html.SHA256)); err != nil {
		t.Fatal(err)
	}
	rep, err := s.Check()
	var ie *IntegrityError
	if !errors.As(err, &ie) || len(rep.Problems) != 2 {
		t.Fatalf("Check = %+v, %v; want 2 problems", rep, err)
	}
	kinds := map[string]string{}
	for _, pr := range rep.Problems {
		kinds[pr.Path] = pr.Kind
		if pr.BuildID != "T7" || pr.Seq != 1 {
			t.Errorf("problem %+v does not name build T7 test 1", pr)
		}
	}
	if kinds["plots/load.png"] != "corrupt" || kinds["report.html"] != "missing" {
		t.Errorf("problems %+v", rep.Problems)
	}
	// Re-attaching the original report does not hide the damage (no-op),
	// but a fresh object copy from another report repairs the PNG.
	if _, err := s.Add(sampleBuild("T8")); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Attach("T8", fakeReport(t, t.TempDir(), 1, 7000, "tower_twist", "")); err != nil {
		t.Fatal(err)
	}
	rep, err = s.Check()
	if err != nil || len(rep.Problems) != 0 {
		t.Errorf("after a good copy was stored again: %+v, %v", rep, err)
	}
}

// TestObjectsWithoutRecordAreHarmless covers an attach interrupted between
// copying objects and committing the record: the object store then holds
// objects no test uses, which Check counts but does not call problems.
func TestObjectsWithoutRecordAreHarmless(t *testing.T) {
	s := newStore(t)
	if _, _, err := s.putObject(strings.NewReader("evidence of an interrupted attach")); err != nil {
		t.Fatal(err)
	}
	rep, err := s.Check()
	if err != nil || rep.Unreferenced != 1 || len(rep.Problems) != 0 {
		t.Errorf("Check = %+v, %v; want 1 unreferenced object and no problems", rep, err)
	}
}

func TestPruneRemovesOnlyOldUnusedObjects(t *testing.T) {
	s := newStore(t)
	for _, id := range []string{"T7", "T8"} {
		if _, err := s.Add(sampleBuild(id)); err != nil {
			t.Fatal(err)
		}
	}
	// Same seed: T8's report shares its PNGs and report.html with T7's.
	if _, err := s.Attach("T7", fakeReport(t, t.TempDir(), 1, 9000, "brace_buckling", "AB-d1")); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Attach("T8", fakeReport(t, t.TempDir(), 1, 7000, "tower_twist", "")); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Remove("T7"); err != nil {
		t.Fatal(err)
	}
	leftover := filepath.Join(s.ObjectsDir(), ".incoming-123")
	stranger := filepath.Join(s.ObjectsDir(), "README")
	os.WriteFile(leftover, []byte("partial"), 0o644)
	os.WriteFile(stranger, []byte("not ours"), 0o644)
	rep, err := s.Check()
	if err != nil || rep.Unreferenced != 1 { // only T7's report.json is unshared
		t.Fatalf("before prune: %+v, %v", rep, err)
	}
	if n, _, err := s.Prune(PruneGrace); err != nil || n != 0 {
		t.Errorf("prune within the grace period removed %d (%v)", n, err)
	}
	n, size, err := s.Prune(0)
	if err != nil || n != 2 || size == 0 {
		t.Errorf("Prune(0) = %d files, %d bytes, %v; want the unused object and the leftover", n, size, err)
	}
	if _, err := os.Stat(stranger); err != nil {
		t.Errorf("prune removed a file that is not an object: %v", err)
	}
	rep, err = s.Check()
	if err != nil || rep.Unreferenced != 0 || rep.Objects != 4 {
		t.Errorf("after prune: %+v, %v; want T8's 4 objects intact", rep, err)
	}
}
