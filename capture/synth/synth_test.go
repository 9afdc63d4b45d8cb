package synth

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/tracking/marks"
)

// short returns a quick scenario: a 640x480 tower but few frames.
func short() Scenario {
	s := Default()
	s.Frames, s.OnsetFrame, s.BreakFrame, s.CollapseFrame = 60, 20, 36, 40
	s.CaptureFPS = 480
	return s
}

// small returns a scenario with a small frame for writing whole clips fast.
func small() Scenario {
	s := short()
	s.Width, s.Height = 240, 180
	s.FocalPX = 740 * 240 / 640.0
	s.MarkerMM = 8
	s.Frames, s.OnsetFrame, s.BreakFrame, s.CollapseFrame = 24, 8, 14, 16
	return s
}

const python = "/usr/bin/python3"

// haveCV2 reports whether Debian's python3-opencv is importable.
func haveCV2(t *testing.T) bool {
	t.Helper()
	if _, err := os.Stat(python); err != nil {
		return false
	}
	return exec.Command(python, "-c", "import cv2").Run() == nil
}

// TestProjectionMatchesOpenCV checks our pinhole projection against OpenCV's
// own cv2.projectPoints (Debian python3-opencv, an independent
// implementation) for the same rvec, tvec and camera matrix.
func TestProjectionMatchesOpenCV(t *testing.T) {
	if !haveCV2(t) {
		t.Skip("skipping: /usr/bin/python3 cannot import cv2 (install Debian's python3-opencv)")
	}
	type camCase struct {
		name string
		edit func(*Scenario)
	}
	cases := []camCase{
		{"demo", func(s *Scenario) {}},
		{"face-on", func(s *Scenario) { s.AzimuthDeg = 0 }},
		{"from behind", func(s *Scenario) { s.AzimuthDeg = 180 }},
		{"low and oblique", func(s *Scenario) { s.AzimuthDeg = -137; s.CameraHeightMM = 20; s.DistanceMM = 900 }},
		{"high", func(s *Scenario) {
			s.AzimuthDeg = 63
			s.CameraHeightMM = 420
			s.FocalPX = 500
			s.Width = 800
			s.Height = 600
		}},
		{"barrel lens", func(s *Scenario) { s.K1 = -0.25; s.AzimuthDeg = 40 }},
		{"pincushion lens", func(s *Scenario) { s.K1 = 0.15; s.FocalPX = 600 }},
	}
	type payload struct {
		Rvec [3]float64    `json:"rvec"`
		Dist [5]float64    `json:"dist"`
		Tvec [3]float64    `json:"tvec"`
		K    [3][3]float64 `json:"K"`
		Obj  [][3]float64  `json:"obj"`
		Ours [][2]float64  `json:"ours"`
	}
	var all []payload
	for _, c := range cases {
		s := short()
		c.edit(&s)
		m := newModel(s)
		var p payload
		p.Rvec, p.Tvec = m.cam.rvec(), m.cam.tvec()
		p.Dist = [5]float64{m.cam.k1}
		p.K = [3][3]float64{{m.cam.f, 0, m.cam.cx}, {0, m.cam.f, m.cam.cy}, {0, 0, 1}}
		for _, f := range []float64{0, float64(s.BreakFrame) + 2, float64(s.CollapseFrame) + 7.5} {
			ps := m.pose(f)
			for i := range m.points {
				q := m.pointPos(i, ps)
				x, y, _ := m.cam.project(q)
				p.Obj = append(p.Obj, [3]float64{q.x, q.y, q.z})
				p.Ours = append(p.Ours, [2]float64{x, y})
			}
		}
		all = append(all, p)
	}
	in, _ := json.Marshal(all)
	script := `
import sys, json, numpy as np, cv2
out = []
for c in json.load(sys.stdin):
    obj = np.array(c["obj"], dtype=np.float64).reshape(-1, 1, 3)
    img, _ = cv2.projectPoints(obj, np.array(c["rvec"], dtype=np.float64), np.array(c["tvec"], dtype=np.float64),
                               np.array(c["K"], dtype=np.float64), np.array(c["dist"], dtype=np.float64))
    out.append(img.reshape(-1, 2).tolist())
json.dump(out, sys.stdout)
`
	cmd := exec.Command(python, "-c", script)
	cmd.Stdin = bytes.NewReader(in)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	outb, err := cmd.Output()
	if err != nil {
		t.Fatalf("python cv2.projectPoints: %v: %s", err, stderr.String())
	}
	var theirs [][][2]float64
	if err := json.Unmarshal(outb, &theirs); err != nil {
		t.Fatalf("decode python output: %v", err)
	}
	for ci, c := range cases {
		var worst float64
		for i, o := range all[ci].Ours {
			d := math.Hypot(o[0]-theirs[ci][i][0], o[1]-theirs[ci][i][1])
			worst = math.Max(worst, d)
		}
		// Source: OpenCV 4.6 calib3d projectPoints (Debian python3-opencv), pinhole model with radial distortion k1.
		if worst > 1e-6 {
			t.Errorf("%s: projection differs from cv2.projectPoints by up to %.3g px (want < 1e-6)", c.name, worst)
		}
		t.Logf("%s: %d points, largest difference from cv2.projectPoints %.2g px", c.name, len(all[ci].Ours), worst)
	}
}

