package cli

import (
	"image"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gocv.io/x/gocv"
)

func TestFramesArgsToOptions(t *testing.T) {
	tests := []struct {
		name    string
		args    []string
		want    framesOptions
		wantErr string
	}{
		{"at seconds", []string{"c.mp4", "--at", "1.234s", "--out", "o"},
			framesOptions{clip: "c.mp4", at: "1.234s", atSet: true, count: 1, step: 1, out: "o"}, ""},
		{"frame, count, step, sheet", []string{"c.mp4", "--frame", "12", "--count", "8", "--step", "3", "--capture-fps", "960", "--out", "o", "--sheet", "-q"},
			framesOptions{clip: "c.mp4", frame: 12, count: 8, step: 3, captureFPS: 960, out: "o", sheet: true, quiet: true}, ""},
		{"both positions", []string{"c.mp4", "--at", "1s", "--frame", "3", "--out", "o"}, framesOptions{}, "not both"},
		{"no position", []string{"c.mp4", "--out", "o"}, framesOptions{}, "--at SECONDS"},
		{"no out", []string{"c.mp4", "--frame", "3"}, framesOptions{}, "--out is required"},
		{"bad time", []string{"c.mp4", "--at", "soon", "--out", "o"}, framesOptions{}, `--at "soon"`},
		{"negative frame", []string{"c.mp4", "--frame", "-2", "--out", "o"}, framesOptions{}, "start at 0"},
		{"zero count", []string{"c.mp4", "--frame", "2", "--count", "0", "--out", "o"}, framesOptions{}, "--count 0"},
		{"zero step", []string{"c.mp4", "--frame", "2", "--step", "0", "--out", "o"}, framesOptions{}, "--step 0"},
		{"sheet too big", []string{"c.mp4", "--frame", "2", "--count", "101", "--sheet", "--out", "o"}, framesOptions{}, "at most 100 tiles"},
		{"capture rate 0", []string{"c.mp4", "--frame", "2", "--capture-fps", "0", "--out", "o"}, framesOptions{}, "capture rate 0 fps"},
		{"capture rate absurd", []string{"c.mp4", "--frame", "2", "--capture-fps", "1e7", "--out", "o"}, framesOptions{}, "at most 1e+06"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			checkArgs(t, newFramesCmdWith, tt.args, tt.wantErr, tt.want, func(o *framesOptions) { o.io = nil })
		})
	}
}

// TestFramesExport exports frames of a clip stored at 30 fps but filmed at
// 960 fps: names carry real time (frame / 960) and the pixels are ffmpeg's
// decode of the same frames.
func TestFramesExport(t *testing.T) {
	clip := capClip(t, 150)
	sums := capFFmpegMD5(t, clip)
	out := t.TempDir()
	io, stdout, errOut := testIO()
	if code := Run(io, []string{"frames", clip, "--capture-fps", "960", "--at", "0.128125s", "--count", "3", "--step", "2", "--out", out}); code != ExitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	// 123 / 960 = 0.128125 s, 125 / 960 = 0.130208 s, 127 / 960 = 0.132292 s (rounded to 6 places).
	names := []string{"frame-000123_t0.128125s.png", "frame-000125_t0.130208s.png", "frame-000127_t0.132292s.png"}
	var want []string
	for _, n := range names {
		want = append(want, filepath.Join(out, n))
	}
	if got := strings.Fields(stdout.String()); strings.Join(got, " ") != strings.Join(want, " ") {
		t.Fatalf("wrote %q, want %q", got, want)
	}
	for i, p := range want {
		img := gocv.IMRead(p, gocv.IMReadColor)
		if img.Empty() {
			t.Fatalf("cannot read %s", p)
		}
		if md := capMD5(img); md != sums[123+2*i] {
			t.Errorf("%s: md5 %s, ffmpeg's frame %d is %s", p, md, 123+2*i, sums[123+2*i])
		}
		img.Close()
	}
	entries, _ := os.ReadDir(out)
	if len(entries) != 3 {
		t.Errorf("%d files in the output folder, want 3 (no temporary files left)", len(entries))
	}
}

