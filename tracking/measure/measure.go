package measure

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"sort"
	"strings"
	"sync"

	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/tracks"
)

// MinDepthFrac is the smallest spread of a level's points along the view
// direction, as a fraction of the level's width, for which twist is
// reported. Below it a twist of one degree moves the points by less than
// 0.15 w x 0.017, which tracking noise swamps.
const MinDepthFrac = 0.15

// Input is what Measure needs: the marks, the tracks and the capture rate.
type Input struct {
	// Marks is the marks file the tracks were started from.
	Marks *marks.File
	// Tracks are the tracked points; columns are matched to marks by id.
	Tracks *tracks.Tracks
	// CaptureFPS is the true capture rate, frames per second; 0 leaves times unknown.
	CaptureFPS float64
	// Energy is the motion energy, one value per Tracks row; optional.
	Energy []float64
	// Undistort maps a distorted image position to an undistorted one, in
	// pixels; nil means the identity (no lens correction).
	Undistort func(x, y float64) (float64, float64)
}

// Result holds the measured quantities, one value per Tracks row.
type Result struct {
	// MMPerPx is the scale at the tower in millimetres per pixel.
	MMPerPx float64
	// Levels are the braced levels that have marked points, lowest first.
	Levels []Level
	// Legs are the legs with at least three marked points, A to D.
	Legs []Leg
	// Members are the marks file's members, in its order.
	Members []Member
	// Notes are things the reader should know (scale source, geometry disagreements).
	Notes []string
	// Slid lists the brace mid-points whose track left their brace (see
	// SlideRatio), by point id: the first row from which the point is not
	// used.
	Slid map[string]int

	// Frames are the frame numbers of the rows (a copy of Tracks.Frames).
	Frames []int
}

// Level is one braced level's rigid in-plane motion.
type Level struct {
	// Level is the level number, 0 = base.
	Level int
	// Points are the ids of the level's marked points used in the fit.
	Points []string
	// WidthMM is the level's width in plan (largest extent of its points), mm.
	WidthMM float64
	// DepthSpreadMM is the spread of the points along the view direction, mm.
	DepthSpreadMM float64
	// Observable is false when twist cannot be seen from this camera.
	Observable bool
	// Note explains a missing number ("" when all is well).
	Note string
	// TwistDeg is the twist, degrees, counter-clockwise from above positive; NaN where unknown.
	TwistDeg []float64
	// SwayMM is the level centre's displacement along the camera's right
	// vector, mm; NaN where unknown. When Observable is false it is only the
	// sideways motion of the face toward the camera, with any twist not
	// separated from it (the Note says so), not true sway.
	SwayMM []float64
	// SettleMM is the vertical displacement, mm, positive down; NaN where unknown.
	SettleMM []float64
}

// Member is one member's chord and bow history.
type Member struct {
	// ID and Kind are copied from the marks file.
	ID, Kind string
	// Points are the member's point ids: end, interior points..., end.
	Points []string
	// Leg is the leg letter of the member's points, for legs ("" otherwise).
	Leg string
	// Levels are the lowest and highest levels among the member's points (-1 when unknown).
	Levels [2]int
	// LengthMM is the member's length: from the plan and level heights when
	// both ends have them, otherwise the chord in the reference frame times the scale.
	LengthMM float64
	// StrainPct is the chord length change relative to the reference frame,
	// percent (+ = longer). With a fitted camera and ends at levels, the
	// change of the chord's image length that the levels' rigid motions
	// explain (a member turning with its level looks shorter) is divided out.
	StrainPct []float64
	// BowMM is the largest perpendicular offset of an interior point from the
	// chord, change since the reference frame, mm (>= 0; NaN without interior
	// points). For a leg marked at mid-panel it is the larger of its braced
	// joints' offsets from the leg's chord and its panels' own bows (see
	// legBow), so a leg buckling between braces shows its panel's bow.
	BowMM []float64
	// BowFrac is BowMM over LengthMM.
	BowFrac []float64
	// RotationDeg is the chord's rotation in the image since the reference
	// frame, degrees, counter-clockwise as seen in the image positive.
	RotationDeg []float64

	panelMM   float64   // for a leg marked at mid-panel: its longest panel, mm (else 0)
	rawStrain []float64 // the chord's image length change, percent, before the levels' motions are divided out (nil: not kept)
	refPx     float64   // the chord's length in the reference frame, px (0: unknown)
	slidFrom  []int     // per point: the row from which its track is not used because it left the member (see SlideRatio); -1 = none; nil = none at all
}

