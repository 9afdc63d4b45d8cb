package measure

import (
	"math"
	"math/rand"
	"testing"

	"github.com/failframe/failframe/tracking/tracks"
)

// TestCollapseWatchAgreesWithDiagnose feeds series one value at a time and
// checks the watch confirms the same jump row as the whole-series rule
// (jumpStart's f, the rule Diagnose applies to the motion energy), on
// noisy series with and without a lone spike, a NaN, and no jump at all.
func TestCollapseWatchAgreesWithDiagnose(t *testing.T) {
	cases := []struct {
		name    string
		n, jump int  // series length; row the sustained jump starts (-1 none)
		spike   int  // row of a lone one-frame spike (-1 none)
		nan     int  // row of a NaN (-1 none)
		wantHit bool // a jump is expected
	}{
		{"jump", 1500, 1200, -1, -1, true},
		{"spike then jump", 1500, 1300, 900, -1, true},
		{"nan in the jump", 1500, 1100, -1, 1101, true},
		{"short series", 80, 60, -1, -1, true},
		{"no jump", 1500, -1, 700, -1, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rng := rand.New(rand.NewSource(int64(c.n + c.jump)))
			x := make([]float64, c.n)
			for i := range x {
				x[i] = 1 + 0.1*rng.NormFloat64()
				if c.jump >= 0 && i >= c.jump {
					x[i] += 20
				}
			}
			if c.spike >= 0 {
				x[c.spike] += 30
			}
			if c.nan >= 0 {
				x[c.nan] = math.NaN()
			}
			_, want := jumpStart(x, baselineRows(c.n), 0, 2)
			w := NewCollapseWatch(c.n)
			got := -1
			for _, v := range x {
				if r, ok := w.Add(v, nil); ok {
					if got >= 0 {
						t.Fatalf("found twice")
					}
					got = r
				}
			}
			if got != want {
				t.Errorf("watch row %d, whole-series rule %d", got, want)
			}
			if (got >= 0) != c.wantHit {
				t.Errorf("found %v, want %v", got >= 0, c.wantHit)
			}
			if c.wantHit && got != c.jump {
				t.Errorf("row %d, the jump began at %d", got, c.jump)
			}
		})
	}
}

// TestCollapseWatchPoints checks the two signals from the tracked points:
// the fastest point's speed jumping (a brace snapping) and more than half
// the points lost, each found at the row it began, and a slow drift (a
// member bowing) or a lone lost point not taken for either.
func TestCollapseWatchPoints(t *testing.T) {
	const n, pts = 1200, 6
	cases := []struct {
		name string
		at   func(r, i int) tracks.Sample
		want int
	}{
		{"snap", func(r, i int) tracks.Sample {
			x := 100 + 0.01*float64((r*7+i)%5)
			if i == 2 && r >= 900 {
				x += 2 * float64(r-899) // 2 px per frame from row 900
			}
			return tracks.Sample{X: x, Y: 50}
		}, 900},
		{"most lost", func(r, i int) tracks.Sample {
			if r >= 1000 && i < 4 {
				return tracks.Sample{X: math.NaN(), Y: math.NaN(), Lost: true}
			}
			return tracks.Sample{X: 100, Y: 50 + 0.01*float64((r*3+i)%4)}
		}, 1000},
		{"slow bow and one lost", func(r, i int) tracks.Sample {
			if i == 5 && r >= 700 {
				return tracks.Sample{X: math.NaN(), Y: math.NaN(), Lost: true}
			}
			return tracks.Sample{X: 100 + 0.004*float64(r), Y: 50 + 0.01*float64((r+i)%3)}
		}, -1},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			w := NewCollapseWatch(n)
			got := -1
			for r := 0; r < n; r++ {
				row := make([]tracks.Sample, pts)
				for i := range row {
					row[i] = c.at(r, i)
				}
				if f, ok := w.Add(math.NaN(), row); ok {
					got = f
				}
			}
			if got != c.want {
				t.Errorf("found row %d, want %d", got, c.want)
			}
		})
	}
}
