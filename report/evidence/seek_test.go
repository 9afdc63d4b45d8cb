package evidence

import (
	"path/filepath"
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/capture/synth"
)

// seekLog wraps a source and records how far ahead of the read position
// each Seek jumps.
type seekLog struct {
	capture.Source
	next  int
	jumps []int
}

func (s *seekLog) Read(dst *gocv.Mat) (int, error) {
	f, err := s.Source.Read(dst)
	s.next = f + 1
	return f, err
}

func (s *seekLog) Seek(frame int) error {
	s.jumps = append(s.jumps, frame-s.next)
	s.next = frame
	return s.Source.Seek(frame)
}

// TestRenderDecodesThroughSheetGaps checks that contact-sheet frames ~55
// frames apart are reached by short forward steps (which the source decodes
// through without converting), not by long seeks, each of which would decode
// again from the keyframe before the target (common practice for
// inter-frame codecs such as H.264: a frame decodes only from its preceding
// keyframe on). The frames drawn must be the same either way.
func TestRenderDecodesThroughSheetGaps(t *testing.T) {
	dir := t.TempDir()
	sc := smallScene()
	if _, err := synth.Write(sc, dir, nil); err != nil {
		t.Fatal(err)
	}
	src, err := capture.Open(filepath.Join(dir, "tower.avi"), capture.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	log := &seekLog{Source: src}
	req := Request{Sheet: []int{2, 57, 89}, ClipTo: -1}
	out, err := Render(log, &Overlay{}, req, filepath.Join(dir, "evidence"))
	if err != nil {
		t.Fatal(err)
	}
	if len(out) != 1 {
		t.Fatalf("wrote %v, want the sheet only", out)
	}
	for i, j := range log.jumps {
		if i > 0 && (j < 0 || j > grabStep) {
			t.Errorf("seek %d jumps %d frames ahead (all jumps %v); want steps of at most %d", i, j, log.jumps, grabStep)
		}
	}
	if len(log.jumps) < 3 {
		t.Errorf("seeks %v: want the first one and steps to frames 57 and 89", log.jumps)
	}
}