// Leg is one leg's deflected shape.
type Leg struct {
	// Leg is the leg letter, A to D.
	Leg string
	// Points are the leg's point ids, bottom to top.
	Points []string
	// HeightsMM are the points' heights above the leg's lowest point, mm.
	HeightsMM []float64
	// LengthMM is the leg's length between its end points, mm.
	LengthMM float64
	// DeflectionMM is each point's offset from the straight line through the
	// leg's end points (change since the reference frame), mm, image-right
	// positive; one row per Tracks row, one column per point, NaN where lost.
	DeflectionMM [][]float64
	// HalfWaveMM is the buckled half-wavelength estimated per row, mm; NaN
	// while the leg is straight within noise or not tracked.
	HalfWaveMM []float64
	// Row is the row the summary below describes (the largest deflection
	// before the leg's points were lost), -1 when the leg never deflected.
	Row int
	// HalfWaves is the number of half-waves over the leg's length at Row (0 = none seen).
	HalfWaves int
	// K is the effective length factor implied by the shape at Row, relative
	// to the leg's full length: half-wavelength / LengthMM (NaN when unknown).
	K float64
	// Shape is "full_height", "between_braces" or "straight".
	Shape string
	// Between are the ids of the two points the buckled half-wave ran
	// between when one panel bowed while the leg's braced joints stayed in
	// line (a leg marked at mid-panel; "" otherwise).
	Between [2]string
	// PanelK is the effective length factor over the length between those
	// two points: half-wavelength / that length, 1 for a panel buckling as a
	// pinned-pinned Euler column between its braces (NaN otherwise).
	PanelK float64
	// Note states the shape's meaning and the Euler relation it rests on.
	Note string

	midPanel bool   // some point sits between braced levels
	isLevel  []bool // per point: at a braced level (or the leg's end)
}

// point is a marked point with its derived geometry.
type point struct {
	id       string
	col      int // Tracks column, -1 when not tracked
	ref      [2]float64
	plan     [2]float64
	hasPlan  bool
	level    int // -1 when none
	height   float64
	hasH     bool
	leg      string
	markLine int
	slidFrom int // row from which the track is not used (it left its member); -1 = never
}

// rows gives undistorted positions of a point per row.
type geom struct {
	in         Input
	s          float64
	pts        map[string]*point
	order      []string
	n          int
	undist     func(x, y float64) (float64, float64)
	cam        *Pinhole             // nil when no camera could be fitted
	excess     map[string][]float64 // per joint id, per row: deflection beyond what the levels' motion explains, mm (trailing median)
	excessRaw  map[string][]float64 // the same, row by row
	slideNotes []string             // one per point found to have left its member
}

// jointExcess returns, for each leg joint between its leg's end levels,
// its sideways deflection from the leg's chord (mm, undoing the lean of the
// leg's image) minus the deflection a twist varying linearly with height
// between the leg's end levels (from the rigid first pass) would give it.
// What is left is the level's common sideways offset plus the leg's own
// bending; comparing joints of one level separates the two.
func (g *geom) jointExcess(legs []Leg, levels []Level) map[string][]float64 {
	_, c := camera(g.in.Marks)
	byLevel := map[int]*Level{}
	for i := range levels {
		byLevel[levels[i].Level] = &levels[i]
	}
	out := map[string][]float64{}
	g.excessRaw = map[string][]float64{}
	for li := range legs {
		l := &legs[li]
		n := len(l.Points)
		ps := make([]*point, n)
		for k, id := range l.Points {
			ps[k] = g.pts[id]
		}
		a, b := ps[0], ps[n-1]
		la, lb := byLevel[a.level], byLevel[b.level]
		if a.level < 0 || b.level < 0 || !a.hasPlan || !b.hasPlan || !a.hasH || !b.hasH || la == nil || lb == nil || b.height <= a.height {
			continue
		}
		cosLean := math.Abs(b.ref[1]-a.ref[1]) / math.Hypot(b.ref[0]-a.ref[0], b.ref[1]-a.ref[1])
		ea := a.plan[0]*c[0] + a.plan[1]*c[1]
		eb := b.plan[0]*c[0] + b.plan[1]*c[1]
		for k := 1; k < n-1; k++ {
			p := ps[k]
			if p.level < 0 || !p.hasPlan || !p.hasH {
				continue
			}
			ep := p.plan[0]*c[0] + p.plan[1]*c[1]
			t := (p.height - a.height) / (b.height - a.height)
			ex := nanSlice(g.n)
			for row := 0; row < g.n; row++ {
				ta, tb := la.TwistDeg[row]*math.Pi/180, lb.TwistDeg[row]*math.Pi/180
				tp := ta + t*(tb-ta)
				pred := tp*ep - ((1-t)*ta*ea + t*tb*eb)
				ex[row] = l.DeflectionMM[row][k]/cosLean - pred
			}
			// A leg bends over many frames; a median over ExcessWindow rows
			// keeps a single noisy row from taking a joint out of its level.
			g.excessRaw[p.id] = ex
			out[p.id] = movingMedian(ex, ExcessWindow)
		}
	}
	return out
}

