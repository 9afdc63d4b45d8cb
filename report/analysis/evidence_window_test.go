package analysis

import (
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/report/evidence"
)

// TestKeepPolicyCoversTheEvidence checks the keeper's default policy against
// what the evidence asks for: a dense run long enough for the failure clip
// (with room before the sign), and a span covering the longest failure
// window with its padding, sparse frames close enough for the snapping.
func TestKeepPolicyCoversTheEvidence(t *testing.T) {
	p := evidence.DefaultKeep
	// The sign is usually the break; the collapse and the window's end
	// follow, so the clip must fit in the frames after the sign.
	if p.After+1 < maxClipFrames {
		t.Errorf("%d frames kept from the sign on, the clip is %d", p.After+1, maxClipFrames)
	}
	if pad := maxWindowFrames / 10; p.Span < maxWindowFrames+pad {
		t.Errorf("span %d frames, the window with its padding is %d", p.Span, maxWindowFrames+pad)
	}
	if p.Every > 8 {
		t.Errorf("sparse frames every %d: stills would be up to %d frames off their event", p.Every, p.Every/2)
	}
}

func TestKeptRun(t *testing.T) {
	k := evidence.NewKeeper(evidence.KeepPolicy{Before: 4, After: 30, Every: 10, Span: 200}, 16, 16)
	defer k.Close()
	img := gocv.NewMatWithSize(16, 16, gocv.MatTypeCV8UC3)
	defer img.Close()
	for f := 0; f <= 150; f++ {
		k.Add(f, img)
		if f == 100 {
			k.Sign(98)
		}
	}
	// Held: 0, 10, ..., 90 (sparse), 97..128 (the last 4 before the sign's
	// frame 100, then 30 after the sign).
	cases := []struct {
		from, to, a, b int
	}{
		{0, 150, 97, 128},    // the dense run
		{100, 110, 100, 110}, // inside it
		{0, 95, 90, 90},      // sparse only: single frames, the later wins
		{129, 150, 0, -1},    // nothing held
	}
	for _, c := range cases {
		a, b := keptRun(k, c.from, c.to)
		if a != c.a || b != c.b {
			t.Errorf("keptRun(%d, %d) = %d, %d; want %d, %d", c.from, c.to, a, b, c.a, c.b)
		}
	}
}
