package review

import (
	"context"
	"encoding/json"
	"fmt"
	"image"
	"image/color"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture/synth"
	"github.com/failframe/failframe/report"
	"github.com/failframe/failframe/tracking/marks"
)

// Test clip: a small MJPG clip whose frames all differ (a moving bar, the
// frame number written in), with three marked points on a brace whose
// middle bows out as the frames go on.
const (
	clipW, clipH, clipFrames = 320, 240, 120
	clipFPS                  = 480.0
	eventOnset, eventBreak   = 40, 77
)

// pointAt is the true position of the test brace's points in frame i.
func pointAt(id string, i int) (float64, float64) {
	switch id {
	case "A1":
		return 60, 200
	case "B2":
		return 220, 40
	}
	// The mid point moves sideways from the chord after the onset.
	bow := 0.0
	if i > eventOnset {
		bow = 0.12 * float64(i-eventOnset)
	}
	return 140 + bow/math.Sqrt2, 120 + bow/math.Sqrt2
}

// makeClip writes the test clip into dir and returns its path.
func makeClip(t testing.TB, dir string) string {
	t.Helper()
	path := filepath.Join(dir, "tower.avi")
	vw, err := gocv.VideoWriterFile(path, "MJPG", 30, clipW, clipH, true)
	if err != nil {
		t.Fatalf("video writer: %v", err)
	}
	defer vw.Close()
	img := gocv.NewMatWithSize(clipH, clipW, gocv.MatTypeCV8UC3)
	defer img.Close()
	for i := 0; i < clipFrames; i++ {
		img.SetTo(gocv.NewScalar(40, 44, 48, 0))
		for x := 0; x < clipW; x += 40 {
			gocv.Line(&img, image.Pt(x, 0), image.Pt(x, clipH), color.RGBA{70, 70, 70, 0}, 1)
		}
		bx := (i * 37) % clipW
		gocv.Rectangle(&img, image.Rect(bx, 0, bx+40, clipH), color.RGBA{200, 200, 60, 0}, -1)
		for _, id := range []string{"A1", "M", "B2"} {
			x, y := pointAt(id, i)
			gocv.Circle(&img, image.Pt(int(math.Round(x)), int(math.Round(y))), 4, color.RGBA{255, 255, 255, 0}, -1)
		}
		gocv.PutText(&img, fmt.Sprintf("frame %d", i), image.Pt(10, 30), gocv.FontHersheySimplex, 0.8, color.RGBA{255, 255, 255, 0}, 2)
		if err := vw.Write(img); err != nil {
			t.Fatalf("write frame %d: %v", i, err)
		}
	}
	return path
}