// dotCentroid measures a marker in a grey image: the rough centre is the
// centroid of the dark blob (below thr) found near (x, y); the fine centre is
// the darkness-weighted centroid, darkness measured from the paper level
// (the median of a ring around the dot), inside a disc of radius rad.
func dotCentroid(g []uint8, w, h int, x, y, rDot float64) (float64, float64, bool) {
	at := func(px, py int) float64 {
		if px < 0 || py < 0 || px >= w || py >= h {
			return 255
		}
		return float64(g[py*w+px])
	}
	// rough: dark pixels within 2 dot radii of the guess
	var sx, sy, sn float64
	R := int(math.Ceil(rDot + 3))
	ix, iy := int(math.Round(x)), int(math.Round(y))
	for py := iy - R; py <= iy+R; py++ {
		for px := ix - R; px <= ix+R; px++ {
			if at(px, py) < 50 {
				sx += float64(px)
				sy += float64(py)
				sn++
			}
		}
	}
	if sn == 0 {
		return 0, 0, false
	}
	cx, cy := sx/sn, sy/sn
	// paper level: median of the ring between 1.25 and 1.6 dot radii
	var ring []float64
	for py := int(cy) - R; py <= int(cy)+R; py++ {
		for px := int(cx) - R; px <= int(cx)+R; px++ {
			d := math.Hypot(float64(px)-cx, float64(py)-cy)
			if d > 1.25*rDot+0.8 && d < 1.6*rDot+0.8 {
				ring = append(ring, at(px, py))
			}
		}
	}
	sort.Float64s(ring)
	paper := ring[len(ring)/2]
	rad := rDot + 1.5
	sx, sy, sn = 0, 0, 0
	for py := int(cy) - R; py <= int(cy)+R; py++ {
		for px := int(cx) - R; px <= int(cx)+R; px++ {
			if math.Hypot(float64(px)-cx, float64(py)-cy) > rad {
				continue
			}
			wgt := paper - at(px, py)
			if wgt > 0 {
				sx += wgt * float64(px)
				sy += wgt * float64(py)
				sn += wgt
			}
		}
	}
	return sx / sn, sy / sn, sn > 0
}

// TestMarkerCentresMatchTruth renders noise-free frames and checks that the
// dark dots found in the image are centred on the truth positions.
func TestMarkerCentresMatchTruth(t *testing.T) {
	for _, k1 := range []float64{0, -0.2} {
		s := short()
		s.Noise, s.Flicker = 0, 0
		s.K1 = k1
		t.Run(fmt.Sprintf("k1=%g", k1), func(t *testing.T) { checkMarkerCentres(t, s) })
	}
}

func checkMarkerCentres(t *testing.T, s Scenario) {
	r, err := NewRenderer(s)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	tr := r.Truth()
	img, grey := gocv.NewMat(), gocv.NewMat()
	defer img.Close()
	defer grey.Close()
	for _, f := range []int{0, s.OnsetFrame + 5, s.BreakFrame - 1} {
		if err := r.Frame(f, &img); err != nil {
			t.Fatal(err)
		}
		gocv.CvtColor(img, &grey, gocv.ColorBGRToGray)
		g, _ := grey.DataPtrUint8()
		var worst float64
		var worstID string
		n := 0
		for i, p := range tr.Points {
			if !p.Marker {
				continue
			}
			x, y := p.PX[f][0], p.PX[f][1]
			_, _, d := r.m.cam.project(r.m.pointPos(i, r.m.pose(float64(f))))
			rDot := s.MarkerMM / 2 * s.FocalPX / d
			mx, my, ok := dotCentroid(g, s.Width, s.Height, x, y, rDot)
			if !ok {
				t.Errorf("frame %d: no dark dot found near %s at (%.2f, %.2f)", f, p.ID, x, y)
				continue
			}
			n++
			if e := math.Hypot(mx-x, my-y); e > worst {
				worst, worstID = e, p.ID
			}
		}
		// Requirement from the synthesizer's contract: under 0.1 px on a noise-free frame.
		if worst >= 0.1 {
			t.Errorf("frame %d: dot centre of %s is %.3f px from the truth (want < 0.1)", f, worstID, worst)
		}
		if n < 20 {
			t.Errorf("frame %d: only %d markers checked", f, n)
		}
		t.Logf("frame %d: %d markers, largest centre error %.3f px (%s)", f, n, worst, worstID)
	}
}

// TestSameSeedSameClip checks that a seed reproduces the truth and the frames
// exactly, and that another seed gives another clip.
func TestSameSeedSameClip(t *testing.T) {
	s := short()
	render := func(s Scenario) (*Truth, [][]byte) {
		r, err := NewRenderer(s)
		if err != nil {
			t.Fatal(err)
		}
		defer r.Close()
		img := gocv.NewMat()
		defer img.Close()
		var frames [][]byte
		for _, f := range []int{0, s.BreakFrame + 2, s.CollapseFrame + 5} {
			if err := r.Frame(f, &img); err != nil {
				t.Fatal(err)
			}
			frames = append(frames, img.ToBytes())
		}
		return r.Truth(), frames
	}
	t1, f1 := render(s)
	t2, f2 := render(s)
	if !reflect.DeepEqual(t1, t2) {
		t.Error("same seed: truth differs")
	}
	for i := range f1 {
		if !bytes.Equal(f1[i], f2[i]) {
			t.Errorf("same seed: frame sample %d differs", i)
		}
	}
	s.Seed++
	t3, f3 := render(s)
	if reflect.DeepEqual(t1.LoadOffsetS, t3.LoadOffsetS) {
		t.Error("another seed gives the same load-log offset")
	}
	for i := range f1 {
		if bytes.Equal(f1[i], f3[i]) {
			t.Errorf("another seed: frame sample %d is identical", i)
		}
	}
}