// ExcessWindow is the number of rows in the moving median of a joint's
// excess deflection.
const ExcessWindow = 9

// movingMedian returns the trailing moving median of x over w rows: each
// row's value from that row and the w-1 before it, so that what happens
// later (a collapse) never leaks back into earlier rows (NaN values skipped;
// NaN where a row itself is NaN).
func movingMedian(x []float64, w int) []float64 {
	out := make([]float64, len(x))
	buf := make([]float64, 0, w)
	for i := range x {
		if math.IsNaN(x[i]) {
			out[i] = math.NaN()
			continue
		}
		buf = buf[:0]
		for j := max(0, i-w+1); j <= i; j++ {
			if !math.IsNaN(x[j]) {
				buf = append(buf, x[j])
			}
		}
		out[i] = median(buf)
	}
	return out
}

// bowingJoint returns the index in ps of a leg joint that the bending of
// its leg has carried away from the level's rigid motion in this row, or -1.
// Among three or more joints with a known excess deflection (jointExcess),
// the one that differs most from the mean of the others is taken when it
// differs by at least JointBowMM and by three times the others' spread.
func (g *geom) bowingJoint(ps []*point, row int) int {
	var idx []int
	var r []float64
	for i, p := range ps {
		ex, ok := g.excess[p.id]
		if !ok || row >= len(ex) || math.IsNaN(ex[row]) {
			continue
		}
		idx = append(idx, i)
		v := ex[row]
		// A joint kicked away at once (a leg snapping) counts at once; the
		// median would take a few rows to follow it.
		if raw := g.excessRaw[p.id]; row < len(raw) && math.Abs(raw[row]) > 10*JointBowMM && math.Abs(raw[row]) > math.Abs(v) {
			v = raw[row]
		}
		r = append(r, v)
	}
	if len(r) < 3 {
		// Too few joints to compare: only a joint plainly carried off its
		// level (KickedMM) is named; the caller then drops the row if too
		// few points remain.
		best, bi := 0.0, -1
		for j := range r {
			if a := math.Abs(r[j]); a > KickedMM && a > best {
				best, bi = a, idx[j]
			}
		}
		return bi
	}
	best, bi := 0.0, -1
	for j := range r {
		others := without(r, j)
		if d := math.Abs(r[j] - mean(others)); d > best && d >= 3*spread(others) {
			best, bi = d, idx[j]
		}
	}
	if bi < 0 || best < JointBowMM {
		return -1
	}
	return bi
}

// cornerShare spreads a joint's own sideways displacement delta (mm along
// the camera's right vector r) over the level as the mean of its four
// corners does: the twist changes by (rho x delta r) / (4 |rho|^2) rad and
// the sway by delta / 4, where rho is the joint's plan position from the
// level centre.
func cornerShare(rho, r [2]float64, delta float64) (dTwist, dSway float64) {
	r2 := rho[0]*rho[0] + rho[1]*rho[1]
	if r2 == 0 {
		return 0, delta / 4
	}
	return (rho[0]*r[1] - rho[1]*r[0]) * delta / (4 * r2), delta / 4
}

func (g *geom) at(p *point, row int) (x, y float64, ok bool) {
	if p.col < 0 || (p.slidFrom >= 0 && row >= p.slidFrom) {
		return math.NaN(), math.NaN(), false
	}
	smp := g.in.Tracks.Samples[row][p.col]
	if smp.Lost || math.IsNaN(smp.X) || math.IsNaN(smp.Y) || math.IsInf(smp.X, 0) || math.IsInf(smp.Y, 0) {
		return math.NaN(), math.NaN(), false
	}
	x, y = g.undist(smp.X, smp.Y)
	return x, y, true
}

