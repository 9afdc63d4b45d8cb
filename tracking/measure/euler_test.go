package measure

import (
	"math"
	"testing"
)

func relErr(got, want float64) float64 { return math.Abs(got-want) / math.Abs(want) }

// Pinned-pinned solid circular column, d = 0.5 m, L = 20 m, E = 200 GPa:
// I = 0.0030680 m^4 and P_cr = 1.51398e7 N (a public linear-column-buckling
// course, lessons 1-2; values in /work/shared/REFERENCES.md, verified by
// reproduction).
func TestEulerPinnedCircularColumn(t *testing.T) {
	I := SecondMomentCircle(0.5)
	if relErr(I, 0.0030680) > 1e-4 {
		t.Errorf("I = %.7f m^4, want 0.0030680", I)
	}
	K, _, _ := EndK(EndsPinnedPin)
	if P := Euler(200e9, I, K, 20); relErr(P, 1.51398e7) > 1e-5 {
		t.Errorf("P_cr = %.6g N, want 1.51398e7", P)
	}
}

// Fixed-free 25 x 25 mm square bar, L = 1 m, E = 210 GPa: P_cr = 16 867 N
// with K = 2 (NAFEMS benchmark citing Timoshenko & Gere, Theory of Elastic
// Stability; REFERENCES.md, verified by reproduction).
func TestEulerFixedFreeSquareBar(t *testing.T) {
	I := SecondMomentRect(0.025, 0.025)
	K, _, _ := EndK(EndsFixedFree)
	if K != 2 {
		t.Fatalf("fixed-free K = %g, want 2", K)
	}
	if P := Euler(210e9, I, K, 1); math.Abs(P-16867) > 1 {
		t.Errorf("P_cr = %.1f N, want 16 867", P)
	}
}

// AISC 360-22 Commentary Table C-A-7.1 effective length factors
// (theoretical / recommended design value).
func TestEndKAISCTable(t *testing.T) {
	tests := []struct {
		ends      string
		theo, rec float64
	}{
		{EndsFixedFixed, 0.5, 0.65},
		{EndsFixedPinned, 0.7, 0.80},
		{EndsFixedSway, 1.0, 1.2},
		{EndsPinnedPin, 1.0, 1.0},
		{EndsFixedFree, 2.0, 2.1},
		{EndsPinnedSway, 2.0, 2.0},
	}
	for _, tc := range tests {
		th, rec, ok := EndK(tc.ends)
		if !ok || th != tc.theo || rec != tc.rec {
			t.Errorf("%s: K = %g / %g (ok %v), want %g / %g", tc.ends, th, rec, ok, tc.theo, tc.rec)
		}
	}
	if _, _, ok := EndK("glued"); ok {
		t.Error("unknown end condition accepted")
	}
}

// Halving a column's unbraced length makes its Euler load four times larger
// (follows from P = pi^2 E I / (K L)^2; REFERENCES.md, common practice
// among model-tower builders).
func TestEulerHalfLengthFourTimes(t *testing.T) {
	// Balsa leg 3 x 3 mm, E = 3.40 GPa = 3400 N/mm^2 (Wood Handbook,
	// FPL-GTR-190, balsa; from memory of the table and edition).
	I := SecondMomentRect(3, 3)
	full := Euler(3400, I, 1, 280)
	half := Euler(3400, I, 1, 70)
	if r := half / full; math.Abs(r-16) > 1e-9 {
		t.Errorf("quarter length ratio %g, want 16", r)
	}
	if r := Euler(3400, I, 1, 140) / full; math.Abs(r-4) > 1e-9 {
		t.Errorf("half length ratio %g, want 4", r)
	}
	if r := LoadRatio(280, 140); r != 4 {
		t.Errorf("LoadRatio %g, want 4", r)
	}
	if !math.IsNaN(Euler(3400, I, 0, 280)) || !math.IsNaN(Euler(-1, I, 1, 280)) {
		t.Error("non-positive input gave a number")
	}
}

