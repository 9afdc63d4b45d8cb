package records

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/failframe/failframe/report"
)

func TestBuildRoundTripEveryField(t *testing.T) {
	path := filepath.Join(t.TempDir(), "builds.db")
	s, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	in := sampleBuild("T7")
	in.Tags = []string{" x-test", "regional", "season-2026", "regional"} // trimmed, de-duplicated, sorted
	added, err := s.Add(in)
	if err != nil {
		t.Fatal(err)
	}
	s.Close()

	// Reopen from disk: the values must survive a close.
	s, err = Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	got, err := s.Get("T7")
	if err != nil {
		t.Fatal(err)
	}
	want := sampleBuild("T7")
	want.CreatedAt, want.UpdatedAt = added.CreatedAt, added.UpdatedAt
	if _, err := time.Parse(time.RFC3339, got.CreatedAt); err != nil {
		t.Errorf("created_at %q: %v", got.CreatedAt, err)
	}
	if !reflect.DeepEqual(*got, want) {
		t.Errorf("round trip:\n got %+v\nwant %+v", *got, want)
	}
	list, err := s.List("")
	if err != nil || len(list) != 1 || !reflect.DeepEqual(list[0], want) {
		t.Errorf("List = %+v, %v", list, err)
	}
	if tagged, _ := s.List("regional"); len(tagged) != 1 {
		t.Errorf("List(regional) = %d builds, want 1", len(tagged))
	}
	if tagged, _ := s.List("nope"); len(tagged) != 0 {
		t.Errorf("List(nope) = %d builds, want 0", len(tagged))
	}
	// The database file really is in WAL mode.
	var mode string
	if err := s.db.QueryRow("PRAGMA journal_mode").Scan(&mode); err != nil || mode != "wal" {
		t.Errorf("journal_mode = %q, %v; want wal", mode, err)
	}
	if v, _ := s.SchemaVersion(); v != LatestSchema {
		t.Errorf("schema version %d, want %d", v, LatestSchema)
	}
}

func TestEditAndRemove(t *testing.T) {
	s := newStore(t)
	if _, err := s.Add(sampleBuild("T7")); err != nil {
		t.Fatal(err)
	}
	got, err := s.Edit("T7", func(b *Build) error {
		b.MassG = 19.9
		b.Bracing = "X"
		b.Members = b.Members[:1]
		b.Tags = []string{"retest"}
		b.Notes = ""
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	re, _ := s.Get("T7")
	if !reflect.DeepEqual(got, re) || re.MassG != 19.9 || re.Bracing != "x" || len(re.Members) != 1 || !reflect.DeepEqual(re.Tags, []string{"retest"}) || re.Notes != "" {
		t.Errorf("after edit: %+v", re)
	}
	before := snapshot(t, s)
	_, err = s.Edit("T7", func(b *Build) error { b.MassG = -3; return nil })
	if !errors.Is(err, ErrInvalid) {
		t.Errorf("edit to negative mass: %v, want ErrInvalid", err)
	}
	if after := snapshot(t, s); after != before {
		t.Errorf("a refused edit wrote: %v -> %v", before, after)
	}
	if b, _ := s.Get("T7"); b.MassG != 19.9 {
		t.Errorf("refused edit changed the mass to %v", b.MassG)
	}
	if _, err := s.Edit("T7", func(b *Build) error { b.ID = "T8"; return nil }); !errors.Is(err, ErrInvalid) {
		t.Errorf("renaming id: %v", err)
	}
	if _, err := s.Attach("T7", fakeReport(t, t.TempDir(), 1, 9000, "brace_buckling", "AB-d1")); err != nil {
		t.Fatal(err)
	}
	n, err := s.Remove("T7")
	if err != nil || n != 1 {
		t.Fatalf("Remove = %d, %v; want 1 test removed", n, err)
	}
	if c := snapshot(t, s); c != [5]int{} {
		t.Errorf("rows left after remove: %v", c)
	}
	if _, err := s.Get("T7"); !errors.Is(err, ErrUnknownBuild) {
		t.Errorf("Get after remove: %v", err)
	}
	if _, err := s.Remove("T7"); !errors.Is(err, ErrUnknownBuild) {
		t.Errorf("second remove: %v", err)
	}
}

func TestBadBuildInputWritesNothing(t *testing.T) {
	s := newStore(t)
	if _, err := s.Add(sampleBuild("T1")); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name   string
		change func(b *Build)
		want   error
		field  string
	}{
		{"negative mass", func(b *Build) { b.MassG = -21.4 }, ErrInvalid, "mass_g"},
		{"zero mass", func(b *Build) { b.MassG = 0 }, ErrInvalid, "mass_g"},
		{"NaN mass", func(b *Build) { b.MassG = math.NaN() }, ErrInvalid, "mass_g"},
		{"negative height", func(b *Build) { b.HeightMM = -1 }, ErrInvalid, "height_mm"},
		{"duplicate id", func(b *Build) { b.ID = "T1" }, ErrDuplicate, ""},
		{"bad id", func(b *Build) { b.ID = "../etc" }, ErrInvalid, "id"},
		{"empty name", func(b *Build) { b.Name = " " }, ErrInvalid, "name"},
		{"bad date", func(b *Build) { b.Date = "14/03/2026" }, ErrInvalid, "date"},
		{"impossible date", func(b *Build) { b.Date = "2026-02-30" }, ErrInvalid, "date"},
		{"bad bracing", func(b *Build) { b.Bracing = "zigzag" }, ErrInvalid, "bracing"},
		{"member without wood", func(b *Build) { b.Members[0].Wood = "" }, ErrInvalid, "members"},
		{"member group twice", func(b *Build) { b.Members[1].Group = "legs" }, ErrInvalid, "members"},
	}
	before := snapshot(t, s)
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b := sampleBuild("T2")
			tt.change(&b)
			_, err := s.Add(b)
			if !errors.Is(err, tt.want) {
				t.Fatalf("Add: %v, want %v", err, tt.want)
			}
			var re *Error
			if !errors.As(err, &re) || re.Field != tt.field {
				t.Errorf("error %#v: want *Error with field %q", err, tt.field)
			}
			if tt.field != "" && !strings.Contains(err.Error(), tt.field) {
				t.Errorf("message %q does not name the field", err)
			}
			if after := snapshot(t, s); after != before {
				t.Errorf("refused add wrote rows: %v -> %v", before, after)
			}
		})
	}
	if _, err := s.Get("nope"); !errors.Is(err, ErrUnknownBuild) || !strings.Contains(err.Error(), `"nope"`) {
		t.Errorf("Get unknown: %v", err)
	}
	if _, err := s.Edit("nope", func(*Build) error { return nil }); !errors.Is(err, ErrUnknownBuild) {
		t.Errorf("Edit unknown: %v", err)
	}
}

