package records

import (
	"bytes"
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"github.com/failframe/failframe/report"
)

// Test is one load test of a build: the analysis result attached from a
// report folder and the files kept as its evidence.
type Test struct {
	// BuildID is the build tested.
	BuildID string `json:"build_id"`
	// Seq numbers the build's tests 1, 2, ... in the order attached.
	Seq int `json:"seq"`
	// ReportSHA256 is the SHA-256 of the report's report.json; it identifies the test.
	ReportSHA256 string `json:"report_sha256"`
	// AttachedAt is when the report was attached, RFC 3339 UTC.
	AttachedAt string `json:"attached_at"`
	// SourceDir is the report folder as given when attached (informational).
	SourceDir string `json:"source_dir"`
	// Tool and CreatedAt are copied from the report.
	Tool      string `json:"tool"`
	CreatedAt string `json:"created_at"`
	// PeakLoadG is the largest load held, grams; nil without a load log.
	PeakLoadG *float64 `json:"peak_load_g"`
	// Efficiency is peak load over mass; from the report, or computed from the
	// build's mass when the report has a peak load but no mass.
	Efficiency *float64 `json:"efficiency"`
	// MassG is the mass the report was made with; nil when not given.
	MassG *float64 `json:"mass_g"`
	// FirstMember, FailureMode and Account are the report's failure findings.
	FirstMember string `json:"first_member"`
	FailureMode string `json:"failure_mode"`
	Account     string `json:"account"`
	// Alignment is how the load log was lined up with the video; nil without a log.
	Alignment *report.Alignment `json:"alignment"`
	// Files are the report's files with their hashes, sorted by path.
	Files []File `json:"files"`
}

// Label names the test as "BUILD" or, for later tests, "BUILD#2".
func (t *Test) Label() string {
	if t.Seq <= 1 {
		return t.BuildID
	}
	return fmt.Sprintf("%s#%d", t.BuildID, t.Seq)
}

// File is one stored evidence file.
type File struct {
	// Path is the file's path relative to the report folder, with '/'.
	Path string `json:"path"`
	// SHA256 is the hex SHA-256 of its content; the object's name in the store.
	SHA256 string `json:"sha256"`
	// Size is its length in bytes.
	Size int64 `json:"size"`
}

// AttachResult says what Attach did.
type AttachResult struct {
	// Test is the stored test.
	Test *Test
	// Created is false when the same report was already attached (nothing written).
	Created bool
	// Warnings are things the user should know (mass differs from the build's, ...).
	Warnings []string
}

// ReadReport reads and checks dir/report.json. A folder without a
// report.json of a version this failframe knows is an *Error wrapping
// ErrNotReport naming the file. It returns the parsed result and the file's
// bytes.
func ReadReport(dir string) (*report.Result, []byte, error) {
	file := filepath.Join(dir, report.ResultFile)
	notReport := func(format string, a ...any) error {
		return &Error{Path: file, Err: fmt.Errorf("%w: "+format, append([]any{ErrNotReport}, a...)...)}
	}
	fi, err := os.Stat(dir)
	if err != nil {
		return nil, nil, &Error{Path: dir, Err: fmt.Errorf("%w: %w", ErrNotReport, err)}
	}
	if !fi.IsDir() {
		return nil, nil, &Error{Path: dir, Err: fmt.Errorf("%w: not a folder", ErrNotReport)}
	}
	raw, err := os.ReadFile(file)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, nil, notReport("the folder has no %s", report.ResultFile)
	}
	if err != nil {
		return nil, nil, notReport("%v", err)
	}
	var probe map[string]json.RawMessage
	if err := json.Unmarshal(raw, &probe); err != nil {
		return nil, nil, notReport("not valid JSON: %v", err)
	}
	if _, ok := probe["version"]; !ok {
		return nil, nil, notReport("no \"version\" field")
	}
	var res report.Result
	if err := json.Unmarshal(raw, &res); err != nil {
		return nil, nil, notReport("%v", err)
	}
	if res.Version < 1 || res.Version > report.ResultVersion {
		return nil, nil, notReport("version %d; this failframe reads version 1 to %d", res.Version, report.ResultVersion)
	}
	// The report package's own reader is the final word on what it wrote.
	if _, err := report.ReadResult(dir); err != nil {
		return nil, nil, notReport("%v", err)
	}
	for _, p := range []*float64{res.PeakLoadG, res.MassG, res.Efficiency} {
		if p != nil && (math.IsNaN(*p) || math.IsInf(*p, 0) || *p < 0) {
			return nil, nil, notReport("negative or non-finite load, mass or efficiency")
		}
	}
	return &res, raw, nil
}

