package plots

import (
	"encoding/xml"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"testing"
)

func TestSavePNGAndSVG(t *testing.T) {
	dir := t.TempDir()
	x := make([]float64, 200)
	y := make([]float64, 200)
	for i := range x {
		x[i] = float64(i) / 100
		y[i] = 5000 * x[i] / 2
		if i == 50 {
			y[i] = math.NaN() // breaks the line
		}
	}
	c := Chart{Title: "Load", XLabel: "time (s)", YLabel: "load (g)",
		Series: []Series{{Name: "load", X: x, Y: y}, {Name: "other", X: x[:10], Y: y[:10], Dots: true}},
		Marks:  []Mark{{X: 1.5, Label: "collapse", Strong: true}, {X: 99, Label: "outside"}}}
	files, err := c.Save(dir, "load")
	if err != nil {
		t.Fatal(err)
	}
	if len(files) != 2 || files[0] != "load.png" || files[1] != "load.svg" {
		t.Fatalf("files = %v", files)
	}
	f, err := os.Open(filepath.Join(dir, "load.png"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("PNG does not decode: %v", err)
	}
	// 16 cm x 9 cm at 144 dpi is 907 x 510 px (1 in = 2.54 cm).
	if b := img.Bounds(); b.Dx() < 900 || b.Dx() > 914 || b.Dy() < 505 || b.Dy() > 515 {
		t.Errorf("PNG size %v, want about 907 x 510", b)
	}
	// The strong mark is drawn in red somewhere.
	red := 0
	b := img.Bounds()
	for yy := b.Min.Y; yy < b.Max.Y; yy++ {
		for xx := b.Min.X; xx < b.Max.X; xx++ {
			r, g, bl, _ := img.At(xx, yy).RGBA()
			if r > 0xa000 && g < 0x4000 && bl < 0x4000 {
				red++
			}
		}
	}
	if red < 20 {
		t.Errorf("only %d red pixels: collapse mark missing", red)
	}
	sf, err := os.Open(filepath.Join(dir, "load.svg"))
	if err != nil {
		t.Fatal(err)
	}
	defer sf.Close()
	dec := xml.NewDecoder(sf)
	for {
		if _, err := dec.Token(); err == io.EOF {
			break
		} else if err != nil {
			t.Fatalf("SVG is not well-formed XML: %v", err)
		}
	}
}

func TestSaveRejectsMismatchedSeries(t *testing.T) {
	c := Chart{Series: []Series{{Name: "bad", X: []float64{1, 2}, Y: []float64{1}}}}
	if _, err := c.Save(t.TempDir(), "bad"); err == nil {
		t.Error("no error for mismatched series")
	}
}

func TestEmptyChartSaves(t *testing.T) {
	c := Chart{Title: "nothing", Series: []Series{{Name: "all NaN", X: []float64{math.NaN()}, Y: []float64{1}}}}
	if _, err := c.Save(t.TempDir(), "empty"); err != nil {
		t.Fatal(err)
	}
}

// TestThinKeepsPeaksAndEnds checks the thinning of long series: at most
// MaxPoints (plus the two ends), the series' lowest and highest points, its
// first and last, in their order; short series untouched (common practice
// in plotting long records: min/max decimation per run of samples).
func TestThinKeepsPeaksAndEnds(t *testing.T) {
	cases := []struct {
		name string
		n    int
	}{
		{"short", MaxPoints},
		{"a little long", MaxPoints + 1},
		{"long clip", 48000},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			x := make([]float64, c.n)
			y := make([]float64, c.n)
			for i := range x {
				x[i] = float64(i)
				y[i] = math.Sin(float64(i) / 50)
			}
			for i := c.n / 10; i < c.n/5; i++ {
				y[i] = 0.25 // a flat stretch: still drawn
			}
			spike := c.n * 2 / 3
			y[spike] = 9 // one frame's peak
			y[c.n/3] = -7
			segs := segments(Series{X: x, Y: y})
			if len(segs) != 1 {
				t.Fatalf("%d segments, want 1", len(segs))
			}
			got := segs[0]
			if c.n <= MaxPoints && len(got) != c.n {
				t.Errorf("%d points thinned to %d", c.n, len(got))
			}
			if len(got) > MaxPoints+2 {
				t.Errorf("%d points drawn, at most %d", len(got), MaxPoints+2)
			}
			if got[0].X != 0 || got[len(got)-1].X != float64(c.n-1) {
				t.Errorf("ends %v and %v, want x 0 and %d", got[0], got[len(got)-1], c.n-1)
			}
			lo, hi := math.Inf(1), math.Inf(-1)
			step := float64((c.n + MaxPoints/2 - 1) / (MaxPoints / 2))
			for i, p := range got {
				lo, hi = math.Min(lo, p.Y), math.Max(hi, p.Y)
				if i > 0 && p.X <= got[i-1].X {
					t.Fatalf("point %d at x %g after x %g", i, p.X, got[i-1].X)
				}
				if i > 0 && p.X-got[i-1].X > 2*step {
					t.Fatalf("gap from x %g to %g, longer than two runs of %g points", got[i-1].X, p.X, step)
				}
			}
			if lo != -7 || hi != 9 {
				t.Errorf("drawn range %g..%g, the series spans -7..9", lo, hi)
			}
		})
	}
	// A NaN gap still breaks a long line, and each part is thinned alike.
	x := make([]float64, 30000)
	y := make([]float64, 30000)
	for i := range x {
		x[i], y[i] = float64(i), float64(i%7)
	}
	y[15000] = math.NaN()
	segs := segments(Series{X: x, Y: y})
	if len(segs) != 2 || len(segs[0])+len(segs[1]) > MaxPoints+4 {
		t.Errorf("NaN gap: %d segments of %d and %d points", len(segs), len(segs[0]), len(segs[len(segs)-1]))
	}
}
