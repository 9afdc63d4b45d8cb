package measure

import (
	"math"
	"strings"
	"testing"
)

// Hand-worked case: camera square to face A-B (azimuth 0), so r = (1, 0),
// c = (0, -1). p1 = (50, 0) has q = 50, e = 0; p2 = (0, -50) has q = 0,
// e = 50. Turned 30 degrees counter-clockwise: R p1 = (43.301, 25.000) and
// R p2 = (25.000, -43.301), so the observed sideways positions are
// u = (43.301, 25.000). Add a sway of 2 mm: u = (45.301, 27.000).
func TestFitTwistHandWorked(t *testing.T) {
	c30 := math.Cos(math.Pi / 6) // 0.866025
	tests := []struct {
		name      string
		q, e, u   []float64
		wantDeg   float64
		wantSway  float64
		tolDeg    float64
		tolSwayMM float64
	}{
		{"two points, 30 deg exactly", []float64{50, 0}, []float64{0, 50}, []float64{50 * c30, 25}, 30, 0, 1e-9, 1e-9},
		{"two points, 30 deg and 2 mm sway", []float64{50, 0}, []float64{0, 50}, []float64{50*c30 + 2, 27}, 30, 2, 1e-9, 1e-9},
		// Three corners of a 100 mm square seen from azimuth 0 (r = (1,0),
		// c = (0,-1)): A(-50,-50): q=-50, e=50; B(50,-50): q=50, e=50;
		// C(50,50): q=50, e=-50. Turned -5 deg: cos=0.996195, sin=-0.087156;
		// u = cos*q + sin*e + sway(1.5).
		{"three points, -5 deg", []float64{-50, 50, 50}, []float64{50, 50, -50},
			[]float64{0.996195*-50 - 0.087156*50 + 1.5, 0.996195*50 - 0.087156*50 + 1.5, 0.996195*50 + 0.087156*50 + 1.5}, -5, 1.5, 1e-4, 1e-4},
		// Large twist, where the small-angle form would be 5 % off.
		{"three points, 40 deg", []float64{-50, 50, 50}, []float64{50, 50, -50},
			[]float64{math.Cos(0.698132)*-50 + math.Sin(0.698132)*50, math.Cos(0.698132)*50 + math.Sin(0.698132)*50, math.Cos(0.698132)*50 - math.Sin(0.698132)*50}, 40, 0, 1e-4, 1e-6},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			th, sway, ok := FitTwist(tc.q, tc.e, tc.u)
			if !ok {
				t.Fatal("no fit")
			}
			if got := th * 180 / math.Pi; math.Abs(got-tc.wantDeg) > tc.tolDeg {
				t.Errorf("twist %.6f deg, want %.6f", got, tc.wantDeg)
			}
			if math.Abs(sway-tc.wantSway) > tc.tolSwayMM {
				t.Errorf("sway %.6f mm, want %.6f", sway, tc.wantSway)
			}
		})
	}
}

func TestFitTwistNeedsDepth(t *testing.T) {
	// Two points at the same depth: no twist can be seen.
	if _, _, ok := FitTwist([]float64{-50, 50}, []float64{50, 50}, []float64{-49, 51}); ok {
		t.Error("fit accepted points with no depth spread")
	}
	if _, _, ok := FitTwist([]float64{1}, []float64{1}, []float64{1}); ok {
		t.Error("fit accepted one point")
	}
}

// Observability across camera azimuths for points on face A-B only.
func TestTwistObservableByAzimuth(t *testing.T) {
	tests := []struct {
		az   float64
		legs []string
		want bool
	}{
		{0, []string{"A", "B"}, false}, // face-on: both legs at one depth
		{5, []string{"A", "B"}, false}, // spread w sin 5 = 0.09 w < 0.15 w
		{10, []string{"A", "B"}, true}, // 0.17 w
		{25, []string{"A", "B"}, true},
		{25, []string{"A", "B", "C"}, true},
		{-30, []string{"A", "B", "D"}, true},
		{90, []string{"B", "C"}, false}, // face B-C square on
	}
	for _, tc := range tests {
		s := newScene(tc.az)
		s.legs = tc.legs
		s.frames = 3
		s.twist = func(l, f int) float64 { return float64(f) * 0.5 * float64(l) / 4 }
		m, tr := s.build()
		res, err := Measure(Input{Marks: m, Tracks: tr, CaptureFPS: 1000})
		if err != nil {
			t.Fatalf("az %g: %v", tc.az, err)
		}
		for _, lv := range res.Levels {
			if lv.Observable != tc.want {
				t.Errorf("az %g legs %v level %d: observable %v, want %v (%s)", tc.az, tc.legs, lv.Level, lv.Observable, tc.want, lv.Note)
			}
			if !tc.want {
				if !strings.Contains(lv.Note, "not observable") || !strings.Contains(lv.Note, "15-35 degrees") {
					t.Errorf("az %g: note %q does not explain and suggest an azimuth", tc.az, lv.Note)
				}
				for _, v := range lv.TwistDeg {
					if !math.IsNaN(v) {
						t.Errorf("az %g: unobservable twist given as a number %g", tc.az, v)
						break
					}
				}
			}
		}
	}
}

