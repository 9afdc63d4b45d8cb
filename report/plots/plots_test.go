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
