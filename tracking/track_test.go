package tracking

import (
	"bytes"
	"errors"
	"image"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/tracks"
)

// writeShiftClip writes a small MJPG clip of a textured plate moving 0.25 px
// right and 0.5 px down per frame: each frame is cut from a 4x finer texture
// at whole fine-pixel offsets and area-averaged down, so the shift is exact.
func writeShiftClip(t *testing.T, path string, frames int) {
	t.Helper()
	const w, h, k = 200, 150, 4
	rng := rand.New(rand.NewPCG(5, 6))
	base := gocv.NewMatWithSize(k*h+2*frames+8, k*w+frames+8, gocv.MatTypeCV8UC3)
	defer base.Close()
	pix, _ := base.DataPtrUint8()
	for i := range pix {
		pix[i] = uint8(rng.IntN(256))
	}
	gocv.GaussianBlur(base, &base, image.Pt(0, 0), 4, 4, gocv.BorderReflect101)
	gocv.Normalize(base, &base, 0, 255, gocv.NormMinMax)
	vw, err := gocv.VideoWriterFile(path, "MJPG", 25, w, h, true)
	if err != nil {
		t.Fatal(err)
	}
	defer vw.Close()
	img := gocv.NewMat()
	defer img.Close()
	for i := 0; i < frames; i++ {
		// The plate moves right and down: the window moves left and up.
		x0, y0 := frames-i, 2*(frames-i)
		crop := base.Region(image.Rect(x0, y0, x0+k*w, y0+k*h))
		gocv.Resize(crop, &img, image.Pt(w, h), 0, 0, gocv.InterpolationArea)
		crop.Close()
		if err := vw.Write(img); err != nil {
			t.Fatal(err)
		}
	}
}