func TestTooFewPointsPerLevel(t *testing.T) {
	s := newScene(25)
	s.frames = 2
	m, tr := s.build()
	// Keep only A at level 3: drop B3 and C3 from the plan (no leg, no level).
	for i := range m.Points {
		if m.Points[i].ID == "B3" || m.Points[i].ID == "C3" {
			m.Points[i].Level = nil
			m.Points[i].Leg = ""
		}
	}
	res, err := Measure(Input{Marks: m, Tracks: tr})
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, lv := range res.Levels {
		if lv.Level == 3 {
			found = true
			if lv.Observable || !strings.Contains(lv.Note, "1 marked point") {
				t.Errorf("level 3: observable %v note %q", lv.Observable, lv.Note)
			}
			if !math.IsNaN(lv.TwistDeg[1]) || !math.IsNaN(lv.SwayMM[1]) {
				t.Errorf("level 3 gave numbers from one point: twist %g sway %g", lv.TwistDeg[1], lv.SwayMM[1])
			}
		}
	}
	if !found {
		t.Error("level 3 missing")
	}
}

// Rigid motion recovered through a true pinhole projection (camera 1.5 m
// away, 0.3 mm/px at the axis) and through an orthographic one.
func TestMeasureLevelsPinholeAndOrtho(t *testing.T) {
	for _, tc := range []struct {
		name      string
		ortho     bool
		noHeights bool
		az        float64
		tolTwist  float64 // deg
		tolSway   float64 // mm
		tolSettle float64 // mm
	}{
		{"orthographic az 25", true, false, 25, 1e-6, 1e-6, 1e-6},
		// The top level moves 5 mm toward the camera in 120 frames; the fit
		// follows such motion over the last DepthWindow frames.
		{"pinhole az 25", false, false, 25, 0.02, 0.01, 0.1},
		{"pinhole az 35", false, false, 35, 0.02, 0.01, 0.1},
		{"pinhole az -20", false, false, -20, 0.02, 0.01, 0.1},
		// Without level heights no camera can be fitted: the near-orthographic
		// model alone, 1.5 m from a 280 mm tower, is good to a few tenths.
		{"pinhole az 25, orthographic model", false, true, 25, 0.5, 0.1, 0.6},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := newScene(tc.az)
			if tc.az < 0 {
				s.legs = []string{"D", "A", "B"}
				s.faces = []string{"DA", "AB"}
			}
			if tc.ortho {
				s.dist, s.focal = 0, 1/0.3
			}
			s.frames = 120
			s.twist = func(l, f int) float64 { return 4 * float64(l) / 4 * float64(f) / 119 }
			s.sway = func(l, f int) [2]float64 {
				return [2]float64{6 * float64(l) / 4 * float64(f) / 119, -3 * float64(l) / 4 * float64(f) / 119}
			}
			s.settle = func(l, f int) float64 { return 0.5 * float64(f) / 119 }
			m, tr := s.build()
			if tc.noHeights {
				for i := range m.Points {
					if p, ok := m.PlanOf(m.Points[i]); ok {
						m.Points[i].PlanMM = &p
					}
				}
				m.Tower = nil
			}
			res, err := Measure(Input{Marks: m, Tracks: tr, CaptureFPS: 1000})
			if err != nil {
				t.Fatal(err)
			}
			if tc.noHeights != (len(res.Notes) > 0 && strings.Contains(res.Notes[0], "orthographic")) {
				t.Errorf("notes %q", res.Notes)
			}
			r, _ := s.cam()
			var worstT, worstS, worstZ float64
			for _, lv := range res.Levels {
				if !lv.Observable {
					t.Fatalf("level %d not observable: %s", lv.Level, lv.Note)
				}
				for f := range lv.TwistDeg {
					d := s.sway(lv.Level, f)
					worstT = math.Max(worstT, math.Abs(lv.TwistDeg[f]-s.twist(lv.Level, f)))
					worstS = math.Max(worstS, math.Abs(lv.SwayMM[f]-(d[0]*r[0]+d[1]*r[1])))
					worstZ = math.Max(worstZ, math.Abs(lv.SettleMM[f]-s.settle(lv.Level, f)))
				}
			}
			t.Logf("worst errors: twist %.4f deg, sway %.4f mm, settlement %.4f mm", worstT, worstS, worstZ)
			if worstT > tc.tolTwist || worstS > tc.tolSway || worstZ > tc.tolSettle {
				t.Errorf("errors twist %.4g deg (tol %g), sway %.4g mm (tol %g), settle %.4g mm (tol %g)", worstT, tc.tolTwist, worstS, tc.tolSway, worstZ, tc.tolSettle)
			}
		})
	}
}

