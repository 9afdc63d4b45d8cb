package measure

import (
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/failframe/failframe/tracking/tracks"
)

// Empty and hopeless inputs give clear answers, not panics or numbers.
func TestEdgeCases(t *testing.T) {
	s := newScene(25)
	s.frames = 30
	m, tr := s.build()

	empty := &tracks.Tracks{IDs: tr.IDs}
	res, err := Measure(Input{Marks: m, Tracks: empty, CaptureFPS: 1000})
	if err != nil {
		t.Fatalf("no frames: %v", err)
	}
	d := Diagnose(res, Input{Marks: m, Tracks: empty})
	if d.Mode != ModeUndetermined || !strings.Contains(d.Account, "No frames") {
		t.Errorf("no frames: mode %s, account %q", d.Mode, d.Account)
	}

	// Every point lost from frame 10 on: no numbers there, and the loss of
	// most points is the collapse.
	for i := 10; i < len(tr.Samples); i++ {
		for j := range tr.Samples[i] {
			tr.Samples[i][j] = tracks.Sample{X: math.NaN(), Y: math.NaN(), Lost: true}
		}
	}
	energy := make([]float64, len(tr.Frames))
	for i := range energy {
		energy[i] = math.NaN()
	}
	in := Input{Marks: m, Tracks: tr, CaptureFPS: 1000, Energy: energy}
	res, err = Measure(in)
	if err != nil {
		t.Fatal(err)
	}
	for _, lv := range res.Levels {
		if !math.IsNaN(lv.TwistDeg[20]) || !math.IsNaN(lv.SwayMM[20]) || !math.IsNaN(lv.SettleMM[20]) {
			t.Errorf("level %d has numbers in a frame with every point lost", lv.Level)
		}
	}
	d = Diagnose(res, in)
	if d.CollapseRow != 10 || d.Mode != ModeJointOrBase {
		t.Errorf("collapse row %d mode %s, want 10 and %s", d.CollapseRow, d.Mode, ModeJointOrBase)
	}

	// A negative or infinite capture rate is refused.
	if _, err := Measure(Input{Marks: m, Tracks: tr, CaptureFPS: math.Inf(1)}); err == nil {
		t.Error("infinite capture rate accepted")
	}
	// A ragged row is refused with its frame.
	tr.Samples[3] = tr.Samples[3][:2]
	if _, err := Measure(Input{Marks: m, Tracks: tr}); err == nil || !strings.Contains(err.Error(), "frame 3") {
		t.Errorf("ragged row: %v", err)
	}
}

// BenchmarkMeasure measures and diagnoses 600 frames of a 15-point tower
// seen through a pinhole camera.
func BenchmarkMeasure(b *testing.B) {
	s := newScene(25)
	s.frames = 600
	s.noise = 0.03
	s.twist = func(l, f int) float64 { return float64(l) * float64(f) / 600 }
	m, tr := s.build()
	in := Input{Marks: m, Tracks: tr, CaptureFPS: 1000}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		res, err := Measure(in)
		if err != nil {
			b.Fatal(err)
		}
		Diagnose(res, in)
	}
}

