package synth

import (
	"errors"
	"fmt"
	"image"
	"image/color"
	"math"
	"math/rand/v2"
	"sort"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/tracking/marks"
)

// Renderer draws the frames of a scenario one at a time. It is not safe for
// concurrent use. Close releases its OpenCV buffers.
type Renderer struct {
	s     Scenario
	m     *model
	load  *loadModel
	truth *Truth
	bg    []float32
	cv    canvas
	acc   []float32
	work  gocv.Mat // float BGR scene
	blur  gocv.Mat
	shook gocv.Mat
	cord  *barTexture
	tones [][2]float32 // per point: paper and dot brightness factors
	noise []float32
	flick [4]float64 // phases and second frequency
}

const noiseTable = 1 << 21

// NewRenderer checks the scenario, builds the tower and computes the truth
// of every frame (geometry only; frames are drawn by Frame).
func NewRenderer(s Scenario) (*Renderer, error) {
	if err := s.Validate(); err != nil {
		return nil, err
	}
	m := newModel(s)
	r := &Renderer{s: s, m: m, load: newLoadModel(s)}
	r.truth = m.computeTruth(r.load)
	n := s.Width * s.Height * 3
	r.bg = make([]float32, n)
	m.renderBackground(r.bg)
	r.work = gocv.NewMatWithSize(s.Height, s.Width, gocv.MatTypeCV32FC3)
	r.blur = gocv.NewMat()
	r.shook = gocv.NewMat()
	r.cord = newBarTexture(rand.New(rand.NewPCG(uint64(s.Seed), 0xc0d)), 4*s.HeightMM+200)
	trng := rand.New(rand.NewPCG(uint64(s.Seed), 0x70e))
	r.tones = make([][2]float32, len(m.points))
	for i := range r.tones {
		r.tones[i] = [2]float32{float32(0.9 + 0.12*trng.Float64()), float32(0.8 + 0.5*trng.Float64())}
	}
	px, err := r.work.DataPtrFloat32()
	if err != nil {
		r.Close()
		return nil, fmt.Errorf("synth: %w", err)
	}
	r.cv = canvas{w: s.Width, h: s.Height, px: px}
	rng := rand.New(rand.NewPCG(uint64(s.Seed), 0x0015e))
	r.noise = make([]float32, noiseTable)
	for i := range r.noise {
		r.noise[i] = float32(rng.NormFloat64())
	}
	r.flick = [4]float64{rng.Float64() * 2 * math.Pi, rng.Float64() * 2 * math.Pi, 2 + 3*rng.Float64(), rng.Float64() * 2 * math.Pi}
	return r, nil
}

// Close releases the renderer's OpenCV buffers.
func (r *Renderer) Close() {
	r.work.Close()
	r.blur.Close()
	r.shook.Close()
}

// Scenario returns the scenario being rendered.
func (r *Renderer) Scenario() Scenario { return r.s }

// NumFrames returns the number of frames in the clip.
func (r *Renderer) NumFrames() int { return r.s.Frames }

// Truth returns the ground truth of every frame. The caller must not change it.
func (r *Renderer) Truth() *Truth { return r.truth }

