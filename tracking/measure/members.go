package measure

import (
	"fmt"
	"math"
	"sort"
)

// members computes chord strain, rotation and bow of every member.
func (g *geom) members(levels []Level) []Member {
	byLevel := map[int]*Level{}
	for i := range levels {
		byLevel[levels[i].Level] = &levels[i]
	}
	r, _ := camera(g.in.Marks)
	// predicted returns the image length and the 3D length of the chord
	// a-b after the rigid motions of the ends' levels (twist, sway,
	// settlement), or NaN.
	predicted := func(a, b *point, row int) (float64, float64) {
		if g.cam == nil {
			return math.NaN(), math.NaN()
		}
		var uv [2][2]float64
		var xyz [2][3]float64
		for k, p := range []*point{a, b} {
			lv := byLevel[p.level]
			if p.level < 0 || !p.hasPlan || !p.hasH || lv == nil {
				return math.NaN(), math.NaN()
			}
			th, sw, st := 0.0, 0.0, 0.0
			if row >= 0 {
				sw, st = lv.SwayMM[row], lv.SettleMM[row]
				if lv.Observable {
					th = lv.TwistDeg[row] * math.Pi / 180
				}
			}
			if math.IsNaN(th) || math.IsNaN(sw) || math.IsNaN(st) {
				return math.NaN(), math.NaN()
			}
			ct, sn := math.Cos(th), math.Sin(th)
			x := ct*p.plan[0] - sn*p.plan[1] + sw*r[0]
			y := sn*p.plan[0] + ct*p.plan[1] + sw*r[1]
			u, v, ok := g.cam.Project(x, y, p.height-st)
			if !ok {
				return math.NaN(), math.NaN()
			}
			uv[k] = [2]float64{u, v}
			xyz[k] = [3]float64{x, y, p.height - st}
		}
		return math.Hypot(uv[1][0]-uv[0][0], uv[1][1]-uv[0][1]),
			norm3([3]float64{xyz[1][0] - xyz[0][0], xyz[1][1] - xyz[0][1], xyz[1][2] - xyz[0][2]})
	}
	var out []Member
	for _, mm := range g.in.Marks.Members {
		M := Member{ID: mm.ID, Kind: mm.Kind, Points: append([]string(nil), mm.Points...), Levels: [2]int{-1, -1},
			StrainPct: nanSlice(g.n), BowMM: nanSlice(g.n), BowFrac: nanSlice(g.n), RotationDeg: nanSlice(g.n), rawStrain: nanSlice(g.n)}
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
		M.refPx = refLen
		if a.hasPlan && b.hasPlan && a.hasH && b.hasH {
			M.LengthMM = math.Sqrt(sq(a.plan[0]-b.plan[0]) + sq(a.plan[1]-b.plan[1]) + sq(a.height-b.height))
		}
		refAng := math.Atan2(-(b.ref[1] - a.ref[1]), b.ref[0]-a.ref[0])
		refOff := make([]float64, len(ps))
		refVec := make([][2]float64, len(ps))
		tpar := make([]float64, len(ps))
		models := make([]*bowModel, len(ps))
		for i := 1; i < len(ps)-1; i++ {
			refOff[i] = perpOffset(a.ref, b.ref, ps[i].ref)
			tpar[i] = chordParam(a.ref, b.ref, ps[i].ref)
			refVec[i] = [2]float64{ps[i].ref[0] - (a.ref[0] + tpar[i]*(b.ref[0]-a.ref[0])), ps[i].ref[1] - (a.ref[1] + tpar[i]*(b.ref[1]-a.ref[1]))}
			models[i] = g.newBowModel(a, b, tpar[i], mm.Kind == "brace")
		}
		if mm.Kind == "brace" {
			M.slidFrom = g.slides(&M, ps, models, tpar, refVec, refLen, refAng)
		}
		// Turning with its levels changes a member's length in the image
		// but not in the tower. Where the ends' level motions are known, the
		// strain is the 3D length those motions give times what the image
		// shows beyond their predicted image length (both smoothed over
		// time, as level fits are noisy frame by frame).
		ratio, len3 := nanSlice(g.n), nanSlice(g.n)
		if p0, q0 := predicted(a, b, -1); p0 > 0 && q0 > 0 {
			for row := 0; row < g.n; row++ {
				p, q := predicted(a, b, row)
				ratio[row], len3[row] = p/p0, q/q0
			}
			ratio = trailingLine(ratio, ExcessWindow)
			len3 = trailingLine(len3, ExcessWindow)
		}
		for row := 0; row < g.n; row++ {
			ax, ay, okA := g.at(a, row)
			bx, by, okB := g.at(b, row)
			if !okA || !okB || refLen == 0 {
				continue
			}
			l := math.Hypot(bx-ax, by-ay)
			rawStrain := 100 * (l - refLen) / refLen
			M.StrainPct[row] = rawStrain
			M.rawStrain[row] = rawStrain
			if ratio[row] > 0 && len3[row] > 0 {
				M.StrainPct[row] = 100 * (len3[row]*(l/refLen)/ratio[row] - 1)
			}
			ang := math.Atan2(-(by - ay), bx-ax)
			M.RotationDeg[row] = wrapDeg((ang - refAng) * 180 / math.Pi)
			bow, seen := 0.0, false
			for i := 1; i < len(ps)-1; i++ {
				x, y, ok := g.at(ps[i], row)
				if !ok {
					continue
				}
				var d float64
				if models[i] != nil {
					dx := x - (ax + tpar[i]*(bx-ax)) - refVec[i][0]
					dy := y - (ay + tpar[i]*(by-ay)) - refVec[i][1]
					// The offset along the chord holds the oblique part of
					// the bow only while the member keeps its place; once its
					// chord has stretched or turned, perspective shifts the
					// interior point along the chord too, so only the
					// always-visible part is used.
					still := math.Abs(rawStrain) <= BowStillStrainPct && math.Abs(M.RotationDeg[row]) <= BowStillRotationDeg
					d = models[i].bow(dx, dy, still)
				} else {
					d = math.Abs(perpOffset([2]float64{ax, ay}, [2]float64{bx, by}, [2]float64{x, y})-refOff[i]) * g.s
				}
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
		L := Leg{Leg: name, LengthMM: refLen * g.s, HalfWaveMM: nanSlice(g.n), Row: -1, K: math.NaN(), PanelK: math.NaN(), Shape: ShapeStraight}
		if a.hasPlan && b.hasPlan && a.hasH && b.hasH {
			L.LengthMM = math.Sqrt(sq(a.plan[0]-b.plan[0]) + sq(a.plan[1]-b.plan[1]) + sq(a.height-b.height))
		}
		tpos := make([]float64, len(ps))
		refOff := make([]float64, len(ps))
		scale := make([]float64, len(ps))
		ux, uy := (b.ref[0]-a.ref[0])/refLen, (b.ref[1]-a.ref[1])/refLen
		for i, p := range ps {
			L.Points = append(L.Points, p.id)
			tpos[i] = ((p.ref[0]-a.ref[0])*ux + (p.ref[1]-a.ref[1])*uy) / refLen
			if p.hasH && a.hasH && b.hasH && b.height > a.height {
				tpos[i] = (p.height - a.height) / (b.height - a.height)
			}
			L.HeightsMM = append(L.HeightsMM, tpos[i]*L.LengthMM)
			if p.level < 0 && i > 0 && i < len(ps)-1 {
				L.midPanel = true
			}
			L.isLevel = append(L.isLevel, p.level >= 0 || i == 0 || i == len(ps)-1)
			refOff[i] = perpOffset(a.ref, b.ref, p.ref)
			scale[i] = g.offsetScale(a, b, p, false)
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
					d[i] = (perpOffset([2]float64{ax, ay}, [2]float64{bx, by}, [2]float64{x, y}) - refOff[i]) * scale[i]
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
			if lb, ok := panelBows(d, L.HeightsMM, L.isLevel); ok && lb.localized(thr) {
				L.HalfWaveMM[row] = L.HeightsMM[lb.hi] - L.HeightsMM[lb.lo]
			} else if n, amp := HalfWaves(interiorT, d[1:len(ps)-1], 4); n > 0 && math.Abs(amp) >= thr {
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
	l.HalfWaves, l.K, l.PanelK, l.Shape, l.Between = 0, math.NaN(), math.NaN(), ShapeStraight, [2]string{}
	if l.Row < 0 {
		l.Note = fmt.Sprintf("leg %s stayed straight within %.2f mm over its %.0f mm length", l.Leg, legThreshold(l.LengthMM), l.LengthMM)
		return
	}
	d := l.DeflectionMM[l.Row]
	euler := "Euler: P = pi^2 E I / (K L)^2, so the load a leg carries falls with the square of its effective length K L"
	if lb, ok := panelBows(d, l.HeightsMM, l.isLevel); ok && lb.localized(legThreshold(l.LengthMM)) {
		// One panel bowed between joints that stayed in line: a half-wave
		// from one braced point to the next.
		hw := l.HeightsMM[lb.hi] - l.HeightsMM[lb.lo]
		l.HalfWaves = 1
		l.K = hw / l.LengthMM
		l.PanelK = 1
		l.Between = [2]string{l.Points[lb.lo], l.Points[lb.hi]}
		if lb.lo == 0 && lb.hi == len(d)-1 {
			l.Shape = ShapeFullHeight
			l.Note = fmt.Sprintf("leg %s bent in one half-wave over its whole %.0f mm height: effective length K L = %.0f mm with K = %.2f (pinned-pinned over the full leg). %s", l.Leg, l.LengthMM, hw, l.K, euler)
			return
		}
		l.Shape = ShapeBetweenBraces
		l.Note = fmt.Sprintf("leg %s bowed %.1f mm between %s and %s while its braced joints stayed within %.1f mm of its line: it buckled between braces in one half-wave of %.0f mm, the panel's length (K = 1 over the panel, K = %.2f of the %.0f mm leg). %s; the bracing held the leg at its levels, and halving this panel's length would carry 4 times the load", l.Leg, math.Abs(lb.bow), l.Points[lb.lo], l.Points[lb.hi], lb.joints, hw, l.K, l.LengthMM, euler)
		return
	}
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

// offsetScale returns the millimetres per pixel of a sideways offset of
// point p from the chord a-b, as seen in the image. With a fitted camera and
// 3D end points it projects a 1 mm offset at p's place on the member: for a
// brace, perpendicular to the chord within the face the brace lies in (a
// brace bows within its face or out of it; in the face is the assumption);
// otherwise perpendicular to both the chord and the view direction (the
// smallest 3D offset that explains the image). Without a camera it is the
// marks' scale.
func (g *geom) offsetScale(a, b, p *point, brace bool) float64 {
	if g.cam == nil || !a.hasPlan || !b.hasPlan || !a.hasH || !b.hasH {
		return g.s
	}
	A := [3]float64{a.plan[0], a.plan[1], a.height}
	B := [3]float64{b.plan[0], b.plan[1], b.height}
	chord := [3]float64{B[0] - A[0], B[1] - A[1], B[2] - A[2]}
	cl := norm3(chord)
	dpx := math.Hypot(b.ref[0]-a.ref[0], b.ref[1]-a.ref[1])
	if cl == 0 || dpx == 0 {
		return g.s
	}
	// p's place along the chord, from the image.
	t := ((p.ref[0]-a.ref[0])*(b.ref[0]-a.ref[0]) + (p.ref[1]-a.ref[1])*(b.ref[1]-a.ref[1])) / (dpx * dpx)
	P := [3]float64{A[0] + t*chord[0], A[1] + t*chord[1], A[2] + t*chord[2]}
	_, c := camera(g.in.Marks)
	view := [3]float64{-c[0], -c[1], 0}
	minNorm := unit3(cross3(chord, view))
	dir := minNorm
	if brace && a.leg != "" && b.leg != "" && a.leg != b.leg {
		pa, _ := legPlanDir(a.leg)
		pb, _ := legPlanDir(b.leg)
		n := unit3([3]float64{pa[0] + pb[0], pa[1] + pb[1], 0}) // the face's outward normal
		if norm3(n) > 0 {
			if d := unit3(cross3(n, chord)); norm3(d) > 0 {
				dir = d
			}
		}
	}
	nx, ny := -(b.ref[1]-a.ref[1])/dpx, (b.ref[0]-a.ref[0])/dpx // image normal of the chord
	pxPerMM := func(d [3]float64) float64 {
		u0, v0, ok0 := g.cam.Project(P[0], P[1], P[2])
		u1, v1, ok1 := g.cam.Project(P[0]+d[0], P[1]+d[1], P[2]+d[2])
		if !ok0 || !ok1 {
			return 0
		}
		return math.Abs((u1-u0)*nx + (v1-v0)*ny)
	}
	f := pxPerMM(dir)
	if f < 0.5/g.s {
		f = pxPerMM(minNorm) // the face is seen nearly edge-on: fall back
	}
	if !(f > 0.5/g.s) || !(f < 2/g.s) {
		return g.s
	}
	return 1 / f
}

// legPlanDir returns the plan direction of a leg's corner from the axis.
func legPlanDir(leg string) ([2]float64, bool) {
	switch leg {
	case "A":
		return [2]float64{-1, -1}, true
	case "B":
		return [2]float64{1, -1}, true
	case "C":
		return [2]float64{1, 1}, true
	case "D":
		return [2]float64{-1, 1}, true
	}
	return [2]float64{}, false
}

func cross3(a, b [3]float64) [3]float64 {
	return [3]float64{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}

func norm3(a [3]float64) float64 { return math.Sqrt(a[0]*a[0] + a[1]*a[1] + a[2]*a[2]) }

func unit3(a [3]float64) [3]float64 {
	n := norm3(a)
	if n == 0 {
		return a
	}
	return [3]float64{a[0] / n, a[1] / n, a[2] / n}
}

// chordParam is p's position along the chord a-b (0 at a, 1 at b), in the image.
func chordParam(a, b, p [2]float64) float64 {
	dx, dy := b[0]-a[0], b[1]-a[1]
	l2 := dx*dx + dy*dy
	if l2 == 0 {
		return 0.5
	}
	return ((p[0]-a[0])*dx + (p[1]-a[1])*dy) / l2
}

// bowModel turns an interior point's image offset from its chord into a 3D
// bow in mm. Bending moves a member's points perpendicular to its axis, so
// the bow lies in the plane perpendicular to the chord; the camera sees that
// plane through the 2x2 matrix M (px per mm along two directions e1, e2 in
// it). e1 is perpendicular to the view direction (always visible); e2 is the
// other, seen only when the member is oblique to the camera. When M is well
// conditioned the full 2D offset gives both components; otherwise only the
// e1 component is used (the smallest 3D bow that explains the image).
type bowModel struct {
	n    [2]float64    // unit image normal of the chord
	cap  float64       // largest ratio of the full solve to the across-chord bow
	m    [2][2]float64 // columns: image of e1, e2 (px per mm)
	inv  [2][2]float64
	full bool
}

func (g *geom) newBowModel(a, b *point, t float64, brace bool) *bowModel {
	if g.cam == nil || !a.hasPlan || !b.hasPlan || !a.hasH || !b.hasH {
		return nil
	}
	A := [3]float64{a.plan[0], a.plan[1], a.height}
	B := [3]float64{b.plan[0], b.plan[1], b.height}
	chord := [3]float64{B[0] - A[0], B[1] - A[1], B[2] - A[2]}
	if norm3(chord) == 0 {
		return nil
	}
	P := [3]float64{A[0] + t*chord[0], A[1] + t*chord[1], A[2] + t*chord[2]}
	_, c := camera(g.in.Marks)
	e1 := unit3(cross3(chord, [3]float64{-c[0], -c[1], 0}))
	if norm3(e1) == 0 {
		return nil
	}
	e2 := unit3(cross3(chord, e1))
	img := func(d [3]float64) ([2]float64, bool) {
		const h = 1.0 // mm
		u0, v0, ok0 := g.cam.Project(P[0], P[1], P[2])
		u1, v1, ok1 := g.cam.Project(P[0]+h*d[0], P[1]+h*d[1], P[2]+h*d[2])
		return [2]float64{(u1 - u0) / h, (v1 - v0) / h}, ok0 && ok1
	}
	j1, ok1 := img(e1)
	j2, ok2 := img(e2)
	if !ok1 || !ok2 {
		return nil
	}
	dpx := math.Hypot(b.ref[0]-a.ref[0], b.ref[1]-a.ref[1])
	if dpx == 0 {
		return nil
	}
	bm := &bowModel{n: [2]float64{-(b.ref[1] - a.ref[1]) / dpx, (b.ref[0] - a.ref[0]) / dpx},
		m: [2][2]float64{{j1[0], j2[0]}, {j1[1], j2[1]}}}
	w := math.Hypot(bm.n[0]*j1[0]+bm.n[1]*j1[1], bm.n[0]*j2[0]+bm.n[1]*j2[1])
	if !(w > 0.25/g.s) {
		return nil // the chord's normal hardly sees any bow: fall back to the marks' scale
	}
	// How much of a bow within the brace's face shows across the chord: a
	// face seen obliquely hides part of it, and the cap on the full solve
	// widens by as much (up to 4 times).
	bm.cap = BowObliqueMax
	if brace && a.leg != "" && b.leg != "" && a.leg != b.leg {
		pa, _ := legPlanDir(a.leg)
		pb, _ := legPlanDir(b.leg)
		if nf := unit3([3]float64{pa[0] + pb[0], pa[1] + pb[1], 0}); norm3(nf) > 0 {
			if din := unit3(cross3(nf, chord)); norm3(din) > 0 {
				b1, b2 := din[0]*e1[0]+din[1]*e1[1]+din[2]*e1[2], din[0]*e2[0]+din[1]*e2[1]+din[2]*e2[2]
				across := math.Abs(bm.n[0]*(j1[0]*b1+j2[0]*b2)+bm.n[1]*(j1[1]*b1+j2[1]*b2)) / w
				if across > 0.25 {
					bm.cap = BowObliqueMax * math.Max(1, 1/across)
				} else {
					bm.cap = BowObliqueMax * 4
				}
			}
		}
	}
	n1 := math.Hypot(j1[0], j1[1])
	if !(n1 > 0.5/g.s) || !(n1 < 2/g.s) {
		return nil
	}
	det := j1[0]*j2[1] - j2[0]*j1[1]
	// Smallest singular value relative to the largest, via det / |M|^2.
	fro := j1[0]*j1[0] + j1[1]*j1[1] + j2[0]*j2[0] + j2[1]*j2[1]
	if math.Abs(det)/fro > BowConditionMin {
		bm.full = true
		bm.inv = [2][2]float64{{j2[1] / det, -j2[0] / det}, {-j1[1] / det, j1[0] / det}}
	}
	return bm
}

// BowConditionMin is the smallest |det M| / |M|^2 (about the ratio of
// M's singular values, halved) at which both components of a bow are
// solved from the image; below it only the always-visible one is.
const BowConditionMin = 0.2

// Limits of chord strain (percent) and rotation (degrees) within which a
// member's oblique bow component is read from the image (see bowModel).
const (
	BowStillStrainPct   = 1.0
	BowStillRotationDeg = 2.0
)

// bow returns the 3D bow in mm for an image offset (dx, dy) px; full
// allows the oblique component to be used. The offset across the chord is
// what a tracker measures best (the member's edges lie along it); alone it
// gives the smallest bow that explains it, b1. The full solve b2 also uses
// the offset along the chord, where trackers slip along a thin member, so
// it is trusted only up to BowObliqueMax times b1 (times more for a brace
// whose face is seen so obliquely that a bow in it hides across the chord).
func (bm *bowModel) bow(dx, dy float64, full bool) float64 {
	perp := dx*bm.n[0] + dy*bm.n[1]
	w := math.Hypot(bm.n[0]*bm.m[0][0]+bm.n[1]*bm.m[1][0], bm.n[0]*bm.m[0][1]+bm.n[1]*bm.m[1][1])
	b1 := math.Abs(perp) / w
	if bm.full && full {
		return math.Min(bm.solve(dx, dy), bm.cap*b1)
	}
	return b1
}

// solve returns the 3D bow, mm, that the full solve (both image components,
// uncapped) gives for an image offset (dx, dy) px; only for a full model.
func (bm *bowModel) solve(dx, dy float64) float64 {
	return math.Hypot(bm.inv[0][0]*dx+bm.inv[0][1]*dy, bm.inv[1][0]*dx+bm.inv[1][1]*dy)
}

// BowObliqueMax caps a bow read from both image components at this many
// times the bow read across the chord alone (for a brace, times the part of
// a bow in its face that shows across the chord).
const BowObliqueMax = 1.3

// trailingLine smooths x without lag on steady trends: each row's value is
// a straight line fitted to that row and the w-1 before it, evaluated at
// the row (NaN values skipped; NaN where the row itself is NaN).
func trailingLine(x []float64, w int) []float64 {
	out := make([]float64, len(x))
	var ts, ys []float64
	for i := range x {
		if math.IsNaN(x[i]) {
			out[i] = math.NaN()
			continue
		}
		ts, ys = ts[:0], ys[:0]
		for j := max(0, i-w+1); j <= i; j++ {
			if !math.IsNaN(x[j]) {
				ts = append(ts, float64(j))
				ys = append(ys, x[j])
			}
		}
		if len(ts) < 3 {
			out[i] = x[i]
			continue
		}
		slope, icept := lineFit(ts, ys)
		if math.IsNaN(slope) {
			out[i] = x[i]
			continue
		}
		out[i] = icept + slope*float64(i)
	}
	return out
}

// A brace's mid-point marker that something dark passes in front of (a
// cord, a hand) can hand its track over to the passing thing: the track
// then runs along the brace, or off it, while the brace's ends hold still.
// A bending brace cannot move its mid-point that way: bending moves it
// across the chord, and the part along the chord that an oblique view adds
// stays comparable to the part across it (the bow model caps the full solve
// at cap times the across-chord bow for that reason). So when, with the
// brace's chord still (BowStillStrainPct, BowStillRotationDeg), the bow its
// full solve implies exceeds SlideMinFrac of the brace's length and
// SlideRatio times what the model would accept (cap times the across-chord
// bow, plus the onset floor), the point has left the brace: it is not used
// from the row where that departure began (the last row its full solve was
// under the onset floor) on, once SlideRows such rows have run. Common
// practice (a consistency test of the measurement, like the bow model's own
// cap): on the 38 synthesizer scenes checked, genuinely bowing braces
// stayed below 1.3 times, a mid-point handed over to a cord reached 90
// times.
const (
	SlideRatio   = 4.0
	SlideMinFrac = 0.02
	SlideRows    = 5
)

// slides looks for interior points of a brace whose track left the brace
// (see SlideRatio), sets their points' slidFrom and adds a note for each;
// it returns the member's per-point rows (-1 = none), nil when none slid.
func (g *geom) slides(M *Member, ps []*point, models []*bowModel, tpar []float64, refVec [][2]float64, refLen, refAng float64) []int {
	a, b := ps[0], ps[len(ps)-1]
	floor := OnsetFloorFrac * M.LengthMM
	var out []int
	for i := 1; i < len(ps)-1; i++ {
		p, bm := ps[i], models[i]
		if bm == nil || !bm.full || p.level >= 0 || p.slidFrom >= 0 || !(M.LengthMM > 0) || refLen == 0 {
			continue
		}
		last := -1 // last row where the full solve was under the floor
		run := 0   // rows running that showed the point off the brace
		for row := 0; row < g.n; row++ {
			ax, ay, okA := g.at(a, row)
			bx, by, okB := g.at(b, row)
			x, y, ok := g.at(p, row)
			if !okA || !okB || !ok {
				continue
			}
			l := math.Hypot(bx-ax, by-ay)
			rot := wrapDeg((math.Atan2(-(by-ay), bx-ax) - refAng) * 180 / math.Pi)
			if math.Abs(100*(l-refLen)/refLen) > BowStillStrainPct || math.Abs(rot) > BowStillRotationDeg {
				continue
			}
			dx := x - (ax + tpar[i]*(bx-ax)) - refVec[i][0]
			dy := y - (ay + tpar[i]*(by-ay)) - refVec[i][1]
			implied := bm.solve(dx, dy)
			if implied <= floor {
				last = row
				continue
			}
			across := bm.bow(dx, dy, false)
			if !(implied > SlideMinFrac*M.LengthMM && implied > SlideRatio*(bm.cap*across+floor)) {
				run = 0
				continue
			}
			if run++; run >= SlideRows {
				p.slidFrom = last + 1
				if out == nil {
					out = make([]int, len(ps))
					for k := range out {
						out[k] = -1
					}
				}
				out[i] = p.slidFrom
				along := math.Abs(dx*(bx-ax)+dy*(by-ay)) / l * g.s
				g.slideNotes = append(g.slideNotes, fmt.Sprintf("point %s (marks line %d) moved %.1f mm along %s by frame %d while the brace's ends held still; a brace cannot bend that way, so its track followed something passing in front of the marker (a cord, a hand), and the point is not used from frame %d on", p.id, p.markLine, along, M.ID, g.in.Tracks.Frames[row], g.in.Tracks.Frames[p.slidFrom]))
				break
			}
		}
	}
	return out
}