// reportFiles walks the report folder and returns its regular files by
// slash path relative to dir. Every file the report lists must be there.
func reportFiles(dir string, res *report.Result) (map[string]string, error) {
	files := map[string]string{}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if !d.Type().IsRegular() {
			return nil
		}
		rel, err := filepath.Rel(dir, p)
		if err != nil {
			return err
		}
		files[filepath.ToSlash(rel)] = p
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("read report folder %s: %w", dir, err)
	}
	for _, f := range res.Files {
		clean := path.Clean(filepath.ToSlash(f))
		if clean != f || path.IsAbs(clean) || clean == ".." || strings.HasPrefix(clean, "../") {
			return nil, &Error{Path: filepath.Join(dir, report.ResultFile), Err: fmt.Errorf("%w: listed file %q is not a plain path inside the folder", ErrNotReport, f)}
		}
		if _, ok := files[clean]; !ok {
			return nil, &Error{Path: filepath.Join(dir, filepath.FromSlash(f)), Err: fmt.Errorf("%w: %s lists this file but it is missing", ErrNotReport, report.ResultFile)}
		}
	}
	return files, nil
}

// Attach stores the report in dir as a test of the build: the analysis
// result in the database, every file of the folder in the object store.
// Attaching a report already attached to the build changes nothing
// (Created false); a report attached to another build, an unknown build or a
// folder that is not a failframe report is an *Error and nothing is written.
func (s *Store) Attach(buildID, dir string) (*AttachResult, error) {
	ctx := context.Background()
	b, err := s.Get(buildID)
	if err != nil {
		return nil, err
	}
	res, raw, err := ReadReport(dir)
	if err != nil {
		return nil, err
	}
	reportSum := sha256Hex(raw)
	if t, err := s.testBySum(reportSum); err != nil {
		return nil, err
	} else if t != nil {
		if t.BuildID != buildID {
			return nil, &Error{Path: dir, Err: kinded(ErrDuplicate, "this report is already attached to build %q as test %d", t.BuildID, t.Seq)}
		}
		return &AttachResult{Test: t, Created: false}, nil
	}
	paths, err := reportFiles(dir, res)
	if err != nil {
		return nil, err
	}

	out := &AttachResult{Created: true}
	t := &Test{
		BuildID:      buildID,
		ReportSHA256: reportSum,
		SourceDir:    dir,
		Tool:         res.Tool,
		CreatedAt:    res.CreatedAt,
		PeakLoadG:    res.PeakLoadG,
		Efficiency:   res.Efficiency,
		MassG:        res.MassG,
		FirstMember:  res.FirstMember,
		FailureMode:  res.FailureMode,
		Account:      res.Account,
		Alignment:    res.Alignment,
	}
	if abs, err := filepath.Abs(dir); err == nil {
		t.SourceDir = abs
	}
	if res.MassG != nil && math.Abs(*res.MassG-b.MassG) > 0.01*b.MassG {
		out.Warnings = append(out.Warnings, fmt.Sprintf("the report was made with mass %.4g g but build %s weighs %.4g g; its efficiency uses the report's mass", *res.MassG, buildID, b.MassG))
	}
	if t.Efficiency == nil && t.PeakLoadG != nil {
		e := *t.PeakLoadG / b.MassG
		t.Efficiency = &e
		out.Warnings = append(out.Warnings, fmt.Sprintf("the report has no mass; efficiency %.1f computed from build %s's mass %.4g g", e, buildID, b.MassG))
	}

	// Objects first: they are content-addressed, so an object whose record
	// never commits is harmless (Check counts it as unreferenced).
	names := make([]string, 0, len(paths))
	for p := range paths {
		names = append(names, p)
	}
	sort.Strings(names)
	for _, p := range names {
		var sum string
		var size int64
		if p == report.ResultFile {
			sum, size, err = s.putObject(bytes.NewReader(raw))
		} else {
			sum, size, err = s.putFile(paths[p])
		}
		if err != nil {
			return nil, fmt.Errorf("attach %s: %w", dir, err)
		}
		t.Files = append(t.Files, File{Path: p, SHA256: sum, Size: size})
	}

	err = s.write(ctx, func(tx *sql.Tx) error {
		// Another process may have attached it meanwhile.
		if old, err := testBySum(tx, reportSum); err != nil {
			return err
		} else if old != nil {
			if old.BuildID != buildID {
				return &Error{Path: dir, Err: kinded(ErrDuplicate, "this report is already attached to build %q as test %d", old.BuildID, old.Seq)}
			}
			out.Test, out.Created, out.Warnings = old, false, nil
			return nil
		}
		if _, err := getBuild(tx, buildID); err != nil {
			return err
		}
		if err := tx.QueryRow(`SELECT coalesce(max(seq), 0) + 1 FROM tests WHERE build_id = ?`, buildID).Scan(&t.Seq); err != nil {
			return err
		}
		t.AttachedAt = now().Format(time.RFC3339)
		if err := insertTest(tx, t); err != nil {
			return err
		}
		out.Test = t
		return nil
	})
	if err != nil {
		return nil, err
	}
	return out, nil
}

