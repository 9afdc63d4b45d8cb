package capture_test

import (
	"errors"
	"io"
	"path/filepath"
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/capture/synth"
)

// TestSynthClips reads the clips the synthesizer writes (MJPG AVI through
// gocv, H.264 MP4 through the ffmpeg command line), stored at 30 fps for a
// 960 fps capture, and checks counts, rates, every frame's pixels and exact
// seeking against ffmpeg's decode of the same files.
func TestSynthClips(t *testing.T) {
	capture.NeedFFmpeg(t)
	s := synth.Default()
	s.Frames, s.OnsetFrame, s.BreakFrame, s.CollapseFrame = 48, 15, 30, 40
	dir := t.TempDir()
	truth, err := synth.Write(s, dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{synth.ClipAVI, synth.ClipMP4} {
		t.Run(name, func(t *testing.T) {
			clip := filepath.Join(dir, name)
			src, err := capture.Open(clip, capture.Options{})
			if err != nil {
				t.Fatal(err)
			}
			defer src.Close()
			info := src.Info()
			ff := capture.FFmpegFrames(t, clip)
			if n := capture.FFprobeCount(t, clip); info.FrameCount != n || n != s.Frames || len(ff) != n {
				t.Fatalf("frame count %d, ffprobe %d, framemd5 %d, scenario %d", info.FrameCount, n, len(ff), s.Frames)
			}
			if r := capture.ParseRatioFor(t, capture.FFprobeValue(t, clip, "r_frame_rate")); info.ContainerFPS != r || r != s.ContainerFPS {
				t.Errorf("container rate %g, ffprobe %g, scenario %g", info.ContainerFPS, r, s.ContainerFPS)
			}
			if info.Width != truth.Width || info.Height != truth.Height {
				t.Errorf("size %dx%d, truth %dx%d", info.Width, info.Height, truth.Width, truth.Height)
			}
			// The capture rate from the marks file wins over the container's.
			tb, warn, err := capture.ChooseRate(0, truth.CaptureFPS, info.ContainerFPS)
			if err != nil || warn != "" || tb.CaptureFPS != 960 || tb.Time(48) != 0.05 {
				t.Errorf("timebase %+v %q %v", tb, warn, err)
			}
			m := gocv.NewMat()
			defer m.Close()
			for i := 0; ; i++ {
				f, err := src.Read(&m)
				if errors.Is(err, io.EOF) {
					if i != s.Frames {
						t.Errorf("EOF after %d frames", i)
					}
					break
				}
				if err != nil || f != i {
					t.Fatalf("read %d: frame %d, %v", i, f, err)
				}
				if md := capture.MatMD5(m); md != ff[i].MD5 {
					t.Errorf("frame %d: md5 %s, ffmpeg %s", i, md, ff[i].MD5)
				}
			}
			for _, f := range []int{40, 5, 39, 47, 0, 23} {
				if err := src.Seek(f); err != nil {
					t.Fatal(err)
				}
				if got, err := src.Read(&m); err != nil || got != f || capture.MatMD5(m) != ff[f].MD5 {
					t.Errorf("seek %d: read %d, %v, md5 match %v", f, got, err, capture.MatMD5(m) == ff[f].MD5)
				}
			}
		})
	}
}
