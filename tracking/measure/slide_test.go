package measure

import (
	"math"
	"testing"
)

// A cord passing in front of a brace's middle marker can take its track
// along: the point runs along the brace, and a little off it, while the
// brace's ends hold still. The point must not read as a bow (the brace
// beginning to buckle) nor, once lost, as the brace breaking; the brace
// that really buckles later is the first member. A genuinely bowing brace,
// seen from any side, must not be taken for such a point. The rule is
// common practice (see SlideRatio); the drift speeds are hand-chosen, the
// cord in the 720p cord scene of the QA runs moved its point 0.5 px a frame.
func TestSlidingPointIsNotABow(t *testing.T) {
	const n = 300
	// The unit vector along BC-d1's chord in the image, from the scene itself.
	chordDir := func(s *scene) [2]float64 {
		m, _ := s.build()
		var a, b [2]float64
		for _, p := range m.Points {
			switch p.ID {
			case "B0":
				a = p.PX
			case "C1":
				b = p.PX
			}
		}
		l := math.Hypot(b[0]-a[0], b[1]-a[1])
		return [2]float64{(b[0] - a[0]) / l, (b[1] - a[1]) / l}
	}
	// (Not at azimuths 0 or 10: face BC is then seen (nearly) edge-on, its
	// braces get no full bow solve and the rule does not apply.)
	for _, az := range []float64{25, 20, 40, 55, -30} {
		s := newScene(az)
		s.frames = n
		s.noise = 0.05
		diagonalGoesWith(nil, nil, nil)(s)
		u := chordDir(s)
		// From frame 20 the track of BC-d1's middle runs along the chord
		// at 0.5 px a frame and off it at 0.03 px a frame (a cord crossing
		// the brace at a slant), until the tower goes.
		s.drift = func(id string, f int) [2]float64 {
			if id != "BC-d1-mid" || f < 20 {
				return [2]float64{}
			}
			k := float64(f - 20)
			return [2]float64{0.5*k*u[0] - 0.03*k*u[1], 0.5*k*u[1] + 0.03*k*u[0]}
		}
		m, tr := s.build()
		in := Input{Marks: m, Tracks: tr, CaptureFPS: 1000, Energy: energyFor(n, 206)}
		res, err := Measure(in)
		if err != nil {
			t.Fatal(err)
		}
		row, ok := res.Slid["BC-d1-mid"]
		if !ok || row < 18 || row > 40 {
			t.Errorf("azimuth %g: BC-d1-mid slid from row %d (found %v), want about 20", az, row, ok)
		}
		if id, bad := slidOtherThan(res, "BC-d1-mid"); bad {
			t.Errorf("azimuth %g: %s taken for a sliding point: %v", az, id, res.Slid)
		}
		d := Diagnose(res, in)
		if d.FirstMember != "AB-d2" || d.Mode != ModeBraceBuckling {
			t.Errorf("azimuth %g: first member %q mode %s, want AB-d2 brace_buckling", az, d.FirstMember, d.Mode)
		}
		for _, e := range d.Events {
			if e.Member == "BC-d1" && (e.Kind == EventOnset || e.Kind == EventBreak) {
				t.Errorf("azimuth %g: %s of BC-d1 at row %d: %s", az, e.Kind, e.Row, e.Detail)
			}
		}
	}
}

// slidOtherThan reports a point other than id found sliding.
func slidOtherThan(res *Result, id string) (string, bool) {
	for k := range res.Slid {
		if k != id {
			return k, true
		}
	}
	return "", false
}

// Braces that really bow, in their face, by up to 8 % of their length
// before the tower goes, at several azimuths: none is taken for a point
// that left its brace, and the buckling diagonal keeps its onset (the
// scene's bows are plain geometry: common practice).
func TestBowingBracesDoNotSlide(t *testing.T) {
	for _, az := range []float64{25, 0, 40, -30, 60} {
		s := newScene(az)
		s.frames = 300
		s.noise = 0.05
		s.bow = func(id string, f int) float64 {
			if f < 100 || f >= 206 {
				return 0
			}
			switch id {
			case "AB-d2", "BC-d1", "BC-d3":
				return 0.08 * float64(f-100) // up to 8.5 mm on about 107 mm
			}
			return 0
		}
		m, tr := s.build()
		res, err := Measure(Input{Marks: m, Tracks: tr, CaptureFPS: 1000})
		if err != nil {
			t.Fatal(err)
		}
		if len(res.Slid) > 0 {
			t.Errorf("azimuth %g: bowing braces taken for sliding points: %v (notes %q)", az, res.Slid, res.Notes)
		}
	}
}
