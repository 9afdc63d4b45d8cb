package measure

import "math"

// PanelBowRatio is how many times larger than the deflection of every
// braced joint of a leg (from the leg's end-to-end chord) and than the bows
// of its other panels the bow of one of its panels (a mid-panel point's
// offset from the line through the panel's two joints) must be for the leg
// to count as buckling in that panel alone:
// the joints then stay in line and the half-wave spans the panel (common
// practice: a leg held at its braced levels buckles between them).
const PanelBowRatio = 2

// localBow describes the largest bow of one panel of a leg in one row.
type localBow struct {
	mid, lo, hi int     // indices of the mid-panel point and the two points it lies between
	bow         float64 // signed offset of mid from the line lo-hi, mm
	joints      float64 // largest |deflection| of an interior braced joint, mm
	others      float64 // largest |bow| of the leg's other panels, mm
}

// panelSpan returns, for interior point i of a leg that is not at a level,
// the nearest points below and above it that are at a level (or the leg's
// ends).
func panelSpan(isLevel []bool, i int) (lo, hi int) {
	lo, hi = i-1, i+1
	for lo > 0 && !isLevel[lo] {
		lo--
	}
	for hi < len(isLevel)-1 && !isLevel[hi] {
		hi++
	}
	return lo, hi
}

// panelBows finds a leg's largest panel bow in one row of deflections d
// (NaN = not seen). ok is false when the leg has no mid-panel point with
// both neighbouring joints seen.
func panelBows(d, heights []float64, isLevel []bool) (lb localBow, ok bool) {
	n := len(d)
	lb.mid = -1
	for j := 1; j < n-1; j++ {
		if isLevel[j] && !math.IsNaN(d[j]) {
			lb.joints = math.Max(lb.joints, math.Abs(d[j]))
		}
	}
	for i := 1; i < n-1; i++ {
		if isLevel[i] || math.IsNaN(d[i]) {
			continue
		}
		lo, hi := panelSpan(isLevel, i)
		if math.IsNaN(d[lo]) || math.IsNaN(d[hi]) || heights[hi] <= heights[lo] {
			continue
		}
		u := (heights[i] - heights[lo]) / (heights[hi] - heights[lo])
		b := d[i] - (d[lo] + u*(d[hi]-d[lo]))
		switch {
		case lb.mid < 0 || math.Abs(b) > math.Abs(lb.bow):
			if lb.mid >= 0 {
				lb.others = math.Max(lb.others, math.Abs(lb.bow))
			}
			lb.mid, lb.lo, lb.hi, lb.bow = i, lo, hi, b
		default:
			lb.others = math.Max(lb.others, math.Abs(b))
		}
	}
	return lb, lb.mid >= 0
}

// localized reports whether the panel bow stands out from the joints'
// deflection and from the other panels' bows: one panel buckling between
// joints that stay in line. (Several panels bowing alike are left to the
// half-sine fit over the whole leg.)
func (lb localBow) localized(thr float64) bool {
	b := math.Abs(lb.bow)
	return lb.mid >= 0 && b >= thr && b >= PanelBowRatio*lb.joints && b >= PanelBowRatio*lb.others
}

// legBow is the bow of a leg marked at mid-panel in one row: the largest of
// its braced joints' deflections from the leg's end-to-end chord (bending
// over the full height) and its panels' own bows (a mid-panel point's
// offset from the line through the panel's joints, buckling between
// braces). Where a mid-panel point and both its joints are deflected the
// same way by at least half as much, the leg bends as a whole there and the
// point's deflection from the leg's chord counts. Measured against the
// panel's joints, a panel's bow leaves out the smooth curvature that the
// tower's own sway and twist give the leg's chord. NaN when nothing was seen.
func legBow(d, heights []float64, isLevel []bool) float64 {
	n := len(d)
	bow, seen := 0.0, false
	for i := 1; i < n-1; i++ {
		if math.IsNaN(d[i]) {
			continue
		}
		if isLevel[i] {
			bow, seen = math.Max(bow, math.Abs(d[i])), true
			continue
		}
		lo, hi := panelSpan(isLevel, i)
		if math.IsNaN(d[lo]) || math.IsNaN(d[hi]) || heights[hi] <= heights[lo] {
			continue
		}
		v := d[i]
		whole := v*d[lo] > 0 && v*d[hi] > 0 && math.Min(math.Abs(d[lo]), math.Abs(d[hi])) >= 0.5*math.Abs(v)
		if !whole {
			u := (heights[i] - heights[lo]) / (heights[hi] - heights[lo])
			v -= d[lo] + u*(d[hi]-d[lo])
		}
		bow, seen = math.Max(bow, math.Abs(v)), true
	}
	if !seen {
		return math.NaN()
	}
	return bow
}

// panelAwareLegBows replaces the bow of each leg member marked at
// mid-panel by legBow, from its leg's deflections.
func panelAwareLegBows(res *Result) {
	for i := range res.Members {
		m := &res.Members[i]
		if m.Kind != "leg" || m.Leg == "" {
			continue
		}
		var l *Leg
		for k := range res.Legs {
			if res.Legs[k].Leg == m.Leg && res.Legs[k].midPanel {
				l = &res.Legs[k]
			}
		}
		if l == nil || !sameIDs(l.Points, m.Points) {
			continue
		}
		for k := 0; k+1 < len(l.isLevel); k++ {
			if !l.isLevel[k] {
				continue
			}
			for j := k + 1; j < len(l.isLevel); j++ {
				if l.isLevel[j] {
					m.panelMM = math.Max(m.panelMM, l.HeightsMM[j]-l.HeightsMM[k])
					break
				}
			}
		}
		for row := range m.BowMM {
			if row >= len(l.DeflectionMM) || math.IsNaN(m.BowMM[row]) {
				continue
			}
			b := legBow(l.DeflectionMM[row], l.HeightsMM, l.isLevel)
			if math.IsNaN(b) {
				continue
			}
			m.BowMM[row] = b
			if m.LengthMM > 0 {
				m.BowFrac[row] = b / m.LengthMM
			}
		}
	}
}

// sameIDs reports whether a and b hold the same ids, in any order.
func sameIDs(a, b []string) bool {
	if len(a) != len(b) {
		return false
	}
	seen := map[string]int{}
	for _, id := range a {
		seen[id]++
	}
	for _, id := range b {
		if seen[id] == 0 {
			return false
		}
		seen[id]--
	}
	return true
}