// TestWriteReadsBack writes a short clip and reads it back through OpenCV:
// the frame count, rate and size stated must be what the files hold.
func TestWriteReadsBack(t *testing.T) {
	s := small()
	s.ContainerFPS = 25
	dir := t.TempDir()
	calls := 0
	truth, err := Write(s, dir, func(done, total int) { calls++ })
	if err != nil {
		t.Fatal(err)
	}
	if calls != s.Frames {
		t.Errorf("progress called %d times, want %d", calls, s.Frames)
	}
	clips := []string{ClipAVI}
	if FFmpegPath() != "" {
		clips = append(clips, ClipMP4)
	} else {
		t.Log("ffmpeg not installed: tower.mp4 not checked")
	}
	r, err := NewRenderer(s)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	want := gocv.NewMat()
	defer want.Close()
	for _, name := range clips {
		vc, err := gocv.VideoCaptureFile(filepath.Join(dir, name))
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		// Outside check: OpenCV's FFmpeg reader (Debian libopencv 4.6) reads the rate and frames.
		if fps := vc.Get(gocv.VideoCaptureFPS); math.Abs(fps-s.ContainerFPS) > 1e-6 {
			t.Errorf("%s: container rate %g fps, want %g", name, fps, s.ContainerFPS)
		}
		img := gocv.NewMat()
		n := 0
		for vc.Read(&img) && !img.Empty() {
			if img.Cols() != s.Width || img.Rows() != s.Height {
				t.Errorf("%s frame %d: %dx%d, want %dx%d", name, n, img.Cols(), img.Rows(), s.Width, s.Height)
			}
			if n == 5 {
				// the decoded frame is the rendered one up to compression loss
				if err := r.Frame(n, &want); err != nil {
					t.Fatal(err)
				}
				diff := gocv.NewMat()
				gocv.AbsDiff(img, want, &diff)
				mean := diff.Mean()
				diff.Close()
				// common practice: high-quality JPEG / CRF 12 H.264 stays within a few grey levels
				if m := (mean.Val1 + mean.Val2 + mean.Val3) / 3; m > 4 {
					t.Errorf("%s frame %d: mean difference from the rendered frame %.2f grey levels", name, n, m)
				}
			}
			n++
		}
		img.Close()
		vc.Close()
		if n != s.Frames {
			t.Errorf("%s: read %d frames, want %d", name, n, s.Frames)
		}
	}
	if ffprobe, err := exec.LookPath("ffprobe"); err == nil && FFmpegPath() != "" {
		// Outside check: the ffprobe program (FFmpeg) counts the frames of
		// tower.mp4 and reads its codec and rate.
		out, err := exec.Command(ffprobe, "-v", "error", "-select_streams", "v:0", "-count_frames",
			"-show_entries", "stream=codec_name,nb_read_frames,r_frame_rate,width,height", "-of", "json",
			filepath.Join(dir, ClipMP4)).Output()
		if err != nil {
			t.Fatalf("ffprobe: %v", err)
		}
		var probe struct {
			Streams []struct {
				Codec  string `json:"codec_name"`
				Frames string `json:"nb_read_frames"`
				Rate   string `json:"r_frame_rate"`
				Width  int    `json:"width"`
				Height int    `json:"height"`
			} `json:"streams"`
		}
		if err := json.Unmarshal(out, &probe); err != nil || len(probe.Streams) != 1 {
			t.Fatalf("ffprobe output %s: %v", out, err)
		}
		st := probe.Streams[0]
		if st.Codec != "h264" || st.Frames != fmt.Sprint(s.Frames) || st.Rate != "25/1" || st.Width != s.Width || st.Height != s.Height {
			t.Errorf("ffprobe: %+v, want h264, %d frames, 25/1, %dx%d", st, s.Frames, s.Width, s.Height)
		}
	} else {
		t.Log("ffprobe not installed: tower.mp4 not probed")
	}
	got, err := LoadTruth(filepath.Join(dir, TruthFile))
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(got, truth) {
		t.Error("truth.json does not read back to the returned truth")
	}
	mf, err := marks.Load(filepath.Join(dir, MarksFile))
	if err != nil {
		t.Fatal(err)
	}
	if err := mf.CheckBounds(s.Width, s.Height); err != nil {
		t.Error(err)
	}
	if mf.CaptureFPS != s.CaptureFPS || mf.Camera == nil || mf.Camera.AzimuthDeg != s.AzimuthDeg || mf.Scale == nil {
		t.Errorf("marks: capture_fps %g, camera %+v, scale %+v", mf.CaptureFPS, mf.Camera, mf.Scale)
	}
	for _, p := range mf.Points {
		tp, ok := truth.Point(p.ID)
		if !ok || tp.PX[0] != p.PX {
			t.Errorf("marks point %s at %v is not the truth's frame-0 position", p.ID, p.PX)
		}
	}
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		if strings.HasPrefix(e.Name(), ".") {
			t.Errorf("temporary file %s left behind", e.Name())
		}
	}
}

