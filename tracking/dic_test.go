package tracking

import (
	"fmt"
	"math"
	"path/filepath"
	"testing"

	"gocv.io/x/gocv"
)

// TestDICChallengeSample3 tracks a grid of points from the reference image
// of DIC Challenge 1.0 Sample 3 (Reu et al., Experimental Mechanics
// 58:1067-1099, 2018; images with imposed shifts of S px in x and in y) to
// each shifted image, and checks the recovered shift. The README beside the
// images records pyramidal Lucas-Kanade within 0.006 px of S with a standard
// deviation of 0.004-0.006 px; we assert |bias| < 0.01 px and std < 0.01 px
// in x and y, for plain Lucas-Kanade and for the full tracker.
func TestDICChallengeSample3(t *testing.T) {
	dir := refDir(t, "dic-challenge-sample3")
	ref := gocv.IMRead(filepath.Join(dir, "reference.tif"), gocv.IMReadGrayScale)
	defer ref.Close()
	if ref.Empty() {
		t.Fatalf("cannot read %s", filepath.Join(dir, "reference.tif"))
	}
	plain := DefaultOptions()
	plain.PlainLK = true
	// The README's settings: 31x31 window, 3 levels, 100 iterations or 0.001 px.
	plain.LKWindow, plain.MaxLevels, plain.MaxIter, plain.LKEpsilon = 31, 3, 100, 0.001
	// The full tracker with a 31x31 uniform window, the subset size the
	// README's Lucas-Kanade run used (common practice for speckle).
	full := DefaultOptions()
	full.Window, full.Sigma = 31, 0
	modes := []struct {
		name   string
		opt    Options
		maxStd float64
	}{{"plain-LK", plain, 0.01}, {"tracker", full, 0.01},
		// The default window (17 px, Gaussian weights of radius 4 px) is
		// tuned for marker dots; on speckle it averages over about a
		// quarter of the pixels, so the noise is about twice as large
		// (std ~ 1/sqrt(area), common practice): allow 0.015 px.
		{"tracker-default", DefaultOptions(), 0.015}}
	m := gridMarks(64, 64, 32, 13, 13) // 169 points, away from the edges
	for _, mode := range modes {
		for k := 0; k <= 10; k++ {
			s := float64(k) / 10
			name := fmt.Sprintf("%s/shift-%.2f", mode.name, s)
			t.Run(name, func(t *testing.T) {
				img := gocv.IMRead(filepath.Join(dir, fmt.Sprintf("shift-%.2f.tif", s)), gocv.IMReadGrayScale)
				defer img.Close()
				if img.Empty() {
					t.Fatalf("cannot read shift-%.2f.tif", s)
				}
				tr, err := New(m, ref, mode.opt)
				if err != nil {
					t.Fatal(err)
				}
				defer tr.Close()
				out, err := tr.Step(1, img)
				if err != nil {
					t.Fatal(err)
				}
				var dx, dy []float64
				for i, smp := range out {
					if smp.Lost {
						t.Fatalf("point %s lost", m.Points[i].ID)
					}
					dx = append(dx, smp.X-m.Points[i].PX[0]-s)
					dy = append(dy, smp.Y-m.Points[i].PX[1]-s)
				}
				bx, sx := meanStd(dx)
				by, sy := meanStd(dy)
				t.Logf("bias x %+.4f y %+.4f px, std x %.4f y %.4f px", bx, by, sx, sy)
				if math.Abs(bx) >= 0.01 || math.Abs(by) >= 0.01 || sx >= mode.maxStd || sy >= mode.maxStd {
					t.Errorf("bias (%+.4f, %+.4f) px, std (%.4f, %.4f) px: want |bias| < 0.01 and std < %g", bx, by, sx, sy, mode.maxStd)
				}
			})
		}
	}
}
