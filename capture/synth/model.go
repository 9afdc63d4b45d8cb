package synth

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
)

const legLetters = "ABCD"

// Loading block size relative to the top width, and its height in mm.
const (
	blockFrac     = 0.8
	blockHeightMM = 18.0
)

// anchor ties a member's material parameter s (0 at its first end, 1 at its
// last) to a node whose position the deformation moves.
type anchor struct {
	s    float64
	node int
}

// member is a leg, brace or the block's marker pair.
type member struct {
	id, kind string
	face     int // face index 0..3 (AB, BC, CD, DA), -1 for legs
	panel    int // panel (diagonals) or level (horizontals); 0 for legs
	anchors  []anchor
	thick    float64
	rest     float64
	pointIDs []string // end, interior..., end (for the marks file)
	front    bool
	tex      *barTexture
}

// pointDef is a named point: a node, or a point at parameter s on a member.
type pointDef struct {
	id     string
	node   int // >= 0 for joints and crossings
	member int // >= 0 for interior member points
	s      float64
	block  int // 1 or 2 for the block's stickers, else 0
	leg    string
	level  int // -1 when not at a level
	marker bool
	rest   vec3
}

// node is a joint (leg and level) or an X crossing.
type node struct {
	id    string
	leg   int // -1 for crossings
	level int
	rest  vec3
	// crossing: the two members and the parameter of the crossing on each
	xa, xb   int
	sa, sb   float64
	crossing bool
}

// model is the tower, the camera and the deformation history of a scenario.
type model struct {
	s        Scenario
	n        int
	levelsZ  []float64
	cam      camera
	camDir   vec3 // horizontal unit vector from the axis toward the camera
	nodes    []node
	members  []member
	points   []pointDef
	faceNorm [4]vec3
	front    [4]bool

	// failure
	fail         int // member index, -1 for a twist or joint failure
	failPanel    int // the panel a leg buckles in between braces, else 0
	joint        int // node index of a joint that lets go, else -1
	jointFirst   int // the member reported first for a joint failure
	detach       map[int]detachment
	mode         string
	span0, span1 float64
	sBreak       float64
	bowDir       vec3
	bOn, bBreak  float64
	tau, e0      float64
	kick0        vec3
	kick1        vec3

	// global motion
	twistTop   float64 // radians, just before collapse
	swayDir    vec3
	swayVibDir vec3
	vibHz      float64
	settleMax  float64

	// collapse
	zLo, zHi  float64
	leanAxis  vec3
	leanMax   float64
	dropMax   float64
	twistC    float64
	nCollapse float64
	// after the break, before the collapse: the failed panel shears
	shearDir   vec3
	shearMM    float64
	shearTwist float64

	// block
	blockFace int // side face (0..3 as faces) carrying the stickers

	// swinging cord in front of the tower
	cordAmp, cordPeriod, cordPhase float64
}

// cordAt returns the bottom and top of the cord's axis at time t (frames).
func (m *model) cordAt(t float64) (vec3, vec3) {
	right := m.cam.rows[0]
	x := m.cordAmp * math.Sin(2*math.Pi*t/m.cordPeriod+m.cordPhase)
	base := m.camDir.scale(0.3 * m.s.DistanceMM).add(right.scale(x))
	return base.add(vec3{0, 0, -100}), base.add(vec3{0, 0, 3 * m.s.HeightMM})
}

// shake returns the image shift of the camera shake at time t (frames).
func (m *model) shake(t float64) (float64, float64) {
	if m.s.ShakePX == 0 {
		return 0, 0
	}
	hit := m.tCollapse() + m.nCollapse
	d := (t - hit) / m.s.CaptureFPS // seconds since the load hit the floor
	if d <= 0 {
		return 0, 0
	}
	a := m.s.ShakePX * math.Exp(-d/0.06) * math.Min(1, d/0.004)
	return a * math.Sin(2*math.Pi*23*d), 0.6 * a * math.Sin(2*math.Pi*31*d+1)
}

// memberIDs lists the member ids of a scenario's bracing pattern (without building the model).
func memberIDs(s Scenario) []string {
	var ids []string
	for _, m := range buildMembers(s, nil) {
		ids = append(ids, m.id)
	}
	return ids
}

func hLevels(s Scenario) []int {
	var ks []int
	switch s.Bracing {
	case BracingHorizontal, BracingZ:
		for k := 1; k <= s.Levels; k++ {
			ks = append(ks, k)
		}
	default:
		ks = []int{s.Levels}
	}
	return ks
}

// jointIndex returns the node index of leg l at level k.
func jointIndex(n, l, k int) int { return l*(n+1) + k }