// TestLoadLog checks the load log: about 80 samples per second on the
// logger's own clock, the peak at the collapse, a drop within a few samples.
func TestLoadLog(t *testing.T) {
	s := short()
	r, err := NewRenderer(s)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	var buf bytes.Buffer
	if err := r.WriteLoadLog(&buf); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(buf.String()), "\n")
	if lines[0] != "time_ms,load_g" {
		t.Fatalf("header %q", lines[0])
	}
	var ts, gs []float64
	for i, l := range lines[1:] {
		var tm, g float64
		if _, err := fmtSscan(l, &tm, &g); err != nil {
			t.Fatalf("line %d %q: %v", i+2, l, err)
		}
		ts = append(ts, tm/1000)
		gs = append(gs, g)
	}
	tr := r.Truth()
	rate := float64(len(ts)-1) / (ts[len(ts)-1] - ts[0])
	// contract (issue 2): about 80 samples per second
	if rate < 75 || rate > 85 {
		t.Errorf("sample rate %.2f per s, want about 80", rate)
	}
	if frac := math.Abs(tr.LoadOffsetS*1000 - math.Round(tr.LoadOffsetS*1000)); frac < 1e-6 && math.Mod(tr.LoadOffsetS, 1) == 0 {
		t.Errorf("load offset %g s is a round number", tr.LoadOffsetS)
	}
	imax := 0
	for i := range gs {
		if gs[i] > gs[imax] {
			imax = i
		}
	}
	collapseLog := float64(s.CollapseFrame)/s.CaptureFPS - tr.LoadOffsetS
	// contract (issue 2): the peak at the collapse, then a drop within a few samples
	if d := math.Abs(ts[imax] - collapseLog); d > 0.03 {
		t.Errorf("peak at log time %.3f s, collapse at %.3f s", ts[imax], collapseLog)
	}
	// a few grams of noise (sigma 2.5 g): the largest sample stays within 12 g of the peak
	if math.Abs(gs[imax]-tr.PeakLoadG) > 12 {
		t.Errorf("logged peak %.1f g, truth %.1f g", gs[imax], tr.PeakLoadG)
	}
	if imax+4 >= len(gs) || gs[imax+4] > 0.3*tr.PeakLoadG {
		t.Errorf("load does not drop within 4 samples after the peak")
	}
	if tr.LoadAtOnsetG <= 0 || tr.LoadAtOnsetG > tr.PeakLoadG {
		t.Errorf("load at onset %.1f g outside (0, peak]", tr.LoadAtOnsetG)
	}
}

// TestPatterns builds every bracing pattern and checks names, the default
// failing member and that the truth agrees with the scenario's events.
func TestPatterns(t *testing.T) {
	tests := []struct {
		bracing, fail      string
		wantFirst, mode    string
		wantMember, wantPt string
	}{
		{BracingHorizontal, "", "leg-B", ModeLegFullHeight, "AB-h2", "AB-h2-mid"},
		{BracingDiagonal, "", "AB-d1", ModeBraceBuckling, "BC-d2", "BC-d2-mid"},
		{BracingZ, "", "AB-d1", ModeBraceBuckling, "AB-h1", "AB-d3-mid"},
		{BracingX, "", "AB-x1a", ModeBraceBuckling, "AB-x2b", "AB-x2-cross"},
		{BracingZ, "twist", "", ModeTowerTwist, "CD-d1", "AB-h4-mid"},
		{BracingZ, "leg-A", "leg-A", ModeLegBetweenBraces, "DA-h3", "A3"},
		{BracingZ, "leg-B:2", "leg-B", ModeLegBetweenBraces, "leg-B", "leg-B-mid2"},
		{BracingX, "leg-A:3", "leg-A", ModeLegBetweenBraces, "AB-x3a", "leg-A-mid3"},
	}
	for _, tt := range tests {
		t.Run(tt.bracing+"/"+tt.fail, func(t *testing.T) {
			s := short()
			s.Bracing, s.Fail = tt.bracing, tt.fail
			m := newModel(s)
			if err := s.Validate(); err != nil {
				t.Fatal(err)
			}
			tr := m.computeTruth(nil)
			if tr.FirstMember != tt.wantFirst || tr.FailureMode != tt.mode {
				t.Errorf("first member %q (%s), want %q (%s)", tr.FirstMember, tr.FailureMode, tt.wantFirst, tt.mode)
			}
			if _, ok := tr.Member(tt.wantMember); !ok {
				t.Errorf("no member %s", tt.wantMember)
			}
			if _, ok := tr.Point(tt.wantPt); !ok {
				t.Errorf("no point %s", tt.wantPt)
			}
			// (a leg buckling in one panel: its bow against the panel's
			// joints is checked in TestLegBetweenBraces; against the leg's
			// end-to-end chord it also holds the tower's sway curvature)
			if tr.FirstMember != "" && tr.FailedPanel == 0 {
				fm, _ := tr.Member(tr.FirstMember)
				on := tr.OnsetFrame
				// onset definition: bow above 0.5 % of the member's length; the
				// geometric bow also holds the tower's own sway and twist, hence 5 %.
				if fm.BowMM[on] <= 0.005*fm.LengthMM*0.95 || fm.BowMM[on-1] >= 0.005*fm.LengthMM*1.05 {
					t.Errorf("bow at onset-1/onset %.3f/%.3f mm vs 0.5 %% of %.1f mm", fm.BowMM[on-1], fm.BowMM[on], fm.LengthMM)
				}
			}
			top := tr.Levels[len(tr.Levels)-1]
			at := s.BreakFrame
			if tr.FirstMember == "" {
				at = s.CollapseFrame
			}
			if got, want := top.TwistDeg[at], s.twistDeg(); math.Abs(got-want) > 0.15*want+0.05 {
				t.Errorf("top twist at frame %d %.3f deg, want about %.3f", at, got, want)
			}
			if top.TwistDeg[0] != 0 || top.SwayMM[0] != 0 || top.SettleMM[0] != 0 {
				t.Errorf("frame 0 is not the nominal shape: twist %g sway %g settle %g", top.TwistDeg[0], top.SwayMM[0], top.SettleMM[0])
			}
			mf := (&Renderer{s: s, m: m}).Marks()
			data, err := marksRoundTrip(mf)
			if err != nil {
				t.Fatalf("marks do not validate: %v\n%s", err, data)
			}
		})
	}
}