// TestMigrateFromSchema1 builds a store at the first schema with the old
// layout (tags as comma text, alignment as JSON text), then opens it with
// the current code and checks every value arrives in the new layout.
func TestMigrateFromSchema1(t *testing.T) {
	path := filepath.Join(t.TempDir(), "old.db")
	s1, err := openAt(path, 1)
	if err != nil {
		t.Fatal(err)
	}
	if v, _ := s1.SchemaVersion(); v != 1 {
		t.Fatalf("old store at version %d", v)
	}
	stmts := []string{
		`INSERT INTO builds(id, name, date, mass_g, height_mm, base_mm, top_mm, bracing, glue, notes, tags, created_at, updated_at)
		 VALUES ('OLD1', 'Old Kestrel', '2025-11-02', 18.25, 300, 110, 45, 'horizontal', 'PVA', 'first try', ' club, 2025 ,club,,fall', '2025-11-02T10:00:00Z', '2025-11-02T10:00:00Z')`,
		`INSERT INTO builds(id, name, date, mass_g, bracing, tags, created_at, updated_at)
		 VALUES ('OLD2', 'No tags', '2025-11-03', 12, 'x', '', '2025-11-03T10:00:00Z', '2025-11-03T10:00:00Z')`,
		`INSERT INTO members(build_id, pos, grp, wood, section) VALUES ('OLD1', 0, 'legs', 'balsa', '4x4 mm')`,
		`INSERT INTO tests(id, build_id, seq, report_sha256, attached_at, peak_load_g, efficiency, mass_g, first_member, failure_mode, account, alignment)
		 VALUES (1, 'OLD1', 1, '` + strings.Repeat("ab", 32) + `', '2025-11-04T09:00:00Z', 4000, 219.2, 18.25, 'leg-A', 'tower_twist', 'It twisted.',
		 '{"method":"manual","offset_s":-0.5,"uncertainty_s":0.02,"detail":"by hand"}')`,
		`INSERT INTO tests(id, build_id, seq, report_sha256, attached_at, first_member, failure_mode, account)
		 VALUES (2, 'OLD1', 2, '` + strings.Repeat("cd", 32) + `', '2025-11-05T09:00:00Z', '', 'undetermined', '')`,
		`INSERT INTO files(test_id, path, sha256, size) VALUES (1, 'report.json', '` + strings.Repeat("ab", 32) + `', 10)`,
	}
	for _, q := range stmts {
		if _, err := s1.db.Exec(q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
	s1.Close()

	s, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if v, _ := s.SchemaVersion(); v != LatestSchema || LatestSchema < 2 {
		t.Fatalf("migrated to version %d, want %d (>= 2)", v, LatestSchema)
	}
	b, err := s.Get("OLD1")
	if err != nil {
		t.Fatal(err)
	}
	want := Build{ID: "OLD1", Name: "Old Kestrel", Date: "2025-11-02", MassG: 18.25, HeightMM: 300, BaseMM: 110, TopMM: 45,
		Bracing: "horizontal", Members: []Member{{"legs", "balsa", "4x4 mm"}}, Glue: "PVA", Notes: "first try",
		Tags: []string{"2025", "club", "fall"}, CreatedAt: "2025-11-02T10:00:00Z", UpdatedAt: "2025-11-02T10:00:00Z"}
	if !reflect.DeepEqual(*b, want) {
		t.Errorf("migrated build:\n got %+v\nwant %+v", *b, want)
	}
	if b2, _ := s.Get("OLD2"); len(b2.Tags) != 0 {
		t.Errorf("OLD2 tags %q, want none", b2.Tags)
	}
	ts, err := s.Tests("OLD1")
	if err != nil || len(ts) != 2 {
		t.Fatalf("tests %v, %v", ts, err)
	}
	wantAlign := &report.Alignment{Method: "manual", OffsetS: -0.5, UncertaintyS: 0.02, Detail: "by hand"}
	if !reflect.DeepEqual(ts[0].Alignment, wantAlign) || *ts[0].PeakLoadG != 4000 || ts[0].FailureMode != "tower_twist" || len(ts[0].Files) != 1 {
		t.Errorf("migrated test 1: %+v (alignment %+v)", ts[0], ts[0].Alignment)
	}
	if ts[1].Alignment != nil || ts[1].PeakLoadG != nil {
		t.Errorf("migrated test 2 should have no alignment or load: %+v", ts[1])
	}
	// The old columns are gone and the new store takes writes.
	if _, err := s.db.Exec(`UPDATE builds SET tags = 'x'`); err == nil {
		t.Error("builds.tags still exists after migration 2")
	}
	if _, err := s.Add(sampleBuild("NEW1")); err != nil {
		t.Fatal(err)
	}
	if got, _ := s.List("club"); len(got) != 1 || got[0].ID != "OLD1" {
		t.Errorf("List(club) = %+v", got)
	}
}

// TestOddDatabaseNames checks that characters with a meaning in SQLite URIs
// ('%', '?', '#') and spaces reach the file system unchanged.
func TestOddDatabaseNames(t *testing.T) {
	dir := t.TempDir()
	for _, name := range []string{"a%20b.db", "what?.db", "no#1 ü.db"} {
		p := filepath.Join(dir, "sub dir", name)
		s, err := Open(p)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if _, err := s.Add(sampleBuild("T1")); err != nil {
			t.Fatal(err)
		}
		s.Close()
		if fi, err := os.Stat(p); err != nil || fi.Size() == 0 {
			t.Errorf("%s: database not at the given path: %v", name, err)
		}
	}
	ents, _ := os.ReadDir(filepath.Join(dir, "sub dir"))
	for _, e := range ents {
		if strings.HasPrefix(e.Name(), "a b") || e.Name() == "what" {
			t.Errorf("stray file %q: the name was decoded or cut", e.Name())
		}
	}
}

func TestNewerSchemaRefused(t *testing.T) {
	path := filepath.Join(t.TempDir(), "future.db")
	s := func() *Store {
		s, err := Open(path)
		if err != nil {
			t.Fatal(err)
		}
		return s
	}()
	if _, err := s.db.Exec("PRAGMA user_version = 99"); err != nil {
		t.Fatal(err)
	}
	s.Close()
	_, err := Open(path)
	if !errors.Is(err, ErrInvalid) || !strings.Contains(err.Error(), "99") {
		t.Errorf("opening a newer schema: %v", err)
	}
}

func TestDefaultPath(t *testing.T) {
	tests := []struct {
		env  map[string]string
		want string
	}{
		{map[string]string{"FAILFRAME_DB": "/x/my.db", "XDG_DATA_HOME": "/d", "HOME": "/h"}, "/x/my.db"},
		{map[string]string{"XDG_DATA_HOME": "/d", "HOME": "/h"}, "/d/failframe/builds.db"},
		{map[string]string{"HOME": "/h"}, "/h/.local/share/failframe/builds.db"},
	}
	for _, tt := range tests {
		got, err := DefaultPath(func(k string) string { return tt.env[k] })
		if err != nil || got != tt.want {
			t.Errorf("DefaultPath(%v) = %q, %v; want %q", tt.env, got, err, tt.want)
		}
	}
}