// Measure computes per-row twist, sway, settlement, leg deflection and
// member strain, rotation and bow from tracked points.
func Measure(in Input) (*Result, error) {
	if in.Marks == nil {
		return nil, errors.New("measure: no marks")
	}
	if in.Tracks == nil {
		return nil, errors.New("measure: no tracks")
	}
	t := in.Tracks
	if len(t.Samples) != len(t.Frames) {
		return nil, fmt.Errorf("measure: tracks have %d frames but %d sample rows", len(t.Frames), len(t.Samples))
	}
	for i, row := range t.Samples {
		if len(row) != len(t.IDs) {
			return nil, fmt.Errorf("measure: tracks row %d (frame %d) has %d samples for %d points", i, t.Frames[i], len(row), len(t.IDs))
		}
	}
	if in.Energy != nil && len(in.Energy) != len(t.Frames) {
		return nil, fmt.Errorf("measure: %d motion energy values for %d frames", len(in.Energy), len(t.Frames))
	}
	if in.CaptureFPS < 0 || math.IsNaN(in.CaptureFPS) || math.IsInf(in.CaptureFPS, 0) {
		return nil, fmt.Errorf("measure: capture rate %g fps is not usable", in.CaptureFPS)
	}
	for _, id := range t.IDs {
		if _, ok := in.Marks.Point(id); !ok {
			return nil, fmt.Errorf("measure: tracked point %q is not in the marks file", id)
		}
	}
	g := &geom{in: in, pts: map[string]*point{}, n: len(t.Frames), undist: in.Undistort}
	if g.undist == nil {
		g.undist = func(x, y float64) (float64, float64) { return x, y }
	}
	res := &Result{Frames: append([]int(nil), t.Frames...)}
	m := in.Marks
	for _, mp := range m.Points {
		p := &point{id: mp.ID, col: t.Index(mp.ID), level: -1, leg: mp.Leg, markLine: mp.Line, slidFrom: -1}
		p.ref[0], p.ref[1] = g.undist(mp.PX[0], mp.PX[1])
		p.plan, p.hasPlan = m.PlanOf(mp)
		if mp.Level != nil {
			p.level = *mp.Level
			if m.Tower != nil && p.level >= 0 && p.level < len(m.Tower.LevelsMM) {
				p.height, p.hasH = m.Tower.LevelsMM[p.level], true
			}
		}
		g.pts[mp.ID] = p
		g.order = append(g.order, mp.ID)
	}
	s, note, err := g.scale()
	if err != nil {
		return nil, err
	}
	g.s = s
	res.MMPerPx = s
	if note != "" {
		res.Notes = append(res.Notes, note)
	}
	var camNote string
	g.cam, camNote = g.fitCamera()
	if camNote != "" {
		res.Notes = append(res.Notes, camNote)
	}
	if m.Camera == nil {
		// Without an azimuth in the marks, take it from the fitted camera's
		// position; sway is measured along the camera's right vector.
		mc := *m
		if az, ok := g.cam.Azimuth(); ok {
			mc.Camera = &marks.Camera{AzimuthDeg: az}
			res.Notes = append(res.Notes, fmt.Sprintf("no camera azimuth in the marks: %.1f degrees taken from the camera fitted to the marked points", az))
		} else {
			mc.Camera = &marks.Camera{}
			res.Notes = append(res.Notes, "no camera azimuth in the marks and none could be fitted: 0 degrees assumed (camera square to face A-B); add camera.azimuth_deg to the marks")
		}
		g.in.Marks = &mc
	}
	res.Legs = g.legs()
	// Two passes: the levels as rigid figures, then again with any joint
	// that its own bending leg carried away from its level handled apart.
	rigid, _ := g.levels(nil)
	g.excess = g.jointExcess(res.Legs, rigid)
	res.Levels, res.Notes = g.levels(res.Notes)
	if len(res.Levels) == 0 {
		for _, id := range g.order {
			if p := g.pts[id]; p.level >= 0 && !p.hasPlan {
				res.Notes = append(res.Notes, fmt.Sprintf("twist and sway not measured: level points (such as %s) have no plan position; add a tower block (base_mm, top_mm, height_mm, levels_mm) or plan_mm to the points", id))
				break
			}
		}
	}
	res.Members = g.members(res.Levels)
	for _, id := range g.order {
		if p := g.pts[id]; p.slidFrom >= 0 {
			if res.Slid == nil {
				res.Slid = map[string]int{}
			}
			res.Slid[id] = p.slidFrom
		}
	}
	res.Notes = append(res.Notes, g.slideNotes...)
	panelAwareLegBows(res)
	return res, nil
}

// CheckMarks reports what in a marks file keeps Measure from working (no
// scale and no tower block to take one from) without any tracks, so a
// caller can refuse the marks before tracking. The message does not name the
// marks file; the caller does.
func CheckMarks(m *marks.File) error {
	ids := make([]string, len(m.Points))
	for i, p := range m.Points {
		ids[i] = p.ID
	}
	_, err := Measure(Input{Marks: m, Tracks: &tracks.Tracks{IDs: ids}})
	if err != nil {
		return errors.New(strings.TrimPrefix(err.Error(), "measure: "))
	}
	return nil
}

