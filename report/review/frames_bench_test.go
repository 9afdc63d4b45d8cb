package review

import (
	"math/rand"
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
)

// BenchmarkFrameStore measures serving JPEG frames in order (reading on)
// and in random order (seeking), with the cache too small to help.
func BenchmarkFrameStore(b *testing.B) {
	dir := b.TempDir()
	clip := makeClip(b, dir)
	for _, order := range []string{"sequential", "random"} {
		b.Run(order, func(b *testing.B) {
			src, err := capture.Open(clip, capture.Options{})
			if err != nil {
				b.Fatal(err)
			}
			fs := newFrameStore(src, 1) // no caching
			defer fs.Close()
			rng := rand.New(rand.NewSource(1))
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				n := i % clipFrames
				if order == "random" {
					n = rng.Intn(clipFrames)
				}
				if _, err := fs.Encoded(n, gocv.JPEGFileExt); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(fs.seeks)/float64(b.N), "seeks/frame")
		})
	}
}
