package capture

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gocv.io/x/gocv"
)

// stillsDir exports frames of an ffmpeg test source as numbered stills with
// the given file-name pattern (ffmpeg's %d syntax), starting at start, and
// returns the folder and ffmpeg's MD5 of each frame's BGR pixels (decoded by
// ffmpeg from the same source: an outside check of order and content).
func stillsDir(t *testing.T, pattern string, start, n int, ext string) (string, []string) {
	t.Helper()
	needFFmpeg(t)
	dir := t.TempDir()
	src := "testsrc2=size=96x64:rate=10"
	args := []string{"-v", "error", "-f", "lavfi", "-i", src, "-frames:v", fmt.Sprint(n), "-start_number", fmt.Sprint(start)}
	if ext != "jpg" {
		args = append(args, "-pix_fmt", "rgb24") // lossless RGB stills
	}
	run(t, "ffmpeg", append(args, filepath.Join(dir, pattern+"."+ext))...)
	if ext == "jpg" {
		return dir, nil // lossy: content is not compared
	}
	out := run(t, "ffmpeg", "-v", "error", "-f", "lavfi", "-i", src, "-frames:v", fmt.Sprint(n),
		"-pix_fmt", "bgr24", "-f", "framemd5", "-")
	var sums []string
	for _, line := range strings.Split(out, "\n") {
		if f := strings.Split(line, ","); len(f) == 6 && !strings.HasPrefix(line, "#") {
			sums = append(sums, strings.TrimSpace(f[5]))
		}
	}
	if len(sums) != n {
		t.Fatalf("framemd5 gave %d sums", len(sums))
	}
	return dir, sums
}

func TestImageFolderNaturalOrder(t *testing.T) {
	tests := []struct {
		name, pattern, ext string
		start              int
	}{
		// Unpadded numbers: shot_2 must come before shot_10.
		{"png unpadded", "shot_%d", "png", 1},
		{"tiff padded", "f%05d", "tif", 100},
		{"jpeg", "img-%03d", "jpg", 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir, sums := stillsDir(t, tt.pattern, tt.start, 12, tt.ext)
			os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("ignored"), 0o644)
			src, err := Open(dir, Options{ImageFPS: 1000})
			if err != nil {
				t.Fatal(err)
			}
			defer src.Close()
			info := src.Info()
			if info.FrameCount != 12 || info.Width != 96 || info.Height != 64 || info.ContainerFPS != 1000 || len(info.Warnings) != 0 || !info.IntraOnly {
				t.Fatalf("info %+v", info)
			}
			good, bad := readAll(t, src)
			if len(good) != 12 || len(bad) != 0 {
				t.Fatalf("good %d bad %v", len(good), bad)
			}
			for i, want := range sums {
				if good[i] != want {
					t.Errorf("frame %d: md5 %s, ffmpeg's frame %d is %s", i, good[i], i, want)
				}
			}
			// Seek back and read a middle frame.
			if len(sums) > 0 {
				m := gocv.NewMat()
				defer m.Close()
				if err := src.Seek(9); err != nil {
					t.Fatal(err)
				}
				if f, err := src.Read(&m); err != nil || f != 9 || matMD5(m) != sums[9] {
					t.Errorf("seek 9: frame %d err %v", f, err)
				}
			}
		})
	}
}

func TestImageFolderGap(t *testing.T) {
	dir, sums := stillsDir(t, "shot_%d", 1, 12, "png")
	// shot_5 is frame 4 (numbers count from the lowest, shot_1).
	if err := os.Remove(filepath.Join(dir, "shot_5.png")); err != nil {
		t.Fatal(err)
	}
	src, err := Open(dir, Options{ImageFPS: 500})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	info := src.Info()
	if info.FrameCount != 12 || len(info.Warnings) != 1 ||
		!strings.Contains(info.Warnings[0], "shot_4.png") || !strings.Contains(info.Warnings[0], "shot_6.png") {
		t.Fatalf("count %d, warnings %q: want 12 frames and one warning naming shot_4.png and shot_6.png", info.FrameCount, info.Warnings)
	}
	good, bad := readAll(t, src)
	if len(bad) != 1 || bad[0] != 4 {
		t.Fatalf("bad frames %v, want [4]", bad)
	}
	m := gocv.NewMat()
	defer m.Close()
	src.Seek(4)
	if f, err := src.Read(&m); f != 4 || err == nil || !strings.Contains(err.Error(), "skips from shot_4.png to shot_6.png") {
		t.Errorf("frame %d: %v, want an error naming the files around the gap", f, err)
	}
	// Not renumbered: frame 5 is still ffmpeg's frame 5.
	if good[5] != sums[5] || good[3] != sums[3] {
		t.Errorf("frames around the gap do not match ffmpeg's")
	}
}

