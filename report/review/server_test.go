package review

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"image"
	"image/png"
	"io"
	"math"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/failframe/failframe/report"
	"github.com/failframe/failframe/tracking/marks"
)

// rawGet sends a request line exactly as written (no client-side cleaning)
// and returns the status code and body.
func rawGet(t *testing.T, base, method, target, host string) (int, string) {
	t.Helper()
	conn, err := net.Dial("tcp", hostOf(base))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	fmt.Fprintf(conn, "%s %s HTTP/1.1\r\nHost: %s\r\nConnection: close\r\n\r\n", method, target, host)
	resp, err := http.ReadResponse(bufio.NewReader(conn), nil)
	if err != nil {
		t.Fatalf("%s %s: %v", method, target, err)
	}
	defer resp.Body.Close()
	body, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, string(body)
}

func TestListenDefaultsToLoopback(t *testing.T) {
	for _, addr := range []string{":0", "127.0.0.1:0"} {
		ln, err := Listen(addr)
		if err != nil {
			t.Fatal(err)
		}
		ip := ln.Addr().(*net.TCPAddr).IP
		if !ip.IsLoopback() {
			t.Errorf("Listen(%q) is on %v, want loopback", addr, ip)
		}
		if u := URL(ln); !strings.HasPrefix(u, "http://127.0.0.1:") {
			t.Errorf("URL = %q", u)
		}
		ln.Close()
	}
	if _, err := Listen("no-port"); err == nil {
		t.Error("Listen without a port: no error")
	}
}

func TestServerRejectsTraversalAndForeignHosts(t *testing.T) {
	dir := t.TempDir()
	clip := makeClip(t, dir)
	rep, mk := makeReport(t, dir)
	secret := "do-not-serve-this-" + t.Name()
	write(t, filepath.Join(dir, "secret.txt"), secret)
	if err := os.Symlink(filepath.Join(dir, "secret.txt"), filepath.Join(rep, "link.txt")); err != nil {
		t.Fatal(err)
	}
	_, base := startServer(t, Config{Clip: clip, Marks: mk, Report: rep})
	host := hostOf(base)

	tests := []struct {
		target string
		host   string
		want   int
	}{
		{"/files/report.json", host, 200},
		{"/files/../secret.txt", host, 400},
		{"/files/%2e%2e/secret.txt", host, 400},
		{"/files/..%2fsecret.txt", host, 400},
		{"/files/plots/../../secret.txt", host, 400},
		{"/files/link.txt", host, 404}, // a symlink out of the folder
		{"/static/..%2fapp.js", host, 400},
		{"/static/../review.go", host, 400},
		{"/files/etc/passwd", host, 404},
		{"/api/info", "evil.example:80", 403},
		{"/api/info", "localhost:" + strings.Split(host, ":")[1], 200},
	}
	for _, tt := range tests {
		code, body := rawGet(t, base, "GET", tt.target, tt.host)
		if code != tt.want {
			t.Errorf("GET %s (Host %s) = %d, want %d; body %.120q", tt.target, tt.host, code, tt.want, body)
		}
		if strings.Contains(body, secret) || strings.Contains(body, "root:") {
			t.Errorf("GET %s leaked a file outside the report folder", tt.target)
		}
	}
}

func TestServerFrameRequests(t *testing.T) {
	dir := t.TempDir()
	clip := makeClip(t, dir)
	_, base := startServer(t, Config{Clip: clip, CaptureFPS: clipFPS})
	tests := []struct {
		path string
		want int
	}{
		{"/api/frame/0.jpg", 200},
		{fmt.Sprintf("/api/frame/%d.png", clipFrames-1), 200},
		{fmt.Sprintf("/api/frame/%d.jpg", clipFrames), 404},
		{"/api/frame/999999999.jpg", 404},
		{"/api/frame/99999999999999999999.jpg", 400},
		{"/api/frame/-1.jpg", 400},
		{"/api/frame/+3.jpg", 400},
		{"/api/frame/abc.jpg", 400},
		{"/api/frame/3.gif", 404},
		{"/api/frame/3", 404},
		{"/api/tracks?frame=5", 200},
		{fmt.Sprintf("/api/tracks?frame=%d", clipFrames), 404},
		{"/api/tracks?frame=x", 400},
		{"/api/report", 404},
		{"/api/load", 404},
		{"/files/report.json", 404},
		{"/api/frame/5.jpg", 200}, // still answering after the bad requests
	}
	for _, tt := range tests {
		resp, err := http.Get(base + strings.TrimPrefix(tt.path, "/"))
		if err != nil {
			t.Fatal(err)
		}
		body, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode != tt.want {
			t.Errorf("GET %s = %d, want %d (%s)", tt.path, resp.StatusCode, tt.want, body)
		}
		if resp.StatusCode >= 400 && !bytes.Contains(body, []byte(`"error"`)) {
			t.Errorf("GET %s: error answer %q is not a JSON error", tt.path, body)
		}
	}
}