// buildMembers lists the members of the pattern; when m is not nil it also
// creates the crossing nodes in m.
func buildMembers(s Scenario, m *model) []member {
	n := s.Levels
	var ms []member
	for l := 0; l < 4; l++ {
		mb := member{id: "leg-" + string(legLetters[l]), kind: "leg", face: -1, thick: s.LegMM}
		for k := 0; k <= n; k++ {
			mb.anchors = append(mb.anchors, anchor{s: float64(k) / float64(n), node: jointIndex(n, l, k)})
			mb.pointIDs = append(mb.pointIDs, fmt.Sprintf("%c%d", legLetters[l], k))
		}
		ms = append(ms, mb)
	}
	hs := hLevels(s)
	for f := 0; f < 4; f++ {
		l1, l2 := f, (f+1)%4
		fn := string(legLetters[l1]) + string(legLetters[l2])
		brace := func(id string, panel int, a, b int) member {
			return member{id: id, kind: "brace", face: f, panel: panel, thick: s.BraceMM,
				anchors: []anchor{{0, a}, {1, b}}}
		}
		for p := 1; p <= n; p++ {
			for _, k := range hs {
				if k == p {
					mb := brace(fmt.Sprintf("%s-h%d", fn, k), k, jointIndex(n, l1, k), jointIndex(n, l2, k))
					ms = append(ms, mb)
				}
			}
			switch s.Bracing {
			case BracingZ:
				ms = append(ms, brace(fmt.Sprintf("%s-d%d", fn, p), p, jointIndex(n, l1, p-1), jointIndex(n, l2, p)))
			case BracingDiagonal:
				if p%2 == 1 {
					ms = append(ms, brace(fmt.Sprintf("%s-d%d", fn, p), p, jointIndex(n, l1, p-1), jointIndex(n, l2, p)))
				} else {
					ms = append(ms, brace(fmt.Sprintf("%s-d%d", fn, p), p, jointIndex(n, l2, p-1), jointIndex(n, l1, p)))
				}
			case BracingX:
				a := brace(fmt.Sprintf("%s-x%da", fn, p), p, jointIndex(n, l1, p-1), jointIndex(n, l2, p))
				b := brace(fmt.Sprintf("%s-x%db", fn, p), p, jointIndex(n, l2, p-1), jointIndex(n, l1, p))
				if m != nil {
					ci := len(m.nodes)
					m.nodes = append(m.nodes, node{id: fmt.Sprintf("%s-x%d-cross", fn, p), leg: -1, level: -1,
						crossing: true, xa: len(ms), xb: len(ms) + 1})
					pa0, pa1 := m.nodes[a.anchors[0].node].rest, m.nodes[a.anchors[1].node].rest
					pb0, pb1 := m.nodes[b.anchors[0].node].rest, m.nodes[b.anchors[1].node].rest
					sa, sb := lineCross(pa0, pa1, pb0, pb1)
					m.nodes[ci].sa, m.nodes[ci].sb = sa, sb
					m.nodes[ci].rest = lerp3(lerp3(pa0, pa1, sa), lerp3(pb0, pb1, sb), 0.5)
					a.anchors = []anchor{a.anchors[0], {sa, ci}, a.anchors[1]}
					b.anchors = []anchor{b.anchors[0], {sb, ci}, b.anchors[1]}
				}
				ms = append(ms, a, b)
			}
		}
	}
	return ms
}

// lineCross returns the parameters of the closest points of lines a0-a1 and
// b0-b1 (for coplanar lines, their crossing).
func lineCross(a0, a1, b0, b1 vec3) (float64, float64) {
	u, v, w := a1.sub(a0), b1.sub(b0), a0.sub(b0)
	a, b, c, d, e := u.dot(u), u.dot(v), v.dot(v), u.dot(w), v.dot(w)
	den := a*c - b*b
	return (b*e - c*d) / den, (a*e - b*d) / den
}

