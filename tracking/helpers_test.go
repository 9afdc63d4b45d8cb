package tracking

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/tracking/marks"
)

// refDir returns ../shared/ref/<name> next to the repository root, or skips
// the test with a clear message when it is absent.
func refDir(t testing.TB, name string) string {
	t.Helper()
	dir, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			break
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			t.Skip("reference data: repository root (go.mod) not found")
		}
		dir = parent
	}
	p := filepath.Join(dir, "..", "shared", "ref", name)
	if _, err := os.Stat(p); err != nil {
		t.Skipf("reference data %s is absent (expected beside the repository at ../shared/ref): %v", name, err)
	}
	return p
}

// gridMarks marks a grid of points.
func gridMarks(x0, y0, step float64, nx, ny int) *marks.File {
	f := &marks.File{}
	for j := 0; j < ny; j++ {
		for i := 0; i < nx; i++ {
			f.Points = append(f.Points, marks.Point{
				ID: fmt.Sprintf("g%d_%d", i, j),
				PX: [2]float64{x0 + float64(i)*step, y0 + float64(j)*step},
			})
		}
	}
	return f
}

// meanStd returns the mean and standard deviation of xs.
func meanStd(xs []float64) (mean, std float64) {
	for _, x := range xs {
		mean += x
	}
	mean /= float64(len(xs))
	for _, x := range xs {
		std += (x - mean) * (x - mean)
	}
	if len(xs) > 1 {
		std = math.Sqrt(std / float64(len(xs)-1))
	}
	return
}

func markPoint(id string, x, y float64) marks.Point {
	return marks.Point{ID: id, PX: [2]float64{x, y}}
}

// TestGreyMatchesOpenCV checks the tracker's own BGR-to-grey reading against
// OpenCV's cvtColor on random colours: they must agree exactly, since the
// reference patches come from cvtColor.
func TestGreyMatchesOpenCV(t *testing.T) {
	bgr := gocv.NewMatWithSize(64, 64, gocv.MatTypeCV8UC3)
	defer bgr.Close()
	gocv.RandU(&bgr, gocv.NewScalar(0, 0, 0, 0), gocv.NewScalar(256, 256, 256, 0))
	grey := gocv.NewMat()
	defer grey.Close()
	gocv.CvtColor(bgr, &grey, gocv.ColorBGRToGray)
	v, err := view(bgr)
	if err != nil {
		t.Fatal(err)
	}
	row := make([]float64, 64)
	for y := 0; y < 64; y++ {
		v.row(row, 0, y)
		for x := 0; x < 64; x++ {
			if want := float64(grey.GetUCharAt(y, x)); row[x] != want || v.at(x, y) != want {
				t.Fatalf("(%d, %d): grey %g / %g, OpenCV %g", x, y, row[x], v.at(x, y), want)
			}
		}
	}
}
