package evidence

import (
	"errors"
	"image"
	"image/color"
	"math"
	"path/filepath"
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/capture/synth"
)

func TestSize(t *testing.T) {
	cases := []struct {
		w, h int
		want image.Point
	}{
		{1280, 720, image.Pt(640, 360)},
		{1920, 1080, image.Pt(640, 360)},
		{640, 480, image.Pt(640, 480)},
		{320, 240, image.Pt(320, 240)},
		{1080, 1920, image.Pt(414, 738)}, // portrait: bounded by MaxPixels
		{321, 241, image.Pt(320, 240)},   // even sides
		{0, 10, image.Point{}},
	}
	for _, c := range cases {
		got := Size(c.w, c.h)
		if got != c.want {
			t.Errorf("Size(%d, %d) = %v, want %v", c.w, c.h, got, c.want)
		}
		if got.X*got.Y > MaxPixels || got.X > MaxWidth {
			t.Errorf("Size(%d, %d) = %v exceeds the bounds", c.w, c.h, got)
		}
	}
}

// flat returns a w x h BGR frame of one colour that encodes n.
func flat(w, h, n int) gocv.Mat {
	return gocv.NewMatWithSizeFromScalar(gocv.NewScalar(float64(n%200+20), float64((n*7)%200+20), 90, 0), h, w, gocv.MatTypeCV8UC3)
}

// TestKeeperPolicy feeds a long run of frames and checks exactly which the
// keeper holds before and after the sign, that it never holds more than the
// policy's Max, and that a held frame comes back as it went in.
func TestKeeperPolicy(t *testing.T) {
	pol := KeepPolicy{Before: 10, After: 20, Every: 8, Span: 100}
	k := NewKeeper(pol, 64, 48)
	defer k.Close()
	peak := 0
	for f := 0; f < 500; f++ {
		if f == 333 {
			continue // a frame that could not be decoded
		}
		m := flat(64, 48, f)
		k.Add(f, m)
		m.Close()
		peak = max(peak, len(k.Held()))
		if f == 300 {
			// Before the sign: the sparse frames of the span and the last Before.
			want := map[int]bool{}
			for n := 201; n <= 300; n++ {
				if n%8 == 0 || n > 290 {
					want[n] = true
				}
			}
			checkHeld(t, "before the sign", k.Held(), want)
		}
		if f == 450 {
			k.Sign(447)
		}
	}
	if peak > pol.Max() {
		t.Errorf("held %d frames at once, policy max %d", peak, pol.Max())
	}
	// Sparse frames of the span at the sign, then every frame from the
	// oldest of the last Before (441) to 20 after the sign (467).
	want := map[int]bool{}
	for n := 351; n <= 450; n++ {
		if n%8 == 0 {
			want[n] = true
		}
	}
	for n := 441; n <= 467; n++ {
		want[n] = true
	}
	checkHeld(t, "after the sign", k.Held(), want)
	if f, ok := k.Nearest(365, 4); !ok || f != 368 {
		t.Errorf("Nearest(365, 4) = %d, %v; want 368", f, ok)
	}
	if _, ok := k.Nearest(300, 4); ok {
		t.Error("Nearest(300, 4) found a frame older than the span")
	}
	// A held frame comes back within the loss of JPEG at quality 90 on a
	// flat colour (a few levels; common practice).
	got := gocv.NewMat()
	defer got.Close()
	for _, f := range []int{400, 460} {
		if !k.Frame(f, &got) {
			t.Fatalf("frame %d not held", f)
		}
		if got.Cols() != 64 || got.Rows() != 48 {
			t.Fatalf("frame size %dx%d", got.Cols(), got.Rows())
		}
		orig := flat(64, 48, f)
		for c := 0; c < 3; c++ {
			a, b := got.GetVecbAt(10, 10)[c], orig.GetVecbAt(10, 10)[c]
			if d := math.Abs(float64(a) - float64(b)); d > 3 {
				t.Errorf("frame %d channel %d: %d kept, %d given", f, c, a, b)
			}
		}
		orig.Close()
	}
}

func checkHeld(t *testing.T, when string, held []int, want map[int]bool) {
	t.Helper()
	if len(held) != len(want) {
		t.Errorf("%s: held %d frames %v, want %d", when, len(held), held, len(want))
	}
	for _, f := range held {
		if !want[f] {
			t.Errorf("%s: holds frame %d, which the policy lets go", when, f)
		}
	}
}

// noRead is a source that fails if the clip is read again.
type noRead struct {
	capture.Source
	reads int
}

func (s *noRead) Read(dst *gocv.Mat) (int, error) {
	s.reads++
	return 0, errors.New("read again")
}

func (s *noRead) Seek(int) error {
	s.reads++
	return errors.New("seek")
}

// TestRenderFromKept checks that evidence drawn from kept frames needs no
// second read of the clip, and that it shows the same picture as the frames
// read again and shrunk (within the loss of JPEG storage).
func TestRenderFromKept(t *testing.T) {
	dir := t.TempDir()
	sc := smallScene()
	if _, err := synth.Write(sc, dir, nil); err != nil {
		t.Fatal(err)
	}
	clip := filepath.Join(dir, "tower.avi")
	src, err := capture.Open(clip, capture.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	k := NewKeeper(KeepPolicy{Before: 20, After: 60, Every: 4, Span: 80}, sc.Width, sc.Height)
	defer k.Close()
	img := gocv.NewMat()
	defer img.Close()
	for {
		f, err := src.Read(&img)
		if err != nil {
			break
		}
		k.Add(f, img)
		if f == 40 {
			k.Sign(38)
		}
	}
	size := image.Pt(160, 120) // drawn smaller than kept: both paths shrink
	req := Request{
		Shots:    []Shot{{Frame: 60, File: "a.png"}},
		Sheet:    []int{52, 56, 64},
		ClipFrom: 70, ClipTo: 89, ClipFPS: 25,
		Kept: k, Size: size,
	}
	nr := &noRead{Source: src}
	if _, err := Render(nr, &Overlay{}, req, filepath.Join(dir, "kept")); err != nil {
		t.Fatalf("render from kept frames: %v", err)
	}
	if nr.reads != 0 {
		t.Errorf("read the clip %d times though every frame was kept", nr.reads)
	}
	src2, err := capture.Open(clip, capture.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src2.Close()
	req.Kept = nil
	if _, err := Render(src2, &Overlay{}, req, filepath.Join(dir, "read")); err != nil {
		t.Fatal(err)
	}
	a := decode(t, filepath.Join(dir, "kept", "a.png"))
	b := decode(t, filepath.Join(dir, "read", "a.png"))
	if a.Bounds() != b.Bounds() || a.Bounds().Dx() != 160 {
		t.Fatalf("sizes %v and %v", a.Bounds(), b.Bounds())
	}
	var sum float64
	n := 0
	for y := 20; y < 120; y++ { // below the stamp bar
		for x := 0; x < 160; x++ {
			ca, cb := color.RGBAModel.Convert(a.At(x, y)).(color.RGBA), color.RGBAModel.Convert(b.At(x, y)).(color.RGBA)
			sum += math.Abs(float64(ca.R)-float64(cb.R)) + math.Abs(float64(ca.G)-float64(cb.G)) + math.Abs(float64(ca.B)-float64(cb.B))
			n += 3
		}
	}
	if mad := sum / float64(n); mad > 3 {
		t.Errorf("kept and re-read frames differ by %.2f levels on average, want <= 3", mad)
	}
}