func newModel(s Scenario) *model {
	m := &model{s: s, n: s.Levels}
	n := s.Levels
	for k := 0; k <= n; k++ {
		m.levelsZ = append(m.levelsZ, s.HeightMM*float64(k)/float64(n))
	}
	az := s.AzimuthDeg * math.Pi / 180
	m.camDir = vec3{math.Sin(az), -math.Cos(az), 0}
	m.cam = newCamera(s, vec3{0, 0, (s.HeightMM + blockHeightMM) / 2})

	// joints
	for l := 0; l < 4; l++ {
		for k := 0; k <= n; k++ {
			m.nodes = append(m.nodes, node{id: fmt.Sprintf("%c%d", legLetters[l], k), leg: l, level: k, rest: m.restJoint(l, k)})
		}
	}
	m.faceNorm = [4]vec3{{0, -1, 0}, {1, 0, 0}, {0, 1, 0}, {-1, 0, 0}}
	best, bestDot := 0, -2.0
	for f := 0; f < 4; f++ {
		d := m.faceNorm[f].dot(m.camDir)
		m.front[f] = d > 0.17
		if d > bestDot {
			best, bestDot = f, d
		}
	}
	m.blockFace = best
	m.members = buildMembers(s, m)
	rng := rand.New(rand.NewPCG(uint64(s.Seed), 0x7a3f))
	for i := range m.members {
		mb := &m.members[i]
		first, last := mb.anchors[0].node, mb.anchors[len(mb.anchors)-1].node
		mb.rest = m.nodes[last].rest.sub(m.nodes[first].rest).norm()
		mb.tex = newBarTexture(rng, mb.rest)
		if mb.face >= 0 {
			mb.front = m.front[mb.face]
		} else {
			l := int(mb.id[4] - 'A')
			mb.front = m.front[l] || m.front[(l+3)%4]
		}
	}
	m.buildPoints()
	m.setupFailure(best, rng)
	return m
}

// restJoint is the nominal position of leg l at level k.
func (m *model) restJoint(l, k int) vec3 {
	z := m.levelsZ[k]
	w := m.s.BaseMM + (m.s.TopMM-m.s.BaseMM)*z/m.s.HeightMM
	h := w / 2
	switch l {
	case 0:
		return vec3{-h, -h, z}
	case 1:
		return vec3{h, -h, z}
	case 2:
		return vec3{h, h, z}
	}
	return vec3{-h, h, z}
}

// buildPoints names every point: joints, brace interior points, crossings
// and the block's stickers, and fills in the members' point lists.
func (m *model) buildPoints() {
	n := m.n
	for l := 0; l < 4; l++ {
		front := m.front[l] || m.front[(l+3)%4]
		mb := &m.members[l] // legs are the first four members, in leg order
		mb.pointIDs = nil
		for k := 0; k <= n; k++ {
			ni := jointIndex(n, l, k)
			m.points = append(m.points, pointDef{id: m.nodes[ni].id, node: ni, member: -1,
				leg: string(legLetters[l]), level: k, marker: front, rest: m.nodes[ni].rest})
			mb.pointIDs = append(mb.pointIDs, m.nodes[ni].id)
			if k == n || !m.s.LegMidMarkers {
				continue
			}
			// mid-panel point of panel k+1, between levels k and k+1
			s := (float64(k) + 0.5) / float64(n)
			id := legMidID(mb.id, k+1)
			m.points = append(m.points, pointDef{id: id, node: -1, member: l, s: s,
				leg: string(legLetters[l]), level: -1, marker: front,
				rest: lerp3(m.nodes[ni].rest, m.nodes[jointIndex(n, l, k+1)].rest, 0.5)})
			mb.pointIDs = append(mb.pointIDs, id)
		}
	}
	seenCross := map[int]bool{}
	for mi := range m.members {
		mb := &m.members[mi]
		if mb.kind == "leg" {
			continue
		}
		end0, end1 := m.nodes[mb.anchors[0].node].id, m.nodes[mb.anchors[len(mb.anchors)-1].node].id
		ids := []string{end0}
		add := func(id string, s float64) {
			p0, p1 := m.nodes[mb.anchors[0].node].rest, m.nodes[mb.anchors[len(mb.anchors)-1].node].rest
			m.points = append(m.points, pointDef{id: id, node: -1, member: mi, s: s, level: -1, marker: mb.front, rest: lerp3(p0, p1, s)})
			ids = append(ids, id)
		}
		if len(mb.anchors) == 3 { // X member: quarter points and the shared crossing
			c := mb.anchors[1]
			add(mb.id+"-q1", c.s/2)
			if !seenCross[c.node] {
				seenCross[c.node] = true
				m.points = append(m.points, pointDef{id: m.nodes[c.node].id, node: c.node, member: -1, level: -1,
					marker: mb.front, rest: m.nodes[c.node].rest})
			}
			ids = append(ids, m.nodes[c.node].id)
			add(mb.id+"-q3", (c.s+1)/2)
		} else {
			add(mb.id+"-mid", 0.5)
		}
		mb.pointIDs = append(ids, end1)
	}
	// the block's two stickers, on the side facing the camera
	for i := 1; i <= 2; i++ {
		m.points = append(m.points, pointDef{id: fmt.Sprintf("block-%c", 'a'+i-1), node: -1, member: -1, block: i, level: -1, marker: true,
			rest: m.blockSticker(i)})
	}
}

