package capture

import (
	"errors"
	"io"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gocv.io/x/gocv"
)

// readAll reads every frame and returns the MD5 of each good frame by frame
// number, and the frame numbers reported bad.
func readAll(t *testing.T, src Source) (map[int]string, []int) {
	t.Helper()
	m := gocv.NewMat()
	defer m.Close()
	good := map[int]string{}
	var bad []int
	want := 0
	for {
		f, err := src.Read(&m)
		if errors.Is(err, io.EOF) {
			return good, bad
		}
		if f != want {
			t.Fatalf("Read returned frame %d, want %d (frames must come in order)", f, want)
		}
		want++
		var fe *FrameError
		switch {
		case errors.As(err, &fe):
			bad = append(bad, f)
		case err != nil:
			t.Fatalf("frame %d: %v", f, err)
		default:
			good[f] = matMD5(m)
		}
	}
}

func TestReadMatchesFFmpeg(t *testing.T) {
	tests := []struct {
		name        string
		clip        func(testing.TB) string
		codec       string
		countSource string
	}{
		{"h264 mp4, B-frames, sparse keyframes", sparseH264, "avc1", "container"},
		{"mjpeg avi", mjpegAVI, "MJPG", "container"},
		{"mpeg4 mov at 29.97 fps", mpeg4MOV, "mp4v", "container"},
		{"h265 mp4", hevcMP4, "hev1", "container"},
		{"h264 in MPEG-TS", mpegTS, "unknown (tag 0x1b)", "container"},
		// A raw H.264 stream has no container, so no stated frame count.
		{"raw h264, no frame count", rawH264, "h264", "counted"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			clip := tt.clip(t)
			src, err := Open(clip, Options{})
			if err != nil {
				t.Fatal(err)
			}
			defer src.Close()
			info := src.Info()
			// Outside check: ffprobe's frame count (by decoding) and the ffmpeg
			// decoder's pixels, frame by frame.
			ff := ffmpegFrames(t, clip)
			if n := ffprobeCount(t, clip); info.FrameCount != n || len(ff) != n {
				t.Fatalf("frame count %d (%s), ffprobe counted %d, framemd5 has %d", info.FrameCount, info.CountSource, n, len(ff))
			}
			// Only the raw stream lacks timestamps (and so a frame count).
			noPTS := strings.Contains(strings.Join(info.Warnings, " "), "no usable timestamps")
			if noPTS != (tt.countSource == "counted") || len(info.Warnings) > 1 {
				t.Errorf("warnings %q", info.Warnings)
			}
			if info.CountSource != tt.countSource {
				t.Errorf("count source %q, want %q", info.CountSource, tt.countSource)
			}
			if info.Codec != tt.codec {
				t.Errorf("codec %q, want %q", info.Codec, tt.codec)
			}
			// Outside check: ffprobe's picture types, all I for an intra-only codec.
			if intra := ffprobeAllIntra(t, clip); info.IntraOnly != intra {
				t.Errorf("intra only %v, ffprobe finds every frame intra: %v", info.IntraOnly, intra)
			}
			if w := ffprobeValue(t, clip, "width"); w != itoa(info.Width) {
				t.Errorf("width %d, ffprobe says %s", info.Width, w)
			}
			good, bad := readAll(t, src)
			if len(bad) != 0 || len(good) != len(ff) {
				t.Fatalf("decoded %d frames, bad %v; ffmpeg decoded %d", len(good), bad, len(ff))
			}
			for i, f := range ff {
				if f.Frame != i {
					t.Fatalf("ffmpeg frame %d has timestamp of frame %d", i, f.Frame)
				}
				if good[i] != f.MD5 {
					t.Errorf("frame %d: md5 %s, ffmpeg %s", i, good[i], f.MD5)
				}
			}
		})
	}
}