func TestMeasureMembers(t *testing.T) {
	s := newScene(25)
	s.dist, s.focal = 0, 1/0.3
	s.frames = 11
	s.bow = func(id string, f int) float64 {
		if id == "AB-d2" {
			return 0.3 * float64(f) // mm, in the face plane
		}
		return 0
	}
	m, tr := s.build()
	res, err := Measure(Input{Marks: m, Tracks: tr})
	if err != nil {
		t.Fatal(err)
	}
	var d2 *Member
	for i := range res.Members {
		if res.Members[i].ID == "AB-d2" {
			d2 = &res.Members[i]
		}
	}
	if d2 == nil {
		t.Fatal("AB-d2 missing")
	}
	// Length from plan: A1 (-43.75,-43.75, 70) to B2 (37.5,-37.5,140).
	want := math.Sqrt(sq(37.5+43.75) + sq(-37.5+43.75) + sq(70))
	if math.Abs(d2.LengthMM-want) > 1e-9 {
		t.Errorf("length %.4f, want %.4f", d2.LengthMM, want)
	}
	// A 3 mm bow in the face plane, seen at 25 deg: the face is
	// foreshortened sideways by cos 25, but the bow is perpendicular to the
	// chord and the camera sees that plane from two directions, so the full
	// 3D bow comes back.
	if b := d2.BowMM[10]; math.Abs(b-3) > 1e-6 {
		t.Errorf("bow at frame 10 %.6f mm, want 3", b)
	}
	if math.Abs(d2.BowFrac[10]-d2.BowMM[10]/want) > 1e-12 {
		t.Error("bow fraction is not bow over length")
	}
	if math.Abs(d2.StrainPct[10]) > 1e-9 || math.Abs(d2.RotationDeg[10]) > 1e-9 {
		t.Errorf("rigid chord shows strain %g %% rotation %g deg", d2.StrainPct[10], d2.RotationDeg[10])
	}
	// Horizontal braces have no interior points: no bow.
	for _, mm := range res.Members {
		if mm.ID == "AB-h1" && !math.IsNaN(mm.BowMM[5]) {
			t.Errorf("AB-h1 bow %g without interior points", mm.BowMM[5])
		}
	}
}

func TestMeasureStrainAndRotation(t *testing.T) {
	s := newScene(0)
	s.dist, s.focal = 0, 1/0.3
	s.legs = []string{"A", "B"}
	s.frames = 2
	// Level 1 settles 0.7 mm: leg-A's lower panel... use the whole leg:
	// its top (level 4) settles 2.8 mm, so the chord shortens by 2.8 mm in
	// height over 280 mm (image projection of the tapered leg).
	s.settle = func(l, f int) float64 { return 2.8 * float64(f) * float64(l) / 4 }
	m, tr := s.build()
	res, err := Measure(Input{Marks: m, Tracks: tr})
	if err != nil {
		t.Fatal(err)
	}
	for _, mm := range res.Members {
		if mm.ID != "leg-A" {
			continue
		}
		// Image chord: dx = 25 mm (taper), dz = 280 -> 277.2 mm.
		l0, l1 := math.Hypot(25, 280), math.Hypot(25, 277.2)
		if want := 100 * (l1 - l0) / l0; math.Abs(mm.StrainPct[1]-want) > 1e-6 {
			t.Errorf("strain %.6f %%, want %.6f", mm.StrainPct[1], want)
		}
		// Chord direction from A0 to A4 leans right by atan(25/280); after
		// settling it leans more: rotation clockwise in the image (negative).
		want := -(math.Atan2(25, 277.2) - math.Atan2(25, 280)) * 180 / math.Pi
		if math.Abs(mm.RotationDeg[1]-want) > 1e-6 {
			t.Errorf("rotation %.6f deg, want %.6f", mm.RotationDeg[1], want)
		}
	}
}