// A collapse with no bow first points at a joint only when a bow could have
// been seen: with every member marked at its two ends alone, a buckling
// member looks the same, so the mode is undetermined (common practice: a
// label needs the evidence that would rule out the other labels).
func TestCollapseWithoutVisibleBowIsUndetermined(t *testing.T) {
	for _, tc := range []struct {
		name     string
		azDeg    float64
		endsOnly bool
		want     string
	}{
		{"members marked between their ends", 25, false, ModeJointOrBase},
		{"members marked at their ends only", 25, true, ModeUndetermined},
		// Square to face A-B no twist can be seen, so a tower twisting
		// as a whole is not ruled out.
		{"camera square to a face", 0, false, ModeUndetermined},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := newScene(tc.azDeg)
			if tc.azDeg == 0 {
				s.legs, s.faces = []string{"A", "B"}, []string{"AB"} // face B-C is seen edge-on
			}
			s.frames = 30
			m, tr := s.build()
			if tc.endsOnly {
				for i := range m.Members {
					p := m.Members[i].Points
					m.Members[i].Points = []string{p[0], p[len(p)-1]}
				}
			}
			for i := 10; i < len(tr.Samples); i++ {
				for j := range tr.Samples[i] {
					tr.Samples[i][j] = tracks.Sample{X: math.NaN(), Y: math.NaN(), Lost: true}
				}
			}
			in := Input{Marks: m, Tracks: tr, CaptureFPS: 1000}
			res, err := Measure(in)
			if err != nil {
				t.Fatal(err)
			}
			d := Diagnose(res, in)
			if d.CollapseRow != 10 || d.Mode != tc.want {
				t.Errorf("collapse row %d mode %s, want 10 and %s", d.CollapseRow, d.Mode, tc.want)
			}
			if tc.endsOnly && !strings.Contains(strings.Join(d.Advice, " "), "between its ends") {
				t.Errorf("advice does not ask for points between member ends: %q", d.Advice)
			}
		})
	}
}

// A bow that reaches the buckling floor by a jump over a few frames (a joint
// letting go, a snap spread by blur and tracking) is not a buckling onset,
// nor is the frame after the jump; a bow that grows smoothly is (common
// practice: elastic buckling grows with the load, a release is sudden).
func TestBowOnsetIgnoresJumps(t *testing.T) {
	const n, length = 400, 100.0 // rows, mm; floor 0.5 mm
	floor := OnsetFloorFrac * length
	ramp := func(f func(r int) float64) *Member {
		m := &Member{ID: "AB-d1", Kind: "brace", LengthMM: length, BowMM: make([]float64, n)}
		for r := range m.BowMM {
			m.BowMM[r] = f(r) + 0.002*math.Sin(float64(r)*1.7) // a little tracker noise
		}
		return m
	}
	for _, tc := range []struct {
		name  string
		bow   func(r int) float64
		onset bool
	}{
		{"smooth exponential growth", func(r int) float64 { return 0.01 * math.Exp(float64(r)/80) }, true},
		{"slow creep to a fifth of the floor, then a jump over 4 frames", func(r int) float64 {
			switch {
			case r < 300:
				return 0.2 * floor * float64(r) / 300 // a fifth of the floor, slowly
			case r < 304:
				return 0.2*floor + (1.5*floor-0.2*floor)*float64(r-299)/5
			}
			return 1.5 * floor
		}, false},
		{"flat then a step within three frames", func(r int) float64 {
			if r < 300 {
				return 0.02
			}
			return math.Min(2*floor, 0.02+float64(r-299)*0.7*floor)
		}, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := ramp(tc.bow)
			onset, _, det := bowOnset(m, baselineRows(n), n)
			if (onset >= 0) != tc.onset {
				t.Errorf("onset row %d (%s), want onset %v", onset, det, tc.onset)
			}
			// Without an onset the jump is the break, where the rise began.
			r, det := bowJump(m, n)
			if tc.onset && r >= 0 {
				t.Errorf("smooth growth read as a jump at row %d (%s)", r, det)
			}
			if !tc.onset && (r < 300 || r > 302) {
				t.Errorf("jump at row %d (%s), want 300-302", r, det)
			}
		})
	}
}

// Marks without a scale entry and without a tower block to take one from are
// refused before any tracking; a tower block alone gives the scale (common
// practice: a length needs a known distance in the picture).
func TestCheckMarks(t *testing.T) {
	s := newScene(25)
	s.frames = 3
	m, _ := s.build()
	if err := CheckMarks(m); err != nil {
		t.Fatalf("full marks refused: %v", err)
	}
	m.Scale = nil
	if err := CheckMarks(m); err != nil {
		t.Errorf("tower block alone refused: %v", err)
	}
	m.Tower = nil
	for i := range m.Points {
		m.Points[i].PlanMM = nil
	}
	err := CheckMarks(m)
	if err == nil || !strings.Contains(err.Error(), "no scale") || strings.HasPrefix(err.Error(), "measure:") {
		t.Errorf("no scale and no tower: %v", err)
	}
}