// legMidID names the mid-panel point of a leg member in a panel (1 =
// between levels 0 and 1): "leg-A-mid2".
func legMidID(leg string, panel int) string { return fmt.Sprintf("%s-mid%d", leg, panel) }

// blockCorners returns the block's rest corners: bottom 0-3 then top 4-7,
// each counter-clockwise from the A corner.
func (m *model) blockCorners() [8]vec3 {
	h := m.s.TopMM * blockFrac / 2
	z0, z1 := m.s.HeightMM, m.s.HeightMM+blockHeightMM
	xy := [4][2]float64{{-h, -h}, {h, -h}, {h, h}, {-h, h}}
	var c [8]vec3
	for i := 0; i < 4; i++ {
		c[i] = vec3{xy[i][0], xy[i][1], z0}
		c[i+4] = vec3{xy[i][0], xy[i][1], z1}
	}
	return c
}

// blockSticker is the rest position of the block's sticker i (1 or 2): on the
// side facing the camera, at a quarter and three quarters of its width.
func (m *model) blockSticker(i int) vec3 {
	c := m.blockCorners()
	f := m.blockFace
	a, b := c[f], c[(f+1)%4]
	t := 0.25
	if i == 2 {
		t = 0.75
	}
	p := lerp3(a, b, t)
	p.z += blockHeightMM / 2
	return p
}