func TestMeasureErrors(t *testing.T) {
	s := newScene(25)
	s.frames = 2
	m, tr := s.build()
	if _, err := Measure(Input{Marks: m}); err == nil {
		t.Error("no tracks accepted")
	}
	tr2 := *tr
	tr2.IDs = append([]string{"Z9"}, tr.IDs[1:]...)
	if _, err := Measure(Input{Marks: m, Tracks: &tr2}); err == nil || !strings.Contains(err.Error(), `"Z9"`) {
		t.Errorf("unknown id: %v", err)
	}
	if _, err := Measure(Input{Marks: m, Tracks: tr, Energy: []float64{1}}); err == nil || !strings.Contains(err.Error(), "energy") {
		t.Errorf("energy length: %v", err)
	}
	m2 := *m
	m2.Scale = nil
	m2.Tower = nil
	if _, err := Measure(Input{Marks: &m2, Tracks: tr}); err == nil || !strings.Contains(err.Error(), "no scale") {
		t.Errorf("no scale: %v", err)
	}
	// Without a scale entry but with the tower block, the scale comes from a leg.
	m3 := *m
	m3.Scale = nil
	res, err := Measure(Input{Marks: &m3, Tracks: tr})
	if err != nil {
		t.Fatal(err)
	}
	want, _ := m.MMPerPixel()
	if math.Abs(res.MMPerPx/want-1) > 0.01 || len(res.Notes) == 0 {
		t.Errorf("fallback scale %g, want about %g; notes %v", res.MMPerPx, want, res.Notes)
	}
}

// The undistortion hook is applied to tracked and marked points alike.
func TestUndistortHook(t *testing.T) {
	s := newScene(25)
	s.dist, s.focal = 0, 1/0.3
	s.frames = 3
	s.twist = func(l, f int) float64 { return float64(f) }
	m, tr := s.build()
	// Distort every position by a fixed 2x stretch about (400, 300) and undo it in the hook.
	for i := range m.Points {
		m.Points[i].PX[0] = 400 + 2*(m.Points[i].PX[0]-400)
	}
	for _, row := range tr.Samples {
		for j := range row {
			row[j].X = 400 + 2*(row[j].X-400)
		}
	}
	undo := func(x, y float64) (float64, float64) { return 400 + (x-400)/2, y }
	resU, err := Measure(Input{Marks: m, Tracks: tr, Undistort: undo})
	if err != nil {
		t.Fatal(err)
	}
	for _, lv := range resU.Levels {
		if math.Abs(lv.TwistDeg[2]-2) > 1e-6 {
			t.Errorf("level %d twist %g with the hook, want 2", lv.Level, lv.TwistDeg[2])
		}
	}
}

// The 3D bow of a brace bowing in its face comes back through a true
// pinhole projection (camera 1.5 m away at 25 deg): the face is seen
// obliquely, so the image offset across the chord alone would read short.
func TestMeasureBowPinhole(t *testing.T) {
	s := newScene(25)
	s.frames = 11
	s.bow = func(id string, f int) float64 {
		if id == "BC-d3" {
			return 0.3 * float64(f)
		}
		return 0
	}
	m, tr := s.build()
	res, err := Measure(Input{Marks: m, Tracks: tr})
	if err != nil {
		t.Fatal(err)
	}
	for _, mm := range res.Members {
		if mm.ID != "BC-d3" {
			continue
		}
		// Face B-C is seen 65 deg off square, so this is a hard case.
		if b := mm.BowMM[10]; math.Abs(b-3) > 0.1 {
			t.Errorf("bow %.3f mm, want 3 within 0.1", b)
		}
		return
	}
	t.Fatal("BC-d3 missing")
}