// insertTest writes a test and its file list.
func insertTest(tx *sql.Tx, t *Test) error {
	var am, ad any
	var ao, au any
	if a := t.Alignment; a != nil {
		am, ao, au, ad = a.Method, a.OffsetS, a.UncertaintyS, a.Detail
	}
	r, err := tx.Exec(`INSERT INTO tests(build_id, seq, report_sha256, attached_at, source_dir, tool, created_at,
		peak_load_g, efficiency, mass_g, first_member, failure_mode, account,
		align_method, align_offset_s, align_uncertainty_s, align_detail)
		VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
		t.BuildID, t.Seq, t.ReportSHA256, t.AttachedAt, t.SourceDir, t.Tool, t.CreatedAt,
		nullable(t.PeakLoadG), nullable(t.Efficiency), nullable(t.MassG), t.FirstMember, t.FailureMode, t.Account,
		am, ao, au, ad)
	if err != nil {
		return fmt.Errorf("insert test of %s: %w", t.BuildID, err)
	}
	id, err := r.LastInsertId()
	if err != nil {
		return err
	}
	for _, f := range t.Files {
		if _, err := tx.Exec(`INSERT INTO files(test_id, path, sha256, size) VALUES (?, ?, ?, ?)`, id, f.Path, f.SHA256, f.Size); err != nil {
			return fmt.Errorf("insert file %s of %s: %w", f.Path, t.BuildID, err)
		}
	}
	return nil
}

func nullable(p *float64) any {
	if p == nil {
		return nil
	}
	return *p
}

const testColumns = `id, build_id, seq, report_sha256, attached_at, source_dir, tool, created_at,
	peak_load_g, efficiency, mass_g, first_member, failure_mode, account,
	align_method, align_offset_s, align_uncertainty_s, align_detail`

// scanTests reads test rows (selected with testColumns) and their files.
func scanTests(q querier, query string, args ...any) ([]Test, error) {
	rows, err := q.Query(query, args...)
	if err != nil {
		return nil, err
	}
	var out []Test
	var ids []int64
	for rows.Next() {
		var t Test
		var id int64
		var peak, eff, mass, ao, au sql.NullFloat64
		var am, ad sql.NullString
		if err := rows.Scan(&id, &t.BuildID, &t.Seq, &t.ReportSHA256, &t.AttachedAt, &t.SourceDir, &t.Tool, &t.CreatedAt,
			&peak, &eff, &mass, &t.FirstMember, &t.FailureMode, &t.Account, &am, &ao, &au, &ad); err != nil {
			rows.Close()
			return nil, err
		}
		t.PeakLoadG, t.Efficiency, t.MassG = ptr(peak), ptr(eff), ptr(mass)
		if am.Valid {
			t.Alignment = &report.Alignment{Method: am.String, OffsetS: ao.Float64, UncertaintyS: au.Float64, Detail: ad.String}
		}
		out = append(out, t)
		ids = append(ids, id)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, err
	}
	for i, id := range ids {
		frows, err := q.Query(`SELECT path, sha256, size FROM files WHERE test_id = ? ORDER BY path`, id)
		if err != nil {
			return nil, err
		}
		out[i].Files = []File{}
		for frows.Next() {
			var f File
			if err := frows.Scan(&f.Path, &f.SHA256, &f.Size); err != nil {
				frows.Close()
				return nil, err
			}
			out[i].Files = append(out[i].Files, f)
		}
		frows.Close()
		if err := frows.Err(); err != nil {
			return nil, err
		}
	}
	return out, nil
}

func ptr(n sql.NullFloat64) *float64 {
	if !n.Valid {
		return nil
	}
	v := n.Float64
	return &v
}

// testBySum returns the test with the report hash, or nil.
func testBySum(q querier, sum string) (*Test, error) {
	ts, err := scanTests(q, `SELECT `+testColumns+` FROM tests WHERE report_sha256 = ?`, sum)
	if err != nil || len(ts) == 0 {
		return nil, err
	}
	return &ts[0], nil
}

func (s *Store) testBySum(sum string) (*Test, error) {
	var t *Test
	err := s.read(context.Background(), func(tx *sql.Tx) error {
		var err error
		t, err = testBySum(tx, sum)
		return err
	})
	return t, err
}

// Tests returns the build's tests in order; an unknown build is an *Error.
func (s *Store) Tests(buildID string) ([]Test, error) {
	var out []Test
	err := s.read(context.Background(), func(tx *sql.Tx) error {
		if _, err := getBuild(tx, buildID); err != nil {
			return err
		}
		var err error
		out, err = scanTests(tx, `SELECT `+testColumns+` FROM tests WHERE build_id = ? ORDER BY seq`, buildID)
		return err
	})
	return out, err
}

// parseAlignmentV1 reads the alignment JSON text of schema 1.
func parseAlignmentV1(text string) (*report.Alignment, error) {
	var a report.Alignment
	if err := json.Unmarshal([]byte(text), &a); err != nil {
		return nil, err
	}
	return &a, nil
}