func TestServerRejectsOversizedAndNonJSONBodies(t *testing.T) {
	dir := t.TempDir()
	clip := makeClip(t, dir)
	mk := filepath.Join(dir, "new.marks.yaml")
	_, base := startServer(t, Config{Clip: clip, Marks: mk, CaptureFPS: clipFPS})

	big := `{"points":[` + strings.Repeat(`{"id":"x","px":[1,1]},`, MaxBody/20) + `]}`
	tests := []struct {
		name   string
		body   io.Reader
		length int64
		ctype  string
		want   int
	}{
		{"declared too long", strings.NewReader(big), int64(len(big)), "application/json", http.StatusRequestEntityTooLarge},
		{"streamed too long", io.MultiReader(strings.NewReader(big)), -1, "application/json", http.StatusRequestEntityTooLarge},
		{"not JSON", strings.NewReader(`{}`), 2, "text/plain", http.StatusUnsupportedMediaType},
		{"unknown field", strings.NewReader(`{"pointz":[]}`), -1, "application/json", http.StatusBadRequest},
	}
	for _, tt := range tests {
		req, _ := http.NewRequest(http.MethodPut, base+"api/marks", tt.body)
		req.ContentLength = tt.length
		req.Header.Set("Content-Type", tt.ctype)
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatalf("%s: %v", tt.name, err)
		}
		resp.Body.Close()
		if resp.StatusCode != tt.want {
			t.Errorf("%s: status %d, want %d", tt.name, resp.StatusCode, tt.want)
		}
	}
	if _, err := os.Stat(mk); !os.IsNotExist(err) {
		t.Errorf("a refused request wrote the marks file (stat: %v)", err)
	}
}

func putMarks(t *testing.T, base, body string) (int, string) {
	t.Helper()
	req, _ := http.NewRequest(http.MethodPut, base+"api/marks", strings.NewReader(body))
	req.Header.Set("Content-Type", "application/json")
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, string(b)
}

func TestServerSavesOnlyValidMarks(t *testing.T) {
	dir := t.TempDir()
	clip := makeClip(t, dir)
	mk := filepath.Join(dir, "m.yaml")
	_, base := startServer(t, Config{Clip: clip, Marks: mk, CaptureFPS: clipFPS})

	good := `{"reference_frame":3,"tower":{"base_mm":100,"top_mm":50,"height_mm":280,"levels_mm":[0,70,140,210,280]},
	  "scale":{"from":"A1","to":"B2","mm":120},
	  "points":[{"id":"A1","px":[10.25,200.5],"leg":"A","level":1},{"id":"B2","px":[300.125,20.75],"leg":"B","level":2}],
	  "members":[{"id":"AB-d1","kind":"brace","points":["A1","B2"]}]}`
	if code, body := putMarks(t, base, good); code != 200 {
		t.Fatalf("good marks: %d %s", code, body)
	}
	m, err := marks.Load(mk)
	if err != nil {
		t.Fatal(err)
	}
	if p, _ := m.Point("B2"); p.PX != [2]float64{300.125, 20.75} || m.ReferenceFrame != 3 || m.CaptureFPS != clipFPS || m.Clip != "tower.avi" {
		t.Errorf("saved marks: %+v (clip %q, fps %g, ref %d)", p, m.Clip, m.CaptureFPS, m.ReferenceFrame)
	}
	// The derived plan position follows marks.PlanOf: at level 1 (70 mm of 280)
	// the width is 100 - 50*70/280 = 87.5 mm, so A1 = (-43.75, -43.75).
	var got marksJSON
	resp, err := http.Get(base + "api/marks")
	if err != nil {
		t.Fatal(err)
	}
	json.NewDecoder(resp.Body).Decode(&got)
	resp.Body.Close()
	if d := got.Points[0].Derived; d == nil || math.Abs(d[0]+43.75) > 1e-9 || math.Abs(d[1]+43.75) > 1e-9 {
		t.Errorf("derived plan of A1 = %v, want (-43.75, -43.75)", d)
	}
	before, _ := os.ReadFile(mk)

	bad := []struct{ name, body, want string }{
		{"duplicate id", `{"points":[{"id":"A","px":[1,1]},{"id":"A","px":[2,2]}]}`, "duplicate point id"},
		{"off the frame", `{"points":[{"id":"A","px":[320.5,1]}]}`, "outside the 320x240 frame"},
		{"unknown member point", `{"points":[{"id":"A","px":[1,1]}],"members":[{"id":"m","kind":"brace","points":["A","Z"]}]}`, "unknown point id"},
		{"bad kind", `{"points":[{"id":"A","px":[1,1]},{"id":"B","px":[5,5]}],"members":[{"id":"m","kind":"strut","points":["A","B"]}]}`, "kind"},
		{"reference past the clip", `{"reference_frame":500,"points":[]}`, "reference_frame"},
		{"zero scale", `{"points":[{"id":"A","px":[1,1]},{"id":"B","px":[5,5]}],"scale":{"from":"A","to":"B","mm":0}}`, "scale"},
	}
	for _, tt := range bad {
		code, body := putMarks(t, base, tt.body)
		if code != http.StatusUnprocessableEntity || !strings.Contains(body, tt.want) {
			t.Errorf("%s: %d %s, want 422 mentioning %q", tt.name, code, body, tt.want)
		}
	}
	after, _ := os.ReadFile(mk)
	if !bytes.Equal(before, after) {
		t.Error("a refused save changed the marks file")
	}
}

