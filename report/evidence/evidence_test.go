package evidence

import (
	"fmt"
	"image"
	"image/png"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/capture/synth"
	"github.com/failframe/failframe/tracking/tracks"
)

// smallScene is a short invented test: a Z-braced tower whose diagonal goes first.
func smallScene() synth.Scenario {
	s := synth.Default()
	s.Seed = 11
	s.Width, s.Height = 320, 240
	s.FocalPX = 400
	s.Frames = 90
	s.OnsetFrame, s.BreakFrame, s.CollapseFrame = 30, 60, 66
	s.SkipMP4 = true
	return s
}

func TestRender(t *testing.T) {
	dir := t.TempDir()
	truth, err := synth.Write(smallScene(), dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	src, err := capture.Open(filepath.Join(dir, "tower.avi"), capture.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	r, err := synth.NewRenderer(smallScene())
	if err != nil {
		t.Fatal(err)
	}
	m := r.Marks()
	r.Close()

	// Tracks from the synthesizer's true positions.
	tr := &tracks.Tracks{}
	for _, p := range m.Points {
		tr.IDs = append(tr.IDs, p.ID)
	}
	for f := 0; f < truth.Frames; f++ {
		tr.Frames = append(tr.Frames, f)
		row := make([]tracks.Sample, len(tr.IDs))
		for j, id := range tr.IDs {
			tp, ok := truth.Point(id)
			if !ok {
				t.Fatalf("no truth for %s", id)
			}
			row[j] = tracks.Sample{X: tp.PX[f][0], Y: tp.PX[f][1], Quality: 1}
		}
		tr.Samples = append(tr.Samples, row)
	}
	bow := map[string][]float64{}
	for _, mem := range truth.Members {
		b := make([]float64, len(mem.BowMM))
		for i, v := range mem.BowMM {
			b[i] = v / mem.LengthMM
		}
		bow[mem.ID] = b
	}
	ov := &Overlay{Marks: m, Tracks: tr, BowFrac: bow, FirstMember: truth.FirstMember}
	req := Request{
		Shots: []Shot{
			{Frame: 0, File: "reference.png", Caption: "reference"},
			{Frame: truth.BreakFrame, File: "break.png", Caption: "break"},
		},
		Sheet:    []int{20, 30, 40, 50, 60, 70},
		ClipFrom: 25, ClipTo: 75, ClipFPS: 25,
		Stamp: func(f int) string { return fmt.Sprintf("frame %d", f) },
	}
	out, err := Render(src, ov, req, filepath.Join(dir, "evidence"))
	if err != nil {
		t.Fatal(err)
	}
	if len(out) != 4 {
		t.Fatalf("written %v", out)
	}
	ref := decode(t, filepath.Join(dir, "evidence", "reference.png"))
	if ref.Bounds().Dx() != 320 || ref.Bounds().Dy() != 240 {
		t.Errorf("reference size %v", ref.Bounds())
	}
	// The stamp bar is black across the top.
	if r, g, b, _ := ref.At(300, 2).RGBA(); r+g+b > 3*0x1000 {
		t.Errorf("stamp bar not dark at (300,2): %d %d %d", r, g, b)
	}
	// The first member is drawn in white outline and colour at its middle in the break frame.
	br := decode(t, filepath.Join(dir, "evidence", "break.png"))
	fm, _ := truth.Member(truth.FirstMember)
	a, _ := truth.Point(fm.Points[0])
	z, _ := truth.Point(fm.Points[len(fm.Points)-1])
	mid, hasMid := truth.Point(fm.ID + "-mid")
	cx := (a.PX[truth.BreakFrame][0] + z.PX[truth.BreakFrame][0]) / 2
	cy := (a.PX[truth.BreakFrame][1] + z.PX[truth.BreakFrame][1]) / 2
	if hasMid {
		cx, cy = (a.PX[truth.BreakFrame][0]+mid.PX[truth.BreakFrame][0])/2, (a.PX[truth.BreakFrame][1]+mid.PX[truth.BreakFrame][1])/2
	}
	if !nearColour(br, int(cx), int(cy), 3, func(r, g, b uint32) bool { return r > 0xb000 && b < 0x6000 }) {
		t.Errorf("no warm highlight of %s near (%.0f,%.0f)", fm.ID, cx, cy)
	}
	sheet := decode(t, filepath.Join(dir, "evidence", SheetFile))
	// 6 thumbnails of 320x240 four to a row: 2 rows.
	if sheet.Bounds().Dx() != 4*324+4 || sheet.Bounds().Dy() != 2*244+4 {
		t.Errorf("sheet size %v", sheet.Bounds())
	}
	// The clip is read back by the ffmpeg CLI, an independent decoder.
	if _, err := exec.LookPath("ffprobe"); err != nil {
		t.Skip("ffprobe not installed")
	}
	outp, err := exec.Command("ffprobe", "-v", "error", "-count_frames", "-select_streams", "v:0",
		"-show_entries", "stream=nb_read_frames,codec_name,width", "-of", "csv=p=0", filepath.Join(dir, "evidence", ClipFile)).Output()
	if err != nil {
		t.Fatalf("ffprobe: %v", err)
	}
	f := strings.Split(strings.TrimSpace(string(outp)), ",")
	if len(f) != 3 || f[0] != "mjpeg" || f[1] != "320" {
		t.Fatalf("ffprobe says %q", outp)
	}
	if n, _ := strconv.Atoi(f[2]); n != 51 {
		t.Errorf("clip has %d frames, want 51", n)
	}
}

func TestBowColour(t *testing.T) {
	if c := BowColour(0); c.G < 150 || c.R > 50 {
		t.Errorf("straight member %v not green", c)
	}
	if c := BowColour(-0.05); c.R < 200 || c.G > 10 {
		t.Errorf("bowed member %v not red", c)
	}
	if c := BowColour(math.NaN()); c.R != c.G || c.G != c.B {
		t.Errorf("unknown bow %v not grey", c)
	}
}

func decode(t *testing.T, path string) image.Image {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return img
}

func nearColour(img image.Image, x, y, r int, ok func(r, g, b uint32) bool) bool {
	for dy := -r; dy <= r; dy++ {
		for dx := -r; dx <= r; dx++ {
			cr, cg, cb, _ := img.At(x+dx, y+dy).RGBA()
			if ok(cr, cg, cb) {
				return true
			}
		}
	}
	return false
}