func TestFramesSheet(t *testing.T) {
	clip := capClip(t, 40)
	sums := capFFmpegMD5(t, clip)
	out := t.TempDir()
	io, stdout, errOut := testIO()
	if code := Run(io, []string{"frames", clip, "--capture-fps", "240", "--frame", "10", "--count", "5", "--sheet", "--out", out}); code != ExitOK {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	p := filepath.Join(out, "sheet_frame-000010-000014.png")
	if strings.TrimSpace(stdout.String()) != p {
		t.Fatalf("wrote %q, want %s", stdout, p)
	}
	sheet := gocv.IMRead(p, gocv.IMReadColor)
	defer sheet.Close()
	// 5 tiles: 3 columns, 2 rows of 192x144 tiles, each under a label band.
	band := (sheet.Rows() - 2*144) / 2
	if sheet.Cols() != 3*192 || sheet.Rows() != 2*(144+band) || band < 8 || band > 30 {
		t.Fatalf("sheet is %dx%d", sheet.Cols(), sheet.Rows())
	}
	// Tile 4 (second row, middle) is frame 14 at full size: ffmpeg's pixels.
	tile := sheet.Region(image.Rect(192, 144+2*band, 384, 2*144+2*band))
	defer tile.Close()
	if md := capMD5(tile.Clone()); md != sums[14] {
		t.Errorf("tile of frame 14: md5 %s, ffmpeg's frame 14 is %s", md, sums[14])
	}
	// Its label band carries white text.
	label := sheet.Region(image.Rect(192, 144+band, 384, 144+2*band))
	defer label.Close()
	if mx := label.Clone(); gocv.CountNonZero(capWhiteMask(mx)) == 0 {
		t.Errorf("no label stamped on tile 4")
	}
}

// capWhiteMask marks near-white pixels (label text).
func capWhiteMask(m gocv.Mat) gocv.Mat {
	g := gocv.NewMat()
	gocv.CvtColor(m, &g, gocv.ColorBGRToGray)
	gocv.Threshold(g, &g, 200, 255, gocv.ThresholdBinary)
	return g
}

func TestFramesBadInputs(t *testing.T) {
	capNeedFFmpeg(t)
	clip := capClip(t, 30)
	damaged := capDamagedAVI(t)
	sums := capFFmpegMD5(t, damaged)
	lost := -1
	for f := 0; f < 40; f++ {
		if _, ok := sums[f]; !ok {
			lost = f
		}
	}
	out := t.TempDir()
	tests := []struct {
		name  string
		args  []string
		code  int
		want  []string
		files int
	}{
		{"missing clip", []string{"frames", filepath.Join(out, "none.avi"), "--frame", "1", "--out", out}, ExitBadInput, []string{"none.avi", "no such file"}, 0},
		{"past the end", []string{"frames", clip, "--capture-fps", "1000", "--at", "0.5s", "--out", out}, ExitBadInput,
			[]string{"frame 500 (0.500000 s) is past the end", "frames 0 to 29"}, 0},
		{"undecodable frame skipped", []string{"frames", damaged, "--frame", "0", "--count", "40", "--capture-fps", "500", "--out", out}, ExitBadInput,
			[]string{damaged, "1 of 40 frames could not be decoded", "frame " + strconv.Itoa(lost)}, 39},
		{"capture rate negative", []string{"frames", clip, "--frame", "1", "--capture-fps", "-1", "--out", out}, ExitUsage, []string{"capture rate -1 fps"}, 39},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			io, _, errOut := testIO()
			if code := Run(io, tt.args); code != tt.code {
				t.Fatalf("exit %d, want %d; stderr: %s", code, tt.code, errOut)
			}
			for _, w := range tt.want {
				if !strings.Contains(errOut.String(), w) {
					t.Errorf("stderr %q lacks %q", errOut, w)
				}
			}
			if entries, _ := os.ReadDir(out); len(entries) != tt.files {
				t.Errorf("%d files in the output folder, want %d", len(entries), tt.files)
			}
		})
	}
}