// TestFramesMatchFFmpeg checks the frames served, asked for out of order
// (forward reads, short skips and seeks back), against frames that the ffmpeg
// command-line tool extracts on its own: an independent decoder path.
func TestFramesMatchFFmpeg(t *testing.T) {
	if _, err := exec.LookPath("ffmpeg"); err != nil {
		t.Skip("ffmpeg not installed: cannot check frames against it")
	}
	dir := t.TempDir()
	// An H.264 clip with a key frame every 12 frames, as phones record:
	// frames between key frames need the decoder to run on from the key.
	h264 := filepath.Join(dir, "testsrc.mp4")
	cmd := exec.Command("ffmpeg", "-v", "error", "-f", "lavfi", "-i", "testsrc=size=320x240:rate=30",
		"-frames:v", "120", "-c:v", "libx264", "-g", "12", "-pix_fmt", "yuv420p", h264)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("ffmpeg: %v\n%s", err, out)
	}
	clips := []struct{ name, path string }{
		{"mjpg", makeClip(t, dir)},
		{"h264", h264},
	}
	for _, c := range clips {
		t.Run(c.name, func(t *testing.T) {
			s, base := startServer(t, Config{Clip: c.path, CaptureFPS: clipFPS})
			order := []int{0, 1, 2, 30, 31, 45, 5, 119, 60, 61}
			// ffmpeg writes every frame, numbered by decode order from 0.
			ffDir := filepath.Join(dir, c.name)
			if err := os.Mkdir(ffDir, 0o755); err != nil {
				t.Fatal(err)
			}
			cmd := exec.Command("ffmpeg", "-v", "error", "-i", c.path, "-vsync", "0", "-start_number", "0", filepath.Join(ffDir, "%03d.png"))
			if out, err := cmd.CombinedOutput(); err != nil {
				t.Fatalf("ffmpeg: %v\n%s", err, out)
			}
			for _, n := range order {
				ref := filepath.Join(ffDir, fmt.Sprintf("%03d.png", n))
				want := readPNG(t, ref)
				got := readPNGFromServer(t, base, n)
				// Same frame: colour conversion may differ by a grey level or two.
				same := meanAbsDiff(got, want)
				if same > 2.5 {
					t.Errorf("frame %d differs from ffmpeg's by %.2f grey levels on average", n, same)
				}
				// And the neighbour must match clearly worse.
				if n > 0 {
					prev := readPNGFromServer(t, base, n-1)
					if d := meanAbsDiff(prev, want); d < 3*same || d == 0 {
						t.Errorf("frame %d-1 matches ffmpeg's frame %d about as well (%.3f vs %.3f): frames not told apart", n, n, d, same)
					}
				}
			}
			s.frames.mu.Lock()
			seeks, reads := s.frames.seeks, s.frames.reads
			s.frames.mu.Unlock()
			if seeks == 0 || seeks > 2*len(order) {
				t.Errorf("%d seeks for %d requests: forward reading not used as expected", seeks, 2*len(order))
			}
			t.Logf("%d reads, %d seeks", reads, seeks)
		})
	}
}

