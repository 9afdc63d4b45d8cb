package report

import (
	"bytes"
	"encoding/json"
	"flag"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strings"
	"testing"

	"github.com/failframe/failframe/report/internal/browsertest"
	"github.com/failframe/failframe/report/plots"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata")

func fp(v float64) *float64 { return &v }

// sample is an invented analysis of an invented tower.
func sample() *Result {
	return &Result{
		Version: ResultVersion, Tool: "failframe test", CreatedAt: "2026-03-14T10:00:00Z",
		Clip:       ClipFacts{Path: "tower-7.avi", Width: 640, Height: 480, Codec: "MJPG", ContainerFPS: 30, FrameCount: 600, FirstFrame: 0, LastFrame: 599},
		CaptureFPS: 960, CaptureFPSFrom: "marks", MMPerPixel: 0.42,
		Levels: []LevelSummary{{Level: 1, TwistObservable: true, MaxTwistDeg: 0.41, MaxSwayMM: 0.6},
			{Level: 4, TwistObservable: false, MaxSwayMM: 1.5, Note: "only one face seen"}},
		Events: []Event{
			{Kind: "onset", Member: "AB-d2", Frame: 250, TimeS: 250.0 / 960, LoadG: fp(5712), Detail: "bow passed 0.5 % of length"},
			{Kind: "break", Member: "AB-d2", Frame: 380, TimeS: 380.0 / 960, LoadG: fp(6301), Detail: "chord jumped"},
			{Kind: "collapse", Frame: 392, TimeS: 392.0 / 960, LoadG: fp(6350), Detail: "most points moved fast"},
		},
		FirstMember: "AB-d2", FailureMode: "brace_buckling",
		Account:   "The long diagonal AB-d2 bowed out first at 5712 g and snapped at 6301 g; the tower then fell.",
		Advice:    []string{"Shorten AB-d2 by adding a cross tie at mid-span."},
		Alignment: &Alignment{Method: "auto", OffsetS: -8.9123, UncertaintyS: 0.01, Detail: "drop matched"},
		PeakLoadG: fp(6350), MassG: fp(21.4), Efficiency: fp(6350 / 21.4),
		Members:  []MemberSummary{{ID: "AB-d2", Kind: "brace", LengthMM: 98.2, MaxBowMM: 3.1, MaxBowPct: 3.16, MaxStrainPct: -0.4, OnsetFrame: 250, BreakFrame: 380}},
		LoadLog:  &LoadLogFacts{Path: "load.csv", Detected: "comma-separated", Samples: 1200, PeriodS: 0.01, SkippedLines: []int{}},
		Figures:  []Figure{},
		Warnings: []string{"level 4: twist not observable"},
		Files:    []string{"report.json", "report.html"},
	}
}

func TestResultGolden(t *testing.T) {
	dir := t.TempDir()
	if err := WriteResult(dir, sample()); err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(filepath.Join(dir, ResultFile))
	if err != nil {
		t.Fatal(err)
	}
	golden := filepath.Join("testdata", "result_golden.json")
	if *update {
		if err := os.WriteFile(golden, got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatalf("%v (run go test ./report -update)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("report.json differs from %s (run go test ./report -update if the change is intended)\n%s", golden, got)
	}
	back, err := ReadResult(dir)
	if err != nil {
		t.Fatal(err)
	}
	if back.Efficiency == nil || math.Abs(*back.Efficiency-6350/21.4) > 1e-9 || back.Events[0].LoadG == nil || *back.Events[0].LoadG != 5712 {
		t.Errorf("round trip lost values: %+v", back)
	}
}

// TestFieldsDocumented checks that every key report.json can hold is
// described in the README's report.json section.
func TestFieldsDocumented(t *testing.T) {
	doc, err := os.ReadFile(filepath.Join("..", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(filepath.Join("testdata", "result_golden.json"))
	if err != nil {
		t.Fatal(err)
	}
	var v any
	if err := json.Unmarshal(data, &v); err != nil {
		t.Fatal(err)
	}
	keys := map[string]bool{}
	var walk func(any)
	walk = func(x any) {
		switch x := x.(type) {
		case map[string]any:
			for k, c := range x {
				keys[k] = true
				walk(c)
			}
		case []any:
			for _, c := range x {
				walk(c)
			}
		}
	}
	walk(v)
	keys["svg"], keys["file"], keys["kind"], keys["caption"] = true, true, true, true
	var names []string
	for k := range keys {
		names = append(names, k)
	}
	sort.Strings(names)
	for _, k := range names {
		if !regexp.MustCompile("`" + regexp.QuoteMeta(k) + "`").Match(doc) {
			t.Errorf("field %q is not described in README.md", k)
		}
	}
}

func TestReadResultErrors(t *testing.T) {
	dir := t.TempDir()
	if _, err := ReadResult(dir); err == nil || !strings.Contains(err.Error(), dir) {
		t.Errorf("missing file: %v", err)
	}
	for _, tt := range []struct{ body, msg string }{
		{`{"version": 99}`, "newer"},
		{`{"tool": "x"}`, "no version"},
		{`{"version": `, "unexpected end"},
	} {
		os.WriteFile(filepath.Join(dir, ResultFile), []byte(tt.body), 0o644)
		if _, err := ReadResult(dir); err == nil || !strings.Contains(err.Error(), tt.msg) {
			t.Errorf("%s: err = %v, want %q", tt.body, err, tt.msg)
		}
	}
}

func TestHTMLInChromium(t *testing.T) {
	dir := t.TempDir()
	r := sample()
	c := plots.Chart{Title: "Load", XLabel: "time (s)", YLabel: "load (g)",
		Series: []plots.Series{{Name: "load", X: []float64{0, 0.2, 0.4}, Y: []float64{5000, 6000, 6350}}},
		Marks:  []plots.Mark{{X: 0.26, Label: "onset AB-d2", Strong: true}}}
	files, err := c.Save(filepath.Join(dir, "plots"), "load")
	if err != nil {
		t.Fatal(err)
	}
	r.Figures = []Figure{{File: "plots/" + files[0], SVG: "plots/" + files[1], Kind: "plot", Caption: "Load against video time"},
		{File: "plots/" + files[0], Kind: "evidence", Caption: "stand-in evidence frame"}}
	if err := WriteHTML(dir, r); err != nil {
		t.Fatal(err)
	}
	html, _ := os.ReadFile(filepath.Join(dir, HTMLFile))
	// Self-contained: no scripts, no outside links; images inline.
	for _, bad := range []string{"<script", "http://", "https://", `src="plots/`} {
		if bytes.Contains(html, []byte(bad)) {
			t.Errorf("report.html contains %q", bad)
		}
	}
	page := browsertest.Load(t, filepath.Join(dir, HTMLFile), "account", "safety", "events")
	if len(page.Errors) > 0 {
		t.Errorf("console errors: %v", page.Errors)
	}
	if len(page.Outside) > 0 {
		t.Errorf("page asked for outside resources: %v", page.Outside)
	}
	if !strings.Contains(page.Texts["account"], "AB-d2 bowed out first") {
		t.Errorf("account text = %q", page.Texts["account"])
	}
	if !strings.Contains(page.Texts["safety"], "eye protection") || !strings.Contains(page.Texts["safety"], "licensed engineers") {
		t.Errorf("safety text = %q", page.Texts["safety"])
	}
	if !strings.Contains(page.Texts["events"], "5712 g") {
		t.Errorf("events table = %q", page.Texts["events"])
	}
	if page.Images != 2 || page.BrokenImages != 0 {
		t.Errorf("images %d, broken %d", page.Images, page.BrokenImages)
	}
	// The account comes before the plots.
	if a, p := bytes.Index(html, []byte(`id="account"`)), bytes.Index(html, []byte("<h2>Plots")); a < 0 || p < 0 || a > p {
		t.Errorf("account at %d, plots at %d", a, p)
	}
}

func TestWriteFileAtomicKeepsOldOnFailure(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "x.json")
	if err := WriteFileAtomic(p, []byte("old")); err != nil {
		t.Fatal(err)
	}
	// Writing into a folder that does not exist fails and leaves nothing behind.
	if err := WriteFileAtomic(filepath.Join(dir, "missing", "x.json"), []byte("new")); err == nil {
		t.Error("no error writing into a missing folder")
	}
	b, _ := os.ReadFile(p)
	if string(b) != "old" {
		t.Errorf("old file = %q", b)
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Errorf("leftovers: %v", ents)
	}
}
