package measure

import (
	"fmt"
	"math"
	"sort"
)

// members computes chord strain, rotation and bow of every member.
func (g *geom) members() []Member {
	var out []Member
	for _, mm := range g.in.Marks.Members {
		M := Member{ID: mm.ID, Kind: mm.Kind, Points: append([]string(nil), mm.Points...), Levels: [2]int{-1, -1},
			StrainPct: nanSlice(g.n), BowMM: nanSlice(g.n), BowFrac: nanSlice(g.n), RotationDeg: nanSlice(g.n)}
		ps := make([]*point, len(mm.Points))
		for i, id := range mm.Points {
			ps[i] = g.pts[id]
			if mm.Kind == "leg" && M.Leg == "" {
				M.Leg = ps[i].leg
			}
			if lv := ps[i].level; lv >= 0 {
				if M.Levels[0] < 0 || lv < M.Levels[0] {
					M.Levels[0] = lv
				}
				if lv > M.Levels[1] {
					M.Levels[1] = lv
				}
			}
		}
		a, b := ps[0], ps[len(ps)-1]
		refLen := math.Hypot(b.ref[0]-a.ref[0], b.ref[1]-a.ref[1])
		M.LengthMM = refLen * g.s
		if a.hasPlan && b.hasPlan && a.hasH && b.hasH {
			M.LengthMM = math.Sqrt(sq(a.plan[0]-b.plan[0]) + sq(a.plan[1]-b.plan[1]) + sq(a.height-b.height))
		}
		refAng := math.Atan2(-(b.ref[1] - a.ref[1]), b.ref[0]-a.ref[0])
		refOff := make([]float64, len(ps))
		for i := 1; i < len(ps)-1; i++ {
			refOff[i] = perpOffset(a.ref, b.ref, ps[i].ref)
		}
		for row := 0; row < g.n; row++ {
			ax, ay, okA := g.at(a, row)
			bx, by, okB := g.at(b, row)
			if !okA || !okB || refLen == 0 {
				continue
			}
			l := math.Hypot(bx-ax, by-ay)
			M.StrainPct[row] = 100 * (l - refLen) / refLen
			ang := math.Atan2(-(by - ay), bx-ax)
			M.RotationDeg[row] = wrapDeg((ang - refAng) * 180 / math.Pi)
			bow, seen := 0.0, false
			for i := 1; i < len(ps)-1; i++ {
				x, y, ok := g.at(ps[i], row)
				if !ok {
					continue
				}
				d := math.Abs(perpOffset([2]float64{ax, ay}, [2]float64{bx, by}, [2]float64{x, y})-refOff[i]) * g.s
				bow, seen = math.Max(bow, d), true
			}
			if seen {
				M.BowMM[row] = bow
				if M.LengthMM > 0 {
					M.BowFrac[row] = bow / M.LengthMM
				}
			}
		}
		out = append(out, M)
	}
	return out
}

// perpOffset is p's signed distance from the line a->b in pixels, positive
// to the image-right of the direction a->b (image y down).
func perpOffset(a, b, p [2]float64) float64 {
	dx, dy := b[0]-a[0], b[1]-a[1]
	l := math.Hypot(dx, dy)
	if l == 0 {
		return math.NaN()
	}
	// Right-hand normal of (dx, dy) in image coordinates (y down) is (-dy, dx).
	return ((p[0]-a[0])*(-dy) + (p[1]-a[1])*dx) / l
}

func wrapDeg(d float64) float64 {
	for d > 180 {
		d -= 360
	}
	for d <= -180 {
		d += 360
	}
	return d
}

// legs computes each leg's deflected shape.
func (g *geom) legs() []Leg {
	byLeg := map[string][]*point{}
	for _, id := range g.order {
		p := g.pts[id]
		if p.leg != "" && p.col >= 0 {
			byLeg[p.leg] = append(byLeg[p.leg], p)
		}
	}
	var out []Leg
	for _, name := range []string{"A", "B", "C", "D"} {
		ps := byLeg[name]
		if len(ps) < 3 {
			continue
		}
		// Bottom to top: image y decreasing (up the image).
		sort.SliceStable(ps, func(i, j int) bool { return ps[i].ref[1] > ps[j].ref[1] })
		a, b := ps[0], ps[len(ps)-1]
		refLen := math.Hypot(b.ref[0]-a.ref[0], b.ref[1]-a.ref[1])
		if refLen == 0 {
			continue
		}
		L := Leg{Leg: name, LengthMM: refLen * g.s, HalfWaveMM: nanSlice(g.n), Row: -1, K: math.NaN(), Shape: ShapeStraight}
		if a.hasPlan && b.hasPlan && a.hasH && b.hasH {
			L.LengthMM = math.Sqrt(sq(a.plan[0]-b.plan[0]) + sq(a.plan[1]-b.plan[1]) + sq(a.height-b.height))
		}
		tpos := make([]float64, len(ps))
		refOff := make([]float64, len(ps))
		ux, uy := (b.ref[0]-a.ref[0])/refLen, (b.ref[1]-a.ref[1])/refLen
		for i, p := range ps {
			L.Points = append(L.Points, p.id)
			tpos[i] = ((p.ref[0]-a.ref[0])*ux + (p.ref[1]-a.ref[1])*uy) / refLen
			if p.hasH && a.hasH && b.hasH && b.height > a.height {
				tpos[i] = (p.height - a.height) / (b.height - a.height)
			}
			L.HeightsMM = append(L.HeightsMM, tpos[i]*L.LengthMM)
			refOff[i] = perpOffset(a.ref, b.ref, p.ref)
		}
		interiorT := tpos[1 : len(ps)-1]
		thr := legThreshold(L.LengthMM)
		bestAmp := 0.0
		for row := 0; row < g.n; row++ {
			d := nanSlice(len(ps))
			ax, ay, okA := g.at(a, row)
			bx, by, okB := g.at(b, row)
			all := okA && okB
			if okA && okB {
				d[0], d[len(ps)-1] = 0, 0
				for i := 1; i < len(ps)-1; i++ {
					x, y, ok := g.at(ps[i], row)
					if !ok {
						all = false
						continue
					}
					d[i] = (perpOffset([2]float64{ax, ay}, [2]float64{bx, by}, [2]float64{x, y}) - refOff[i]) * g.s
				}
			}
			L.DeflectionMM = append(L.DeflectionMM, d)
			if !all {
				if L.Row >= 0 || row > 0 {
					// Stop summarising once the leg loses a point.
					bestAmp = math.Inf(1)
				}
				continue
			}
			n, amp := HalfWaves(interiorT, d[1:len(ps)-1], 4)
			if n > 0 && math.Abs(amp) >= thr {
				L.HalfWaveMM[row] = L.LengthMM / float64(n)
			}
			if mx := maxAbs(d); mx > bestAmp && mx >= thr {
				bestAmp = mx
				L.Row = row
			}
		}
		L.summarize()
		out = append(out, L)
	}
	return out
}