// setupFailure chooses the failing member and the bow, break and collapse.
func (m *model) setupFailure(frontFace int, rng *rand.Rand) {
	s := m.s
	n := m.n
	m.fail, m.joint, m.jointFirst = -1, -1, -1
	id := s.Fail
	if id == "" {
		if s.Bracing == BracingHorizontal {
			bestL, bestD := 0, -1e9
			for l := 0; l < 4; l++ {
				if d := m.restJoint(l, 0).dot(m.camDir); d > bestD {
					bestL, bestD = l, d
				}
			}
			id = "leg-" + string(legLetters[bestL])
		} else {
			fn := string(legLetters[frontFace]) + string(legLetters[(frontFace+1)%4])
			if s.Bracing == BracingX {
				id = fn + "-x1a"
			} else {
				id = fn + "-d1"
			}
		}
	}
	legID, panel, hasPanel := splitLegPanel(id)
	if hasPanel {
		id = legID
	}
	for i, mb := range m.members {
		if mb.id == id {
			m.fail = i
		}
	}
	sign := 1.0
	if rng.IntN(2) == 0 {
		sign = -1
	}
	right := m.cam.rows[0]
	twist := s.twistDeg() * math.Pi / 180
	m.twistTop = twist
	sa := (rng.Float64()*2 - 1) * 30 * math.Pi / 180
	m.swayDir = rotZ(right, sa)
	m.swayVibDir = rotZ(right, sa+math.Pi/3)
	m.vibHz = 7 + 4*rng.Float64()
	m.settleMax = 0.4 + 0.3*rng.Float64()
	m.nCollapse = math.Max(8, math.Round(0.05*s.CaptureFPS))
	m.cordAmp = 0.45 * s.BaseMM
	m.cordPeriod = (0.9 + 0.4*rng.Float64()) * s.CaptureFPS
	m.cordPhase = rng.Float64() * 2 * math.Pi
	lean := rotZ(m.camDir, (rng.Float64()*2-1)*math.Pi)

	if strings.HasPrefix(id, JointPrefix) {
		for i, nd := range m.nodes {
			if !nd.crossing && nd.id == strings.TrimPrefix(id, JointPrefix) {
				m.joint = i
			}
		}
	}
	switch {
	case m.joint >= 0:
		m.setupJoint(rng)
	case m.fail < 0:
		m.mode = ModeTowerTwist
		m.zLo, m.zHi = 0, s.HeightMM
		m.leanMax, m.dropMax, m.twistC = 10*math.Pi/180, 0.25*s.HeightMM, 30*math.Pi/180
	default:
		mb := m.members[m.fail]
		m.span0, m.span1 = 0, 1
		m.sBreak = 0.42 // beside the mid-span sticker, so the gap shows
		p0, p1 := m.nodes[mb.anchors[0].node].rest, m.nodes[mb.anchors[len(mb.anchors)-1].node].rest
		axis := p1.sub(p0).unit()
		switch {
		case mb.kind == "leg" && s.Bracing == BracingHorizontal && !hasPanel:
			m.mode = ModeLegFullHeight
			m.sBreak = (math.Floor(float64(n)/2) + 0.5) / float64(n)
			m.bowDir = right.sub(axis.scale(right.dot(axis))).unit().scale(sign)
			m.zLo, m.zHi = 0, s.HeightMM
			lean = m.bowDir
			m.leanMax, m.dropMax, m.twistC = 22*math.Pi/180, 0.2*s.HeightMM, 12*math.Pi/180
		case mb.kind == "leg":
			// one panel bows as a half-sine between its two braced levels,
			// which stay in line (Euler column with K = 1 over the panel)
			m.mode = ModeLegBetweenBraces
			if !hasPanel {
				panel = 1
			}
			m.failPanel = panel
			m.span0, m.span1 = float64(panel-1)/float64(n), float64(panel)/float64(n)
			m.sBreak = m.span0 + 0.42*(m.span1-m.span0) // beside the mid-panel sticker
			m.bowDir = right.sub(axis.scale(right.dot(axis))).unit().scale(sign)
			m.zLo, m.zHi = m.levelsZ[panel-1], m.levelsZ[panel]
			lean = m.bowDir
			m.leanMax, m.dropMax, m.twistC = 25*math.Pi/180, 0.5*(m.zHi-m.zLo), 8*math.Pi/180
		default:
			m.mode = ModeBraceBuckling
			if len(mb.anchors) == 3 {
				m.span1 = mb.anchors[1].s
				m.sBreak = 0.42 * m.span1
			}
			f := mb.face
			l1, l2 := f, (f+1)%4
			a, b, c := m.restJoint(l1, 0), m.restJoint(l2, 0), m.restJoint(l1, n)
			nf := b.sub(a).cross(c.sub(a)).unit()
			if nf.dot(m.faceNorm[f]) < 0 {
				nf = nf.scale(-1)
			}
			inPlane := nf.cross(axis).unit()
			out := 0.35
			if rng.IntN(2) == 0 {
				out = -0.35
			}
			m.bowDir = inPlane.scale(sign).add(nf.scale(out)).unit()
			lo := mb.panel - 1 // a diagonal's panel, or the panel below a horizontal
			if lo < 0 {
				lo = 0
			}
			m.zLo, m.zHi = m.levelsZ[lo], m.levelsZ[mb.panel]
			lean = m.faceNorm[f]
			m.shearDir = b.sub(a).unit().scale(sign)
			m.leanMax, m.dropMax, m.twistC = 28*math.Pi/180, 0.5*(m.zHi-m.zLo), 8*math.Pi/180
		}
		spanLen := mb.rest * (m.span1 - m.span0)
		m.bBreak = 0.05 * spanLen
		if mb.kind == "leg" {
			m.bBreak = 0.04 * spanLen
		}
		m.bOn = 0.005 * mb.rest * (1 + 1e-9)
		if m.bBreak < 2*m.bOn {
			m.bBreak = 2 * m.bOn
		}
		m.tau = float64(s.BreakFrame-s.OnsetFrame) / math.Log(m.bBreak/m.bOn)
		m.e0 = math.Exp(-float64(s.OnsetFrame) / m.tau)
		side := axis.cross(m.bowDir).unit()
		if m.shearDir == (vec3{}) {
			m.shearDir = vec3{m.bowDir.x, m.bowDir.y, 0}.unit()
		}
		m.shearMM = math.Min(3, 0.025*(m.zHi-m.zLo))
		m.shearTwist = 0.25 * m.twistTop
		// the halves spring apart: further along the bow, sliding past each other
		m.kick0 = m.bowDir.scale(1.5 * m.bBreak).sub(axis.scale(1.5)).add(side.scale(1.2))
		m.kick1 = m.bowDir.scale(1.0 * m.bBreak).add(axis.scale(1.5)).sub(side.scale(1.0))
	}
	if m.joint >= 0 {
		return // setupJoint chose the lean
	}
	m.leanAxis = vec3{0, 0, 1}.cross(vec3{lean.x, lean.y, 0}.unit())
}

// detachment is how one member end comes off a failing joint.
type detachment struct {
	end  int  // 0 = the member's first end, 1 = its last
	kick vec3 // where that end goes (mm, rest frame) once the joint has let go
}

// jointSlip returns how far along its kick a failing joint has moved at time
// t: creeping a tenth of the way from the onset, then popping at the break.
func (m *model) jointSlip(t float64) float64 {
	on, tb := float64(m.s.OnsetFrame), m.tBreak()
	switch {
	case t <= on:
		return 0
	case t <= tb:
		r := (t - on) / (tb - on)
		return 0.1 * r * r
	}
	return 0.1 + 0.9*(1-math.Exp(-(t-tb)/1.5))
}