// TestValidate checks that bad scenarios are refused with a clear message.
func TestValidate(t *testing.T) {
	tests := []struct {
		name string
		edit func(*Scenario)
		want string
	}{
		{"unknown pattern", func(s *Scenario) { s.Bracing = "k" }, "unknown bracing pattern"},
		{"negative rate", func(s *Scenario) { s.CaptureFPS = -960 }, "capture rate"},
		{"onset after collapse", func(s *Scenario) { s.OnsetFrame = 500; s.CollapseFrame = 400 }, "onset frame 500"},
		{"break after collapse", func(s *Scenario) { s.BreakFrame = 395 }, "break frame"},
		{"collapse past end", func(s *Scenario) { s.CollapseFrame = 600 }, "not inside the clip"},
		{"unknown member", func(s *Scenario) { s.Fail = "AB-x1a" }, `unknown member "AB-x1a"`},
		{"does not fit", func(s *Scenario) { s.FocalPX = 3000 }, "does not fit"},
		{"odd width", func(s *Scenario) { s.Width = 641 }, "even"},
		{"top wider", func(s *Scenario) { s.TopMM = 120 }, "wider than the base"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s := Default()
			tt.edit(&s)
			err := s.Validate()
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("Validate() = %v, want an error containing %q", err, tt.want)
			}
		})
	}
	if err := Default().Validate(); err != nil {
		t.Errorf("default scenario: %v", err)
	}
}

// TestVariedScenes renders one frame of several varied, seeded scenes: every
// marker must be inside the frame and darker than the paper around it, and
// the truth series must cover every frame.
func TestVariedScenes(t *testing.T) {
	tests := []struct {
		name string
		edit func(*Scenario)
	}{
		{"one level, diagonal", func(s *Scenario) { s.Levels = 1; s.Bracing = BracingDiagonal }},
		{"six levels, x, steep", func(s *Scenario) {
			s.Levels, s.Bracing, s.HeightMM, s.TopMM, s.DistanceMM = 6, BracingX, 420, 40, 900
		}},
		{"face-on, horizontal, big twist", func(s *Scenario) { s.AzimuthDeg, s.Bracing, s.TwistDeg = 0, BracingHorizontal, 12 }},
		{"from the C-D side, high camera", func(s *Scenario) { s.AzimuthDeg, s.CameraHeightMM, s.DistanceMM = 200, 400, 800 }},
		{"untapered, brace x2b fails", func(s *Scenario) { s.TopMM, s.Bracing, s.Fail = 100, BracingX, "AB-x2b"; s.DistanceMM = 750 }},
		{"noisy, flickering, blurred", func(s *Scenario) { s.Noise, s.Flicker, s.BlurPX = 8, 0.1, 1.5 }},
	}
	for i, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s := short()
			s.Seed = int64(100 + i)
			s.Width, s.Height, s.FocalPX = 320, 240, 370
			s.MarkerMM = 8
			tt.edit(&s)
			r, err := NewRenderer(s)
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			tr := r.Truth()
			for _, l := range tr.Levels {
				if len(l.TwistDeg) != s.Frames || len(l.SwayMM) != s.Frames || len(l.SettleMM) != s.Frames {
					t.Fatalf("level %d series do not cover %d frames", l.Level, s.Frames)
				}
			}
			img, grey := gocv.NewMat(), gocv.NewMat()
			defer img.Close()
			defer grey.Close()
			f := s.OnsetFrame
			if err := r.Frame(f, &img); err != nil {
				t.Fatal(err)
			}
			gocv.CvtColor(img, &grey, gocv.ColorBGRToGray)
			n := 0
			for _, p := range tr.Points {
				if !p.Marker {
					continue
				}
				n++
				x, y := int(math.Round(p.PX[f][0])), int(math.Round(p.PX[f][1]))
				if x < 3 || y < 3 || x >= s.Width-3 || y >= s.Height-3 {
					t.Errorf("%s at (%d, %d) outside the frame", p.ID, x, y)
					continue
				}
				centre := float64(grey.GetUCharAt(y, x))
				if centre > 110 {
					t.Errorf("%s: pixel at its truth position is %.0f, not a dark dot", p.ID, centre)
				}
			}
			if n < 10 {
				t.Errorf("only %d markers", n)
			}
		})
	}
}

