package evidence

import (
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"gocv.io/x/gocv"
)

// TestAVIWriterReadByFFmpeg writes a short Motion-JPEG AVI and reads it back
// with the ffmpeg command-line tools (an independent reader of the AVI RIFF
// layout): frame count, codec, size and rate as written, and every frame's
// colour within the loss of JPEG at quality 90 (a few levels; common
// practice).
func TestAVIWriterReadByFFmpeg(t *testing.T) {
	if _, err := exec.LookPath("ffprobe"); err != nil {
		t.Skip("reference check skipped: ffprobe is not installed (make deps)")
	}
	path := filepath.Join(t.TempDir(), "c.avi")
	const w, h, n = 64, 48, 5
	a, err := newAVIWriter(path, w, h, 24, 90)
	if err != nil {
		t.Fatal(err)
	}
	colours := [n][3]float64{{20, 40, 200}, {200, 40, 20}, {90, 200, 90}, {10, 10, 10}, {240, 240, 240}}
	for _, c := range colours {
		m := gocv.NewMatWithSizeFromScalar(gocv.NewScalar(c[0], c[1], c[2], 0), h, w, gocv.MatTypeCV8UC3)
		if err := a.Write(m); err != nil {
			t.Fatal(err)
		}
		m.Close()
	}
	if err := a.Close(); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command("ffprobe", "-v", "error", "-count_frames", "-select_streams", "v:0",
		"-show_entries", "stream=codec_name,width,height,r_frame_rate,nb_read_frames", "-of", "csv=p=0", path).CombinedOutput()
	if err != nil {
		t.Fatalf("ffprobe: %v\n%s", err, out)
	}
	if got := strings.TrimSpace(string(out)); got != "mjpeg,64,48,24/1,5" {
		t.Errorf("ffprobe reads %q, want mjpeg,64,48,24/1,5", got)
	}
	raw, err := exec.Command("ffmpeg", "-v", "error", "-i", path, "-f", "rawvideo", "-pix_fmt", "bgr24", "-").Output()
	if err != nil {
		t.Fatalf("ffmpeg decode: %v", err)
	}
	if len(raw) != n*w*h*3 {
		t.Fatalf("decoded %d bytes, want %d", len(raw), n*w*h*3)
	}
	for i, c := range colours {
		px := raw[i*w*h*3+(h/2*w+w/2)*3:]
		for ch := 0; ch < 3; ch++ {
			if d := float64(px[ch]) - c[ch]; d > 4 || d < -4 {
				t.Errorf("frame %d channel %d: %d read back, %g written", i, ch, px[ch], c[ch])
			}
		}
	}
}