// JointPrefix in Scenario.Fail names a joint that lets go, as in "joint-B2".
const JointPrefix = "joint-"

// bow returns the failing member's bow amplitude (mm) at time t (frames)
// before the break.
func (m *model) bow(t float64) float64 {
	if t <= 0 {
		return 0
	}
	if b := m.tBreak(); t > b {
		t = b
	}
	return m.bOn * (math.Exp((t-float64(m.s.OnsetFrame))/m.tau) - m.e0) / (1 - m.e0)
}

// off is the failing member's displacement (rest-frame directions, mm) at
// parameter s on half h (0 before the break point, 1 after) at time t.
func (m *model) off(s float64, half int, t float64) vec3 {
	if s < m.span0 || s > m.span1 {
		return vec3{}
	}
	shape := math.Sin(math.Pi * (s - m.span0) / (m.span1 - m.span0))
	bt := m.tBreak()
	if t <= bt {
		return m.bowDir.scale(m.bow(t) * shape)
	}
	e := 1 - math.Exp(-(t-bt)/1.5) // a snapped stick springs apart within a few frames
	d := m.bowDir.scale(m.bBreak * shape)
	if half == 0 {
		return d.add(m.kick0.scale(e * (s - m.span0) / (m.sBreak - m.span0)))
	}
	return d.add(m.kick1.scale(e * (m.span1 - s) / (m.span1 - m.sBreak)))
}

// tBreak is the instant the failing member snaps: half a frame before the
// break frame, so that the break frame is the first to show it.
func (m *model) tBreak() float64 { return float64(m.s.BreakFrame) - 0.5 }

// tCollapse is the instant the collapse starts: half a frame before the
// collapse frame, so that the collapse frame is the first to move.
func (m *model) tCollapse() float64 { return float64(m.s.CollapseFrame) - 0.5 }

func (m *model) broken(t float64) bool {
	return (m.fail >= 0 || m.joint >= 0) && t > m.tBreak()
}

// level motion before collapse: twist (rad), sway (plan vector) and
// settlement (mm down) of a point at rest height z at time t.
func (m *model) levelMotion(z, t float64) (float64, vec3, float64) {
	s := m.s
	c := float64(s.CollapseFrame)
	// twist and sway reach their set values when the first member breaks
	// (for a twist failure: at the collapse); settlement at the collapse
	end := c
	if m.fail >= 0 || m.joint >= 0 {
		end = m.tBreak()
	}
	tt := math.Max(0, math.Min(t, end))
	h := z / s.HeightMM
	var g float64
	if m.fail < 0 && m.joint < 0 {
		on := float64(s.OnsetFrame)
		if tt < on {
			g = 0.15 * tt / on
		} else {
			r := (tt - on) / (end - on)
			g = 0.15 + 0.85*r*r
		}
	} else {
		r := tt / end
		g = r * r
	}
	twist := m.twistTop * g * h
	r := tt / end
	sway := m.swayDir.scale(s.SwayMM * h * h * math.Pow(r, 1.5))
	tv := math.Max(0, math.Min(t, c))
	vib := 0.04 * s.SwayMM * h * h * math.Sin(2*math.Pi*m.vibHz*tv/s.CaptureFPS)
	sway = sway.add(m.swayVibDir.scale(vib))
	settle := m.settleMax * h * tv / c
	return twist, sway, settle
}

// transform moves a point from its (bow-displaced) rest position p with rest
// height z0 to its position at time t: level twist, sway and settlement, then
// the collapse.
func (m *model) transform(p vec3, z0, t float64) vec3 {
	tw, sw, se := m.levelMotion(z0, t)
	w := (z0 - m.zLo) / (m.zHi - m.zLo)
	w = math.Max(0, math.Min(1, w))
	if m.broken(t) && w > 0 {
		// the panel that lost its member shears and twists a little more
		e := w * (1 - math.Exp(-(t-m.tBreak())/5))
		tw += m.shearTwist * e
		sw = sw.add(m.shearDir.scale(m.shearMM * e))
	}
	q := rotZ(p, tw).add(sw)
	q.z -= se
	c := (t - m.tCollapse()) / m.nCollapse
	if c <= 0 || w == 0 {
		return q
	}
	if c > 1 {
		c = 1
	}
	c2 := 0.25*c + 0.75*c*c // released spring energy, then gravity
	hinge := vec3{0, 0, m.zLo}
	d := q.sub(hinge)
	d = rotZ(d, m.twistC*c2*w)
	d = rotate(d, m.leanAxis, m.leanMax*c2*w)
	q = hinge.add(d)
	q.z -= m.dropMax * c2 * w
	return q
}

