package e2e

import (
	"fmt"
	"testing"

	"github.com/failframe/failframe/capture/synth"
	"github.com/failframe/failframe/tracking/measure"
)

func TestDbgC(t *testing.T) {
	s := synth.Default()
	s.Bracing = synth.BracingDiagonal
	s.AzimuthDeg = -30
	r, _ := synth.NewRenderer(s)
	defer r.Close()
	tr, m := r.Truth(), r.Marks()
	tk := truthTracks(tr, m, 0.03, 1)
	res, _ := measure.Measure(measure.Input{Marks: m, Tracks: tk, CaptureFPS: tr.CaptureFPS})
	for f := 376; f < 394; f++ {
		fmt.Printf("%d ", f)
		for _, l := range []int{1, 2, 3} {
			fmt.Printf("L%d %.3f/%.3f ", l, res.Levels[l].TwistDeg[f], tr.Levels[l].TwistDeg[f])
		}
		fmt.Println()
	}
	fmt.Println(tr.BreakFrame, tr.CollapseFrame, tr.FirstMember)
}
