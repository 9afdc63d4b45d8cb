package measure

import (
	"math"
	"math/rand"
	"testing"
)

// braceTwist is the top level's twist, degrees, of the synthesizer's
// tower whose brace (or leg) buckles first (capture/synth/model.go,
// levelMotion and transform): it grows as (row/break)^2 to top degrees at
// the break, and the panel that lost its member then turns a quarter of
// that more with a 5-row time constant.
func braceTwist(top float64, brk int) func(r int) float64 {
	tb := float64(brk) - 0.5
	return func(r int) float64 {
		t := float64(r)
		if t <= tb {
			return top * (t / tb) * (t / tb)
		}
		return top + 0.25*top*(1-math.Exp(-(t-tb)/5))
	}
}

// wholeTwist is the top level's twist, degrees, of the synthesizer's tower
// that twists as a whole (capture/synth/model.go, levelMotion): 15 % of top
// at a steady rate up to the onset row, then the rest as the square of the
// time since the onset, reaching top at the collapse.
func wholeTwist(top float64, onset, collapse int) func(r int) float64 {
	on, end := float64(onset), float64(collapse)
	return func(r int) float64 {
		t := math.Min(float64(r), end)
		if t < on {
			return top * 0.15 * t / on
		}
		u := (t - on) / (end - on)
		return top * (0.15 + 0.85*u*u)
	}
}

// A twist onset is reported only for a tower that twists, not for a braced
// tower that turns a degree or so, smoothly and ever faster, before its
// brace breaks: that curves away from the line fitted to the baseline rows
// (0.7 to 0.9 degree off it by the collapse, worked from the series), but
// never reaches TwistModeDeg. Noise is the measured twist's, about 0.01
// degree (the synthesizer's clips, failframe analyze). Rows are those of
// the synthesizer's demo clip (600 frames, break 380, collapse 392) and of
// a long clip (2100 frames, break 1900, collapse 1950).
func TestTwistOnsetNeedsATwist(t *testing.T) {
	for _, tc := range []struct {
		name   string
		n, end int
		tw     func(r int) float64
		lo, hi int // rows the onset must fall in; lo -1: no onset
	}{
		{name: "braced tower, 0.8 deg by the break", n: 600, end: 392, tw: braceTwist(0.8, 380), lo: -1},
		{name: "braced tower, long clip", n: 2100, end: 1950, tw: braceTwist(0.8, 1900), lo: -1},
		// 4 degrees at a steady rate is a twist, but it never leaves its
		// early trend, so nothing began.
		{name: "steady twist rate", n: 600, end: 600, tw: func(r int) float64 { return 0.0067 * float64(r) }, lo: -1},
		// Horizontal bracing: the same curve, 6 degrees by the break. It
		// leaves the line fitted to rows 0-119 by the change point's slack,
		// one sigma (here the curve's own scatter about that line, 0.045
		// deg), near row 108 (hand-worked: 6/379.5^2 (r^2 - 120 r + 2400)
		// = 0.045).
		{name: "horizontal bracing, 6 deg by the break", n: 600, end: 392, tw: braceTwist(6, 380), lo: 80, hi: 130},
		// Whole-tower twist from row 250: the synthesizer's runaway starts
		// at zero rate, so the twist falls below the extended early line
		// until row 264 (hand-worked) and only then leaves it upward; the
		// two-phase fit finds the bend itself, at row 250, to within the
		// noise (hingeRow: its scatter over seeds is about 10 rows).
		{name: "whole tower twists from row 250", n: 600, end: 392, tw: wholeTwist(6, 250, 392), lo: 235, hi: 270},
		// The slower runaway leaves the early line later (it last rises
		// through TwistRiseDeg near row 833, hand-worked: 2.55 x^2/200^2 -
		// 0.00056 x = 0.05 at x = 33); the bend is still at row 800.
		{name: "whole tower twists 3 deg from row 800", n: 1200, end: 1000, tw: wholeTwist(3, 800, 1000), lo: 788, hi: 815},
		// A steady twist read 6 % faster after the baseline rows (a camera
		// or scale slightly off): extended far, the early line falls behind
		// by 0.02 deg by row 250, which the CUSUM alone took for the onset
		// near row 130 (a 1280x720 scene of the synthesizer with shake);
		// the departure last rises through TwistRiseDeg near row 258
		// (hand-worked: 5.1 x^2/142^2 + 0.0002 (x + 130) = 0.05 at x = 8),
		// and the two-phase fit around it finds the bend at row 250.
		{name: "steady twist read a little fast, whole tower twists from row 250", n: 600, end: 392, tw: func(r int) float64 {
			t := 0.0035*float64(min(r, 120)) + 0.0037*float64(max(0, r-120))
			if r > 250 {
				u := float64(r-250) / 142
				t += 5.1 * u * u
			}
			return t
		}, lo: 240, hi: 265},
	} {
		t.Run(tc.name, func(t *testing.T) {
			for seed := int64(1); seed <= 5; seed++ {
				rng := rand.New(rand.NewSource(seed))
				tw := make([]float64, tc.n)
				for r := range tw {
					tw[r] = tc.tw(r) + 0.01*rng.NormFloat64()
				}
				got, det := twistOnset(tw, baselineRows(tc.n), tc.end)
				switch {
				case tc.lo < 0 && got >= 0:
					t.Errorf("seed %d: twist onset at row %d, want none (%s)", seed, got, det)
				case tc.lo >= 0 && (got < tc.lo || got > tc.hi):
					t.Errorf("seed %d: twist onset at row %d, want %d-%d (%s)", seed, got, tc.lo, tc.hi, det)
				}
			}
		})
	}
}