// pose is every node's position at one time.
type pose struct {
	t     float64
	nodes []vec3
	block [8]vec3
}

func (m *model) pose(t float64) *pose {
	ps := &pose{t: t, nodes: make([]vec3, len(m.nodes))}
	var failLeg = -1
	if m.fail >= 0 && m.members[m.fail].kind == "leg" {
		failLeg = m.fail // legs are the first four members, in leg order
	}
	for i, nd := range m.nodes {
		if nd.crossing {
			continue
		}
		p := nd.rest
		if i == m.joint && nd.level == 0 {
			p = p.add(m.detach[-1].kick.scale(m.jointSlip(t)))
		}
		if nd.leg == failLeg {
			sl := float64(nd.level) / float64(m.n)
			half := 0
			if sl > m.sBreak {
				half = 1
			}
			p = p.add(m.off(sl, half, t))
		}
		ps.nodes[i] = m.transform(p, nd.rest.z, t)
	}
	for i, nd := range m.nodes {
		if !nd.crossing {
			continue
		}
		a, b := m.members[nd.xa], m.members[nd.xb]
		pa := lerp3(ps.nodes[a.anchors[0].node], ps.nodes[a.anchors[2].node], nd.sa)
		pb := lerp3(ps.nodes[b.anchors[0].node], ps.nodes[b.anchors[2].node], nd.sb)
		ps.nodes[i] = lerp3(pa, pb, 0.5)
	}
	for i, c := range m.blockCorners() {
		ps.block[i] = m.transform(c, m.s.HeightMM, t)
	}
	return ps
}

// halfOf returns the half (0 below the break point, 1 above) of an anchor
// at parameter s of the failing member; an anchor at the break point itself
// belongs to the half h being drawn.
func (m *model) halfOf(s float64, h int) int {
	switch {
	case s < m.sBreak:
		return 0
	case s > m.sBreak:
		return 1
	}
	return h
}

// memberPos returns the position of member mi at parameter s on half h.
func (m *model) memberPos(mi int, s float64, half int, ps *pose) vec3 {
	mb := &m.members[mi]
	k := 0
	for k < len(mb.anchors)-2 && s > mb.anchors[k+1].s {
		k++
	}
	a0, a1 := mb.anchors[k], mb.anchors[k+1]
	u := (s - a0.s) / (a1.s - a0.s)
	p := lerp3(ps.nodes[a0.node], ps.nodes[a1.node], u)
	if mi == m.fail {
		o := m.off(s, half, ps.t)
		// each anchor on its own side of the break, so that the two
		// pieces part there once the member has snapped
		oa := m.off(a0.s, m.halfOf(a0.s, half), ps.t)
		ob := m.off(a1.s, m.halfOf(a1.s, half), ps.t)
		p = p.add(o.sub(lerp3(oa, ob, u)))
	}
	if d, ok := m.detach[mi]; ok {
		// the end on the failing joint comes off; the piece up to the next
		// anchor follows it, fading to nothing there
		var f float64
		switch {
		case d.end == 0 && k == 0:
			f = 1 - u
		case d.end == 1 && k == len(mb.anchors)-2:
			f = u
		}
		if f > 0 {
			p = p.add(d.kick.scale(f * m.jointSlip(ps.t)))
		}
	}
	return p
}

// setupJoint prepares a joint failure: at a leg's foot the leg slides off
// the base; higher up the braces ending at the joint come unglued.
func (m *model) setupJoint(rng *rand.Rand) {
	nd := m.nodes[m.joint]
	m.mode = ModeJointOrBase
	out := vec3{nd.rest.x, nd.rest.y, 0}.unit()
	m.detach = map[int]detachment{}
	m.leanMax, m.twistC = 24*math.Pi/180, 8*math.Pi/180
	if nd.level == 0 {
		m.jointFirst = nd.leg
		m.detach[-1] = detachment{kick: out.scale(3.5).add(vec3{0, 0, 1.5})}
		m.zLo, m.zHi = 0, m.levelsZ[1]
	} else {
		for mi, mb := range m.members {
			if mb.kind == "leg" {
				continue
			}
			end := -1
			if mb.anchors[0].node == m.joint {
				end = 0
			} else if mb.anchors[len(mb.anchors)-1].node == m.joint {
				end = 1
			}
			if end < 0 {
				continue
			}
			if m.jointFirst < 0 || (mb.front && !m.members[m.jointFirst].front) {
				m.jointFirst = mi
			}
			otherEnd := mb.anchors[len(mb.anchors)-1].node
			if end == 1 {
				otherEnd = mb.anchors[0].node
			}
			away := m.nodes[otherEnd].rest.sub(nd.rest).unit()
			nf := m.faceNorm[mb.face]
			side := nf.cross(away).unit()
			k := away.scale(1.2 + rng.Float64()).add(nf.scale(2 + 1.5*rng.Float64())).add(side.scale(rng.Float64()*2 - 1))
			m.detach[mi] = detachment{end: end, kick: k}
		}
		if m.jointFirst < 0 {
			m.jointFirst = nd.leg // no brace ends here: report the leg
		}
		m.zLo, m.zHi = m.levelsZ[nd.level-1], m.levelsZ[nd.level]
	}
	m.dropMax = 0.5 * (m.zHi - m.zLo)
	m.shearDir = out
	m.shearMM = math.Min(3, 0.025*(m.zHi-m.zLo))
	m.shearTwist = 0.25 * m.twistTop
	m.leanAxis = vec3{0, 0, 1}.cross(out)
}

