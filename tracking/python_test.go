package tracking

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"gocv.io/x/gocv"
)

// lkScript runs OpenCV's pyramidal Lucas-Kanade from the Python binding on
// the same frames with the same settings, chaining the points from frame to
// frame as the Go tracker's plain mode does, and prints the positions.
const lkScript = `
import json, sys
import numpy as np
import cv2
cfg = json.load(open(sys.argv[1]))
frames = [cv2.imread(p, cv2.IMREAD_GRAYSCALE) for p in cfg["frames"]]
pts = np.array(cfg["points"], dtype=np.float32).reshape(-1, 1, 2)
crit = (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, cfg["iters"], cfg["eps"])
out = []
for a, b in zip(frames[:-1], frames[1:]):
    nxt, st, err = cv2.calcOpticalFlowPyrLK(a, b, pts, None, winSize=(cfg["win"], cfg["win"]),
        maxLevel=cfg["levels"], criteria=crit, flags=0, minEigThreshold=1e-4)
    out.append({"pts": nxt.reshape(-1, 2).astype(float).tolist(), "status": st.reshape(-1).astype(int).tolist()})
    pts = nxt
print(json.dumps(out))
`

// TestAgreesWithPythonOpenCV checks the tracker's plain Lucas-Kanade mode
// against an independent run of Debian's python3-opencv on the same frames
// (PNG, lossless) and settings: positions must agree within 0.02 px.
func TestAgreesWithPythonOpenCV(t *testing.T) {
	const py = "/usr/bin/python3"
	if _, err := os.Stat(py); err != nil {
		t.Skipf("%s is missing: install Debian's python3-opencv to run this check", py)
	}
	if err := exec.Command(py, "-c", "import cv2, numpy").Run(); err != nil {
		t.Skipf("%s cannot import cv2 (install Debian's python3-opencv): %v", py, err)
	}
	dir := t.TempDir()
	sc, probes := speckleScene(21, slowSway(6, 3, 40, 0.05))
	sc.noise, sc.flicker = 1.5, 0.02
	// A tower scene too: thin bars with dots, less texture.
	tw, tprobes := towerScene(22, 1, slowSway(4, 1, 40, 0), slowSway(3, 2, 30, 0.01))
	tw.noise = 1.5
	opt := DefaultOptions()
	opt.PlainLK = true
	for _, c := range []struct {
		name   string
		sc     *scene
		probes []probe
	}{{"speckle", sc, probes}, {"tower", tw, tprobes}} {
		t.Run(c.name, func(t *testing.T) {
			const n = 12
			img := gocv.NewMat()
			defer img.Close()
			var paths []string
			for i := 0; i < n; i++ {
				c.sc.render(i, &img)
				p := filepath.Join(dir, fmt.Sprintf("%s-%02d.png", c.name, i))
				if !gocv.IMWrite(p, img) {
					t.Fatalf("write %s", p)
				}
				paths = append(paths, p)
			}
			ref := gocv.IMRead(paths[0], gocv.IMReadGrayScale)
			defer ref.Close()
			m := gridMarks(0, 0, 1, 0, 0)
			var pts [][2]float32
			for _, p := range c.probes {
				x, y := c.sc.bodies[p.body].at(0, p.x, p.y)
				m.Points = append(m.Points, markPoint(p.id, x, y))
				pts = append(pts, [2]float32{float32(x), float32(y)})
			}
			tr, err := New(m, ref, opt)
			if err != nil {
				t.Fatal(err)
			}
			defer tr.Close()
			cfg, _ := json.Marshal(map[string]any{"frames": paths, "points": pts, "win": opt.LKWindow,
				"levels": opt.MaxLevels, "iters": opt.MaxIter, "eps": opt.LKEpsilon})
			cfgPath := filepath.Join(dir, c.name+".json")
			os.WriteFile(cfgPath, cfg, 0o644)
			script := filepath.Join(dir, "lk.py")
			os.WriteFile(script, []byte(lkScript), 0o644)
			outJSON, err := exec.Command(py, script, cfgPath).Output()
			if err != nil {
				t.Fatalf("python: %v", err)
			}
			var pyOut []struct {
				Pts    [][2]float64 `json:"pts"`
				Status []int        `json:"status"`
			}
			if err := json.Unmarshal(outJSON, &pyOut); err != nil {
				t.Fatal(err)
			}
			var worst float64
			for i := 1; i < n; i++ {
				img := gocv.IMRead(paths[i], gocv.IMReadGrayScale)
				out, err := tr.Step(i, img)
				img.Close()
				if err != nil {
					t.Fatal(err)
				}
				for j, s := range out {
					want := pyOut[i-1].Pts[j]
					if pyOut[i-1].Status[j] == 0 || s.Lost {
						t.Fatalf("frame %d point %s: lost (python status %d, go lost %v)", i, m.Points[j].ID, pyOut[i-1].Status[j], s.Lost)
					}
					d := math.Hypot(s.X-want[0], s.Y-want[1])
					worst = math.Max(worst, d)
					if d > 0.02 {
						t.Errorf("frame %d point %s: go (%.4f, %.4f), python (%.4f, %.4f): %.4f px apart", i, m.Points[j].ID, s.X, s.Y, want[0], want[1], d)
					}
				}
			}
			t.Logf("largest difference from python3-opencv: %.2g px", worst)
		})
	}
}
