package measure

import (
	"math"
	"testing"
)

// stepSeries is n rows of 0 that step to size from row at on.
func stepSeries(n, at int, size float64) []float64 {
	x := make([]float64, n)
	for i := range x {
		if i >= at {
			x[i] = size
		}
		x[i] += 0.02 * math.Sin(float64(i)*1.3) // a little noise, percent
	}
	return x
}

// A chord step counts as a break only when the chord stepped in the image
// too: a step made by dividing out the levels' motions (the fit of a level
// shifting when one of its points is lost) is not the member (common
// practice: a member that lets go moves the joints it held apart or
// together, which the image shows).
func TestChordStepNeedsTheImage(t *testing.T) {
	const n = 300
	for _, tc := range []struct {
		name  string
		raw   []float64
		refPx float64 // the chord's image length; 0 = unknown
		brk   bool
		where int
	}{
		{"image chord stepped too", stepSeries(n, 200, -1.5), 0, true, 200},
		{"only the level correction stepped", stepSeries(n, 200, 0), 0, false, -1},
		{"image stepped the other way", stepSeries(n, 200, 1.5), 0, false, -1},
		// 1.5 % of 200 px is 3 px: a joint letting go.
		{"long in the image", stepSeries(n, 200, -1.5), 200, true, 200},
		// 1.5 % of 10 px is 0.15 px: a brace seen end-on, whose joint's
		// track moved by what compression can move it (ChordStepMinPx).
		{"end-on in the image", stepSeries(n, 200, -1.5), 10, false, -1},
		// 1.5 % of 20 px is 0.3 px: as much as a brace snapping moved the
		// synthesizer's chord.
		{"short in the image", stepSeries(n, 200, -1.5), 20, true, 200},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := &Member{ID: "BC-h2", Kind: "brace", Levels: [2]int{2, 2}, LengthMM: 80,
				StrainPct: stepSeries(n, 200, -1.5), BowMM: make([]float64, n), rawStrain: tc.raw, refPx: tc.refPx}
			r, det := memberBreak(m, Input{}, baselineRows(n), -1, n, n)
			switch {
			case tc.brk && (r < tc.where-1 || r > tc.where+2):
				t.Errorf("break at row %d (%s), want near %d", r, det, tc.where)
			case !tc.brk && r >= 0:
				t.Errorf("break at row %d (%s), want none", r, det)
			}
		})
	}
}

// The loading block is measured but is never the first member to go: its
// chord stepping (a marker on it dragged by a cord) is no break of the
// tower.
func TestBlockIsNoMember(t *testing.T) {
	const n = 300
	res := &Result{Frames: make([]int, n), Members: []Member{
		{ID: "block", Kind: "block", Levels: [2]int{-1, -1}, LengthMM: 60,
			StrainPct: stepSeries(n, 150, -1.5), BowMM: make([]float64, n), rawStrain: stepSeries(n, 150, -1.5)},
	}}
	for i := range res.Frames {
		res.Frames[i] = i
	}
	d := Diagnose(res, Input{CaptureFPS: 1000})
	if d.FirstMember != "" {
		t.Errorf("first member %q, want none (%s)", d.FirstMember, d.Account)
	}
	if e := findEvent(d, EventBreak, "block"); e != nil {
		t.Errorf("the loading block reported broken: %+v", *e)
	}
}
