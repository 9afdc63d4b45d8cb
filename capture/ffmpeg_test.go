package capture

import (
	"bufio"
	"bytes"
	"crypto/md5"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"

	"gocv.io/x/gocv"
)

// The checks in this package compare what capture decodes with the ffmpeg
// command-line tool, an independent reader of the same files: its framemd5
// muxer prints one MD5 per decoded frame (here of the frame converted to
// packed BGR, the layout of a gocv Mat), and ffprobe prints frame counts,
// rates and timestamps.

// needFFmpeg skips the test when the ffmpeg tools are not installed.
func needFFmpeg(t testing.TB) {
	t.Helper()
	for _, tool := range []string{"ffmpeg", "ffprobe"} {
		if _, err := exec.LookPath(tool); err != nil {
			t.Skipf("%s not installed: the checks against the ffmpeg command line are skipped", tool)
		}
	}
}

// run runs an ffmpeg tool and returns its standard output.
func run(t testing.TB, name string, args ...string) string {
	t.Helper()
	var out, errb bytes.Buffer
	cmd := exec.Command(name, args...)
	cmd.Stdout, cmd.Stderr = &out, &errb
	if err := cmd.Run(); err != nil {
		t.Fatalf("%s %s: %v\n%s", name, strings.Join(args, " "), err, errb.String())
	}
	return out.String()
}

// makeClip writes a clip with ffmpeg from a lavfi test source into dir.
// src is a lavfi graph such as "testsrc2=size=320x240:rate=30".
func makeClip(t testing.TB, dir, name, src string, frames int, codecArgs ...string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	args := []string{"-v", "error", "-y", "-f", "lavfi", "-i", src, "-frames:v", strconv.Itoa(frames)}
	args = append(args, codecArgs...)
	run(t, "ffmpeg", append(args, p)...)
	return p
}

// clipCache holds clips shared by several tests of one run.
var clipCache struct {
	sync.Mutex
	dir   string
	clips map[string]string
}

// sharedClip makes a clip once per test run (keyed by name) in a temporary
// folder removed by TestMain.
func sharedClip(t testing.TB, name, src string, frames int, codecArgs ...string) string {
	t.Helper()
	needFFmpeg(t)
	clipCache.Lock()
	defer clipCache.Unlock()
	if p, ok := clipCache.clips[name]; ok {
		return p
	}
	if clipCache.dir == "" {
		d, err := os.MkdirTemp("", "capture-test-")
		if err != nil {
			t.Fatal(err)
		}
		clipCache.dir = d
		clipCache.clips = map[string]string{}
	}
	p := makeClip(t, clipCache.dir, name, src, frames, codecArgs...)
	clipCache.clips[name] = p
	return p
}

func TestMain(m *testing.M) {
	code := m.Run()
	if clipCache.dir != "" {
		os.RemoveAll(clipCache.dir)
	}
	os.Exit(code)
}

// sparseH264 is an H.264 clip with B-frames and a keyframe only every 50
// frames, so that a decoder's seek lands well before most frames.
func sparseH264(t testing.TB) string {
	return sharedClip(t, "sparse.mp4", "testsrc2=size=320x240:rate=30", 150,
		"-c:v", "libx264", "-g", "50", "-keyint_min", "50", "-sc_threshold", "0", "-bf", "2", "-pix_fmt", "yuv420p", "-preset", "veryfast")
}

// mjpegAVI is an MJPG AVI clip.
func mjpegAVI(t testing.TB) string {
	return sharedClip(t, "mandel.avi", "mandelbrot=size=160x120:rate=25", 60, "-c:v", "mjpeg", "-q:v", "4", "-pix_fmt", "yuvj420p")
}

// ffFrame is one line of ffmpeg's framemd5 output.
type ffFrame struct {
	// Frame is the frame number from the timestamp (pts x time base x rate).
	Frame int
	MD5   string
}

// ffmpegFrames decodes path with the ffmpeg CLI and returns each frame's
// timestamp (in the stream's time base) and the MD5 of its BGR pixels.
func ffmpegFrames(t testing.TB, path string) []ffFrame {
	t.Helper()
	// passthrough: no frames duplicated or dropped to fill gaps in time.
	out := run(t, "ffmpeg", "-v", "quiet", "-i", path, "-map", "0:v:0", "-fps_mode", "passthrough", "-pix_fmt", "bgr24", "-f", "framemd5", "-")
	rate := parseRatio(t, ffprobeValue(t, path, "r_frame_rate"))
	tb := 0.0
	var frames []ffFrame
	sc := bufio.NewScanner(strings.NewReader(out))
	for sc.Scan() {
		line := sc.Text()
		if v, ok := strings.CutPrefix(line, "#tb 0:"); ok {
			tb = parseRatio(t, strings.TrimSpace(v))
		}
		if strings.HasPrefix(line, "#") || strings.TrimSpace(line) == "" {
			continue
		}
		f := strings.Split(line, ",")
		if len(f) < 6 {
			t.Fatalf("framemd5 line %q", line)
		}
		pts, err := strconv.Atoi(strings.TrimSpace(f[2]))
		if err != nil {
			t.Fatalf("framemd5 line %q: %v", line, err)
		}
		if tb == 0 {
			t.Fatalf("framemd5 of %s: no time base line", path)
		}
		frames = append(frames, ffFrame{Frame: int(math.Round(float64(pts) * tb * rate)), MD5: strings.TrimSpace(f[5])})
	}
	return frames
}

// parseRatio reads "30000/1001" or "30".
func parseRatio(t testing.TB, s string) float64 {
	t.Helper()
	num, den, ok := strings.Cut(s, "/")
	a, err1 := strconv.ParseFloat(num, 64)
	b, err2 := 1.0, error(nil)
	if ok {
		b, err2 = strconv.ParseFloat(den, 64)
	}
	if err1 != nil || err2 != nil || b == 0 {
		t.Fatalf("ratio %q", s)
	}
	return a / b
}

// ffprobeCount is ffprobe's count of decoded video frames.
func ffprobeCount(t testing.TB, path string) int {
	t.Helper()
	out := run(t, "ffprobe", "-v", "error", "-count_frames", "-select_streams", "v:0",
		"-show_entries", "stream=nb_read_frames", "-of", "csv=p=0", path)
	n, err := strconv.Atoi(strings.TrimSpace(strings.Split(out, "\n")[0]))
	if err != nil {
		t.Fatalf("ffprobe count %q: %v", out, err)
	}
	return n
}

// ffprobeValue returns one stream entry of the first video stream, e.g. "r_frame_rate".
func ffprobeValue(t testing.TB, path, entry string) string {
	t.Helper()
	out := run(t, "ffprobe", "-v", "error", "-select_streams", "v:0",
		"-show_entries", "stream="+entry, "-of", "csv=p=0", path)
	return strings.TrimSpace(strings.Split(out, "\n")[0])
}

// ffprobeAllIntra reports whether ffprobe finds every frame of the clip's
// video stream to be an intra (I) frame.
func ffprobeAllIntra(t testing.TB, path string) bool {
	t.Helper()
	out := run(t, "ffprobe", "-v", "error", "-select_streams", "v:0",
		"-show_entries", "frame=pict_type", "-of", "csv=p=0", path)
	types := strings.Fields(out)
	for _, p := range types {
		if strings.Trim(p, ",") != "I" {
			return false
		}
	}
	return len(types) > 0
}

// matMD5 is the MD5 of a BGR Mat's pixel bytes, as framemd5 computes it for bgr24.
func matMD5(m gocv.Mat) string {
	return fmt.Sprintf("%x", md5.Sum(m.ToBytes()))
}