// Marks returns a marks file for the clip: the marker points on the faces
// toward the camera at their exact frame-0 positions, the members made of
// them, the camera azimuth, the tower block, a scale along a leg and the
// capture rate. Clip is "tower.avi".
func (r *Renderer) Marks() *marks.File {
	m := r.m
	ps := m.pose(0)
	f := &marks.File{
		Clip:           "tower.avi",
		CaptureFPS:     r.s.CaptureFPS,
		ReferenceFrame: 0,
		Camera:         &marks.Camera{AzimuthDeg: r.s.AzimuthDeg},
		Tower: &marks.Tower{BaseMM: r.s.BaseMM, TopMM: r.s.TopMM, HeightMM: r.s.HeightMM,
			LevelsMM: append([]float64(nil), m.levelsZ...)},
	}
	marked := map[string]bool{}
	for i, p := range m.points {
		if !p.marker {
			continue
		}
		x, y, _ := m.cam.project(m.pointPos(i, ps))
		mp := marks.Point{ID: p.id, PX: [2]float64{round6(x), round6(y)}}
		mp.Leg = p.leg
		if p.level >= 0 {
			lv := p.level
			mp.Level = &lv
		} else {
			plan := [2]float64{round6(p.rest.x), round6(p.rest.y)}
			mp.PlanMM = &plan
		}
		f.Points = append(f.Points, mp)
		marked[p.id] = true
	}
	for _, mb := range m.members {
		ok := true
		for _, id := range mb.pointIDs {
			ok = ok && marked[id]
		}
		if ok {
			f.Members = append(f.Members, marks.Member{ID: mb.id, Kind: mb.kind, Points: append([]string(nil), mb.pointIDs...)})
		}
	}
	f.Members = append(f.Members, marks.Member{ID: "block", Kind: marks.KindBlock, Points: []string{"block-a", "block-b"}})
	for l := 0; l < 4; l++ {
		from := fmt.Sprintf("%c0", legLetters[l])
		to := fmt.Sprintf("%c%d", legLetters[l], m.n)
		if marked[from] && marked[to] {
			d := m.nodes[jointIndex(m.n, l, m.n)].rest.sub(m.nodes[jointIndex(m.n, l, 0)].rest).norm()
			f.Scale = &marks.Scale{From: from, To: to, MM: round6(d)}
			break
		}
	}
	return f
}

// Frame renders frame i into dst as 8-bit BGR, reallocating dst when it has
// another size or type.
func (r *Renderer) Frame(i int, dst *gocv.Mat) error {
	if i < 0 || i >= r.s.Frames {
		return fmt.Errorf("synth: frame %d is outside the clip (0..%d)", i, r.s.Frames-1)
	}
	if dst == nil {
		return errors.New("synth: nil destination")
	}
	if dst.Empty() || dst.Rows() != r.s.Height || dst.Cols() != r.s.Width || dst.Type() != gocv.MatTypeCV8UC3 {
		if !dst.Empty() {
			dst.Close()
		}
		*dst = gocv.NewMatWithSize(r.s.Height, r.s.Width, gocv.MatTypeCV8UC3)
	}
	out, err := dst.DataPtrUint8()
	if err != nil {
		return fmt.Errorf("synth: %w", err)
	}

	// motion blur: several instants across the exposure when points move fast
	k := r.blurSamples(i)
	if k == 1 {
		r.drawScene(float64(i))
	} else {
		if r.acc == nil {
			r.acc = make([]float32, len(r.bg))
		}
		clear(r.acc)
		const exposure = 0.8 // fraction of the frame period
		for j := 0; j < k; j++ {
			t := float64(i) + exposure*((float64(j)+0.5)/float64(k)-0.5)
			r.drawScene(t)
			w := float32(1) / float32(k)
			for q, v := range r.cv.px {
				r.acc[q] += w * v
			}
		}
		copy(r.cv.px, r.acc)
	}
	src := r.cv.px
	scene := r.work
	if dx, dy := r.m.shake(float64(i)); dx != 0 || dy != 0 {
		// camera shake moves the whole image; linear interpolation keeps each
		// dot's centroid shifted by exactly (dx, dy)
		mt := gocv.NewMatWithSize(2, 3, gocv.MatTypeCV64F)
		mt.SetDoubleAt(0, 0, 1)
		mt.SetDoubleAt(0, 2, dx)
		mt.SetDoubleAt(1, 1, 1)
		mt.SetDoubleAt(1, 2, dy)
		gocv.WarpAffineWithParams(r.work, &r.shook, mt, image.Pt(r.s.Width, r.s.Height), gocv.InterpolationLinear, gocv.BorderReflect101, color.RGBA{})
		mt.Close()
		scene = r.shook
		if src, err = r.shook.DataPtrFloat32(); err != nil {
			return fmt.Errorf("synth: %w", err)
		}
	}
	if r.s.BlurPX > 0 {
		gocv.GaussianBlur(scene, &r.blur, image.Point{}, r.s.BlurPX, r.s.BlurPX, gocv.BorderReflect101)
		if src, err = r.blur.DataPtrFloat32(); err != nil {
			return fmt.Errorf("synth: %w", err)
		}
	}
	tsec := float64(i) / r.s.CaptureFPS
	gain := 1 + r.s.Flicker*(0.75*math.Sin(2*math.Pi*100*tsec+r.flick[0])+0.25*math.Sin(2*math.Pi*r.flick[2]*tsec+r.flick[1]))
	g := float32(gain)
	if r.s.Noise > 0 {
		// shot noise grows with the signal: variance = Noise^2 * (0.35 + 0.65 * level / 128)
		var sig [257]float32
		for k := range sig {
			sig[k] = float32(r.s.Noise * math.Sqrt(0.35+0.65*float64(k)/128))
		}
		rng := rand.New(rand.NewPCG(uint64(r.s.Seed), uint64(i)+1))
		off := rng.IntN(noiseTable)
		for q, v := range src {
			v *= g
			k := int(v)
			if k < 0 {
				k = 0
			} else if k > 256 {
				k = 256
			}
			out[q] = toByte(v + sig[k]*r.noise[(off+q)&(noiseTable-1)])
		}
	} else {
		for q, v := range src {
			out[q] = toByte(v * g)
		}
	}
	return nil
}

