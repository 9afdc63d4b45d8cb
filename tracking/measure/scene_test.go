package measure

import (
	"fmt"
	"math"
	"math/rand"

	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/tracks"
)

// scene is a hand-built test tower: a tapered square tower with legs A-D,
// braced levels, and members, moved by known per-level rigid motions and
// member bows, and seen by a known camera. It stands in for the
// synthesizer in unit tests: the truth is exact and independent of the code
// under test (plain 3D geometry and a pinhole or orthographic projection).
type scene struct {
	base, top, height float64
	levels            []float64
	azDeg             float64
	legs              []string // legs whose points are marked
	dist              float64  // camera distance from the axis, mm; 0 = orthographic
	focal             float64  // px (pinhole) or px per mm (orthographic)
	camZ              float64  // camera height, mm
	cx, cy            float64
	faces             []string // faces with single diagonals ("AB", "BC")
	horizontals       bool
	midLeg            bool // add mid-panel leg points
	frames            int
	// motion per frame
	twist  func(level, frame int) float64    // degrees
	sway   func(level, frame int) [2]float64 // plan displacement, mm
	settle func(level, frame int) float64    // mm, down
	bow    func(member string, frame int) float64
	legBow func(leg string, frame int, h float64) float64 // sideways leg offset, mm, along the face normal (r direction)
	noise  float64                                        // px
	lost   func(id string, frame int) bool
	// quality of a tracked point's match; nil: 1
	quality func(id string, frame int) float64
	// drift, when set, moves a point's tracked position in the image by
	// this many pixels (a track following something else); nil: none
	drift func(id string, frame int) [2]float64
	seed  int64
}

type spt struct {
	id    string
	leg   string
	level int // -1 for mid points
	plan  [2]float64
	z     float64
	// for mid points: the member it belongs to
	a, b string
	frac float64
}

func (s *scene) width(z float64) float64 { return s.base + (s.top-s.base)*z/s.height }

func legPlan(leg string, w float64) [2]float64 {
	h := w / 2
	switch leg {
	case "A":
		return [2]float64{-h, -h}
	case "B":
		return [2]float64{h, -h}
	case "C":
		return [2]float64{h, h}
	}
	return [2]float64{-h, h}
}

func (s *scene) cam() (r, c [2]float64) {
	phi := s.azDeg * math.Pi / 180
	return [2]float64{math.Cos(phi), math.Sin(phi)}, [2]float64{math.Sin(phi), -math.Cos(phi)}
}

// project maps a 3D point (plan x, y, height z) to the image.
func (s *scene) project(x, y, z float64) (float64, float64) {
	r, c := s.cam()
	if s.dist == 0 {
		return s.cx + s.focal*(x*r[0]+y*r[1]), s.cy - s.focal*(z-s.camZ)
	}
	// Camera at dist along c, looking at the axis horizontally.
	rx, ry := x-s.dist*c[0], y-s.dist*c[1]
	depth := -(rx*c[0] + ry*c[1])
	xc := rx*r[0] + ry*r[1]
	return s.cx + s.focal*xc/depth, s.cy - s.focal*(z-s.camZ)/depth
}

func (s *scene) members() (pts []spt, mem []marks.Member) {
	for li, z := range s.levels {
		for _, leg := range s.legs {
			pts = append(pts, spt{id: fmt.Sprintf("%s%d", leg, li), leg: leg, level: li, plan: legPlan(leg, s.width(z)), z: z})
		}
	}
	for _, leg := range s.legs {
		var ids []string
		for li := range s.levels {
			ids = append(ids, fmt.Sprintf("%s%d", leg, li))
			if s.midLeg && li+1 < len(s.levels) {
				id := fmt.Sprintf("%s%d-%d", leg, li, li+1)
				pts = append(pts, spt{id: id, leg: leg, level: -1, a: fmt.Sprintf("%s%d", leg, li), b: fmt.Sprintf("%s%d", leg, li+1), frac: 0.5})
				ids = append(ids, id)
			}
		}
		mem = append(mem, marks.Member{ID: "leg-" + leg, Kind: "leg", Points: ids})
	}
	has := func(l string) bool {
		for _, x := range s.legs {
			if x == l {
				return true
			}
		}
		return false
	}
	for _, f := range s.faces {
		l1, l2 := f[:1], f[1:]
		if !has(l1) || !has(l2) {
			continue
		}
		for li := 1; li < len(s.levels); li++ {
			id := fmt.Sprintf("%s-d%d", f, li)
			a, b := fmt.Sprintf("%s%d", l1, li-1), fmt.Sprintf("%s%d", l2, li)
			mid := id + "-mid"
			pts = append(pts, spt{id: mid, level: -1, a: a, b: b, frac: 0.5})
			mem = append(mem, marks.Member{ID: id, Kind: "brace", Points: []string{a, mid, b}})
			if s.horizontals {
				hid := fmt.Sprintf("%s-h%d", f, li)
				mem = append(mem, marks.Member{ID: hid, Kind: "brace", Points: []string{fmt.Sprintf("%s%d", l1, li), fmt.Sprintf("%s%d", l2, li)}})
			}
		}
	}
	return pts, mem
}