// TestShakeMovesDots checks that the camera shake after the load lands moves
// the drawn dots exactly as the truth says.
func TestShakeMovesDots(t *testing.T) {
	s := short()
	s.Noise, s.Flicker, s.ShakePX = 0, 0, 2
	s.Frames = 100
	r, err := NewRenderer(s)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	tr := r.Truth()
	f := s.CollapseFrame + int(r.m.nCollapse) + 6
	if math.Hypot(tr.ShakePX[f][0], tr.ShakePX[f][1]) < 0.5 {
		t.Fatalf("shake at frame %d is only %v px", f, tr.ShakePX[f])
	}
	img, grey := gocv.NewMat(), gocv.NewMat()
	defer img.Close()
	defer grey.Close()
	if err := r.Frame(f, &img); err != nil {
		t.Fatal(err)
	}
	gocv.CvtColor(img, &grey, gocv.ColorBGRToGray)
	g, _ := grey.DataPtrUint8()
	ps := r.m.pose(float64(f))
	var worst float64
	n := 0
	for i, p := range tr.Points {
		if !p.Marker {
			continue
		}
		x, y := p.PX[f][0], p.PX[f][1]
		_, _, d := r.m.cam.project(r.m.pointPos(i, ps))
		rDot := s.MarkerMM / 2 * s.FocalPX / d
		if x < 10 || y < 10 || x > float64(s.Width-10) || y > float64(s.Height-10) {
			continue
		}
		// skip dots that the collapse has piled onto others
		crowded := false
		for j, q := range tr.Points {
			if j != i && q.Marker && math.Hypot(q.PX[f][0]-x, q.PX[f][1]-y) < 4*rDot {
				crowded = true
			}
		}
		if crowded {
			continue
		}
		mx, my, ok := dotCentroid(g, s.Width, s.Height, x, y, rDot)
		if !ok {
			t.Errorf("no dot near %s", p.ID)
			continue
		}
		n++
		worst = math.Max(worst, math.Hypot(mx-x, my-y))
	}
	if n < 5 {
		t.Fatalf("only %d dots checked", n)
	}
	// same bound as the still frames: the shift is exact, only sampling remains
	if worst >= 0.1 {
		t.Errorf("largest dot centre error with camera shake %.3f px (want < 0.1)", worst)
	}
	t.Logf("frame %d: shake %v px, %d dots, largest centre error %.3f px", f, tr.ShakePX[f], n, worst)
}

// TestCordHidesMarkers checks the truth's hidden flags against the pixels: a
// dot the cord does not touch is drawn exactly as without a cord.
func TestCordHidesMarkers(t *testing.T) {
	s := short()
	s.Noise, s.Flicker, s.BlurPX = 0, 0, 0
	s.Frames = 60
	s.CordMM = 4
	with, err := NewRenderer(s)
	if err != nil {
		t.Fatal(err)
	}
	defer with.Close()
	s.CordMM = 0
	without, err := NewRenderer(s)
	if err != nil {
		t.Fatal(err)
	}
	defer without.Close()
	tr := with.Truth()
	a, b := gocv.NewMat(), gocv.NewMat()
	defer a.Close()
	defer b.Close()
	hiddenSeen := 0
	for _, f := range []int{0, 15, 30, 45} {
		if err := with.Frame(f, &a); err != nil {
			t.Fatal(err)
		}
		if err := without.Frame(f, &b); err != nil {
			t.Fatal(err)
		}
		pa, _ := a.DataPtrUint8()
		pb, _ := b.DataPtrUint8()
		ps := with.m.pose(float64(f))
		for i, p := range tr.Points {
			if !p.Marker {
				continue
			}
			_, _, d := with.m.cam.project(with.m.pointPos(i, ps))
			rDot := s.MarkerMM / 2 * s.FocalPX / d
			x, y := p.PX[f][0], p.PX[f][1]
			changed := false
			for py := int(y - rDot); py <= int(y+rDot)+1; py++ {
				for px := int(x - rDot); px <= int(x+rDot)+1; px++ {
					if math.Hypot(float64(px)-x, float64(py)-y) > rDot-1 {
						continue
					}
					k := (py*s.Width + px) * 3
					if pa[k] != pb[k] || pa[k+1] != pb[k+1] || pa[k+2] != pb[k+2] {
						changed = true
					}
				}
			}
			if p.Hidden[f] {
				hiddenSeen++
			} else if changed {
				t.Errorf("frame %d: %s is not hidden in the truth but the cord changes its dot", f, p.ID)
			}
		}
	}
	if hiddenSeen == 0 {
		t.Error("the cord hid no marker in the frames checked")
	}
	t.Logf("%d hidden marker-frames among the frames checked", hiddenSeen)
}

