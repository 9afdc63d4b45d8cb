package capture

import (
	"bytes"
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gocv.io/x/gocv"
)

// overwrite replaces n bytes of a copy of src at offset with the byte b.
func overwrite(t *testing.T, src, dst string, offset, n int, b byte) string {
	t.Helper()
	data, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	copy(data[offset:], bytes.Repeat([]byte{b}, n))
	if err := os.WriteFile(dst, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return dst
}

// cut writes the first frac of src to dst.
func cut(t *testing.T, src, dst string, frac float64) string {
	t.Helper()
	data, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(dst, data[:int(float64(len(data))*frac)], 0o644); err != nil {
		t.Fatal(err)
	}
	return dst
}

func TestOpenBadClips(t *testing.T) {
	needFFmpeg(t)
	dir := t.TempDir()
	h264 := sparseH264(t)
	tests := []struct {
		name     string
		path     func() string
		wantText string
		notExist bool
	}{
		{"missing file", func() string { return filepath.Join(dir, "nope.mp4") }, "no such file", true},
		{"not a video", func() string {
			p := filepath.Join(dir, "notes.mp4")
			os.WriteFile(p, []byte("tower 3, braced, 21.4 g\n"), 0o644)
			return p
		}, "not a readable video", false},
		{"empty file", func() string {
			p := filepath.Join(dir, "empty.mp4")
			os.WriteFile(p, nil, 0o644)
			return p
		}, "not a readable video", false},
		// ffmpeg writes the MP4 index (moov) at the end, so the first half
		// of the file has no index at all.
		{"mp4 cut in half", func() string { return cut(t, h264, filepath.Join(dir, "half.mp4"), 0.5) }, "not a readable video", false},
		{"audio only, zero video frames", func() string {
			p := filepath.Join(dir, "sound.mp4")
			run(t, "ffmpeg", "-v", "error", "-y", "-f", "lavfi", "-i", "sine=frequency=440:duration=0.5", p)
			return p
		}, "", false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			p := tt.path()
			src, err := Open(p, Options{})
			if err == nil {
				src.Close()
				t.Fatalf("Open(%s) succeeded", p)
			}
			var ce *ClipError
			if !errors.As(err, &ce) || ce.Path != p {
				t.Fatalf("error %v is not a ClipError naming %s", err, p)
			}
			if !strings.Contains(err.Error(), p) || !strings.Contains(err.Error(), tt.wantText) {
				t.Errorf("error %q should name %s and say %q", err, p, tt.wantText)
			}
			if errors.Is(err, fs.ErrNotExist) != tt.notExist {
				t.Errorf("errors.Is(fs.ErrNotExist) = %v, want %v", !tt.notExist, tt.notExist)
			}
		})
	}
}

