package measure

import (
	"math"
	"strings"
	"testing"
)

// A camera square to face A-B sees no twist; a twist of the tower alone (no
// sway) then moves the face toward the camera sideways by theta times half
// the level's width (plain geometry: the face's points sit half a width in
// front of the axis). That number is what the level's sway holds, and the
// note must say it is the front face's motion with twist not separated, not
// true sway (which is zero here).
func TestSquareOnSwayIsFrontFaceMotion(t *testing.T) {
	for _, tc := range []struct {
		name     string
		twistDeg float64
	}{
		{"0.8 degree twist", 0.8},
		{"-2 degree twist", -2},
	} {
		t.Run(tc.name, func(t *testing.T) {
			s := newScene(0)
			s.legs = []string{"A", "B"}
			s.frames = 3
			s.twist = func(l, f int) float64 { return tc.twistDeg * float64(f) / 2 * float64(l) / 4 }
			m, tr := s.build()
			res, err := Measure(Input{Marks: m, Tracks: tr, CaptureFPS: 1000})
			if err != nil {
				t.Fatal(err)
			}
			for _, lv := range res.Levels {
				if lv.Observable {
					t.Fatalf("level %d: twist observable square-on", lv.Level)
				}
				if !strings.Contains(lv.Note, "twist not separated") || !strings.Contains(lv.Note, "sideways motion of the face toward the camera") {
					t.Errorf("level %d: note %q does not say the sway is the front face's motion with twist not separated", lv.Level, lv.Note)
				}
				th := tc.twistDeg * float64(lv.Level) / 4 * math.Pi / 180
				w := s.width(s.levels[lv.Level])
				want := th * w / 2
				got := lv.SwayMM[2]
				if math.Abs(got-want) > 0.1*math.Abs(want)+0.02 {
					t.Errorf("level %d: sway %.3f mm, want the face's %.3f mm (twist %.2f deg, width %.0f mm)", lv.Level, got, want, th*180/math.Pi, w)
				}
			}
		})
	}
}
