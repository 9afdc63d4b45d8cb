package analysis

import (
	"bufio"
	"encoding/json"
	"errors"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/failframe/failframe/capture/synth"
	"github.com/failframe/failframe/report"
	"github.com/failframe/failframe/report/internal/browsertest"
	"github.com/failframe/failframe/report/loadlog"
	"github.com/failframe/failframe/tracking/marks"
)

// A short invented test shared by the tests of this package: a Z-braced
// tower, seed 3, 260 frames at 960 fps.
var (
	clipOnce  sync.Once
	clipDir   string
	clipTruth *synth.Truth
	clipErr   error
)

func scene() synth.Scenario {
	s := synth.Default()
	s.Seed = 3
	s.Frames = 260
	s.OnsetFrame, s.BreakFrame, s.CollapseFrame = 110, 200, 210
	s.SkipMP4 = true
	return s
}

func testClip(t *testing.T) (string, *synth.Truth) {
	t.Helper()
	clipOnce.Do(func() {
		clipDir, clipErr = os.MkdirTemp("", "failframe-analysis-")
		if clipErr == nil {
			clipTruth, clipErr = synth.Write(scene(), clipDir, nil)
		}
	})
	if clipErr != nil {
		t.Fatal(clipErr)
	}
	return clipDir, clipTruth
}

func TestMain(m *testing.M) {
	code := m.Run()
	if clipDir != "" {
		os.RemoveAll(clipDir)
	}
	os.Exit(code)
}

func config(dir, out string) Config {
	return Config{
		Clip:  filepath.Join(dir, synth.ClipAVI),
		Marks: filepath.Join(dir, synth.MarksFile),
		Load:  filepath.Join(dir, synth.LoadFile),
		MassG: 21.4,
		Out:   out,
		Tool:  "failframe test",
		Now:   func() time.Time { return time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC) },
	}
}

