package capture

import (
	"errors"
	"io"
	"strconv"
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
		name  string
		clip  func(testing.TB) string
		codec string
	}{
		{"h264 mp4, B-frames, sparse keyframes", sparseH264, "avc1"},
		{"mjpeg avi", mjpegAVI, "MJPG"},
		{"mpeg4 mov", func(t testing.TB) string {
			return sharedClip(t, "clip.mov", "testsrc2=size=176x144:rate=24", 40, "-c:v", "mpeg4", "-q:v", "3")
		}, "mp4v"},
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
			if info.Codec != tt.codec {
				t.Errorf("codec %q, want %q", info.Codec, tt.codec)
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
	for _, clipFn := range []func(testing.TB) string{sparseH264, mjpegAVI} {
		clip := clipFn(t)
		t.Run(clip, func(t *testing.T) {
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
			targets := []int{n - 1, 0, 77, 50, 49, 51, 100, 3, 120, 99, 99, n - 2, 76, 75, 1, 0, n - 3, 30, 31, 40, 52}
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
