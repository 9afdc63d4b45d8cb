package synth

import (
	"testing"

	"gocv.io/x/gocv"
)

func BenchmarkFrameScratch(b *testing.B) {
	r, err := NewRenderer(Default())
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	m := gocv.NewMat()
	defer m.Close()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		r.Frame(100+i%200, &m)
	}
}