// pointPos returns the position of point i.
func (m *model) pointPos(i int, ps *pose) vec3 {
	p := m.points[i]
	switch {
	case p.node >= 0:
		return ps.nodes[p.node]
	case p.member >= 0:
		half := 0
		if p.member == m.fail && p.s > m.sBreak {
			half = 1
		}
		return m.memberPos(p.member, p.s, half, ps)
	}
	// block sticker: same bilinear position on the moved block
	c := ps.block
	f := m.blockFace
	t := 0.25
	if p.block == 2 {
		t = 0.75
	}
	bot := lerp3(c[f], c[(f+1)%4], t)
	top := lerp3(c[f+4], c[(f+1)%4+4], t)
	return lerp3(bot, top, 0.5)
}

// memberShape samples member mi as one or two polylines (two after it broke),
// each point with its material parameter.
func (m *model) memberShape(mi int, ps *pose) [][]shapePt {
	mb := &m.members[mi]
	var ss []float64
	for _, a := range mb.anchors {
		ss = append(ss, a.s)
	}
	if mi == m.fail {
		const nSamp = 24
		for j := 1; j < nSamp; j++ {
			ss = append(ss, m.span0+(m.span1-m.span0)*float64(j)/nSamp)
		}
		ss = sortFloats(append(ss, m.sBreak))
	}
	if !(mi == m.fail && m.broken(ps.t)) {
		line := make([]shapePt, 0, len(ss))
		for _, s := range ss {
			line = append(line, shapePt{m.memberPos(mi, s, 0, ps), s})
		}
		return [][]shapePt{line}
	}
	var h0, h1 []shapePt
	for _, s := range ss {
		if s <= m.sBreak {
			h0 = append(h0, shapePt{m.memberPos(mi, s, 0, ps), s})
		}
		if s >= m.sBreak {
			h1 = append(h1, shapePt{m.memberPos(mi, s, 1, ps), s})
		}
	}
	return [][]shapePt{h0, h1}
}

type shapePt struct {
	p vec3
	s float64
}

// sortFloats sorts a in place and returns it without duplicates.
func sortFloats(a []float64) []float64 {
	for i := 1; i < len(a); i++ {
		for j := i; j > 0 && a[j] < a[j-1]; j-- {
			a[j], a[j-1] = a[j-1], a[j]
		}
	}
	// drop duplicates in place
	w := 0
	for i := range a {
		if i == 0 || a[i]-a[w-1] > 1e-12 {
			a[w] = a[i]
			w++
		}
	}
	return a[:w]
}

// checkFits reports a marker point or block corner outside the frame at frame 0.
func (m *model) checkFits() error {
	ps := m.pose(0)
	const margin = 6.0
	W, H := float64(m.s.Width), float64(m.s.Height)
	for i, p := range m.points {
		if !p.marker {
			continue
		}
		x, y, d := m.cam.project(m.pointPos(i, ps))
		if d <= 0 || x < margin || y < margin || x > W-1-margin || y > H-1-margin {
			return fmt.Errorf("the tower does not fit in the %dx%d frame: point %s lands at (%.1f, %.1f) px; use a longer --distance-mm, a shorter --focal-px or a larger frame",
				m.s.Width, m.s.Height, p.id, x, y)
		}
	}
	for _, c := range ps.block {
		x, y, d := m.cam.project(c)
		if d <= 0 || x < 0 || y < 0 || x > W-1 || y > H-1 {
			return fmt.Errorf("the loading block does not fit in the %dx%d frame (a corner lands at (%.1f, %.1f) px); use a longer --distance-mm, a shorter --focal-px or a larger frame",
				m.s.Width, m.s.Height, x, y)
		}
	}
	return nil
}
