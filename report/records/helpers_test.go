package records

import (
	"encoding/json"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"os"
	"path/filepath"
	"testing"

	"github.com/failframe/failframe/report"
)

// newStore opens a fresh store in a temporary folder.
func newStore(t *testing.T) *Store {
	t.Helper()
	s, err := Open(filepath.Join(t.TempDir(), "db", "builds.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

// sampleBuild is an invented tower with every field set.
func sampleBuild(id string) Build {
	return Build{
		ID:       id,
		Name:     "Tall Heron " + id,
		Date:     "2026-03-14",
		MassG:    21.4,
		HeightMM: 280,
		BaseMM:   100,
		TopMM:    50,
		Bracing:  "diagonal",
		Members: []Member{
			{Group: "legs", Wood: "balsa", Section: "3x3 mm"},
			{Group: "braces", Wood: "balsa", Section: "2x2 mm"},
			{Group: "horizontals", Wood: "basswood", Section: "1.5x3 mm"},
		},
		Glue:  "wood glue, thin CA at the base",
		Notes: "Leg B slightly bowed before loading.\nSecond line with 'quotes' and ü.",
		Tags:  []string{"regional", "season-2026", "x-test"},
	}
}

func fptr(v float64) *float64 { return &v }

// fakeReport writes an invented report folder: report.json with the given
// peak load, failure mode and first member, report.html and two small PNGs
// whose pixels depend on seed (so different seeds give different files).
func fakeReport(t *testing.T, dir string, seed uint8, peak float64, mode, first string) string {
	t.Helper()
	for _, sub := range []string{"plots", "evidence"} {
		if err := os.MkdirAll(filepath.Join(dir, sub), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	writePNG(t, filepath.Join(dir, "plots", "load.png"), seed)
	writePNG(t, filepath.Join(dir, "evidence", "first.png"), seed+100)
	if err := os.WriteFile(filepath.Join(dir, "report.html"), []byte("<html><body>invented test</body></html>\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	mass := 21.4
	res := report.Result{
		Version:        report.ResultVersion,
		Tool:           "failframe test",
		CreatedAt:      "2026-03-15T10:00:00Z",
		Clip:           report.ClipFacts{Path: fmt.Sprintf("tower-%d.avi", seed), Width: 320, Height: 240, Codec: "MJPG", ContainerFPS: 30, FrameCount: 200, LastFrame: 199},
		CaptureFPS:     960,
		CaptureFPSFrom: "marks",
		Events:         []report.Event{{Kind: "onset", Member: first, Frame: 120, TimeS: 0.125, LoadG: fptr(peak * 0.9), Detail: "bow grows"}},
		FirstMember:    first,
		FailureMode:    mode,
		Account:        "The " + first + " bowed out and snapped first.",
		Advice:         []string{"Shorten the long diagonals."},
		Alignment:      &report.Alignment{Method: "auto", OffsetS: 1.25, UncertaintyS: 0.01, Detail: "load drop matched to collapse"},
		PeakLoadG:      fptr(peak),
		MassG:          &mass,
		Efficiency:     fptr(peak / mass),
		Warnings:       []string{},
		Files:          []string{"report.json", "report.html", "plots/load.png", "evidence/first.png"},
	}
	b, err := json.MarshalIndent(&res, "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "report.json"), b, 0o644); err != nil {
		t.Fatal(err)
	}
	return dir
}

func writePNG(t *testing.T, path string, seed uint8) {
	t.Helper()
	img := image.NewRGBA(image.Rect(0, 0, 8, 6))
	for y := 0; y < 6; y++ {
		for x := 0; x < 8; x++ {
			img.Set(x, y, color.RGBA{seed, uint8(x * 30), uint8(y * 40), 255})
		}
	}
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := png.Encode(f, img); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
}

// countRows returns the number of rows in a table.
func countRows(t *testing.T, s *Store, table string) int {
	t.Helper()
	var n int
	if err := s.db.QueryRow("SELECT count(*) FROM " + table).Scan(&n); err != nil {
		t.Fatal(err)
	}
	return n
}

// snapshot returns the row counts of every table, to show nothing was written.
func snapshot(t *testing.T, s *Store) [5]int {
	return [5]int{countRows(t, s, "builds"), countRows(t, s, "members"), countRows(t, s, "build_tags"), countRows(t, s, "tests"), countRows(t, s, "files")}
}