// pos3 returns a point's 3D position at a frame.
func (s *scene) pos3(p spt, byID map[string]spt, frame int) [3]float64 {
	if p.level >= 0 {
		th := 0.0
		if s.twist != nil {
			th = s.twist(p.level, frame) * math.Pi / 180
		}
		var d [2]float64
		if s.sway != nil {
			d = s.sway(p.level, frame)
		}
		dz := 0.0
		if s.settle != nil {
			dz = s.settle(p.level, frame)
		}
		x := math.Cos(th)*p.plan[0] - math.Sin(th)*p.plan[1] + d[0]
		y := math.Sin(th)*p.plan[0] + math.Cos(th)*p.plan[1] + d[1]
		return [3]float64{x, y, p.z - dz}
	}
	a := s.pos3(byID[p.a], byID, frame)
	b := s.pos3(byID[p.b], byID, frame)
	var q [3]float64
	for k := 0; k < 3; k++ {
		q[k] = a[k] + p.frac*(b[k]-a[k])
	}
	r, _ := s.cam()
	if p.leg != "" {
		if s.legBow != nil {
			off := s.legBow(p.leg, frame, q[2])
			q[0] += off * r[0]
			q[1] += off * r[1]
		}
		return q
	}
	// Brace bow: in the face plane, perpendicular to the chord, i.e. mostly
	// sideways/vertical; we bow it along the chord's in-face normal.
	if s.bow != nil {
		mid := p.id[:len(p.id)-4]
		off := s.bow(mid, frame)
		// in-face direction perpendicular to the chord: chord (dx, dy, dz) and
		// the face's horizontal direction h: n = h*dz - up*(dh)
		dx, dy, dz := b[0]-a[0], b[1]-a[1], b[2]-a[2]
		dh := math.Hypot(dx, dy)
		hx, hy := dx/dh, dy/dh
		l := math.Sqrt(dh*dh + dz*dz)
		// n = (h * (-dz) + up * dh) / l
		q[0] += off * (-dz * hx) / l
		q[1] += off * (-dz * hy) / l
		q[2] += off * dh / l
	}
	return q
}

// build returns the marks and tracks of the scene.
func (s *scene) build() (*marks.File, *tracks.Tracks) {
	pts, mem := s.members()
	byID := map[string]spt{}
	for _, p := range pts {
		byID[p.id] = p
	}
	m := &marks.File{
		CaptureFPS: 1000,
		Camera:     &marks.Camera{AzimuthDeg: s.azDeg},
		Tower:      &marks.Tower{BaseMM: s.base, TopMM: s.top, HeightMM: s.height, LevelsMM: s.levels},
		Members:    mem,
	}
	for _, p := range pts {
		q := s.pos3(p, byID, 0)
		u, v := s.project(q[0], q[1], q[2])
		mp := marks.Point{ID: p.id, PX: [2]float64{u, v}, Leg: p.leg}
		if p.level >= 0 {
			lv := p.level
			mp.Level = &lv
		}
		m.Points = append(m.Points, mp)
	}
	// Scale along leg A (or the first marked leg), bottom to top.
	leg := s.legs[0]
	a, b := byID[leg+"0"], byID[fmt.Sprintf("%s%d", leg, len(s.levels)-1)]
	m.Scale = &marks.Scale{From: a.id, To: b.id, MM: math.Sqrt(sq(a.plan[0]-b.plan[0]) + sq(a.plan[1]-b.plan[1]) + sq(a.z-b.z))}
	rng := rand.New(rand.NewSource(s.seed))
	t := &tracks.Tracks{}
	for _, p := range pts {
		t.IDs = append(t.IDs, p.id)
	}
	for f := 0; f < s.frames; f++ {
		t.Frames = append(t.Frames, f)
		row := make([]tracks.Sample, len(pts))
		for j, p := range pts {
			if s.lost != nil && s.lost(p.id, f) {
				row[j] = tracks.Sample{X: math.NaN(), Y: math.NaN(), Lost: true}
				continue
			}
			q := s.pos3(p, byID, f)
			u, v := s.project(q[0], q[1], q[2])
			if s.drift != nil {
				d := s.drift(p.id, f)
				u, v = u+d[0], v+d[1]
			}
			row[j] = tracks.Sample{X: u + s.noise*rng.NormFloat64(), Y: v + s.noise*rng.NormFloat64(), Quality: 1}
			if s.quality != nil {
				row[j].Quality = s.quality(p.id, f)
			}
		}
		t.Samples = append(t.Samples, row)
	}
	return m, t
}

// newScene returns a 280 mm tower, 100 mm base, 50 mm top, four panels,
// seen at azimuth az from 1500 mm by a pinhole camera with about
// 0.3 mm/px at the axis.
func newScene(az float64) *scene {
	return &scene{base: 100, top: 50, height: 280, levels: []float64{0, 70, 140, 210, 280}, azDeg: az,
		legs: []string{"A", "B", "C"}, dist: 1500, focal: 1500 / 0.3, camZ: 140, cx: 400, cy: 300,
		faces: []string{"AB", "BC"}, horizontals: true, frames: 50, seed: 1}
}