func TestTrackRangeAndHooks(t *testing.T) {
	path := filepath.Join(t.TempDir(), "clip.avi")
	writeShiftClip(t, path, 30)
	m := &marks.File{ReferenceFrame: 5, Points: []marks.Point{
		{ID: "p", PX: [2]float64{60.5, 50.25}}, {ID: "q", PX: [2]float64{140, 100}}}}
	src, err := capture.Open(path, capture.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	var seen []int
	var lastDone, lastTotal int
	tr, err := Track(src, m, DefaultOptions(), Range{From: 8, To: 20}, Hooks{
		OnFrame:  func(frame int, img gocv.Mat, _ []tracks.Sample) error { seen = append(seen, frame); return nil },
		Progress: func(done, total int) { lastDone, lastTotal = done, total },
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(tr.Frames) != 13 || tr.Frames[0] != 8 || tr.Frames[12] != 20 || len(seen) != 13 || seen[0] != 8 {
		t.Fatalf("frames %v, hook saw %v; want 8..20", tr.Frames, seen)
	}
	if lastDone != 13 || lastTotal != 13 {
		t.Errorf("progress ended at %d of %d, want 13 of 13", lastDone, lastTotal)
	}
	if tr.Ref[0] != m.Points[0].PX || strings.Join(tr.IDs, ",") != "p,q" {
		t.Errorf("ids %v, ref %v", tr.IDs, tr.Ref)
	}
	// Positions relative to the reference frame 5: (0.25, 0.5) px per frame
	// (how the clip was made; MJPG compression allows 0.1 px).
	for i, f := range tr.Frames {
		for j, s := range tr.Samples[i] {
			wx, wy := m.Points[j].PX[0]+0.25*float64(f-5), m.Points[j].PX[1]+0.5*float64(f-5)
			if s.Lost || math.Hypot(s.X-wx, s.Y-wy) > 0.1 {
				t.Errorf("frame %d %s: %+v, want (%.2f, %.2f)", f, tr.IDs[j], s, wx, wy)
			}
		}
	}
	// A hook error stops tracking and comes back.
	stop := errors.New("enough")
	if _, err := Track(src, m, DefaultOptions(), Range{From: 0, To: -1}, Hooks{
		OnFrame: func(int, gocv.Mat, []tracks.Sample) error { return stop },
	}); !errors.Is(err, stop) {
		t.Errorf("hook error: got %v", err)
	}
}

func TestTrackBadRanges(t *testing.T) {
	path := filepath.Join(t.TempDir(), "clip.avi")
	writeShiftClip(t, path, 10)
	good := &marks.File{Points: []marks.Point{{ID: "p", PX: [2]float64{60, 50}}}}
	cases := []struct {
		name string
		m    *marks.File
		rng  Range
		msg  string
	}{
		{"negative from", good, Range{From: -1, To: -1}, "negative"},
		{"to before from", good, Range{From: 5, To: 2}, "before the first"},
		{"from past end", good, Range{From: 10, To: -1}, "past the end"},
		{"reference past end", &marks.File{ReferenceFrame: 40, Points: good.Points}, Range{To: -1}, "reference frame 40"},
		{"point outside", &marks.File{Points: []marks.Point{{ID: "far", PX: [2]float64{60, 500}}}}, Range{To: -1}, "point far"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			src, err := capture.Open(path, capture.Options{})
			if err != nil {
				t.Fatal(err)
			}
			defer src.Close()
			_, err = Track(src, c.m, DefaultOptions(), c.rng, Hooks{})
			if err == nil || !strings.Contains(err.Error(), c.msg) {
				t.Errorf("error %v, want one mentioning %q", err, c.msg)
			}
		})
	}
}

func TestStepChecksFrames(t *testing.T) {
	ref := gocv.NewMatWithSize(100, 120, gocv.MatTypeCV8UC1)
	defer ref.Close()
	gocv.RandU(&ref, gocv.NewScalar(0, 0, 0, 0), gocv.NewScalar(256, 0, 0, 0))
	gocv.GaussianBlur(ref, &ref, image.Pt(0, 0), 1.2, 1.2, gocv.BorderReflect101)
	m := &marks.File{Points: []marks.Point{{ID: "p", PX: [2]float64{50, 50}}}}
	tr, err := New(m, ref, DefaultOptions())
	if err != nil {
		t.Fatal(err)
	}
	defer tr.Close()
	small := gocv.NewMatWithSize(90, 120, gocv.MatTypeCV8UC1)
	defer small.Close()
	if _, err := tr.Step(7, small); err == nil || !strings.Contains(err.Error(), "frame 7") {
		t.Errorf("wrong size: %v", err)
	}
	float := gocv.NewMatWithSize(100, 120, gocv.MatTypeCV32F)
	defer float.Close()
	if _, err := tr.Step(8, float); err == nil || !strings.Contains(err.Error(), "frame 8") {
		t.Errorf("float frame: %v", err)
	}
	// The reference itself tracks to the mark exactly.
	out, err := tr.Step(0, ref)
	if err != nil || out[0].Lost || out[0].X != 50 || out[0].Y != 50 || out[0].Quality < 0.999 {
		t.Errorf("reference frame: %+v, %v", out, err)
	}
	// Options are checked.
	bad := DefaultOptions()
	bad.Window = 16
	if _, err := New(m, ref, bad); err == nil {
		t.Error("even window accepted")
	}
	// Marks near the edge or on a flat patch are refused, naming the point.
	flat := gocv.NewMatWithSize(100, 120, gocv.MatTypeCV8UC1)
	defer flat.Close()
	for _, c := range []struct {
		img gocv.Mat
		px  [2]float64
		msg string
	}{{ref, [2]float64{2, 50}, "too near the edge"}, {flat, [2]float64{50, 50}, "too little texture"}} {
		mm := &marks.File{Points: []marks.Point{{ID: "edge", PX: c.px, Line: 9}}}
		_, err := New(mm, c.img, DefaultOptions())
		var me *marks.Error
		if !errors.As(err, &me) || me.Line != 9 || !strings.Contains(err.Error(), c.msg) || !strings.Contains(err.Error(), "point edge") {
			t.Errorf("%s: error %v", c.msg, err)
		}
	}
}

// TestTrackDamagedFrame damages one frame of an MJPG clip (its JPEG header
// zeroed): by default tracking stops with an error naming the frame; with
// OnFrameError the frame is skipped and tracking goes on.
func TestTrackDamagedFrame(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "clip.avi")
	writeShiftClip(t, path, 20)
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	// The 13th "00dc" chunk tag (one sits in the header list) holds frame
	// 11 or so; zero its JPEG start.
	off := -1
	for i, k := 0, 0; k < 13; k++ {
		j := bytes.Index(data[i:], []byte("00dc"))
		if j < 0 {
			t.Fatal("no 13th frame chunk")
		}
		off, i = i+j, i+j+4
	}
	for k := off + 8; k < off+408 && k < len(data); k++ {
		data[k] = 0
	}
	bad := filepath.Join(dir, "bad.avi")
	if err := os.WriteFile(bad, data, 0o644); err != nil {
		t.Fatal(err)
	}
	m := &marks.File{Points: []marks.Point{{ID: "p", PX: [2]float64{60, 50}}}}
	open := func() capture.Source {
		src, err := capture.Open(bad, capture.Options{})
		if err != nil {
			t.Fatal(err)
		}
		return src
	}
	src := open()
	_, err = Track(src, m, DefaultOptions(), Range{To: -1}, Hooks{})
	src.Close()
	var fe *capture.FrameError
	if !errors.As(err, &fe) || !strings.Contains(err.Error(), "frame") {
		t.Fatalf("error %v, want a *capture.FrameError naming the frame", err)
	}
	src = open()
	defer src.Close()
	var skipped []int
	tr, err := Track(src, m, DefaultOptions(), Range{To: -1}, Hooks{OnFrameError: func(e *capture.FrameError) error {
		skipped = append(skipped, e.Frame)
		return nil
	}})
	if err != nil {
		t.Fatal(err)
	}
	if len(skipped) != 1 || skipped[0] != fe.Frame || len(tr.Frames) != 19 || tr.Row(fe.Frame) >= 0 {
		t.Fatalf("skipped %v (first error at %d), %d rows %v", skipped, fe.Frame, len(tr.Frames), tr.Frames)
	}
	// Tracking goes on past the gap.
	last := tr.Samples[len(tr.Samples)-1][0]
	if last.Lost || math.Abs(last.X-(60+0.25*19)) > 0.1 || math.Abs(last.Y-(50+0.5*19)) > 0.1 {
		t.Errorf("frame 19: %+v, want (%.2f, %.2f)", last, 60+0.25*19, 50+0.5*19)
	}
}
