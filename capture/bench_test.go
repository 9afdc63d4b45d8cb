package capture

import (
	"errors"
	"io"
	"os/exec"
	"syscall"
	"testing"
	"time"

	"gocv.io/x/gocv"
)

// ffmpegDecode runs the ffmpeg command line decoding clip to the null
// muxer and returns the wall time and the CPU time (user + system) it took.
// extra adds output options, e.g. a pixel format.
func ffmpegDecode(b *testing.B, clip string, extra ...string) (wall, cpu time.Duration) {
	b.Helper()
	args := append([]string{"-v", "error", "-i", clip}, extra...)
	args = append(args, "-f", "null", "-")
	cmd := exec.Command("ffmpeg", args...)
	start := time.Now()
	if out, err := cmd.CombinedOutput(); err != nil {
		b.Fatalf("ffmpeg: %v\n%s", err, out)
	}
	return time.Since(start), cmd.ProcessState.UserTime() + cmd.ProcessState.SystemTime()
}

// processCPU is the CPU time (user + system) this process has used.
func processCPU() time.Duration {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// BenchmarkRead720p reads a 300-frame 1280x720 H.264 clip start to end
// (open, decode, convert to BGR) and reports frames per second next to the
// ffmpeg command line's own decode of the same clip (ffmpeg -i clip -f null
// -), and their ratio. ffmpeg_bgr_frames/s is ffmpeg decoding and
// converting to packed BGR as capture does. Each iteration times capture
// and both ffmpeg runs back to back, so that a machine shared with other
// work slows all three alike. cpu_ratio compares CPU time per frame
// (ffmpeg's over capture's), which other work on the machine disturbs less
// than wall time.
func BenchmarkRead720p(b *testing.B) {
	clip := sharedClip(b, "bench720.mp4", "testsrc2=size=1280x720:rate=30", 300,
		"-c:v", "libx264", "-pix_fmt", "yuv420p", "-preset", "veryfast", "-g", "60")
	n := ffprobeCount(b, clip)
	m := gocv.NewMat()
	defer m.Close()
	var ours, ff, ffBGR, oursCPU, ffCPU time.Duration
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		start, startCPU := time.Now(), processCPU()
		src, err := Open(clip, Options{})
		if err != nil {
			b.Fatal(err)
		}
		frames := 0
		for {
			_, err := src.Read(&m)
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
			frames++
		}
		src.Close()
		ours += time.Since(start)
		oursCPU += processCPU() - startCPU
		if frames != n {
			b.Fatalf("read %d frames, ffprobe counts %d", frames, n)
		}
		b.StopTimer()
		w, c := ffmpegDecode(b, clip)
		ff += w
		ffCPU += c
		w, _ = ffmpegDecode(b, clip, "-pix_fmt", "bgr24")
		ffBGR += w
		b.StartTimer()
	}
	b.StopTimer()
	total := float64(n * b.N)
	fps, ffFPS, ffBGRFPS := total/ours.Seconds(), total/ff.Seconds(), total/ffBGR.Seconds()
	b.ReportMetric(fps, "frames/s")
	b.ReportMetric(ffFPS, "ffmpeg_frames/s")
	b.ReportMetric(ffBGRFPS, "ffmpeg_bgr_frames/s")
	b.ReportMetric(fps/ffFPS, "ratio")
	b.ReportMetric(ffCPU.Seconds()/oursCPU.Seconds(), "cpu_ratio")
	b.Logf("capture %.0f frames/s, ffmpeg -f null %.0f frames/s (with BGR conversion %.0f): ratio %.2f (%.2f against BGR); CPU ms per frame: capture %.2f, ffmpeg %.2f",
		fps, ffFPS, ffBGRFPS, fps/ffFPS, fps/ffBGRFPS, 1000*oursCPU.Seconds()/total, 1000*ffCPU.Seconds()/total)
}

// BenchmarkSeek720p seeks to scattered frames of the same clip and reads
// each (exact seeking: land before, decode forward).
func BenchmarkSeek720p(b *testing.B) {
	clip := sharedClip(b, "bench720.mp4", "testsrc2=size=1280x720:rate=30", 300,
		"-c:v", "libx264", "-pix_fmt", "yuv420p", "-preset", "veryfast", "-g", "60")
	src, err := Open(clip, Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer src.Close()
	m := gocv.NewMat()
	defer m.Close()
	targets := []int{250, 17, 140, 299, 61, 62, 200, 5}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		f := targets[i%len(targets)]
		if err := src.Seek(f); err != nil {
			b.Fatal(err)
		}
		if got, err := src.Read(&m); err != nil || got != f {
			b.Fatalf("seek %d: read %d, %v", f, got, err)
		}
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "seeks/s")
}