func toByte(v float32) uint8 {
	v += 0.5
	if v <= 0 {
		return 0
	}
	if v >= 255 {
		return 255
	}
	return uint8(v)
}

// blurSamples returns how many instants to average for frame i: one, unless
// some point moves more than about half a pixel per frame.
func (r *Renderer) blurSamples(i int) int {
	a, b := i-1, i+1
	if a < 0 {
		a = 0
	}
	if b >= r.s.Frames {
		b = r.s.Frames - 1
	}
	if a == b {
		return 1
	}
	var v float64
	for _, p := range r.truth.Points {
		d := math.Hypot(p.PX[b][0]-p.PX[a][0], p.PX[b][1]-p.PX[a][1]) / float64(b-a)
		v = math.Max(v, d)
	}
	if v < 0.7 {
		return 1
	}
	return int(math.Min(6, math.Ceil(v/0.7)))
}

// subdivide inserts points so that no piece of a polyline is longer than
// step mm, for lines that a distorting lens bends.
func subdivide(lines [][]shapePt, step float64) [][]shapePt {
	out := make([][]shapePt, len(lines))
	for i, l := range lines {
		for j, p := range l {
			if j > 0 {
				q := l[j-1]
				n := int(math.Ceil(p.p.sub(q.p).norm() / step))
				for k := 1; k < n; k++ {
					u := float64(k) / float64(n)
					out[i] = append(out[i], shapePt{lerp3(q.p, p.p, u), q.s + (p.s-q.s)*u})
				}
			}
			out[i] = append(out[i], p)
		}
	}
	return out
}

type prim struct {
	depth float64
	draw  func()
}