func TestRunOnSynthClip(t *testing.T) {
	dir, truth := testClip(t)
	out := filepath.Join(t.TempDir(), "report")
	res, err := Run(config(dir, out), Progress{})
	if err != nil {
		t.Fatal(err)
	}
	period := truth.LoadPeriodS

	// Done when: the recovered load offset is within one log sample period of the truth.
	if res.Alignment == nil || res.Alignment.Method != "auto" {
		t.Fatalf("alignment %+v", res.Alignment)
	}
	if e := math.Abs(res.Alignment.OffsetS - truth.LoadOffsetS); e > period {
		t.Errorf("offset %.5f s, truth %.5f s: error %.5f s > one sample period %.4f s", res.Alignment.OffsetS, truth.LoadOffsetS, e, period)
	} else {
		t.Logf("offset error %.5f s (period %.4f s)", e, period)
	}
	if res.Alignment.UncertaintyS < 0.99*period { // the estimated period of whole-ms stamps
		t.Errorf("uncertainty %g below one period", res.Alignment.UncertaintyS)
	}

	// The load at the true onset frame, read through the alignment, within
	// 1 % of the synthesizer's truth.
	log := readLog(t, filepath.Join(dir, synth.LoadFile))
	g, ok := log.At(float64(truth.OnsetFrame)/truth.CaptureFPS - res.Alignment.OffsetS)
	if !ok || math.Abs(g-truth.LoadAtOnsetG) > 0.01*truth.LoadAtOnsetG {
		t.Errorf("load at the true onset %.1f g, truth %.1f g", g, truth.LoadAtOnsetG)
	}
	// Done when: the load reported at the first member's onset is within 1 % of the truth.
	var onset *report.Event
	for i, e := range res.Events {
		if e.Kind == "onset" && e.Member == res.FirstMember {
			onset = &res.Events[i]
			break
		}
	}
	if onset == nil || onset.LoadG == nil {
		t.Errorf("no onset event with a load for the first member %q: %+v", res.FirstMember, res.Events)
	} else if math.Abs(*onset.LoadG-truth.LoadAtOnsetG) > 0.01*truth.LoadAtOnsetG {
		t.Errorf("load at onset %.1f g (frame %d), truth %.1f g (frame %d)", *onset.LoadG, onset.Frame, truth.LoadAtOnsetG, truth.OnsetFrame)
	} else {
		t.Logf("onset load error %.2f %%", 100*math.Abs(*onset.LoadG-truth.LoadAtOnsetG)/truth.LoadAtOnsetG)
	}
	// Efficiency = peak load / mass (common practice); the log's noise is 2.5 g.
	if res.Efficiency == nil || math.Abs(*res.Efficiency-truth.Efficiency) > 0.005*truth.Efficiency {
		t.Errorf("efficiency %v, truth %g", res.Efficiency, truth.Efficiency)
	}
	if res.PeakLoadG == nil || math.Abs(*res.PeakLoadG*1/21.4-*res.Efficiency) > 1e-9 {
		t.Errorf("efficiency %v is not peak %v / 21.4 g", res.Efficiency, res.PeakLoadG)
	}

	// Files present and valid.
	for _, f := range []string{"report.json", "report.html", "points.csv", "levels.csv", "members.csv", "energy.csv", "load.csv",
		"plots/load.png", "plots/load.svg", "plots/twist.png", "plots/sway.png", "plots/bow.png", "plots/leg_shape.png",
		"evidence/reference.png", "evidence/onset.png", "evidence/collapse.png", "evidence/sheet.png", "evidence/failure.avi"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("missing %s", f)
		}
	}
	for _, f := range res.Files {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("listed file %s missing", f)
		}
		if strings.HasSuffix(f, ".png") {
			fh, err := os.Open(filepath.Join(out, f))
			if err != nil {
				t.Fatal(err)
			}
			if _, err := png.Decode(fh); err != nil {
				t.Errorf("%s does not decode: %v", f, err)
			}
			fh.Close()
		}
	}
	checkJSON(t, out)
	checkCSVHeader(t, filepath.Join(out, "points.csv"), "frame,time_s,point,x_px,y_px,x_mm,y_mm,quality,lost")
	checkCSVHeader(t, filepath.Join(out, "load.csv"), "log_time_s,video_time_s,frame,load_g")
	checkCSVHeader(t, filepath.Join(out, "levels.csv"), "frame,time_s,level,twist_deg,sway_mm,settle_mm")
	checkCSVHeader(t, filepath.Join(out, "members.csv"), "frame,time_s,member,kind,bow_mm,bow_pct,strain_pct,rotation_deg")
	checkCSVHeader(t, filepath.Join(out, "energy.csv"), "frame,time_s,energy")
	// No temporary folders left beside the report.
	ents, _ := os.ReadDir(filepath.Dir(out))
	if len(ents) != 1 {
		t.Errorf("beside the report: %v", ents)
	}

	page := browsertest.Load(t, filepath.Join(out, report.HTMLFile), "account", "safety")
	if len(page.Errors) > 0 || len(page.Outside) > 0 {
		t.Errorf("console errors %v, outside requests %v", page.Errors, page.Outside)
	}
	if page.Texts["account"] == "" || !strings.Contains(page.Texts["account"], strings.Fields(res.Account)[0]) {
		t.Errorf("account shown %q, want %q", page.Texts["account"], res.Account)
	}
	if page.Images < 8 || page.BrokenImages != 0 {
		t.Errorf("%d images, %d broken", page.Images, page.BrokenImages)
	}
}