func readPNG(t *testing.T, path string) image.Image {
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

func readPNGFromServer(t *testing.T, base string, n int) image.Image {
	t.Helper()
	resp, err := http.Get(fmt.Sprintf("%sapi/frame/%d.png", base, n))
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	img, err := png.Decode(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return img
}

func meanAbsDiff(a, b image.Image) float64 {
	r := a.Bounds()
	if r != b.Bounds() {
		return math.Inf(1)
	}
	sum, n := 0.0, 0
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			r1, g1, b1, _ := a.At(x, y).RGBA()
			r2, g2, b2, _ := b.At(x, y).RGBA()
			sum += math.Abs(float64(r1>>8)-float64(r2>>8)) + math.Abs(float64(g1>>8)-float64(g2>>8)) + math.Abs(float64(b1>>8)-float64(b2>>8))
			n += 3
		}
	}
	return sum / float64(n)
}

func TestServerReportAndStill(t *testing.T) {
	dir := t.TempDir()
	clip := makeClip(t, dir)
	rep, mk := makeReport(t, dir)
	s, base := startServer(t, Config{Clip: clip, Marks: mk, Report: rep})
	if s.Timebase().CaptureFPS != clipFPS || s.Timebase().From != "marks" {
		t.Errorf("timebase %+v, want %g fps from the marks", s.Timebase(), clipFPS)
	}

	// Overlay at frame 90: the mid point is 0.12*(90-40) = 6 px off the chord
	// of length hypot(160, 160) = 226.27 px, a bow fraction of 0.0265.
	var ov overlayJSON
	getJSON(t, base+"api/tracks?frame=90", &ov)
	if !ov.Tracked || len(ov.Points) != 3 || len(ov.Members) != 1 {
		t.Fatalf("overlay: %+v", ov)
	}
	mb := ov.Members[0]
	if mb.BowFrac == nil || math.Abs(*mb.BowFrac-6/math.Hypot(160, 160)) > 1e-3 || !mb.First {
		t.Errorf("member %+v, want bow fraction %.4f and first", mb, 6/math.Hypot(160, 160))
	}
	var ov0 overlayJSON
	getJSON(t, base+"api/tracks?frame=0", &ov0)
	if c := ov0.Members[0].Color; c != hexColor(colorLow) {
		t.Errorf("straight member colour %s, want %s", c, hexColor(colorLow))
	}

	var ld loadSeries
	getJSON(t, base+"api/load", &ld)
	if g, ok := ld.at(0.1); !ok || math.Abs(g-1000) > 1e-6 {
		t.Errorf("load at 0.1 s = %g, want 1000 g (10 g per ms)", g)
	}

	req, _ := http.NewRequest(http.MethodPost, base+"api/still", strings.NewReader(`{"frame":90,"points":true,"members":true,"labels":true}`))
	req.Header.Set("Content-Type", "application/json")
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	var out map[string]any
	json.NewDecoder(resp.Body).Decode(&out)
	resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Fatalf("still: %d %v", resp.StatusCode, out)
	}
	still := readPNG(t, filepath.Join(rep, "evidence", "review-frame-000090.png"))
	raw := readPNGFromServer(t, base, 90)
	if still.Bounds() != raw.Bounds() {
		t.Fatalf("still is %v, frame is %v", still.Bounds(), raw.Bounds())
	}
	// Halfway along the chord from A1 to the mid point the member line is drawn.
	x, y := pointAt("M", 90)
	cx, cy := int((60+x)/2), int((200+y)/2)
	r1, g1, b1, _ := still.At(cx, cy).RGBA()
	r2, g2, b2, _ := raw.At(cx, cy).RGBA()
	if r1 == r2 && g1 == g2 && b1 == b2 {
		t.Errorf("still has no member line at (%d, %d)", cx, cy)
	}
	entries, _ := os.ReadDir(filepath.Join(rep, "evidence"))
	if len(entries) != 1 {
		t.Errorf("evidence holds %d files, want only the still (no temp files left)", len(entries))
	}
}

