package cli

import (
	"image"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/tracking/tracks"
)

func TestTrackArgsToOptions(t *testing.T) {
	tests := []struct {
		name string
		args []string
		want trackOptions
		code int
		err  string
	}{
		{name: "required only", args: []string{"c.avi", "--marks", "m.yaml", "--out", "o"},
			want: trackOptions{clip: "c.avi", marks: "m.yaml", out: "o"}},
		{name: "all flags", args: []string{"c.avi", "--marks", "m.yaml", "--out", "o", "--capture-fps", "960", "--from", "0.5s", "--to", "1200", "--quiet"},
			want: trackOptions{clip: "c.avi", marks: "m.yaml", out: "o", captureFPS: 960, from: "0.5s", to: "1200", quiet: true}},
		{name: "no marks", args: []string{"c.avi", "--out", "o"}, code: ExitUsage, err: "--marks is required"},
		{name: "no out", args: []string{"c.avi", "--marks", "m.yaml"}, code: ExitUsage, err: "--out is required"},
		{name: "no clip", args: []string{"--marks", "m.yaml", "--out", "o"}, code: ExitUsage, err: "accepts 1 arg"},
		{name: "bad from", args: []string{"c.avi", "--marks", "m.yaml", "--out", "o", "--from", "soon"}, code: ExitUsage, err: "--from"},
		{name: "fractional frame", args: []string{"c.avi", "--marks", "m.yaml", "--out", "o", "--to", "12.5"}, code: ExitUsage, err: "whole"},
		{name: "zero rate", args: []string{"c.avi", "--marks", "m.yaml", "--out", "o", "--capture-fps", "0"}, code: ExitUsage, err: "--capture-fps"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			io, _, errOut := testIO()
			var got *trackOptions
			root := NewRootCmd(io)
			for _, c := range root.Commands() {
				if c.Name() == "track" {
					root.RemoveCommand(c)
				}
			}
			root.AddCommand(newTrackCmdWith(io, func(o *trackOptions) error { got = o; return nil }))
			root.SetArgs(append([]string{"track"}, tt.args...))
			_, err := root.ExecuteC()
			if code := exitCode(err); code != tt.code {
				t.Fatalf("exit %d (%v), want %d; stderr %s", code, err, tt.code, errOut)
			}
			if tt.code != ExitOK {
				if err == nil || !strings.Contains(err.Error(), tt.err) {
					t.Errorf("error %v, want one mentioning %q", err, tt.err)
				}
				return
			}
			got.io = nil
			if *got != tt.want {
				t.Errorf("options %+v, want %+v", *got, tt.want)
			}
		})
	}
}

// writeTrackClip writes a 160x120 MJPG clip of a speckled plate moving
// 0.5 px right and 0.25 px down per frame: each frame is cut from a 4x finer
// texture at whole fine-pixel offsets and area-averaged down, so the shift
// is exact.
func writeTrackClip(t *testing.T, path string, frames int) {
	t.Helper()
	const w, h, k = 160, 120, 4
	rng := rand.New(rand.NewPCG(11, 12))
	base := gocv.NewMatWithSize(k*h+frames+8, k*w+2*frames+8, gocv.MatTypeCV8UC3)
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
		x0, y0 := 2*(frames-i), frames-i
		crop := base.Region(image.Rect(x0, y0, x0+k*w, y0+k*h))
		gocv.Resize(crop, &img, image.Pt(w, h), 0, 0, gocv.InterpolationArea)
		crop.Close()
		if err := vw.Write(img); err != nil {
			t.Fatal(err)
		}
	}
}

const trackMarks = `capture_fps: 500
reference_frame: 0
scale: {from: p1, to: p2, mm: 30}
points:
  - id: p1
    px: [50.0, 40.0]
  - id: p2
    px: [110.0, 40.0]
  - id: p3
    px: [80.0, 80.0]
`