// TestRunOtherSceneAndLogLayout checks a different test: horizontal-only
// bracing (a leg goes over its full height), 240 fps, camera at 40 degrees,
// a lighter tower, and the load log rewritten as a space-separated file in
// seconds and newtons with comment lines (1 g = 9.80665e-3 N under standard
// gravity, CGPM 1901).
func TestRunOtherSceneAndLogLayout(t *testing.T) {
	s := synth.Default()
	s.Seed = 21
	s.Bracing = "horizontal"
	s.CaptureFPS = 240
	s.Frames = 200
	s.OnsetFrame, s.BreakFrame, s.CollapseFrame = 80, 140, 146
	s.AzimuthDeg = 40
	s.PeakLoadG = 2300
	s.MassG = 14.2
	s.SkipMP4 = true
	dir := t.TempDir()
	truth, err := synth.Write(s, dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Rewrite load.csv (time_ms,load_g) as "t [s]  Force (N)".
	src := readLog(t, filepath.Join(dir, synth.LoadFile))
	var b strings.Builder
	b.WriteString("# bench logger, 80 Hz\n# tared with the empty hook\nt [s]   Force (N)\n")
	for i, ts := range src.TimesS {
		b.WriteString(strconv.FormatFloat(ts, 'f', 3, 64) + "   " + strconv.FormatFloat(src.LoadG[i]*loadlog.StandardGravity/1000, 'f', 5, 64) + "\n")
	}
	logN := filepath.Join(dir, "load_n.txt")
	if err := os.WriteFile(logN, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	cfg := config(dir, filepath.Join(t.TempDir(), "report"))
	cfg.Load, cfg.MassG = logN, 14.2
	res, err := Run(cfg, Progress{})
	if err != nil {
		t.Fatal(err)
	}
	if res.LoadLog == nil || !strings.Contains(res.LoadLog.Detected, "in N (header)") || !strings.Contains(res.LoadLog.Detected, "in s (header)") {
		t.Errorf("detected %+v", res.LoadLog)
	}
	if res.Alignment == nil {
		t.Fatal("no alignment")
	}
	if e := math.Abs(res.Alignment.OffsetS - truth.LoadOffsetS); e > truth.LoadPeriodS {
		t.Errorf("offset error %.5f s > one sample period %.4f s (%s)", e, truth.LoadPeriodS, res.Alignment.Detail)
	} else {
		t.Logf("offset error %.5f s", e)
	}
	g, ok := src.At(float64(truth.OnsetFrame)/truth.CaptureFPS - res.Alignment.OffsetS)
	if !ok || math.Abs(g-truth.LoadAtOnsetG) > 0.01*truth.LoadAtOnsetG {
		t.Errorf("load at the true onset %.1f g, truth %.1f g", g, truth.LoadAtOnsetG)
	}
	for _, e := range res.Events {
		if e.Kind == "onset" && e.Member == truth.FirstMember {
			if e.LoadG == nil || math.Abs(*e.LoadG-truth.LoadAtOnsetG) > 0.01*truth.LoadAtOnsetG {
				t.Errorf("reported onset load %v, truth %.1f g", e.LoadG, truth.LoadAtOnsetG)
			}
		}
	}
	// Efficiency against the synthesizer's own figure (peak / mass, common practice).
	if res.Efficiency == nil || math.Abs(*res.Efficiency-truth.Efficiency) > 0.005*truth.Efficiency {
		t.Errorf("efficiency %v, truth %g", res.Efficiency, truth.Efficiency)
	}
}

func TestRunReplacesOnlyWithForce(t *testing.T) {
	dir, truth := testClip(t)
	out := filepath.Join(t.TempDir(), "report")
	os.MkdirAll(out, 0o755)
	marker := filepath.Join(out, "keep.txt")
	os.WriteFile(marker, []byte("old"), 0o644)

	cfg := config(dir, out)
	cfg.From, cfg.To = "150", "259" // a shorter run
	// Sync: frame 240 happened at logger time 240/fps - offset.
	cfg.Sync = &SyncMark{Frame: 240, LogTimeS: 240/truth.CaptureFPS - truth.LoadOffsetS}
	_, err := Run(cfg, Progress{})
	var ie *InputError
	if !errors.As(err, &ie) || !errors.Is(err, ErrOutExists) {
		t.Fatalf("err = %v, want ErrOutExists", err)
	}
	if b, _ := os.ReadFile(marker); string(b) != "old" {
		t.Fatal("existing folder touched")
	}
	cfg.Force = true
	var notes []string
	res, err := Run(cfg, Progress{Note: func(m string) { notes = append(notes, m) }})
	if err != nil {
		t.Fatal(err)
	}
	// What was detected in the log is reported as it is found.
	if len(notes) == 0 || !strings.Contains(notes[0], `"time_ms" in ms`) || !strings.Contains(notes[0], `"load_g" in g`) {
		t.Errorf("notes %q", notes)
	}
	if _, err := os.Stat(marker); !os.IsNotExist(err) {
		t.Error("old report not replaced")
	}
	if res.Alignment == nil || res.Alignment.Method != "sync" || math.Abs(res.Alignment.OffsetS-truth.LoadOffsetS) > 1e-6 {
		t.Errorf("sync alignment %+v, truth offset %g", res.Alignment, truth.LoadOffsetS)
	}
	if res.Clip.FirstFrame != 150 || res.Clip.LastFrame != 259 {
		t.Errorf("range %d-%d", res.Clip.FirstFrame, res.Clip.LastFrame)
	}
	ents, _ := os.ReadDir(filepath.Dir(out))
	if len(ents) != 1 {
		t.Errorf("beside the report: %v", ents)
	}
}

func TestRunRejectsBadLogBeforeTracking(t *testing.T) {
	dir, _ := testClip(t)
	tmp := t.TempDir()
	// A 21.4 g tower cannot hold 6 tonnes: the header says kg, the values are grams.
	bad := filepath.Join(tmp, "bad.csv")
	os.WriteFile(bad, []byte("time_s,load_kg\n0,0\n1,3000\n2,6000\n3,100\n"), 0o644)
	cfg := config(dir, filepath.Join(tmp, "report"))
	cfg.Load = bad
	start := time.Now()
	_, err := Run(cfg, Progress{})
	var pe *loadlog.ParseError
	if !errors.As(err, &pe) || pe.Line != 4 {
		t.Fatalf("err = %v, want a ParseError at line 4", err)
	}
	if time.Since(start) > 5*time.Second {
		t.Error("the bad log was found only after tracking")
	}
	if _, err := os.Stat(cfg.Out); !os.IsNotExist(err) {
		t.Error("report folder created for a failed run")
	}
}

// Marks with no scale and no tower block give no millimetres: refused before
// tracking as a marks error naming the file (exit status 3 in the CLI).
func TestRunRejectsMarksWithoutScaleBeforeTracking(t *testing.T) {
	dir, _ := testClip(t)
	tmp := t.TempDir()
	m, err := marks.Load(filepath.Join(dir, synth.MarksFile))
	if err != nil {
		t.Fatal(err)
	}
	m.Scale, m.Tower = nil, nil
	m.Clip = ""
	bad := filepath.Join(tmp, "marks.yaml")
	if err := marks.Save(bad, m); err != nil {
		t.Fatal(err)
	}
	cfg := config(dir, filepath.Join(tmp, "report"))
	cfg.Marks = bad
	start := time.Now()
	_, err = Run(cfg, Progress{})
	var me *marks.Error
	if !errors.As(err, &me) || me.Path != bad || !strings.Contains(err.Error(), "no scale") {
		t.Fatalf("err = %v, want a marks error naming %s and the missing scale", err, bad)
	}
	if time.Since(start) > 5*time.Second {
		t.Error("the unusable marks were found only after tracking")
	}
	if _, err := os.Stat(cfg.Out); !os.IsNotExist(err) {
		t.Error("report folder created for a failed run")
	}
}

func readLog(t *testing.T, path string) *loadlog.Log {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	l, _, err := loadlog.Parse(path, f, loadlog.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return l
}

// checkJSON parses report.json generically and checks the documented fields.
func checkJSON(t *testing.T, dir string) {
	t.Helper()
	data, err := os.ReadFile(filepath.Join(dir, report.ResultFile))
	if err != nil {
		t.Fatal(err)
	}
	var v map[string]any
	if err := json.Unmarshal(data, &v); err != nil {
		t.Fatalf("report.json: %v", err)
	}
	for _, k := range []string{"version", "tool", "created_at", "clip", "capture_fps", "capture_fps_from", "mm_per_px", "levels", "events",
		"first_member", "failure_mode", "account", "advice", "alignment", "peak_load_g", "mass_g", "efficiency", "members", "load_log", "figures", "warnings", "files"} {
		if _, ok := v[k]; !ok {
			t.Errorf("report.json lacks %q", k)
		}
	}
	if v["version"] != float64(report.ResultVersion) {
		t.Errorf("version %v", v["version"])
	}
	if _, err := report.ReadResult(dir); err != nil {
		t.Error(err)
	}
}

func checkCSVHeader(t *testing.T, path, want string) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Scan()
	if sc.Text() != want {
		t.Errorf("%s header %q, want %q", filepath.Base(path), sc.Text(), want)
	}
	rows := 0
	for sc.Scan() {
		rows++
		if n := strings.Count(sc.Text(), ","); n != strings.Count(want, ",") {
			t.Fatalf("%s row %d has %d commas", filepath.Base(path), rows, n)
		}
	}
	if rows == 0 {
		t.Errorf("%s has no rows", filepath.Base(path))
	}
}
