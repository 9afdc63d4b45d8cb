package synth

import (
	"testing"

	"gocv.io/x/gocv"
)

// BenchmarkFrame renders frames of the demo scenario (640x480) before the
// break; the demo's 600 frames take about 600 times this.
func BenchmarkFrame(b *testing.B) {
	r, err := NewRenderer(Default())
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	m := gocv.NewMat()
	defer m.Close()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if err := r.Frame(100+i%200, &m); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkFrameCollapse renders collapse frames, which average several
// instants for motion blur.
func BenchmarkFrameCollapse(b *testing.B) {
	s := Default()
	r, err := NewRenderer(s)
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	m := gocv.NewMat()
	defer m.Close()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if err := r.Frame(s.CollapseFrame+5+i%30, &m); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkNewRenderer builds the demo renderer: background and the truth of all frames.
func BenchmarkNewRenderer(b *testing.B) {
	for i := 0; i < b.N; i++ {
		r, err := NewRenderer(Default())
		if err != nil {
			b.Fatal(err)
		}
		r.Close()
	}
}