// scale returns mm per pixel from the marks' scale, or from two level points
// on one leg when the marks give no scale.
func (g *geom) scale() (float64, string, error) {
	m := g.in.Marks
	if m.Scale != nil {
		a, b := g.pts[m.Scale.From], g.pts[m.Scale.To]
		if a == nil || b == nil {
			return 0, "", fmt.Errorf("measure: scale names unknown points %q, %q", m.Scale.From, m.Scale.To)
		}
		d := math.Hypot(a.ref[0]-b.ref[0], a.ref[1]-b.ref[1])
		if !(d >= 1) || !(m.Scale.MM > 0) {
			return 0, "", fmt.Errorf("measure: scale %s-%s is %.3g px long; need a known distance of at least 1 px", m.Scale.From, m.Scale.To, d)
		}
		return m.Scale.MM / d, "", nil
	}
	// Fallback: the longest run of one leg between two points with known plan and height.
	best, bestPX := 0.0, 0.0
	var bestA, bestB string
	for _, ida := range g.order {
		a := g.pts[ida]
		if !a.hasPlan || !a.hasH || a.leg == "" {
			continue
		}
		for _, idb := range g.order {
			b := g.pts[idb]
			if idb <= ida || !b.hasPlan || !b.hasH || b.leg != a.leg {
				continue
			}
			d3 := math.Sqrt(sq(a.plan[0]-b.plan[0]) + sq(a.plan[1]-b.plan[1]) + sq(a.height-b.height))
			dpx := math.Hypot(a.ref[0]-b.ref[0], a.ref[1]-b.ref[1])
			if d3 > best && dpx >= 1 {
				best, bestPX, bestA, bestB = d3, dpx, ida, idb
			}
		}
	}
	if best == 0 {
		return 0, "", errors.New("measure: the marks give no scale (add a scale entry with a known distance, or a tower block with leg points at two levels)")
	}
	return best / bestPX, fmt.Sprintf("no scale entry in the marks; scale %.4f mm/px taken from leg points %s-%s and the tower block", best/bestPX, bestA, bestB), nil
}

func sq(x float64) float64 { return x * x }

// camera returns the right vector r and toward-camera vector c in plan.
func camera(m *marks.File) (r, c [2]float64) {
	phi := 0.0
	if m.Camera != nil {
		phi = m.Camera.AzimuthDeg * math.Pi / 180
	}
	return [2]float64{math.Cos(phi), math.Sin(phi)}, [2]float64{math.Sin(phi), -math.Cos(phi)}
}

func nanSlice(n int) []float64 {
	s := make([]float64, n)
	for i := range s {
		s[i] = math.NaN()
	}
	return s
}