func TestTrackRun(t *testing.T) {
	dir := t.TempDir()
	clip := filepath.Join(dir, "clip.avi")
	writeTrackClip(t, clip, 40)
	mk := filepath.Join(dir, "marks.yaml")
	if err := os.WriteFile(mk, []byte(trackMarks), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "run")
	io, stdout, stderr := testIO()
	if code := Run(io, []string{"track", clip, "--marks", mk, "--out", out, "--to", "0.05s"}); code != ExitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	f, err := os.Open(filepath.Join(out, "points.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	tr, err := tracks.ReadCSV(f)
	if err != nil {
		t.Fatal(err)
	}
	// --to 0.05s at capture_fps 500 is frame 25: frames 0..25.
	if len(tr.Frames) != 26 || tr.Frames[25] != 25 {
		t.Fatalf("frames %v, want 0..25", tr.Frames)
	}
	// The plate moves (+0.5, +0.25) px per frame (how the clip was made).
	for i, fr := range tr.Frames {
		for j, id := range tr.IDs {
			s := tr.Samples[i][j]
			ref := tr.Ref[j]
			if s.Lost {
				t.Fatalf("frame %d: %s lost", fr, id)
			}
			if math.Abs(s.X-ref[0]-0.5*float64(fr)) > 0.1 || math.Abs(s.Y-ref[1]-0.25*float64(fr)) > 0.1 {
				t.Errorf("frame %d %s at (%.3f, %.3f), want (%.3f, %.3f)", fr, id, s.X, s.Y, ref[0]+0.5*float64(fr), ref[1]+0.25*float64(fr))
			}
		}
	}
	// The scale is 30 mm over 60 px.
	if math.Abs(tr.Ref[2][0]-80) > 1e-3 || math.Abs(tr.Ref[2][1]-80) > 1e-3 {
		t.Errorf("reference of p3 %v, want [80 80] (from the mm columns)", tr.Ref[2])
	}
	lines := strings.Split(strings.TrimSpace(stdout.String()), "\n")
	if len(lines) != 4 || !strings.HasPrefix(lines[0], "point") || !strings.HasPrefix(lines[3], "p3") {
		t.Errorf("summary %q, want a header and three points", stdout.String())
	}
	if !strings.Contains(stderr.String(), "wrote "+filepath.Join(out, "points.csv")) {
		t.Errorf("stderr %q, want the written file named", stderr)
	}
}

func TestTrackBadInput(t *testing.T) {
	dir := t.TempDir()
	clip := filepath.Join(dir, "clip.avi")
	writeTrackClip(t, clip, 10)
	good := filepath.Join(dir, "good.yaml")
	os.WriteFile(good, []byte(trackMarks), 0o644)
	outside := filepath.Join(dir, "outside.yaml")
	os.WriteFile(outside, []byte(strings.Replace(trackMarks, "[80.0, 80.0]", "[80.0, 300.0]", 1)), 0o644)
	unknown := filepath.Join(dir, "unknown.yaml")
	os.WriteFile(unknown, []byte(trackMarks+"colour: red\n"), 0o644)
	plain := filepath.Join(dir, "plain.avi")
	writePlainClip(t, plain)
	junk := filepath.Join(dir, "junk.avi")
	os.WriteFile(junk, []byte("not a video"), 0o644)
	out := filepath.Join(dir, "run")

	// A first good run leaves a points.csv that failed runs must not touch.
	io, _, stderr := testIO()
	if code := Run(io, []string{"track", clip, "--marks", good, "--out", out}); code != ExitOK {
		t.Fatalf("good run: exit %d: %s", code, stderr)
	}
	before, err := os.ReadFile(filepath.Join(out, "points.csv"))
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name string
		args []string
		code int
		msg  string
	}{
		{"point outside frame", []string{clip, "--marks", outside}, ExitBadInput, "line 9: point p3"},
		{"unknown key", []string{clip, "--marks", unknown}, ExitBadInput, "colour"},
		{"missing marks", []string{clip, "--marks", filepath.Join(dir, "none.yaml")}, ExitBadInput, "none.yaml"},
		{"missing clip", []string{filepath.Join(dir, "none.avi"), "--marks", good}, ExitBadInput, "none.avi"},
		{"not a video", []string{junk, "--marks", good}, ExitBadInput, "junk.avi"},
		{"from past end", []string{clip, "--marks", good, "--from", "50"}, ExitBadInput, "past the end"},
		{"to before from", []string{clip, "--marks", good, "--from", "5", "--to", "3"}, ExitUsage, "before --from"},
		{"no texture", []string{plain, "--marks", good}, ExitBadInput, "too little texture"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			io, _, stderr := testIO()
			code := Run(io, append([]string{"track"}, append(tt.args, "--out", out)...))
			if code != tt.code || !strings.Contains(stderr.String(), tt.msg) {
				t.Errorf("exit %d, stderr %q; want exit %d mentioning %q", code, stderr, tt.code, tt.msg)
			}
			after, err := os.ReadFile(filepath.Join(out, "points.csv"))
			if err != nil || string(after) != string(before) {
				t.Errorf("points.csv changed by a failed run")
			}
		})
	}
}

// writePlainClip writes a clip of flat grey frames.
func writePlainClip(t *testing.T, path string) {
	t.Helper()
	vw, err := gocv.VideoWriterFile(path, "MJPG", 25, 160, 120, true)
	if err != nil {
		t.Fatal(err)
	}
	defer vw.Close()
	img := gocv.NewMatWithSizeFromScalar(gocv.NewScalar(128, 128, 128, 0), 120, 160, gocv.MatTypeCV8UC3)
	defer img.Close()
	for i := 0; i < 5; i++ {
		if err := vw.Write(img); err != nil {
			t.Fatal(err)
		}
	}
}
