package motion

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"math/rand"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gocv.io/x/gocv"
)

// frame draws a textured background (fixed seed) with a dark block at x0,
// brightness multiplied by gain, as BGR.
func frame(t *testing.T, x0 int, gain float64) gocv.Mat {
	t.Helper()
	const w, h = 640, 480
	rng := rand.New(rand.NewSource(3))
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			v := 60 + 40*math.Sin(float64(x)/9)*math.Cos(float64(y)/13) + 20*rng.Float64()
			if x >= x0 && x < x0+80 && y >= 100 && y < 380 {
				v = 25
			}
			v = math.Min(255, v*gain)
			img.Set(x, y, color.RGBA{uint8(v), uint8(v * 0.9), uint8(v * 0.8), 255})
		}
	}
	m, err := gocv.ImageToMatRGB(img)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func TestMeterFlickerVersusMotion(t *testing.T) {
	m := NewMeter()
	defer m.Close()
	f0 := frame(t, 200, 1)
	defer f0.Close()
	if e := m.Add(f0); e != 0 {
		t.Errorf("first frame energy %g, want 0", e)
	}
	flick := frame(t, 200, 1.3) // 30 % brighter, nothing moved
	defer flick.Close()
	eFlicker := m.Add(flick)
	moved := frame(t, 260, 1.3) // block moved 60 px
	defer moved.Close()
	eMotion := m.Add(moved)
	t.Logf("flicker %.3f, motion %.3f grey levels", eFlicker, eMotion)
	if !(eMotion > 10*eFlicker) || eMotion < 2 {
		t.Errorf("motion %g not well above flicker %g", eMotion, eFlicker)
	}
	var empty gocv.Mat = gocv.NewMat()
	defer empty.Close()
	if e := m.Add(empty); !math.IsNaN(e) {
		t.Errorf("empty frame energy %g, want NaN", e)
	}
	if e := m.Add(moved); e != 0 {
		t.Errorf("energy after an empty frame %g, want 0", e)
	}
}

// The meter agrees with the same measure computed independently with
// Debian's python3-opencv (cv2.cvtColor, cv2.resize INTER_AREA, numpy).
func TestMeterMatchesPythonOpenCV(t *testing.T) {
	py := "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import cv2, numpy").Run(); err != nil {
		t.Skipf("reference check skipped: %s with cv2 and numpy is not available: %v", py, err)
	}
	dir := t.TempDir()
	m := NewMeter()
	defer m.Close()
	var got []float64
	var paths []string
	for i, spec := range []struct {
		x    int
		gain float64
	}{{200, 1}, {210, 1.1}, {240, 0.9}, {240, 1}} {
		f := frame(t, spec.x, spec.gain)
		p := filepath.Join(dir, fmt.Sprintf("f%d.png", i))
		if !gocv.IMWrite(p, f) {
			t.Fatal("write png")
		}
		got = append(got, m.Add(f))
		f.Close()
		paths = append(paths, p)
	}
	script := `
import sys, cv2, numpy as np
prev = None
for p in sys.argv[1:]:
    c = cv2.imread(p)
    w = min(160, c.shape[1]); h = max(1, int(round(c.shape[0] * w / c.shape[1])))
    while c.shape[1] >= 2 * w and c.shape[0] >= 2 * h:
        c = cv2.resize(c, (c.shape[1] // 2, c.shape[0] // 2), interpolation=cv2.INTER_AREA)
    if (c.shape[1], c.shape[0]) != (w, h):
        c = cv2.resize(c, (w, h), interpolation=cv2.INTER_AREA)
    s = cv2.cvtColor(c, cv2.COLOR_BGR2GRAY).astype(np.float64)
    mu = s.mean()
    s = s * (128.0 / mu if mu > 1 else 1.0)
    print(0.0 if prev is None else float(np.abs(s - prev).mean()))
    prev = s
`
	out, err := exec.Command(py, append([]string{"-c", script}, paths...)...).CombinedOutput()
	if err != nil {
		t.Fatalf("python: %v\n%s", err, out)
	}
	lines := strings.Fields(string(out))
	if len(lines) != len(got) {
		t.Fatalf("python gave %d values, want %d: %s", len(lines), len(got), out)
	}
	for i, l := range lines {
		want, _ := strconv.ParseFloat(l, 64)
		if math.Abs(got[i]-want) > 1e-3*math.Max(1, want) {
			t.Errorf("frame %d: energy %.5f, python-opencv %.5f", i, got[i], want)
		}
	}
}