// levels fits each level's rigid motion per row.
func (g *geom) levels(notes []string) ([]Level, []string) {
	byLevel := map[int][]*point{}
	var nums []int
	for _, id := range g.order {
		p := g.pts[id]
		if p.level < 0 || !p.hasPlan || p.col < 0 {
			continue
		}
		if _, ok := byLevel[p.level]; !ok {
			nums = append(nums, p.level)
		}
		byLevel[p.level] = append(byLevel[p.level], p)
	}
	sort.Ints(nums)
	r, c := camera(g.in.Marks)
	cam := g.cam
	azNote := "; mark points on two faces and film from a camera azimuth of roughly 15-35 degrees off a face so the points sit at different depths"
	var out []Level
	var fits []func()
	for _, lv := range nums {
		ps := byLevel[lv]
		L := Level{Level: lv, TwistDeg: nanSlice(g.n), SwayMM: nanSlice(g.n), SettleMM: nanSlice(g.n)}
		q := make([]float64, len(ps))
		e := make([]float64, len(ps))
		minX, maxX, minY, maxY := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
		for i, p := range ps {
			L.Points = append(L.Points, p.id)
			q[i] = p.plan[0]*r[0] + p.plan[1]*r[1]
			e[i] = p.plan[0]*c[0] + p.plan[1]*c[1]
			minX, maxX = math.Min(minX, p.plan[0]), math.Max(maxX, p.plan[0])
			minY, maxY = math.Min(minY, p.plan[1]), math.Max(maxY, p.plan[1])
		}
		L.WidthMM = math.Max(maxX-minX, maxY-minY)
		L.DepthSpreadMM = spread(e)
		sL := g.s
		// The level's own scale from its reference positions, when its points
		// spread sideways: it absorbs the level's distance from the camera.
		if len(ps) >= 2 && spread(q) > 0.3*L.WidthMM && L.WidthMM > 0 {
			uref := make([]float64, len(ps))
			for i, p := range ps {
				uref[i] = p.ref[0]
			}
			slope, _ := lineFit(q, uref)
			if slope > 0 {
				sl := 1 / slope
				// Against the scale the fitted camera gives at the level's
				// height (a camera well above or below the tower sees its
				// levels at different distances), else the marks' scale.
				want, against := g.s, "the marks' scale"
				if ws, ok := cam.levelScale(ps, r); ok {
					want, against = ws, "the camera fitted to the marks"
				}
				if math.Abs(sl/want-1) <= 0.1 {
					sL = sl
				} else {
					notes = append(notes, fmt.Sprintf("level %d: its marked points' plan positions and image positions disagree on scale by %.0f%% with %s (check the camera azimuth, the tower sizes and the point legs); using the marks' scale", lv, 100*(sl/want-1), against))
				}
			}
		}
		switch {
		case len(ps) < 2:
			L.Note = fmt.Sprintf("level %d has %d marked point with a plan position; twist and sway need at least two points at different depths (three give a check)%s", lv, len(ps), azNote)
		case L.WidthMM <= 0 || L.DepthSpreadMM < MinDepthFrac*L.WidthMM:
			L.Note = fmt.Sprintf("level %d: twist is not observable from this camera: its points span %.1f mm in depth, under %.0f%% of the level's %.1f mm width; its sway is only the sideways motion of the face toward the camera, twist not separated (a twist of 1 degree alone would move that face %.2f mm sideways), so it is true sway only where the tower did not twist%s", lv, L.DepthSpreadMM, 100*MinDepthFrac, L.WidthMM, L.WidthMM/2*math.Pi/180, azNote)
		default:
			L.Observable = true
		}
		for row := 0; row < g.n; row++ {
			var qs, es, us []float64
			var dv []float64
			var vp []*point
			for i, p := range ps {
				x, y, ok := g.at(p, row)
				if !ok {
					continue
				}
				qs = append(qs, q[i])
				es = append(es, e[i])
				us = append(us, sL*(x-p.ref[0])+q[i])
				dv = append(dv, sL*(y-p.ref[1]))
				vp = append(vp, p)
			}
			if len(dv) > 0 {
				L.SettleMM[row] = mean(dv)
			}
			if len(us) < 2 || len(ps) < 2 {
				continue
			}
			if L.Observable && g.lostCarried(ps, row) {
				continue
			}
			if L.Observable && spread(es) >= MinDepthFrac*L.WidthMM {
				// A joint carried off by its bending leg is left out of the
				// rigid fit and added back as the mean of the corners does.
				bj := g.bowingJoint(vp, row)
				fq, fe, fu := qs, es, us
				if bj >= 0 {
					fq, fe, fu = without(qs, bj), without(es, bj), without(us, bj)
					if len(fq) < 2 || spread(fe) < MinDepthFrac*L.WidthMM {
						if g.kicked(vp[bj].id, row) {
							continue // no number rather than a wrong one
						}
						bj, fq, fe, fu = -1, qs, es, us
					}
				}
				th, a, ok := FitTwist(fq, fe, fu)
				if ok {
					if bj >= 0 {
						ct, st := math.Cos(th), math.Sin(th)
						delta := us[bj] - (ct*qs[bj] + st*es[bj] + a)
						pl := vp[bj].plan
						dt, ds := cornerShare([2]float64{ct*pl[0] - st*pl[1], st*pl[0] + ct*pl[1]}, r, delta)
						th += dt
						a += ds
					}
					L.TwistDeg[row] = th * 180 / math.Pi
					L.SwayMM[row] = a
				}
			} else if !L.Observable {
				// Sway with the twist taken as zero.
				var d []float64
				for i := range us {
					d = append(d, us[i]-qs[i])
				}
				L.SwayMM[row] = mean(d)
			}
		}
		if cam != nil && len(ps) >= 2 {
			i, ps := len(out), ps
			fits = append(fits, func() { g.perspectiveLevel(cam, &out[i], ps, c) })
		}
		out = append(out, L)
	}
	// The perspective fits, the costly part, only write their own level's
	// series: they run side by side.
	parallel(fits)
	return out, notes
}

// parallel runs the jobs on up to GOMAXPROCS goroutines and waits for them.
func parallel(jobs []func()) {
	next := make(chan func())
	var wg sync.WaitGroup
	for w := 0; w < min(len(jobs), runtime.GOMAXPROCS(0)); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for job := range next {
				job()
			}
		}()
	}
	for _, job := range jobs {
		next <- job
	}
	close(next)
	wg.Wait()
}

