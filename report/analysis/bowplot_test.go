package analysis

import (
	"math"
	"testing"

	"github.com/failframe/failframe/tracking/measure"
)

// The bow plot names the first member and the braces that bowed most, and
// draws the rest grey without a legend entry, so a tower with many braces
// still gets a readable legend (common practice: a legend of more than a
// handful of entries cannot be told apart by colour).
func TestBowSeriesColoursFirstAndLargest(t *testing.T) {
	ct := []float64{0, 1, 2}
	head := func(y []float64) []float64 { return y }
	var ms []measure.Member
	for i, peak := range []float64{0.001, 0.004, 0.02, 0.003, 0.002, 0.0005, 0.006} {
		ms = append(ms, measure.Member{ID: string(rune('a' + i)), Kind: "brace", BowFrac: []float64{0, peak / 2, peak}})
	}
	ms = append(ms, measure.Member{ID: "leg-A", Kind: "leg", BowFrac: []float64{0, 0.1, math.NaN()}})
	out := bowSeries(ms, "", ct, head)
	if len(out) != 7 {
		t.Fatalf("%d series, want the 7 braces (the leg is not the first member)", len(out))
	}
	var named []string
	faint := 0
	for i, s := range out {
		if s.Faint {
			faint++
			if s.Name != "" {
				t.Errorf("faint series %d keeps its name %q", i, s.Name)
			}
			if len(named) > 0 {
				t.Errorf("faint series %d drawn after a coloured one", i)
			}
			continue
		}
		named = append(named, s.Name)
	}
	want := []string{"c", "g", "b", "d"}
	if len(named) != len(want) || faint != 3 {
		t.Fatalf("coloured %v (faint %d), want %v and 3 faint", named, faint, want)
	}
	for i := range want {
		if named[i] != want[i] {
			t.Errorf("coloured %v, want %v", named, want)
			break
		}
	}
	// The first member is always coloured, first, whatever its bow.
	ms[5].ID = "first"
	out = bowSeries(ms, "first", ct, head)
	if out[len(out)-5].Name != "first" {
		t.Errorf("first member not coloured first: %+v", out[len(out)-5].Name)
	}
}