// Leg shapes.
const (
	ShapeFullHeight    = "full_height"
	ShapeBetweenBraces = "between_braces"
	ShapeStraight      = "straight"
)

// legThreshold is the smallest deflection taken as a shape: 0.25 % of the
// leg's length, at least 0.3 mm (common practice: well above tracking noise).
func legThreshold(l float64) float64 { return math.Max(0.3, 0.0025*l) }

func maxAbs(x []float64) float64 {
	m := 0.0
	for _, v := range x {
		if !math.IsNaN(v) {
			m = math.Max(m, math.Abs(v))
		}
	}
	return m
}

// SummarizeAt sets the leg's shape, K and note from the deflection in row
// (for instance the last row before collapse). Rows with lost points or no
// deflection above noise leave the leg straight.
func (l *Leg) SummarizeAt(row int) {
	l.Row = -1
	if row >= 0 && row < len(l.DeflectionMM) {
		d := l.DeflectionMM[row]
		ok := len(d) >= 3
		for _, v := range d {
			if math.IsNaN(v) {
				ok = false
			}
		}
		if ok && maxAbs(d) >= legThreshold(l.LengthMM) {
			l.Row = row
		}
	}
	l.summarize()
}

func (l *Leg) summarize() {
	l.HalfWaves, l.K, l.Shape = 0, math.NaN(), ShapeStraight
	if l.Row < 0 {
		l.Note = fmt.Sprintf("leg %s stayed straight within %.2f mm over its %.0f mm length", l.Leg, legThreshold(l.LengthMM), l.LengthMM)
		return
	}
	d := l.DeflectionMM[l.Row]
	t := make([]float64, len(d))
	for i, h := range l.HeightsMM {
		t[i] = h / l.LengthMM
	}
	n, _ := HalfWaves(t[1:len(d)-1], d[1:len(d)-1], 4)
	if n == 0 {
		l.Note = fmt.Sprintf("leg %s: deflection %.2f mm but no half-sine shape fits its %d interior points", l.Leg, maxAbs(d), len(d)-2)
		return
	}
	l.HalfWaves = n
	hw := l.LengthMM / float64(n)
	l.K = hw / l.LengthMM
	euler := "Euler: P = pi^2 E I / (K L)^2, so the load a leg carries falls with the square of its effective length K L"
	if n == 1 {
		l.Shape = ShapeFullHeight
		l.Note = fmt.Sprintf("leg %s bent in one half-wave over its whole %.0f mm height: effective length K L = %.0f mm with K = %.2f (pinned-pinned over the full leg), so the bracing did not hold the leg sideways. %s; a leg held at every braced level would buckle over one panel instead", l.Leg, l.LengthMM, hw, l.K, euler)
		return
	}
	l.Shape = ShapeBetweenBraces
	l.Note = fmt.Sprintf("leg %s bent in %d half-waves of about %.0f mm over its %.0f mm height: it buckled between braced points, K = %.2f of the full leg (effective length K L = %.0f mm). %s; %d half-waves carry %d times the load of one", l.Leg, n, hw, l.LengthMM, l.K, hw, euler, n, n*n)
}

// HalfWaves fits the deflections d of interior points at fractional
// positions t (0..1 along the member, ends fixed at zero) with a half-sine
// series term A sin(n pi t) for n = 1..maxN, and returns the number of
// half-waves n that explains them best and its amplitude A. A larger n is
// chosen only when it halves the squared residual of every smaller one, so
// noise does not read as waviness. n = 0 when nothing can be fitted.
func HalfWaves(t, d []float64, maxN int) (n int, amp float64) {
	if len(t) == 0 || len(t) != len(d) {
		return 0, 0
	}
	var ss float64
	for _, v := range d {
		if math.IsNaN(v) {
			return 0, 0
		}
		ss += v * v
	}
	bestSSE := math.Inf(1)
	for k := 1; k <= maxN; k++ {
		var sb, bb float64
		for i := range t {
			b := math.Sin(float64(k) * math.Pi * t[i])
			sb += b * d[i]
			bb += b * b
		}
		if bb < 0.1*float64(len(t)) {
			continue // this wave is zero at (nearly) every point: not identifiable
		}
		A := sb / bb
		sse := ss - A*sb
		if n == 0 || sse < 0.5*bestSSE {
			n, amp, bestSSE = k, A, sse
		}
	}
	return n, amp
}