// fitCamera fits a pinhole camera to the marked points with known plan
// positions and heights; nil (and a note) when they do not allow it.
func (g *geom) fitCamera() (*Pinhole, string) {
	var xyz [][3]float64
	var uv [][2]float64
	for _, id := range g.order {
		p := g.pts[id]
		if p.hasPlan && p.hasH {
			xyz = append(xyz, [3]float64{p.plan[0], p.plan[1], p.height})
			uv = append(uv, p.ref)
		}
	}
	if len(xyz) == 0 {
		return nil, "level motion from a near-orthographic view (no perspective correction): the marks give no level heights (add a tower block with levels_mm)"
	}
	cam, err := FitPinhole(xyz, uv)
	if err != nil {
		return nil, fmt.Sprintf("level motion from a near-orthographic view (no perspective correction): %v", err)
	}
	if cam.RMS > MaxCameraRMS {
		return nil, fmt.Sprintf("level motion from a near-orthographic view: a pinhole camera fitted to the %d marked points with plan positions misses them by %.1f px RMS (over %.1f px), so the marks' plan positions, tower sizes or azimuth may be off", len(xyz), cam.RMS, MaxCameraRMS)
	}
	return cam, ""
}

// DepthPriorWeakMM and DepthPriorMM are the departures of a level's motion
// toward the camera, in mm, that cost as much as one pixel of misfit in the
// perspective level fit: weak while that motion is first estimated, firm
// around its smoothed value in the final fit. Such motion shows only as a
// slight change of scale, so left free in each frame it would soak up
// tracking noise and pull the twist with it.
const (
	DepthPriorWeakMM = 50.0
	DepthPriorMM     = 0.5
)

// MaxCameraRMS is the largest reprojection error, px, at which the fitted
// pinhole camera is trusted for perspective-corrected level motion.
const MaxCameraRMS = 3.0

// perspectiveLevel replaces the level's near-orthographic motion with a fit
// through the pinhole camera wherever that fit succeeds.
func (g *geom) perspectiveLevel(cam *Pinhole, L *Level, ps []*point, toward [2]float64) {
	r, _ := camera(g.in.Marks)
	// Pass 1 finds the slow motion toward the camera with a weak prior; pass
	// 2 solves every row again with that motion, smoothed over time, as a
	// firm prior, so tracking noise cannot trade depth for twist.
	depth := nanSlice(g.n)
	g.perspectivePass(cam, L, ps, toward, r, nil, depth)
	g.perspectivePass(cam, L, ps, toward, r, movingMedian(depth, DepthWindow), nil)
}

// DepthWindow is the number of rows over which a level's motion toward the
// camera is smoothed (a moving median) before the final perspective fit.
const DepthWindow = 15