func getJSON(t *testing.T, url string, v any) {
	t.Helper()
	resp, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	if resp.StatusCode != 200 {
		b, _ := io.ReadAll(resp.Body)
		t.Fatalf("GET %s: %d %s", url, resp.StatusCode, b)
	}
	if err := json.NewDecoder(resp.Body).Decode(v); err != nil {
		t.Fatalf("GET %s: %v", url, err)
	}
}

func TestReadLoad(t *testing.T) {
	dir := t.TempDir()
	res := &report.Result{Alignment: &report.Alignment{OffsetS: 0.25}}
	tests := []struct {
		name, csv string
		wantErr   string
		at, want  float64
	}{
		{"video time", "video_time_s,load_g\n0,0\n1,100\n", "", 0.5, 50},
		{"log time shifted by the alignment", "log_time_s,load_g\n0,0\n1,100\n", "", 0.75, 50},
		{"comment and blank load", "# logger X\ntime_s,load_g\n0,0\n0.5,\n1,100\n", "", 0.5, 50},
		{"bad number names the line", "time_s,load_g\n0,0\n0.5,abc\n", "line 3", 0, 0},
		{"no load column", "time_s,force\n0,0\n", "lacks a time and a load column", 0, 0},
		{"out of order", "time_s,load_g\n1,0\n0,1\n", "not in order", 0, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			p := filepath.Join(dir, strings.ReplaceAll(tt.name, " ", "_")+".csv")
			write(t, p, tt.csv)
			ls, err := readLoad(p, res)
			if tt.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), tt.wantErr) || !strings.Contains(err.Error(), p) {
					t.Fatalf("err %v, want one naming %s and %q", err, p, tt.wantErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if g, ok := ls.at(tt.at); !ok || math.Abs(g-tt.want) > 1e-9 {
				t.Errorf("load at %g s = %g (%v), want %g", tt.at, g, ok, tt.want)
			}
		})
	}
}

func TestLoadThinKeepsPeaks(t *testing.T) {
	ls := &loadSeries{}
	for i := 0; i < 100000; i++ {
		g := float64(i % 1000)
		if i == 54321 {
			g = 5000
		}
		ls.TimeS = append(ls.TimeS, float64(i)/1000)
		ls.LoadG = append(ls.LoadG, g)
	}
	ls.thin(maxLoadPoints)
	if len(ls.TimeS) > maxLoadPoints {
		t.Errorf("%d points after thinning, want at most %d", len(ls.TimeS), maxLoadPoints)
	}
	peak := 0.0
	for _, g := range ls.LoadG {
		peak = math.Max(peak, g)
	}
	if peak != 5000 {
		t.Errorf("peak after thinning %g, want 5000", peak)
	}
}

func TestServerTruncatedClip(t *testing.T) {
	dir := t.TempDir()
	clip := makeClip(t, dir)
	st, err := os.Stat(clip)
	if err != nil {
		t.Fatal(err)
	}
	// Cut the file at 60 %: the container still lists every frame.
	if err := os.Truncate(clip, st.Size()*6/10); err != nil {
		t.Fatal(err)
	}
	s, err := New(Config{Clip: clip, CaptureFPS: clipFPS})
	if err != nil {
		// Refusing a damaged clip with a clear error is also acceptable.
		if !strings.Contains(err.Error(), clip) {
			t.Fatalf("error %v does not name the clip", err)
		}
		return
	}
	s.Close()
	_, base := startServer(t, Config{Clip: clip, CaptureFPS: clipFPS})
	for _, n := range []int{clipFrames - 1, clipFrames - 2, 90, 10, clipFrames * 3 / 4, 0} {
		resp, err := http.Get(fmt.Sprintf("%sapi/frame/%d.jpg", base, n))
		if err != nil {
			t.Fatalf("frame %d: %v (server gone?)", n, err)
		}
		b, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode >= 400 && !bytes.Contains(b, []byte(clip)) {
			t.Errorf("frame %d: error %q does not name the clip", n, b)
		}
		switch {
		case n <= 10 && resp.StatusCode != 200:
			t.Errorf("frame %d of the intact part: %d", n, resp.StatusCode)
		case resp.StatusCode != 200 && resp.StatusCode != 404 && resp.StatusCode != 422:
			t.Errorf("frame %d: status %d, want 200, 404 or 422", n, resp.StatusCode)
		}
	}
	var info infoJSON
	getJSON(t, base+"api/info", &info)
	t.Logf("truncated clip: the container lists %d frames", info.Frames)
}

