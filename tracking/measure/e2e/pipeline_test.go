package e2e

import (
	"io"
	"testing"
	"time"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/capture/synth"
	"github.com/failframe/failframe/tracking"
	"github.com/failframe/failframe/tracking/measure"
	"github.com/failframe/failframe/tracking/motion"
	"github.com/failframe/failframe/tracking/tracks"
)

// renderSource serves a synthesizer's frames as a capture.Source, rendering
// each on demand (nothing is written to disk).
type renderSource struct {
	r    *synth.Renderer
	next int
}

func (s *renderSource) Info() capture.Info {
	sc := s.r.Scenario()
	return capture.Info{Path: "synth", Width: sc.Width, Height: sc.Height, Codec: "none", ContainerFPS: sc.ContainerFPS, FrameCount: s.r.NumFrames()}
}

func (s *renderSource) Read(dst *gocv.Mat) (int, error) {
	if s.next >= s.r.NumFrames() {
		return s.next, io.EOF
	}
	i := s.next
	s.next++
	return i, s.r.Frame(i, dst)
}

func (s *renderSource) Seek(frame int) error { s.next = frame; return nil }
func (s *renderSource) Close() error         { return nil }

// A shorter, smaller clip than the demo so the whole chain runs in seconds
// per bracing pattern: 480 x 360 frames, 260 frames, onset at 120, break at
// 185, collapse at 195.
func smallScenario(bracing, fail string) synth.Scenario {
	s := synth.Default()
	s.Bracing, s.Fail = bracing, fail
	s.Width, s.Height, s.FocalPX = 480, 360, 555
	s.Frames, s.OnsetFrame, s.BreakFrame, s.CollapseFrame = 260, 120, 185, 195
	return s
}

// The whole chain on rendered clips (sensor noise, flicker, lens blur):
// synthesizer -> tracking.Track (with motion energy from the same decoded
// frames) -> Measure -> Diagnose, for each bracing pattern and a
// whole-tower twist, checked against the synthesizer's truth.
func TestPipelineOnRenderedClips(t *testing.T) {
	for _, tc := range []struct {
		bracing, fail string
		onsetTol      int
	}{
		{synth.BracingHorizontal, "", tolOnset},
		{synth.BracingDiagonal, "", tolOnset},
		{synth.BracingZ, "", tolOnset},
		// Crossed bracing: the bowing diagonal's quarter points move over a
		// still background; measured onset 124 against 120 since the tracker
		// learns that background and the onset is read from a fitted line.
		{synth.BracingX, "", tolOnset},
		{synth.BracingZ, synth.FailTwist, tolOnset},
		// Leg B buckles in panel 2 (between levels 1 and 2) only; the legs
		// are marked at mid-panel (the synthesizer's default).
		{synth.BracingZ, "leg-B:2", tolOnset},
	} {
		name := tc.bracing
		if tc.fail != "" {
			name += "/" + tc.fail
		}
		t.Run(name, func(t *testing.T) {
			start := time.Now()
			s := smallScenario(tc.bracing, tc.fail)
			r, err := synth.NewRenderer(s)
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			m := r.Marks()
			meter := motion.NewMeter()
			defer meter.Close()
			var energy []float64
			to := s.CollapseFrame + 30
			tk, err := tracking.Track(&renderSource{r: r}, m, tracking.DefaultOptions(), tracking.Range{From: 0, To: to},
				tracking.Hooks{OnFrame: func(frame int, img gocv.Mat, _ []tracks.Sample) error {
					energy = append(energy, meter.Add(img))
					return nil
				}})
			if err != nil {
				t.Fatal(err)
			}
			in := measure.Input{Marks: m, Tracks: tk, CaptureFPS: s.CaptureFPS, Energy: energy}
			res, err := measure.Measure(in)
			if err != nil {
				t.Fatal(err)
			}
			for _, n := range res.Notes {
				t.Log("note:", n)
			}
			d := measure.Diagnose(res, in)
			checkAgainstTruth(t, r.Truth(), res, d, tc.onsetTol)
			t.Logf("%d frames in %v", len(tk.Frames), time.Since(start).Round(time.Millisecond))
		})
	}
}