// TestRayInvertsProjection checks that the pixel ray (used for the
// background and the block faces) points back at the projected point, with
// and without lens distortion.
func TestRayInvertsProjection(t *testing.T) {
	for _, k1 := range []float64{0, -0.3, 0.2} {
		s := short()
		s.K1 = k1
		m := newModel(s)
		ps := m.pose(0)
		var worst float64
		for i := range m.points {
			p := m.pointPos(i, ps)
			x, y, _ := m.cam.project(p)
			want := p.sub(m.cam.pos).unit()
			got := m.cam.ray(x, y)
			worst = math.Max(worst, got.sub(want).norm())
		}
		if worst > 1e-9 {
			t.Errorf("k1 %g: ray misses the projected point by %.2g rad", k1, worst)
		}
	}
}

// TestWriteIsReproducible writes the same scenario twice: every file but the
// H.264 copy must be identical byte for byte.
func TestWriteIsReproducible(t *testing.T) {
	s := small()
	s.SkipMP4 = true
	a, b := t.TempDir(), t.TempDir()
	if _, err := Write(s, a, nil); err != nil {
		t.Fatal(err)
	}
	if _, err := Write(s, b, nil); err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{ClipAVI, TruthFile, MarksFile, LoadFile} {
		da, err := os.ReadFile(filepath.Join(a, name))
		if err != nil {
			t.Fatal(err)
		}
		db, err := os.ReadFile(filepath.Join(b, name))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(da, db) {
			t.Errorf("%s differs between two runs with seed %d", name, s.Seed)
		}
	}
}

// TestJointFailure checks a glued joint letting go: no member bows first,
// the braces on the joint come off it at the break, and a foot slides off
// the base.
func TestJointFailure(t *testing.T) {
	for _, tt := range []struct{ fail, first string }{{"joint-B2", "AB-h2"}, {"joint-A0", "leg-A"}} {
		t.Run(tt.fail, func(t *testing.T) {
			s := short()
			s.Fail = tt.fail
			if err := s.Validate(); err != nil {
				t.Fatal(err)
			}
			m := newModel(s)
			tr := m.computeTruth(nil)
			if tr.FailureMode != ModeJointOrBase || tr.FirstMember != tt.first || tr.FailedJoint != strings.TrimPrefix(tt.fail, JointPrefix) {
				t.Fatalf("mode %s first %s joint %s", tr.FailureMode, tr.FirstMember, tr.FailedJoint)
			}
			fm, _ := tr.Member(tr.FirstMember)
			b := s.BreakFrame
			// before the break the joint only creeps: no bow to speak of
			if fm.BowMM[b-1] > 0.005*fm.LengthMM {
				t.Errorf("bow %.3f mm before the break", fm.BowMM[b-1])
			}
			// a detached end moves by millimetres within a few frames of the break
			var jump float64
			if strings.HasSuffix(tt.fail, "0") {
				j, _ := tr.Point("A0")
				jump = math.Hypot(j.PX[b+4][0]-j.PX[b-1][0], j.PX[b+4][1]-j.PX[b-1][1])
			} else {
				mid, _ := tr.Point(tt.first + "-mid")
				jump = math.Hypot(mid.PX[b+4][0]-mid.PX[b-1][0], mid.PX[b+4][1]-mid.PX[b-1][1])
			}
			if jump < 1 {
				t.Errorf("the failing joint moved only %.2f px across the break", jump)
			}
		})
	}
	s := short()
	s.Fail = "joint-E1"
	if err := s.Validate(); err == nil || !strings.Contains(err.Error(), "unknown joint") {
		t.Errorf("joint-E1: %v", err)
	}
	s.Fail = "joint-A9"
	if err := s.Validate(); err == nil {
		t.Error("joint-A9 accepted on a 4-level tower")
	}
}