func TestNewNamesBadReportFiles(t *testing.T) {
	dir := t.TempDir()
	clip := makeClip(t, dir)
	tests := []struct {
		file, content, want string
	}{
		{"points.csv", "frame,time_s,point,x_px,y_px,x_mm,y_mm,quality,lost\n0,0,A,1,2,,,0.9,0\nx,0,A,1,2,,,0.9,0\n", "line 3"},
		{"members.csv", "frame,time_s,member,kind,bow_mm,bow_pct,strain_pct,rotation_deg\n0,0,m,brace,0.1,abc,,\n", "line 2"},
		{"load.csv", "video_time_s,load_g\n0,0\n0.1,lots\n", "line 3"},
		{"report.json", `{"version": 99}`, "version 99"},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			rep, mk := makeReport(t, t.TempDir())
			p := filepath.Join(rep, tt.file)
			write(t, p, tt.content)
			s, err := New(Config{Clip: clip, Marks: mk, Report: rep})
			if err == nil {
				s.Close()
				t.Fatalf("bad %s accepted", tt.file)
			}
			if !strings.Contains(err.Error(), p) || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %q, want one naming %s and %q", err, p, tt.want)
			}
		})
	}
}

func TestServerRefusesToReadBrokenMarksLater(t *testing.T) {
	dir := t.TempDir()
	clip := makeClip(t, dir)
	mk := filepath.Join(dir, "m.yaml")
	_, base := startServer(t, Config{Clip: clip, Marks: mk, CaptureFPS: clipFPS})
	// The file is broken by hand while the server runs.
	write(t, mk, "points:\n  - id: A\n    px: [1, 1]\n  - id: A\n    px: [2, 2]\n")
	resp, err := http.Get(base + "api/marks")
	if err != nil {
		t.Fatal(err)
	}
	b, _ := io.ReadAll(resp.Body)
	resp.Body.Close()
	if resp.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(string(b), "line 4") {
		t.Errorf("broken marks: %d %s, want 422 naming line 4", resp.StatusCode, b)
	}
}

func TestServerImageFolder(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "stills")
	if err := os.Mkdir(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 5; i++ {
		img := image.NewGray(image.Rect(0, 0, 40, 30))
		for k := range img.Pix {
			img.Pix[k] = uint8(40 * i)
		}
		f, err := os.Create(filepath.Join(dir, fmt.Sprintf("shot_%04d.png", i+10)))
		if err != nil {
			t.Fatal(err)
		}
		png.Encode(f, img)
		f.Close()
	}
	_, base := startServer(t, Config{Clip: dir, CaptureFPS: 2000})
	var info infoJSON
	getJSON(t, base+"api/info", &info)
	if info.Frames != 5 || info.Width != 40 || info.CaptureFPS != 2000 {
		t.Fatalf("info %+v, want 5 frames of 40x30 at 2000 fps", info)
	}
	got := readPNGFromServer(t, base, 3)
	if r, _, _, _ := got.At(5, 5).RGBA(); r>>8 != 120 {
		t.Errorf("frame 3 grey %d, want 120 (the fourth still)", r>>8)
	}
}

func TestServerParallelFrameRequests(t *testing.T) {
	dir := t.TempDir()
	clip := makeClip(t, dir)
	_, base := startServer(t, Config{Clip: clip, CaptureFPS: clipFPS})
	errs := make(chan error, 8)
	for g := 0; g < 8; g++ {
		go func(g int) {
			for i := 0; i < 12; i++ {
				n := (g*37 + i*11) % clipFrames
				resp, err := http.Get(fmt.Sprintf("%sapi/frame/%d.jpg", base, n))
				if err != nil {
					errs <- err
					return
				}
				io.Copy(io.Discard, resp.Body)
				resp.Body.Close()
				if resp.StatusCode != 200 {
					errs <- fmt.Errorf("frame %d: status %d", n, resp.StatusCode)
					return
				}
			}
			errs <- nil
		}(g)
	}
	for g := 0; g < 8; g++ {
		if err := <-errs; err != nil {
			t.Error(err)
		}
	}
}