func TestTruncatedFaststartMP4(t *testing.T) {
	needFFmpeg(t)
	dir := t.TempDir()
	// With the index moved to the front the cut file opens, states 150
	// frames, and runs out of data part way.
	fs := filepath.Join(dir, "fs.mp4")
	run(t, "ffmpeg", "-v", "error", "-y", "-i", sparseH264(t), "-c", "copy", "-movflags", "+faststart", fs)
	half := cut(t, fs, filepath.Join(dir, "fshalf.mp4"), 0.5)
	src, err := Open(half, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	if src.Info().FrameCount != 150 || src.Info().CountSource != "container" {
		t.Fatalf("info %+v", src.Info())
	}
	res, err := Scan(src, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Outside check: each frame capture decodes is ffmpeg's frame with that
	// timestamp and pixels. ffmpeg also gets a few frames out of the
	// decoder after the cut; OpenCV's backend gives those no timestamps,
	// so capture drops them (their numbers cannot be told) and the short
	// clip report covers them.
	n := ffprobeCount(t, half)
	if res.Decoded > n || res.Decoded < n-4 || res.Decoded+len(res.Bad) != res.Frames {
		t.Errorf("decoded %d of %d frames, bad %v; ffprobe decoded %d", res.Decoded, res.Frames, res.BadFrames(), n)
	}
	checkAgainstFFmpeg(t, half, 0)
	if res.Short == nil || res.Short.Frame != res.Frames || res.Frames > 100 || !errors.Is(res.Short, ErrShortClip) ||
		!strings.Contains(res.Short.Error(), half) || !strings.Contains(res.Short.Error(), "lists 150 frames") {
		t.Errorf("short clip report %v, want one at frame %d naming the file and the stated count", res.Short, res.Frames)
	}
}

// checkAgainstFFmpeg reads a damaged clip and checks that every frame
// capture decodes carries the number of the frame ffmpeg decodes with the
// same timestamp and the same pixels (an independent decoder), that bad
// frames are reported rather than renumbered, and returns the bad frames.
func checkAgainstFFmpeg(t *testing.T, clip string, mustMatchFrom int) []int {
	t.Helper()
	ff := ffmpegFrames(t, clip)
	byFrame := map[int]string{}
	for _, f := range ff {
		byFrame[f.Frame] = f.MD5
	}
	src, err := Open(clip, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	good, bad := readAll(t, src)
	for f, md := range good {
		want, ok := byFrame[f]
		if f >= mustMatchFrom && !ok {
			t.Errorf("capture decoded frame %d, ffmpeg has no frame with that timestamp", f)
		}
		if ok && (f < mustMatchFrom/2 || f >= mustMatchFrom) && md != want {
			t.Errorf("frame %d: md5 %s, ffmpeg's frame %d is %s (renumbered?)", f, md, f, want)
		}
	}
	for _, f := range bad {
		if _, ok := good[f]; ok {
			t.Errorf("frame %d both decoded and reported bad", f)
		}
	}
	return bad
}

func TestDamagedMiddleMJPEG(t *testing.T) {
	needFFmpeg(t)
	clip := mjpegAVI(t)
	data, err := os.ReadFile(clip)
	if err != nil {
		t.Fatal(err)
	}
	// Overwrite the JPEG header of the 30th frame chunk ("00dc" tag, size,
	// then the JPEG stream) with zeros: that frame cannot be decoded.
	off := -1
	for i, k := 0, 0; k < 30; k++ {
		j := bytes.Index(data[i:], []byte("00dc"))
		if j < 0 {
			t.Fatal("no 30th frame chunk")
		}
		off, i = i+j, i+j+4
	}
	bad := overwrite(t, clip, filepath.Join(t.TempDir(), "bad.avi"), off+8, 400, 0)
	badFrames := checkAgainstFFmpeg(t, bad, 0)
	seekIntoDamage(t, bad, badFrames)
	// The stream index says which chunk is which frame; the 30th chunk
	// after the header list is frame 29 (one "00dc" appears in the header).
	if len(badFrames) != 1 || (badFrames[0] != 28 && badFrames[0] != 29) {
		t.Errorf("bad frames %v, want the one damaged frame", badFrames)
	}
}

func TestDamagedMiddleH264(t *testing.T) {
	needFFmpeg(t)
	clip := sparseH264(t)
	st, err := os.Stat(clip)
	if err != nil {
		t.Fatal(err)
	}
	bad := overwrite(t, clip, filepath.Join(t.TempDir(), "bad.mp4"), int(st.Size())/3, 3000, 0xff)
	// Frames from the keyframe after the damage (frame 100) on decode
	// cleanly in both readers; before it, error concealment may differ.
	badFrames := checkAgainstFFmpeg(t, bad, 100)
	if len(badFrames) == 0 {
		t.Fatalf("no bad frames reported for a clip with 3000 bytes overwritten")
	}
	for _, f := range badFrames {
		if f < 1 || f >= 100 {
			t.Errorf("bad frame %d outside the damaged group of pictures", f)
		}
	}
	seekIntoDamage(t, bad, badFrames)
}

// seekIntoDamage seeks to bad frames (Read must report each by number) and
// to the good frames around them (Read must give what reading in order gave).
func seekIntoDamage(t *testing.T, clip string, badFrames []int) {
	t.Helper()
	src, err := Open(clip, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	good, bad := readAll(t, src)
	last := len(good) + len(bad) - 1
	m := gocv.NewMat()
	defer m.Close()
	targets := []int{}
	for _, b := range badFrames {
		targets = append(targets, b+1, b, b-1)
	}
	targets = append(targets, 0, badFrames[0], last, last-1, badFrames[len(badFrames)-1])
	for _, f := range targets {
		if err := src.Seek(f); err != nil {
			t.Fatalf("seek %d: %v", f, err)
		}
		got, err := src.Read(&m)
		var fe *FrameError
		if md, ok := good[f]; ok {
			if err != nil || got != f || matMD5(m) != md {
				t.Errorf("seek %d: read frame %d, %v; pixels as read in order: %v", f, got, err, matMD5(m) == md)
			}
		} else if got != f || !errors.As(err, &fe) || fe.Frame != f {
			t.Errorf("seek to bad frame %d: read frame %d, %v; want a FrameError for it", f, got, err)
		}
	}
}