func TestSeekExact(t *testing.T) {
	for _, clipFn := range []func(testing.TB) string{sparseH264, mjpegAVI, rawH264, mpeg4MOV, mpegTS} {
		clip := clipFn(t)
		t.Run(filepath.Base(clip), func(t *testing.T) {
			ff := ffmpegFrames(t, clip)
			n := len(ff)
			src, err := Open(clip, Options{})
			if err != nil {
				t.Fatal(err)
			}
			defer src.Close()
			m := gocv.NewMat()
			defer m.Close()
			// Backward, far forward, near forward, on and around keyframes
			// (every 50th frame in the H.264 clip), the last frames (flushed
			// from the decoder without timestamps), and twice the same frame.
			targets := []int{n - 1, 0, 77, 50, 49, 51, 100, 3, 120, 99, 99, n - 2, 76, 75, 1, 0, n - 3, 30, 31, 40, 52, 21, 20}
			for _, f := range targets {
				if f >= n {
					continue
				}
				if err := src.Seek(f); err != nil {
					t.Fatalf("seek %d: %v", f, err)
				}
				got, err := src.Read(&m)
				if err != nil || got != f {
					t.Fatalf("after seek %d: read frame %d, %v", f, got, err)
				}
				// Outside check: ffmpeg's decode of the same frame.
				if md := matMD5(m); md != ff[f].MD5 {
					t.Errorf("seek %d: md5 %s, ffmpeg frame %d is %s", f, md, f, ff[f].MD5)
				}
			}
			if err := src.Seek(n + 5); err == nil {
				if _, err := src.Read(&m); !errors.Is(err, io.EOF) {
					t.Errorf("seek past the end: no error and read gave %v", err)
				}
			} else {
				var fe *FrameError
				if !errors.As(err, &fe) || fe.Frame != n+5 {
					t.Errorf("seek past the end: %v, want a FrameError for frame %d", err, n+5)
				}
			}
		})
	}
}

func itoa(i int) string { return strconv.Itoa(i) }

// hevcMP4 is an H.265 clip (skipped when ffmpeg has no libx265).
func hevcMP4(t testing.TB) string {
	needFFmpeg(t)
	if out, _ := exec.Command("ffmpeg", "-hide_banner", "-encoders").Output(); !strings.Contains(string(out), "libx265") {
		t.Skip("ffmpeg has no libx265 encoder")
	}
	return sharedClip(t, "hevc.mp4", "testsrc2=size=192x128:rate=25", 60,
		"-c:v", "libx265", "-x265-params", "log-level=error:keyint=30", "-pix_fmt", "yuv420p", "-preset", "ultrafast")
}

// rawH264 is the sparse H.264 clip as a bare Annex B stream, with no
// container and so no frame count or timestamps.
func rawH264(t testing.TB) string {
	return sharedClip(t, "raw.h264", "testsrc2=size=320x240:rate=30", 150,
		"-c:v", "libx264", "-g", "50", "-keyint_min", "50", "-sc_threshold", "0", "-bf", "2", "-pix_fmt", "yuv420p", "-preset", "veryfast", "-f", "h264")
}

// mpeg4MOV is an MPEG-4 part 2 clip in a QuickTime file at 30000/1001 fps.
func mpeg4MOV(t testing.TB) string {
	return sharedClip(t, "clip.mov", "testsrc2=size=176x144:rate=30000/1001", 60, "-c:v", "mpeg4", "-q:v", "3", "-g", "20")
}

// mpegTS is the sparse H.264 clip in an MPEG transport stream (as camcorders
// write .MTS files). Its timestamps start well above 0, and OpenCV 4.6's own
// frame positioning lands on wrong frames in it (seen: asking for frame 20
// gave frame 51), so it tests that Seek checks where it landed.
func mpegTS(t testing.TB) string {
	return sharedClip(t, "sparse.ts", "testsrc2=size=320x240:rate=30", 150,
		"-c:v", "libx264", "-g", "50", "-keyint_min", "50", "-sc_threshold", "0", "-bf", "2", "-pix_fmt", "yuv420p", "-preset", "veryfast")
}