func TestImageFolderErrors(t *testing.T) {
	tests := []struct {
		name  string
		spoil func(dir string) error
		want  []string
	}{
		{"mixed sizes", func(dir string) error {
			m := gocv.NewMatWithSize(70, 90, gocv.MatTypeCV8UC3)
			defer m.Close()
			if !gocv.IMWrite(filepath.Join(dir, "shot_7.png"), m) {
				return errors.New("imwrite")
			}
			return nil
		}, []string{"shot_7.png", "90x70", "96x64", "mixed frame sizes"}},
		{"same number twice", func(dir string) error {
			b, _ := os.ReadFile(filepath.Join(dir, "shot_3.png"))
			return os.WriteFile(filepath.Join(dir, "shot_03.png"), b, 0o644)
		}, []string{"shot_03.png", "shot_3.png", "same frame number"}},
		{"unnumbered image", func(dir string) error {
			b, _ := os.ReadFile(filepath.Join(dir, "shot_3.png"))
			return os.WriteFile(filepath.Join(dir, "cover.png"), b, 0o644)
		}, []string{"cover.png", "no frame number"}},
		{"not an image", func(dir string) error {
			return os.WriteFile(filepath.Join(dir, "shot_13.png"), []byte("not a png"), 0o644)
		}, []string{"shot_13.png", "not a readable image"}},
		{"no images", func(dir string) error {
			ms, _ := filepath.Glob(filepath.Join(dir, "*.png"))
			for _, m := range ms {
				os.Remove(m)
			}
			return nil
		}, []string{"no PNG, JPEG or TIFF images"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			dir, _ := stillsDir(t, "shot_%d", 1, 12, "png")
			if err := tt.spoil(dir); err != nil {
				t.Fatal(err)
			}
			src, err := Open(dir, Options{})
			if err == nil {
				src.Close()
				t.Fatal("Open succeeded")
			}
			var ce *ClipError
			if !errors.As(err, &ce) || ce.Path != dir {
				t.Errorf("%v is not a ClipError for %s", err, dir)
			}
			for _, w := range tt.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q lacks %q", err, w)
				}
			}
		})
	}
}

// Stills named with more than one number: a camera number before the frame
// number and a time stamp after it, as `failframe frames` names its exports
// (frame-000123_t0.128125s.png). The frame number is the first number that
// differs between the files; order and content are checked against ffmpeg's
// MD5 of each frame.
func TestImageFolderNamesWithTimeStamps(t *testing.T) {
	dir, sums := stillsDir(t, "frame-%06d", 0, 12, "png")
	for i := range sums {
		old := filepath.Join(dir, fmt.Sprintf("frame-%06d.png", i))
		name := fmt.Sprintf("cam2_frame-%06d_t%.6fs.png", i, float64(i)/960)
		if err := os.Rename(old, filepath.Join(dir, name)); err != nil {
			t.Fatal(err)
		}
	}
	src, err := Open(dir, Options{ImageFPS: 30})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	if info := src.Info(); info.FrameCount != 12 || len(info.Warnings) != 0 {
		t.Fatalf("info %+v", info)
	}
	good, bad := readAll(t, src)
	if len(good) != 12 || len(bad) != 0 {
		t.Fatalf("good %d bad %v", len(good), bad)
	}
	for i, want := range sums {
		if good[i] != want {
			t.Errorf("frame %d: md5 %s, ffmpeg's frame %d is %s", i, good[i], i, want)
		}
	}
}