// drawScene draws the scene at time t (frames) into the work canvas.
func (r *Renderer) drawScene(t float64) {
	m := r.m
	cam := &m.cam
	copy(r.cv.px, r.bg)
	ps := m.pose(t)
	var prims []prim
	for mi := range m.members {
		mb := &m.members[mi]
		shape := m.memberShape(mi, ps)
		lines := make([][]barPt, len(shape))
		var dsum float64
		var dn int
		if cam.k1 != 0 {
			shape = subdivide(shape, 8)
		}
		for li, l := range shape {
			for _, sp := range l {
				x, y, d := cam.project(sp.p)
				if d <= 1 {
					d = 1
				}
				lines[li] = append(lines[li], barPt{x, y, mb.thick / 2 * cam.f / d, sp.s * mb.rest})
				dsum += d
				dn++
			}
		}
		tex := mb.tex
		prims = append(prims, prim{dsum / float64(dn), func() { r.cv.drawBar(lines, tex, balsaColour) }})
	}
	// the loading block: the faces turned toward the camera
	c := ps.block
	faces := [][4]int{{0, 3, 2, 1}, {4, 5, 6, 7}, {0, 1, 5, 4}, {1, 2, 6, 5}, {2, 3, 7, 6}, {3, 0, 4, 7}}
	seed := uint64(r.s.Seed)*31 + 5
	for fi, f := range faces {
		p0, p1, p3 := c[f[0]], c[f[1]], c[f[3]]
		U, V := p1.sub(p0), p3.sub(p0)
		n := U.cross(V)
		centre := lerp3(p0, c[f[2]], 0.5)
		if n.dot(cam.pos.sub(centre)) <= 0 {
			continue
		}
		_, _, d := cam.project(centre)
		shade := float32([]float64{0.55, 1.1, 0.95, 0.85, 0.75, 0.8}[fi])
		fs := seed + uint64(fi)
		prims = append(prims, prim{d, func() {
			r.cv.drawFace(cam, p0, U, V, func(u, v float64) [3]float32 {
				g := shade * float32(1+0.08*fbm(fs, u/25, v/4, 3)+0.04*math.Sin(v*2.1+2*fbm(fs+9, u/30, v/10, 2)))
				return [3]float32{blockColour[0] * g, blockColour[1] * g, blockColour[2] * g}
			})
		}})
	}
	sort.SliceStable(prims, func(a, b int) bool { return prims[a].depth > prims[b].depth })
	for _, p := range prims {
		p.draw()
	}
	// marker stickers last: they sit on the faces toward the camera
	type sticker struct {
		x, y, r, d float64
		i          int
	}
	var st []sticker
	for i, p := range m.points {
		if !p.marker {
			continue
		}
		x, y, d := cam.project(m.pointPos(i, ps))
		if d <= 1 {
			continue
		}
		st = append(st, sticker{x, y, r.s.MarkerMM / 2 * cam.f / d, d, i})
	}
	sort.SliceStable(st, func(a, b int) bool { return st[a].d > st[b].d })
	for _, s := range st {
		// each sticker has its own paper and ink tone, as hand-placed ones do
		pt, dt := r.tones[s.i][0], r.tones[s.i][1]
		r.cv.drawDisc(s.x, s.y, s.r*1.8, [3]float32{paperColour[0] * pt, paperColour[1] * pt, paperColour[2] * pt})
		r.cv.drawDisc(s.x, s.y, s.r, [3]float32{dotColour[0] * dt, dotColour[1] * dt, dotColour[2] * dt})
	}
	// the swinging cord, nearest the camera
	if r.s.CordMM > 0 {
		b, tp := m.cordAt(t)
		xb, yb, db := cam.project(b)
		xt, yt, dt := cam.project(tp)
		line := [][]barPt{{
			{xb, yb, r.s.CordMM / 2 * cam.f / db, 0},
			{xt, yt, r.s.CordMM / 2 * cam.f / dt, tp.sub(b).norm()},
		}}
		if cam.k1 != 0 {
			line[0] = line[0][:0]
			for _, sp := range subdivide([][]shapePt{{{b, 0}, {tp, 1}}}, 8)[0] {
				x, y, d := cam.project(sp.p)
				line[0] = append(line[0], barPt{x, y, r.s.CordMM / 2 * cam.f / d, sp.s * tp.sub(b).norm()})
			}
		}
		r.cv.drawBar(line, r.cord, cordColour)
	}
}
