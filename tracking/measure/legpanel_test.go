package measure

import (
	"math"
	"testing"
)

// Hand-worked deflections of a 280 mm leg marked at its five braced levels
// (every 70 mm) and at mid-panel: nine points at eighths of its length.
func TestPanelBuckleHandWorked(t *testing.T) {
	heights := []float64{0, 35, 70, 105, 140, 175, 210, 245, 280}
	isLevel := []bool{true, false, true, false, true, false, true, false, true}
	sine := func(n float64, a float64) []float64 {
		d := make([]float64, len(heights))
		for i, h := range heights {
			d[i] = a * math.Sin(n*math.Pi*h/280)
		}
		return d
	}
	tests := []struct {
		name     string
		d        []float64
		local    bool    // one panel alone
		lo, hi   int     // the panel's points when local
		wantBow  float64 // legBow, mm
		wantHalf int     // half-sine fit over the leg when not local
	}{
		// Panel 2 bows 3 mm; the joints stay in line.
		{"one panel", []float64{0, 0, 0, 3, 0, 0, 0, 0, 0}, true, 2, 4, 3, 0},
		// The same with the tower's sway curving the chord line: joints at
		// -0.3, -0.4, -0.3 mm and every point between them on the curve;
		// the panel bow is still 3 mm (3 + mean of -0.3 and -0.4).
		{"one panel, swaying", []float64{0, -0.15, -0.3, 3 - 0.35, -0.4, -0.35, -0.3, -0.15, 0}, true, 2, 4, 3, 0},
		// One half-sine over the full height (K = 1): the joints move
		// with the leg; the bow is the amplitude at mid-height.
		{"full height", sine(1, 2), false, 0, 0, 2, 1},
		// Four half-waves, one per panel, alternating (a leg braced at every
		// level, K = 0.25): no panel stands out.
		{"every panel", sine(4, 1), false, 0, 0, 1, 4},
		// Two neighbouring panels bowing alike: not one panel alone.
		{"two panels", []float64{0, 0, 0, 3, 0, 2.5, 0, 0, 0}, false, 0, 0, 3, 0},
		// A joint moving nearly as much as the panel: not one panel alone.
		// The bow: the joint's 2 mm, or the mid point's 3 mm less the 1 mm
		// its panel's line moved there.
		{"joint moves too", []float64{0, 0, 0, 3, 2, 0, 0, 0, 0}, false, 0, 0, 2, 0},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			lb, ok := panelBows(tc.d, heights, isLevel)
			if !ok {
				t.Fatal("no panel bow found")
			}
			if got := lb.localized(0.7); got != tc.local {
				t.Errorf("localized %v, want %v (%+v)", got, tc.local, lb)
			}
			if tc.local && (lb.lo != tc.lo || lb.hi != tc.hi || math.Abs(math.Abs(lb.bow)-tc.wantBow) > 1e-12) {
				t.Errorf("panel %d-%d bow %g, want %d-%d bow %g", lb.lo, lb.hi, lb.bow, tc.lo, tc.hi, tc.wantBow)
			}
			if b := legBow(tc.d, heights, isLevel); math.Abs(b-tc.wantBow) > 1e-12 {
				t.Errorf("legBow %g mm, want %g", b, tc.wantBow)
			}
			if tc.wantHalf > 0 {
				tt := make([]float64, 7)
				for i := range tt {
					tt[i] = heights[i+1] / 280
				}
				if n, _ := HalfWaves(tt, tc.d[1:8], 4); n != tc.wantHalf {
					t.Errorf("%d half-waves, want %d", n, tc.wantHalf)
				}
			}
		})
	}
}

// The leg summary from Measure for a leg whose second panel bows alone
// while the tower sways: between braces, between A1 and A2, half-wave =
// the panel's length (K = 1 over the panel: Euler column pinned at both
// braces, AISC 360-22 Commentary Table C-A-7.1, pinned-pinned K = 1.0), and
// the leg member's bow is the panel's bow, not its offset from the leg's
// end-to-end chord that the sway curves.
func TestMeasureLegPanelBuckle(t *testing.T) {
	s := newScene(25)
	s.dist, s.focal = 0, 1/0.3 // orthographic: 0.3 mm per px
	s.midLeg = true
	s.frames = 41
	s.legBow = func(leg string, f int, h float64) float64 {
		if leg == "A" && h > 70 && h < 140 {
			return 0.075 * float64(f) // 3 mm at frame 40
		}
		return 0
	}
	s.sway = func(l, f int) [2]float64 {
		h := float64(l) / 4
		return [2]float64{0.05 * float64(f) * h * h, 0} // 2 mm at the top by frame 40
	}
	m, tr := s.build()
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
	leg.SummarizeAt(40)
	// The panel along the leg: 70 mm high, stepping in by 6.25 mm in x and
	// y (50 mm taper over 280 mm, both sides); the leg: 280 mm high, 25 mm
	// in x and y.
	panel := math.Sqrt(70*70 + 2*6.25*6.25)
	legLen := math.Sqrt(280*280 + 2*25*25)
	if leg.Shape != ShapeBetweenBraces || leg.Between != [2]string{"A1", "A2"} {
		t.Errorf("shape %s between %v, want between_braces between A1 and A2 (%s)", leg.Shape, leg.Between, leg.Note)
	}
	if hw := leg.HalfWaveMM[40]; math.Abs(hw-panel) > 1e-6 {
		t.Errorf("half-wave %g mm, want the panel's %g mm", hw, panel)
	}
	if math.Abs(leg.K-panel/legLen) > 1e-9 || leg.PanelK != 1 {
		t.Errorf("K %g of the leg and %g over the panel, want %g and 1", leg.K, leg.PanelK, panel/legLen)
	}
	if !contains(leg.Note, "P = pi^2 E I / (K L)^2") {
		t.Errorf("note lacks the Euler relation: %s", leg.Note)
	}
	// The bow: 3 mm sideways in the image plane, seen perpendicular to the
	// image of the leg, which leans by atan(25 (cos 25 + sin 25) / 280)
	// (as in TestMeasureLegShapes): 3 cos(lean).
	lean := math.Atan(25 * (math.Cos(25*math.Pi/180) + math.Sin(25*math.Pi/180)) / 280)
	want := 3 * math.Cos(lean)
	for _, mb := range res.Members {
		if mb.ID != "leg-A" {
			continue
		}
		if math.Abs(mb.BowMM[40]-want) > 0.01 {
			t.Errorf("leg-A bow %.4f mm at frame 40, want the panel's %.4f mm", mb.BowMM[40], want)
		}
		if math.Abs(mb.BowFrac[40]-mb.BowMM[40]/mb.LengthMM) > 1e-12 {
			t.Errorf("bow fraction %g for %g mm over %g mm", mb.BowFrac[40], mb.BowMM[40], mb.LengthMM)
		}
	}
}