// perspectivePass fits every row of one level through the camera; with
// prior == nil it uses a weak depth prior at 0 and records the fitted
// depth motion in depthOut, otherwise it holds the depth near prior[row].
func (g *geom) perspectivePass(cam *Pinhole, L *Level, ps []*point, toward, r [2]float64, prior, depthOut []float64) {
	var x0 [4]float64
	for row := 0; row < g.n; row++ {
		var xyz [][3]float64
		var ref, obs [][2]float64
		var es []float64
		var vp []*point
		for _, p := range ps {
			x, y, ok := g.at(p, row)
			if !ok {
				continue
			}
			xyz = append(xyz, [3]float64{p.plan[0], p.plan[1], p.height})
			ref = append(ref, p.ref)
			obs = append(obs, [2]float64{x, y})
			es = append(es, p.plan[0]*toward[0]+p.plan[1]*toward[1])
			vp = append(vp, p)
		}
		if len(xyz) < 2 {
			continue
		}
		twist := L.Observable && spread(es) >= MinDepthFrac*L.WidthMM
		if L.Observable && !twist {
			continue // this row lacks the points that show twist
		}
		if L.Observable && g.lostCarried(ps, row) {
			L.TwistDeg[row], L.SwayMM[row] = math.NaN(), math.NaN()
			continue
		}
		if !twist {
			x0[0] = 0
		}
		bj := -1
		fx, fr, fo := xyz, ref, obs
		if twist {
			if bj = g.bowingJoint(vp, row); bj >= 0 {
				if fe := without(es, bj); len(fe) >= 2 && spread(fe) >= MinDepthFrac*L.WidthMM {
					fx, fr, fo = without3(xyz, bj), without2(ref, bj), without2(obs, bj)
				} else if g.kicked(vp[bj].id, row) {
					L.TwistDeg[row], L.SwayMM[row] = math.NaN(), math.NaN()
					continue // no number rather than a wrong one
				} else {
					bj = -1
				}
			}
		}
		p0, pmm := 0.0, DepthPriorWeakMM
		if prior != nil {
			if p0, pmm = prior[row], DepthPriorMM; math.IsNaN(p0) {
				p0, pmm = 0, DepthPriorWeakMM
			}
		}
		x, ok := cam.levelPose(fx, fr, fo, toward, x0, p0, pmm, twist)
		if !ok {
			continue
		}
		x0 = x
		if depthOut != nil {
			depthOut[row] = x[1]*toward[0] + x[2]*toward[1]
			continue
		}
		th, sway := x[0], x[1]*r[0]+x[2]*r[1]
		if bj >= 0 {
			// The joint's own sideways displacement: observed minus the
			// level's rigid motion, in mm along r at the joint.
			p := xyz[bj]
			ct, st := math.Cos(th), math.Sin(th)
			mx, my := ct*p[0]-st*p[1]+x[1], st*p[0]+ct*p[1]+x[2]
			u1, _, ok1 := cam.Project(mx, my, p[2]-x[3])
			u0, _, ok0 := cam.Project(p[0], p[1], p[2])
			ur, _, okr := cam.Project(mx+r[0], my+r[1], p[2]-x[3])
			if ok1 && ok0 && okr && ur != u1 {
				pred := ref[bj][0] + u1 - u0
				delta := (obs[bj][0] - pred) / (ur - u1)
				dt, ds := cornerShare([2]float64{ct*p[0] - st*p[1], st*p[0] + ct*p[1]}, r, delta)
				th += dt
				sway += ds
			}
		}
		if twist {
			L.TwistDeg[row] = th * 180 / math.Pi
		}
		L.SwayMM[row] = sway
		L.SettleMM[row] = x[3]
	}
}

func spread(x []float64) float64 {
	if len(x) == 0 {
		return 0
	}
	lo, hi := x[0], x[0]
	for _, v := range x {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	return hi - lo
}

func mean(x []float64) float64 {
	s := 0.0
	for _, v := range x {
		s += v
	}
	return s / float64(len(x))
}

// lineFit returns slope and intercept of y on x by least squares.
func lineFit(x, y []float64) (slope, icept float64) {
	mx, my := mean(x), mean(y)
	var sxy, sxx float64
	for i := range x {
		sxy += (x[i] - mx) * (y[i] - my)
		sxx += (x[i] - mx) * (x[i] - mx)
	}
	if sxx == 0 {
		return math.NaN(), math.NaN()
	}
	slope = sxy / sxx
	return slope, my - slope*mx
}

func without(x []float64, i int) []float64 {
	return append(append([]float64(nil), x[:i]...), x[i+1:]...)
}

func without2(x [][2]float64, i int) [][2]float64 {
	return append(append([][2]float64(nil), x[:i]...), x[i+1:]...)
}

func without3(x [][3]float64, i int) [][3]float64 {
	return append(append([][3]float64(nil), x[:i]...), x[i+1:]...)
}

// KickedMM is a joint's excess deflection, mm, beyond which it is plainly
// not moving with its level (its leg has snapped or slipped): such a joint
// is left out of the level's fit even where there are too few joints to
// compare, and the row is given no number rather than a wrong one.
const KickedMM = 1.0

// JointBowMM is the smallest deflection of a joint from its leg's chord,
// beyond what the levels' motion explains, in mm, for which the joint is
// treated as carried by its bending leg rather than moving with its level
// (well above tracking noise, small enough that a bending leg barely pulls
// the level's fit; common practice).
const JointBowMM = 0.1

// kicked reports whether a joint's excess deflection in row is beyond KickedMM.
func (g *geom) kicked(id string, row int) bool {
	raw := g.excessRaw[id]
	return row < len(raw) && math.Abs(raw[row]) > KickedMM
}

// lostCarried reports whether a level point that is not tracked in row was
// being carried off its level by its own leg when last seen: the mean of
// the level's corners then cannot be told, so the row gets no number.
func (g *geom) lostCarried(ps []*point, row int) bool {
	for _, p := range ps {
		if _, _, ok := g.at(p, row); ok {
			continue
		}
		ex := g.excess[p.id]
		for r := min(row, len(ex)) - 1; r >= 0; r-- {
			if !math.IsNaN(ex[r]) {
				if math.Abs(ex[r]) >= 3*JointBowMM {
					return true
				}
				break
			}
		}
	}
	return false
}