// A marks file without a camera azimuth: the azimuth is taken from the
// camera fitted to the marked points, so twist and sway match the run with
// the azimuth given (the scene's camera is placed at a known azimuth: an
// outside check of the fitted one, common practice).
func TestMissingAzimuthFromFittedCamera(t *testing.T) {
	for _, az := range []float64{25, -30} {
		s := newScene(az)
		s.frames = 40
		s.twist = func(l, f int) float64 { return 0.02 * float64(l*f) }
		s.sway = func(l, f int) [2]float64 { return [2]float64{0.01 * float64(l*f), 0.004 * float64(l*f)} }
		m, tr := s.build()
		want, err := Measure(Input{Marks: m, Tracks: tr, CaptureFPS: 1000})
		if err != nil {
			t.Fatal(err)
		}
		m.Camera = nil
		got, err := Measure(Input{Marks: m, Tracks: tr, CaptureFPS: 1000})
		if err != nil {
			t.Fatal(err)
		}
		if m.Camera != nil {
			t.Fatal("Measure changed the caller's marks")
		}
		if !strings.Contains(strings.Join(got.Notes, " "), fmt.Sprintf("%.0f", az)) {
			t.Errorf("azimuth %g: notes %q do not give the fitted azimuth", az, got.Notes)
		}
		for i := range want.Levels {
			for r := range want.Levels[i].SwayMM {
				if d := math.Abs(got.Levels[i].SwayMM[r] - want.Levels[i].SwayMM[r]); d > 0.02 {
					t.Fatalf("azimuth %g: level %d row %d sway %.3f mm, %.3f with the azimuth given", az, want.Levels[i].Level, r, got.Levels[i].SwayMM[r], want.Levels[i].SwayMM[r])
				}
				if d := math.Abs(got.Levels[i].TwistDeg[r] - want.Levels[i].TwistDeg[r]); d > 0.02 {
					t.Fatalf("azimuth %g: level %d row %d twist %.3f, %.3f with the azimuth given", az, want.Levels[i].Level, r, got.Levels[i].TwistDeg[r], want.Levels[i].TwistDeg[r])
				}
			}
		}
	}
}

// A leg's foot sliding on the base breaks the braces that start there
// without any bow: the first member to go is the leg (its foot), not the
// brace whose chord stepped (common practice: a base joint failure is
// named by the leg standing on it).
func TestBaseFootNamesTheLeg(t *testing.T) {
	s := newScene(25)
	s.frames = 80
	m, tr := s.build()
	c := tr.Index("A0")
	for r := 50; r < len(tr.Samples); r++ {
		tr.Samples[r][c].X += 4 * math.Min(1, float64(r-49)/2) // slides 4 px over two frames
	}
	in := Input{Marks: m, Tracks: tr, CaptureFPS: 1000}
	res, err := Measure(in)
	if err != nil {
		t.Fatal(err)
	}
	d := Diagnose(res, in)
	if d.FirstMember != "leg-A" || d.Mode != ModeJointOrBase || !strings.Contains(d.Account, "base let go under leg A") {
		t.Errorf("first %q mode %s account %q; want leg-A, %s and the base letting go", d.FirstMember, d.Mode, d.Account, ModeJointOrBase)
	}
}

// Level points without plan positions (no tower block, no plan_mm) give no
// twist or sway, and a note says why instead of silence (common practice).
func TestLevelsWithoutPlanAreNoted(t *testing.T) {
	s := newScene(25)
	s.frames = 5
	m, tr := s.build()
	m.Tower = nil
	for i := range m.Points {
		m.Points[i].PlanMM = nil
	}
	res, err := Measure(Input{Marks: m, Tracks: tr, CaptureFPS: 1000})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Levels) != 0 || !strings.Contains(strings.Join(res.Notes, " "), "twist and sway not measured") {
		t.Errorf("levels %d, notes %q", len(res.Levels), res.Notes)
	}
}
