package tracking

import (
	"fmt"
	"image"
	"io"
	"math/rand/v2"
	"path/filepath"
	"syscall"
	"testing"
	"time"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/tracking/marks"
)

// writeBenchClip writes a 1280x720 MJPG clip of a textured scene drifting
// slowly, with 40 marks spread over it.
func writeBenchClip(tb testing.TB, path string, frames int) *marks.File {
	tb.Helper()
	const w, h = 1280, 720
	rng := rand.New(rand.NewPCG(3, 4))
	base := gocv.NewMatWithSize(h+40, w+40, gocv.MatTypeCV8UC3)
	defer base.Close()
	pix, _ := base.DataPtrUint8()
	for i := range pix {
		pix[i] = uint8(rng.IntN(256))
	}
	gocv.GaussianBlur(base, &base, image.Pt(0, 0), 1.5, 1.5, gocv.BorderReflect101)
	vw, err := gocv.VideoWriterFile(path, "MJPG", 30, w, h, true)
	if err != nil {
		tb.Fatal(err)
	}
	defer vw.Close()
	mtx := gocv.NewMatWithSize(2, 3, gocv.MatTypeCV64F)
	defer mtx.Close()
	frame := gocv.NewMat()
	defer frame.Close()
	for i := 0; i < frames; i++ {
		mtx.SetDoubleAt(0, 0, 1)
		mtx.SetDoubleAt(1, 1, 1)
		mtx.SetDoubleAt(0, 2, -20+0.05*float64(i))
		mtx.SetDoubleAt(1, 2, -20+0.02*float64(i))
		gocv.WarpAffine(base, &frame, mtx, image.Pt(w, h))
		if err := vw.Write(frame); err != nil {
			tb.Fatal(err)
		}
	}
	m := &marks.File{}
	for j := 0; j < 5; j++ {
		for i := 0; i < 8; i++ {
			m.Points = append(m.Points, marks.Point{
				ID: fmt.Sprintf("p%d", len(m.Points)),
				PX: [2]float64{100 + float64(i)*150 + 0.3, 100 + float64(j)*130 + 0.6},
			})
		}
	}
	return m
}

// BenchmarkTrackOverhead compares reading a 1280x720 clip with reading it and
// tracking 40 points, and reports the ratio (target: at most 1.25, i.e.
// tracking adds at most 25 % to reading).
func BenchmarkTrackOverhead(b *testing.B) {
	const frames = 150
	path := filepath.Join(b.TempDir(), "bench.avi")
	m := writeBenchClip(b, path, frames)
	readOnly := func() (time.Duration, time.Duration) {
		src, err := capture.Open(path, capture.Options{})
		if err != nil {
			b.Fatal(err)
		}
		defer src.Close()
		img := gocv.NewMat()
		defer img.Close()
		start, cpu := time.Now(), cpuTime()
		for {
			if _, err := src.Read(&img); err == io.EOF {
				break
			} else if err != nil {
				b.Fatal(err)
			}
		}
		return time.Since(start), cpuTime() - cpu
	}
	withTrack := func() (time.Duration, time.Duration) {
		src, err := capture.Open(path, capture.Options{})
		if err != nil {
			b.Fatal(err)
		}
		defer src.Close()
		start, cpu := time.Now(), cpuTime()
		tr, err := Track(src, m, DefaultOptions(), Range{From: 0, To: -1}, Hooks{})
		if err != nil {
			b.Fatal(err)
		}
		d, c := time.Since(start), cpuTime()-cpu
		for i := range tr.Samples {
			for j, s := range tr.Samples[i] {
				if s.Lost {
					b.Fatalf("frame %d: point %s lost", tr.Frames[i], tr.IDs[j])
				}
			}
		}
		return d, c
	}
	var tRead, tTrack, cRead, cTrack time.Duration
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		d, c := readOnly()
		tRead, cRead = tRead+d, cRead+c
		d, c = withTrack()
		tTrack, cTrack = tTrack+d, cTrack+c
	}
	// CPU time is the fairer figure on a shared machine; wall time is
	// printed too.
	ratio := float64(cTrack) / float64(cRead)
	b.ReportMetric(ratio, "track/read-cpu")
	b.ReportMetric(float64(tTrack)/float64(tRead), "track/read-wall")
	per := func(d time.Duration) float64 { return float64(d.Microseconds()) / 1000 / float64(b.N*frames) }
	fmt.Printf("BenchmarkTrackOverhead: 40 points, 1280x720 MJPG: CPU read %.2f ms/frame, read+track %.2f ms/frame, ratio %.3f (target <= 1.25); wall %.2f vs %.2f ms/frame, ratio %.3f\n",
		per(cRead), per(cTrack), ratio, per(tRead), per(tTrack), float64(tTrack)/float64(tRead))
}

// cpuTime is the process's user and system CPU time so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
