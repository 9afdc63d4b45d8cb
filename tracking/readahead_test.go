package tracking

import (
	"errors"
	"io"
	"path/filepath"
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/tracks"
)

// TestTrackSameAsSequential checks that Track, which decodes ahead on its own
// goroutine, gives exactly the samples of a plain read-then-step loop over
// the same clip, and hands OnFrame the same pixels (checked by their sum).
func TestTrackSameAsSequential(t *testing.T) {
	path := filepath.Join(t.TempDir(), "clip.avi")
	writeShiftClip(t, path, 40)
	m := &marks.File{ReferenceFrame: 3, Points: []marks.Point{
		{ID: "p", PX: [2]float64{60.5, 50.25}}, {ID: "q", PX: [2]float64{140, 100}}, {ID: "r", PX: [2]float64{100.25, 70}}}}
	cases := []struct {
		name string
		rng  Range
	}{
		{"from the reference frame to the end", Range{From: 3, To: -1}},
		{"inside the clip", Range{From: 7, To: 31}},
		{"from frame 0", Range{From: 0, To: 12}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			src, err := capture.Open(path, capture.Options{})
			if err != nil {
				t.Fatal(err)
			}
			defer src.Close()
			var sums []float64
			got, err := Track(src, m, DefaultOptions(), tc.rng, Hooks{OnFrame: func(_ int, img gocv.Mat, _ []tracks.Sample) error {
				sums = append(sums, img.Sum().Val1+img.Sum().Val2+img.Sum().Val3)
				return nil
			}})
			if err != nil {
				t.Fatal(err)
			}

			// The sequential reference: read the reference frame, then every frame of the range.
			img := gocv.NewMat()
			defer img.Close()
			if err := src.Seek(m.ReferenceFrame); err != nil {
				t.Fatal(err)
			}
			if _, err := src.Read(&img); err != nil {
				t.Fatal(err)
			}
			tr, err := New(m, img, DefaultOptions())
			if err != nil {
				t.Fatal(err)
			}
			defer tr.Close()
			if err := src.Seek(tc.rng.From); err != nil {
				t.Fatal(err)
			}
			row := 0
			for {
				f, err := src.Read(&img)
				if errors.Is(err, io.EOF) || (tc.rng.To >= 0 && f > tc.rng.To) {
					break
				}
				if err != nil {
					t.Fatal(err)
				}
				want, err := tr.Step(f, img)
				if err != nil {
					t.Fatal(err)
				}
				if row >= got.Len() || got.Frames[row] != f {
					t.Fatalf("row %d: Track has frames %v, sequential reading gives frame %d", row, got.Frames, f)
				}
				for j := range want {
					if got.Samples[row][j] != want[j] {
						t.Errorf("frame %d %s: Track %+v, sequential %+v", f, m.Points[j].ID, got.Samples[row][j], want[j])
					}
				}
				if s := img.Sum().Val1 + img.Sum().Val2 + img.Sum().Val3; sums[row] != s {
					t.Errorf("frame %d: OnFrame saw pixels summing to %g, the frame sums to %g", f, sums[row], s)
				}
				row++
			}
			if row != got.Len() {
				t.Errorf("Track gave %d rows, sequential reading %d", got.Len(), row)
			}
		})
	}
}
