package cli

import (
	"bytes"
	"crypto/md5"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gocv.io/x/gocv"
)

// Helpers for the probe and frames tests. Clips are made with the ffmpeg
// command line from its test sources; ffmpeg and ffprobe are also the
// outside check (an independent decoder) for counts, rates and pixels.

func capNeedFFmpeg(t *testing.T) {
	t.Helper()
	for _, tool := range []string{"ffmpeg", "ffprobe"} {
		if _, err := exec.LookPath(tool); err != nil {
			t.Skipf("%s not installed: the probe and frames checks against ffmpeg are skipped", tool)
		}
	}
}

func capRun(t *testing.T, name string, args ...string) string {
	t.Helper()
	var out, errb bytes.Buffer
	cmd := exec.Command(name, args...)
	cmd.Stdout, cmd.Stderr = &out, &errb
	if err := cmd.Run(); err != nil {
		t.Fatalf("%s %s: %v\n%s", name, strings.Join(args, " "), err, errb.String())
	}
	return out.String()
}

// capClip writes a small H.264 clip stored at 30 fps (keyframe every 25
// frames) into a temporary folder.
func capClip(t *testing.T, frames int) string {
	t.Helper()
	capNeedFFmpeg(t)
	p := filepath.Join(t.TempDir(), "tower.mp4")
	capRun(t, "ffmpeg", "-v", "error", "-f", "lavfi", "-i", "testsrc2=size=192x144:rate=30",
		"-frames:v", strconv.Itoa(frames), "-c:v", "libx264", "-g", "25", "-pix_fmt", "yuv420p", "-preset", "veryfast", p)
	return p
}

// capFFmpegMD5 returns ffmpeg's MD5 of each frame's BGR pixels, by frame
// number (from the frame's timestamp).
func capFFmpegMD5(t *testing.T, clip string) map[int]string {
	t.Helper()
	rate := capProbe(t, clip, "stream=r_frame_rate")
	num, den, _ := strings.Cut(rate, "/")
	fps, _ := strconv.ParseFloat(num, 64)
	if d, err := strconv.ParseFloat(den, 64); err == nil && d != 0 {
		fps /= d
	}
	out := capRun(t, "ffmpeg", "-v", "quiet", "-i", clip, "-map", "0:v:0", "-fps_mode", "passthrough", "-pix_fmt", "bgr24", "-f", "framemd5", "-")
	sums := map[int]string{}
	tb := 0.0
	for _, line := range strings.Split(out, "\n") {
		if v, ok := strings.CutPrefix(line, "#tb 0: "); ok {
			n, d, _ := strings.Cut(strings.TrimSpace(v), "/")
			a, _ := strconv.ParseFloat(n, 64)
			b, _ := strconv.ParseFloat(d, 64)
			tb = a / b
		}
		f := strings.Split(line, ",")
		if strings.HasPrefix(line, "#") || len(f) != 6 {
			continue
		}
		pts, _ := strconv.Atoi(strings.TrimSpace(f[2]))
		sums[int(math.Round(float64(pts)*tb*fps))] = strings.TrimSpace(f[5])
	}
	return sums
}

// capProbe returns one ffprobe entry of the first video stream.
func capProbe(t *testing.T, clip, entries string) string {
	t.Helper()
	out := capRun(t, "ffprobe", "-v", "error", "-select_streams", "v:0", "-show_entries", entries, "-of", "csv=p=0", clip)
	return strings.TrimSpace(strings.Split(out, "\n")[0])
}

func capMD5(m gocv.Mat) string { return fmt.Sprintf("%x", md5.Sum(m.ToBytes())) }

// capCut writes the first half of src next to it.
func capCut(t *testing.T, src string) string {
	t.Helper()
	b, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(t.TempDir(), "half.mp4")
	if err := os.WriteFile(p, b[:len(b)/2], 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// capDamagedAVI writes an MJPG AVI of 40 frames whose 20th frame chunk has
// its JPEG header overwritten with zeros, so that frame cannot be decoded.
func capDamagedAVI(t *testing.T) string {
	t.Helper()
	capNeedFFmpeg(t)
	p := filepath.Join(t.TempDir(), "damaged.avi")
	capRun(t, "ffmpeg", "-v", "error", "-f", "lavfi", "-i", "mandelbrot=size=128x96:rate=25",
		"-frames:v", "40", "-c:v", "mjpeg", "-q:v", "4", "-pix_fmt", "yuvj420p", p)
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	off := -1
	for i, k := 0, 0; k < 20; k++ {
		j := bytes.Index(b[i:], []byte("00dc"))
		if j < 0 {
			t.Fatal("no 20th frame chunk")
		}
		off, i = i+j, i+j+4
	}
	copy(b[off+8:], make([]byte, 300))
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}