// Effective length factor from hand-worked deflected shapes of a leg of
// length L = 280 mm with interior points at the quarter points.
func TestHalfWavesHandWorked(t *testing.T) {
	tq := []float64{0.25, 0.5, 0.75}
	s45 := math.Sqrt2 / 2
	tests := []struct {
		name  string
		t, d  []float64
		wantN int
		wantK float64
	}{
		// One half-sine over the full height: d = A sin(pi t) = (0.707, 1, 0.707) A.
		{"half-sine, full height", tq, []float64{2 * s45, 2, 2 * s45}, 1, 1},
		// Two half-waves: d = A sin(2 pi t) = (1, 0, -1) A.
		{"two half-waves", tq, []float64{1.5, 0, -1.5}, 2, 0.5},
		// Three half-waves: sin(3 pi t) = (0.707, -1, 0.707).
		{"three half-waves", tq, []float64{s45, -1, s45}, 3, 1.0 / 3},
		// A half-sine with 5 % noise is still one half-wave.
		{"noisy half-sine", tq, []float64{2*s45 + 0.1, 2 - 0.08, 2*s45 - 0.05}, 1, 1},
		// Two half-waves over seven interior points (eighth points).
		{"two half-waves, 7 points", []float64{0.125, 0.25, 0.375, 0.5, 0.625, 0.75, 0.875},
			[]float64{math.Sin(math.Pi / 4), 1, math.Sin(3 * math.Pi / 4), 0, -math.Sin(math.Pi / 4), -1, -math.Sin(3 * math.Pi / 4)}, 2, 0.5},
	}
	for _, tc := range tests {
		n, amp := HalfWaves(tc.t, tc.d, 4)
		if n != tc.wantN {
			t.Errorf("%s: %d half-waves, want %d (amp %g)", tc.name, n, tc.wantN, amp)
			continue
		}
		if K := KFromHalfWave(280/float64(n), 280); math.Abs(K-tc.wantK) > 1e-12 {
			t.Errorf("%s: K = %g, want %g", tc.name, K, tc.wantK)
		}
	}
}

// The leg summary from Measure: a half-sine over the whole leg reads as
// full height with K = 1; two half-waves as between braces with K = 0.5.
func TestMeasureLegShapes(t *testing.T) {
	for _, tc := range []struct {
		name  string
		waves float64
		shape string
		k     float64
	}{
		{"full height", 1, ShapeFullHeight, 1},
		{"between braces", 2, ShapeBetweenBraces, 0.5},
	} {
		s := newScene(25)
		s.dist, s.focal = 0, 1/0.3
		s.midLeg = true // points at mid-panel too: eight half-panels
		s.frames = 20
		s.legBow = func(leg string, f int, h float64) float64 {
			if leg != "A" {
				return 0
			}
			return 0.3 * float64(f) * math.Sin(tc.waves*math.Pi*h/280)
		}
		m, tr := s.build()
		// Apply the bow to A's level points by hand (orthographic camera:
		// sideways offset in image = off / 0.3 px).
		for f := range tr.Samples {
			for j, id := range tr.IDs {
				if len(id) == 2 && id[0] == 'A' {
					lv := int(id[1] - '0')
					tr.Samples[f][j].X += s.legBow("A", f, s.levels[lv]) / 0.3
				}
			}
		}
		res, err := Measure(Input{Marks: m, Tracks: tr})
		if err != nil {
			t.Fatal(err)
		}
		var leg *Leg
		for i := range res.Legs {
			if res.Legs[i].Leg == "A" {
				leg = &res.Legs[i]
			}
		}
		if leg == nil {
			t.Fatal("leg A missing")
		}
		if len(leg.Points) != 9 {
			t.Fatalf("leg A has %d points %v, want 9", len(leg.Points), leg.Points)
		}
		if leg.Shape != tc.shape || math.Abs(leg.K-tc.k) > 1e-9 {
			t.Errorf("%s: shape %s K %g, want %s %g (%s)", tc.name, leg.Shape, leg.K, tc.shape, tc.k, leg.Note)
		}
		if !contains(leg.Note, "P = pi^2 E I / (K L)^2") {
			t.Errorf("note lacks the Euler relation: %s", leg.Note)
		}
		// Mid-height deflection at frame 19 for one half-wave: 0.3*19 = 5.7 mm
		// sideways; perpendicular to the image of the leg, which leans by
		// atan(33.2/280) (the taper of 25 mm in x and y seen along
		// r = (cos 25, sin 25)): 5.7 cos(lean). The leg is
		// sqrt(25^2 + 25^2 + 280^2) = 282.22 mm long.
		lean := math.Atan(25 * (math.Cos(25*math.Pi/180) + math.Sin(25*math.Pi/180)) / 280)
		legLen := math.Sqrt(25*25 + 25*25 + 280*280)
		// The deflection is the distance from the leg's chord: the 5.7 mm
		// sideways offset times the cosine of the leg's lean from vertical
		// in the view plane.
		want := 5.7 * math.Cos(lean)
		if tc.waves == 1 {
			if d := leg.DeflectionMM[19][4]; math.Abs(math.Abs(d)-want) > 1e-6 {
				t.Errorf("mid-height deflection %g mm, want %g", d, want)
			}
			if hw := leg.HalfWaveMM[19]; math.Abs(hw-legLen) > 1e-6 {
				t.Errorf("half-wave %g mm, want %g", hw, legLen)
			}
			if !math.IsNaN(leg.HalfWaveMM[0]) {
				t.Errorf("straight leg at frame 0 has a half-wave %g", leg.HalfWaveMM[0])
			}
		}
	}
}

func contains(s, sub string) bool {
	return len(sub) == 0 || (len(s) >= len(sub) && indexOf(s, sub) >= 0)
}

func indexOf(s, sub string) int {
	for i := 0; i+len(sub) <= len(s); i++ {
		if s[i:i+len(sub)] == sub {
			return i
		}
	}
	return -1
}