// makeReport writes a small report folder (report.json, points.csv,
// load.csv) and the marks the tracks refer to.
func makeReport(t testing.TB, dir string) (reportDir, marksPath string) {
	t.Helper()
	reportDir = filepath.Join(dir, "report")
	if err := os.MkdirAll(reportDir, 0o755); err != nil {
		t.Fatal(err)
	}
	lvl := func(v int) *int { return &v }
	m := &marks.File{
		Clip: "tower.avi", CaptureFPS: clipFPS,
		Points: []marks.Point{
			{ID: "A1", PX: [2]float64{60, 200}, Leg: "A", Level: lvl(1)},
			{ID: "M", PX: [2]float64{140, 120}},
			{ID: "B2", PX: [2]float64{220, 40}, Leg: "B", Level: lvl(2)},
		},
		Members: []marks.Member{{ID: "AB-d1", Kind: marks.KindBrace, Points: []string{"A1", "M", "B2"}}},
	}
	marksPath = filepath.Join(dir, "marks.yaml")
	if err := marks.Save(marksPath, m); err != nil {
		t.Fatal(err)
	}

	var pts strings.Builder
	pts.WriteString("frame,time_s,point,x_px,y_px,x_mm,y_mm,quality,lost\n")
	for i := 0; i < clipFrames; i++ {
		for _, id := range []string{"A1", "M", "B2"} {
			x, y := pointAt(id, i)
			fmt.Fprintf(&pts, "%d,%.6f,%s,%.3f,%.3f,,,0.95,0\n", i, float64(i)/clipFPS, id, x, y)
		}
	}
	write(t, filepath.Join(reportDir, "points.csv"), pts.String())

	// Load rises 10 g per ms to the break, then falls away.
	var ld strings.Builder
	ld.WriteString("video_time_s,load_g\n")
	tBreak := eventBreak / clipFPS
	for ms := 0; ms <= 250; ms++ {
		ts := float64(ms) / 1000
		g := 10.0 * float64(ms)
		if ts > tBreak+0.001 {
			g = math.Max(0, 10*tBreak*1000-200*(ts-tBreak)*1000)
		}
		fmt.Fprintf(&ld, "%.4f,%.2f\n", ts, g)
	}
	write(t, filepath.Join(reportDir, "load.csv"), ld.String())

	g := func(v float64) *float64 { return &v }
	res := report.Result{
		Version: report.ResultVersion, Tool: "failframe test", CaptureFPS: clipFPS, CaptureFPSFrom: "marks",
		Clip:        report.ClipFacts{Path: "tower.avi", Width: clipW, Height: clipH, FrameCount: clipFrames, LastFrame: clipFrames - 1},
		FirstMember: "AB-d1", FailureMode: "brace_buckling",
		Account: "The diagonal AB-d1 bowed out and snapped first; the legs held until then.",
		Events: []report.Event{
			{Kind: "onset", Member: "AB-d1", Frame: eventOnset, TimeS: eventOnset / clipFPS, LoadG: g(10 * 1000 * eventOnset / clipFPS), Detail: "mid-span starts to move sideways"},
			{Kind: "break", Member: "AB-d1", Frame: eventBreak, TimeS: eventBreak / clipFPS, LoadG: g(10 * 1000 * eventBreak / clipFPS), Detail: "bow jumps"},
			{Kind: "collapse", Frame: 100, TimeS: 100 / clipFPS, Detail: "whole tower moves"},
		},
		PeakLoadG: g(1604), MassG: g(21.4), Efficiency: g(75),
	}
	data, err := json.MarshalIndent(res, "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	write(t, filepath.Join(reportDir, report.ResultFile), string(data))
	return reportDir, marksPath
}

func write(t testing.TB, path, s string) {
	t.Helper()
	if err := os.WriteFile(path, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
}

// startServer runs a review server on a free loopback port until the test ends.
func startServer(t testing.TB, cfg Config) (*Server, string) {
	t.Helper()
	s, err := New(cfg)
	if err != nil {
		t.Fatalf("New: %v", err)
	}
	ln, err := Listen("127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Serve(ctx, ln) }()
	t.Cleanup(func() {
		cancel()
		if err := <-done; err != nil {
			t.Errorf("Serve: %v", err)
		}
		s.Close()
	})
	return s, URL(ln)
}

// hostOf returns host:port of a URL like http://127.0.0.1:1234/.
func hostOf(u string) string {
	h := strings.TrimPrefix(u, "http://")
	return strings.TrimSuffix(h, "/")
}

// synthReview is a synthesized tower clip with a report folder built from
// the synthesizer's ground truth (what an analysis would find at best).
type synthReview struct {
	clip, marks, report string
	truth               *synth.Truth
}

// makeSynthReview renders a short clip of the synthesizer's demo tower at
// the given size and writes a report folder for it: report.json with the
// true events, points.csv with the true positions of the marked points,
// members.csv with the true bow, and load.csv lined up in video time.
func makeSynthReview(t testing.TB, dir string, w, h, frames int) synthReview {
	t.Helper()
	s := synth.Default()
	s.Width, s.Height, s.FocalPX = w, h, s.FocalPX*float64(w)/float64(s.Width)
	s.Frames = frames
	s.OnsetFrame, s.BreakFrame, s.CollapseFrame = frames*4/10, frames*6/10, frames*7/10
	s.SkipMP4 = true
	clipDir := filepath.Join(dir, "clip")
	tr, err := synth.Write(s, clipDir, nil)
	if err != nil {
		t.Fatalf("synth: %v", err)
	}
	sr := synthReview{clip: filepath.Join(clipDir, "tower.avi"), marks: filepath.Join(clipDir, "marks.yaml"),
		report: filepath.Join(dir, "report"), truth: tr}
	if err := os.MkdirAll(sr.report, 0o755); err != nil {
		t.Fatal(err)
	}
	m, err := marks.Load(sr.marks)
	if err != nil {
		t.Fatal(err)
	}
	fps := tr.CaptureFPS

	var pts strings.Builder
	pts.WriteString("frame,time_s,point,x_px,y_px,x_mm,y_mm,quality,lost\n")
	for i := 0; i < tr.Frames; i++ {
		for _, p := range m.Points {
			tp, ok := tr.Point(p.ID)
			if !ok {
				t.Fatalf("truth lacks point %s", p.ID)
			}
			fmt.Fprintf(&pts, "%d,%.6f,%s,%.3f,%.3f,,,0.9,0\n", i, float64(i)/fps, p.ID, tp.PX[i][0], tp.PX[i][1])
		}
	}
	write(t, filepath.Join(sr.report, "points.csv"), pts.String())

	var mem strings.Builder
	mem.WriteString("frame,time_s,member,kind,bow_mm,bow_pct,strain_pct,rotation_deg\n")
	for i := 0; i < tr.Frames; i++ {
		for _, tm := range tr.Members {
			if len(tm.BowMM) <= i || tm.LengthMM <= 0 {
				continue
			}
			fmt.Fprintf(&mem, "%d,%.6f,%s,%s,%.4f,%.4f,,\n", i, float64(i)/fps, tm.ID, tm.Kind, tm.BowMM[i], 100*tm.BowMM[i]/tm.LengthMM)
		}
	}
	write(t, filepath.Join(sr.report, "members.csv"), mem.String())

	// The synthesizer's log is in logger time (ms); video = log + offset.
	raw, err := os.ReadFile(filepath.Join(clipDir, "load.csv"))
	if err != nil {
		t.Fatal(err)
	}
	var ld strings.Builder
	ld.WriteString("log_time_s,video_time_s,frame,load_g\n")
	for _, line := range strings.Split(string(raw), "\n")[1:] {
		var ms, g float64
		if _, err := fmt.Sscanf(line, "%g,%g", &ms, &g); err != nil {
			continue
		}
		v := ms/1000 + tr.LoadOffsetS
		fmt.Fprintf(&ld, "%.4f,%.5f,%d,%.1f\n", ms/1000, v, int(math.Round(v*fps)), g)
	}
	write(t, filepath.Join(sr.report, "load.csv"), ld.String())

	f := func(v float64) *float64 { return &v }
	ev := func(kind, member string, frame int, g float64, detail string) report.Event {
		e := report.Event{Kind: kind, Member: member, Frame: frame, TimeS: float64(frame) / fps, Detail: detail}
		if g > 0 {
			e.LoadG = f(g)
		}
		return e
	}
	res := report.Result{
		Version: report.ResultVersion, Tool: "failframe test", CaptureFPS: fps, CaptureFPSFrom: "marks",
		Clip:        report.ClipFacts{Path: sr.clip, Width: w, Height: h, FrameCount: frames, LastFrame: frames - 1},
		FirstMember: tr.FirstMember, FailureMode: tr.FailureMode,
		Account: "The long diagonal " + tr.FirstMember + " bowed out and snapped first; the legs held until the tower folded.",
		Events: []report.Event{
			ev("onset", tr.FirstMember, tr.OnsetFrame, tr.LoadAtOnsetG, "mid-span moves sideways"),
			ev("break", tr.FirstMember, tr.BreakFrame, tr.LoadAtBreakG, "bow jumps, member snaps"),
			ev("collapse", "", tr.CollapseFrame, 0, "the whole tower moves"),
		},
		PeakLoadG: f(tr.PeakLoadG), MassG: f(tr.MassG), Efficiency: f(tr.Efficiency),
		Alignment: &report.Alignment{Method: "auto", OffsetS: tr.LoadOffsetS, UncertaintyS: tr.LoadPeriodS},
		Advice:    []string{"Cut the long diagonals in half with a second brace crossing them at mid-span."},
	}
	data, err := json.MarshalIndent(res, "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	write(t, filepath.Join(sr.report, report.ResultFile), string(data))
	write(t, filepath.Join(sr.report, "report.html"), "<!doctype html><title>report</title><p>test report page</p>")
	return sr
}
