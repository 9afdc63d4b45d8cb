package measure

import (
	"math"
	"math/rand"
	"testing"
)

// A bow growing exponentially through the 0.5 % floor (a column's bow grows
// as its load nears the Euler load; common practice) with Gaussian tracker
// noise: the onset is placed within two frames of the row where the
// noise-free bow first reaches the floor, for several noise draws, although
// one low frame near the floor delays the first sustained run above it.
// The crossing row is worked by hand: bow(r) = floor * exp((r-250)/tau)
// reaches floor at r = 250 exactly.
func TestBowOnsetFitsTheCrossing(t *testing.T) {
	const (
		n      = 400
		length = 120.0 // mm
		cross  = 250
	)
	floor := OnsetFloorFrac * length
	for _, tc := range []struct {
		name       string
		tau, noise float64 // growth time constant, rows; noise as a fraction of the floor
	}{
		{"slow growth, 3 % noise", 60, 0.03},
		{"slow growth, 5 % noise", 60, 0.05},
		{"fast growth, 5 % noise", 25, 0.05},
		{"slow growth, 1 % noise", 80, 0.01},
	} {
		t.Run(tc.name, func(t *testing.T) {
			for seed := int64(1); seed <= 8; seed++ {
				rng := rand.New(rand.NewSource(seed))
				m := &Member{ID: "AB-d1", Kind: "brace", LengthMM: length, BowMM: make([]float64, n)}
				for r := range m.BowMM {
					m.BowMM[r] = floor*math.Exp(float64(r-cross)/tc.tau) + tc.noise*floor*rng.NormFloat64()
				}
				onset, change, det := bowOnset(m, baselineRows(n), n)
				if onset < 0 || math.Abs(float64(onset-cross)) > 2 {
					t.Errorf("seed %d: onset row %d, want %d +- 2 (%s)", seed, onset, cross, det)
				}
				if change > onset {
					t.Errorf("seed %d: change point %d after onset %d", seed, change, onset)
				}
			}
		})
	}
}

// The fitted crossing stays between the CUSUM change point and the last
// row of the first sustained run (hand-worked lines).
func TestOnsetCrossingBounds(t *testing.T) {
	ramp := make([]float64, 100) // 0 until row 30, then 0.05 a row: reaches 1.0 at row 50
	for i := range ramp {
		ramp[i] = math.Max(0, 0.05*float64(i-30))
	}
	step := make([]float64, 100) // a step onto the floor at row 50: the line through it crosses late
	for i := 50; i < len(step); i++ {
		step[i] = 1
	}
	fall := make([]float64, 100) // falling: no rising trend to fit
	for i := range fall {
		fall[i] = 2 - 0.01*float64(i)
	}
	for _, tc := range []struct {
		name          string
		x             []float64
		f, change     int
		wantLo, wantH int
	}{
		{"ramp, crossing at row 50", ramp, 51, 40, 50, 50},
		{"ramp, change point after the crossing bounds it", ramp, 53, 52, 52, 52},
		{"step, held within the confirmed run", step, 50, 50, 50, 50 + SustainRows - 1},
		{"falling bow keeps the run's first row", fall, 30, 10, 30, 30},
	} {
		got := onsetCrossing(tc.x, tc.f, 1, tc.change)
		if got < tc.wantLo || got > tc.wantH {
			t.Errorf("%s: onset %d, want %d-%d", tc.name, got, tc.wantLo, tc.wantH)
		}
	}
}
