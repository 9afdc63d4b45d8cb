package tracking

import (
	"math"
	"strings"
	"testing"

	"github.com/failframe/failframe/tracking/marks"
)

// A marked point whose reference patch is one straight edge (its marker
// hidden behind a dark cord) draws a warning naming it; a dot marker on a
// member, and the member's crossing with another, do not (common practice:
// a patch whose structure matrix has one small eigenvalue is the aperture
// problem, which no tracker can resolve along the edge).
func TestEdgeLikeReferenceWarns(t *testing.T) {
	still := func(int) pose { return pose{} }
	member := shape{x: 80, y: 60, len: 70, wid: 2.5, ang: 0.6, sigma: 0.6, amp: 70}
	dot := shape{x: 80, y: 60, sigma: 1.6, amp: -60}
	cord := shape{x: 80, y: 60, len: 80, wid: 5, ang: math.Pi / 2, sigma: 0.8, amp: -75}
	for _, tc := range []struct {
		name   string
		shapes []shape
		warn   bool
	}{
		{"dot on a member", []shape{member, dot}, false},
		{"two members crossing", []shape{member, {x: 80, y: 60, len: 70, wid: 2.5, ang: -0.6, sigma: 0.6, amp: 70}}, false},
		{"dot behind a cord", []shape{member, dot, cord}, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			sc := &scene{w: 160, h: 120, bg: 90, bodies: []body{{shapes: tc.shapes, move: still}}, noise: 1, seed: 5}
			m := &marks.File{Points: []marks.Point{{ID: "AB-d1-mid", PX: [2]float64{80, 60}, Line: 12}}}
			tr, _ := sc.start(t, m, DefaultOptions())
			w := tr.Warnings()
			switch {
			case tc.warn && (len(w) != 1 || !strings.Contains(w[0], "AB-d1-mid (marks line 12)") || !strings.Contains(w[0], "straight edge")):
				t.Errorf("warnings %q, want one naming AB-d1-mid and its line", w)
			case !tc.warn && len(w) != 0:
				t.Errorf("warnings %q, want none", w)
			}
		})
	}
}