// TestLegBetweenBraces checks a leg buckling in one panel: the mid-panel
// point of that panel leaves the line of its two braced joints as a
// half-sine (the buckled shape of a pinned-pinned Euler column, K = 1 over
// the panel; common practice), the leg's joints and its other panels stay in
// line, and the marks carry the mid-panel points on the leg.
func TestLegBetweenBraces(t *testing.T) {
	s := short()
	s.Fail = "leg-B:2"
	if err := s.Validate(); err != nil {
		t.Fatal(err)
	}
	m := newModel(s)
	tr := m.computeTruth(nil)
	if tr.FirstMember != "leg-B" || tr.FailureMode != ModeLegBetweenBraces || tr.FailedPanel != 2 {
		t.Fatalf("first %s mode %s panel %d, want leg-B leg_between_braces panel 2", tr.FirstMember, tr.FailureMode, tr.FailedPanel)
	}
	idx := map[string]int{}
	for i, p := range m.points {
		idx[p.id] = i
	}
	// offFromPanel is the 3D distance of leg B's mid-panel point of panel p
	// from the straight line through the joints at levels p-1 and p.
	offFromPanel := func(p int, f float64) float64 {
		ps := m.pose(f)
		a := m.pointPos(idx[fmt.Sprintf("B%d", p-1)], ps)
		b := m.pointPos(idx[fmt.Sprintf("B%d", p)], ps)
		q := m.pointPos(idx[fmt.Sprintf("leg-B-mid%d", p)], ps)
		e := b.sub(a).unit()
		d := q.sub(a)
		return d.sub(e.scale(d.dot(e))).norm()
	}
	legLen := m.members[1].rest
	on, brk := float64(s.OnsetFrame), float64(s.BreakFrame)
	// At the onset the panel's bow is 0.5 % of the leg's length (the onset
	// definition), a frame earlier less; it keeps growing to the break.
	if got := offFromPanel(2, on); math.Abs(got-0.005*legLen) > 0.02*0.005*legLen {
		t.Errorf("panel 2 bow at onset %.4f mm, want %.4f", got, 0.005*legLen)
	}
	if got := offFromPanel(2, on-1); got >= 0.005*legLen {
		t.Errorf("panel 2 bow a frame before the onset %.4f mm, not below %.4f", got, 0.005*legLen)
	}
	if got := offFromPanel(2, brk-1); got < 2*0.005*legLen {
		t.Errorf("panel 2 bow before the break %.3f mm, want at least twice the onset bow", got)
	}
	// The other panels stay straight (only the tower's own sway curves them,
	// by hundredths of a millimetre).
	for _, p := range []int{1, 3, 4} {
		if got := offFromPanel(p, brk-1); got > 0.05 {
			t.Errorf("panel %d of leg B bowed %.3f mm", p, got)
		}
	}
	// Half-sine over the panel: at a quarter of the panel the bow is
	// sin(pi/4) of the mid-panel bow.
	ps := m.pose(brk - 1)
	rest := m.pose(0)
	s0, s1 := 1.0/4, 2.0/4
	bowAt := func(u float64) float64 {
		sp := s0 + u*(s1-s0)
		return m.memberPos(1, sp, 0, ps).sub(m.memberPos(1, sp, 0, rest)).sub(
			lerp3(m.memberPos(1, s0, 0, ps).sub(m.memberPos(1, s0, 0, rest)), m.memberPos(1, s1, 0, ps).sub(m.memberPos(1, s1, 0, rest)), u)).norm()
	}
	if r := bowAt(0.25) / bowAt(0.5); math.Abs(r-math.Sin(math.Pi/4)) > 0.02 {
		t.Errorf("bow at a quarter of the panel is %.3f of the mid-panel bow, want sin(pi/4) = 0.707", r)
	}
	// After the break the leg is in two pieces with a gap in that panel.
	if lines := m.memberShape(1, m.pose(brk-1)); len(lines) != 1 {
		t.Errorf("leg B in %d pieces before the break", len(lines))
	}
	lines := m.memberShape(1, m.pose(brk+4))
	if len(lines) != 2 {
		t.Fatalf("leg B in %d pieces after the break, want 2", len(lines))
	}
	end0, start1 := lines[0][len(lines[0])-1], lines[1][0]
	if gap := end0.p.sub(start1.p).norm(); gap < 1 || end0.s < s0 || start1.s > s1 {
		t.Errorf("gap %.2f mm at s %.3f/%.3f, want over 1 mm inside panel 2", gap, end0.s, start1.s)
	}
	mid, _ := tr.Point("leg-B-mid2")
	if mid.Leg != "B" || mid.Level != nil || mid.Member != "leg-B" {
		t.Errorf("truth point leg-B-mid2: leg %q level %v member %q", mid.Leg, mid.Level, mid.Member)
	}

	// Marks: the leg member runs through the mid-panel points; those have a
	// leg and plan position but no level.
	mf := (&Renderer{s: s, m: m}).Marks()
	var legB []string
	for _, mb := range mf.Members {
		if mb.ID == "leg-B" {
			legB = mb.Points
		}
	}
	want := []string{"B0", "leg-B-mid1", "B1", "leg-B-mid2", "B2", "leg-B-mid3", "B3", "leg-B-mid4", "B4"}
	if !reflect.DeepEqual(legB, want) {
		t.Errorf("leg-B points %v, want %v", legB, want)
	}
	mp, ok := mf.Point("leg-B-mid2")
	if !ok || mp.Leg != "B" || mp.Level != nil || mp.PlanMM == nil {
		t.Fatalf("marks point leg-B-mid2: %+v", mp)
	}
	// Its plan position is half-way between B1 and B2 (width 90 mm at 75 mm
	// and 80 mm at 150 mm high on the default 100-to-60 mm taper).
	if math.Abs(mp.PlanMM[0]-42.5) > 1e-6 || math.Abs(mp.PlanMM[1]+42.5) > 1e-6 {
		t.Errorf("plan of leg-B-mid2 %v, want [42.5 -42.5]", *mp.PlanMM)
	}
	if _, err := marksRoundTrip(mf); err != nil {
		t.Fatal(err)
	}

	// Without mid-panel markers the legs are marked at the levels only.
	s.LegMidMarkers = false
	m2 := newModel(s)
	for _, p := range (&Renderer{s: s, m: m2}).Marks().Points {
		if strings.Contains(p.ID, "-mid") && p.Leg != "" {
			t.Errorf("point %s marked with --leg-mid-markers=false", p.ID)
		}
	}
	for _, bad := range []string{"leg-B:0", "leg-B:5", "leg-E:1", "leg-B:x", "AB-d1:1"} {
		s.Fail = bad
		if err := s.Validate(); err == nil || !strings.Contains(err.Error(), "unknown leg panel") {
			t.Errorf("%s: %v", bad, err)
		}
	}
}
