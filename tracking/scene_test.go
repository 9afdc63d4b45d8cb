package tracking

import (
	"image"
	"math"
	"math/rand/v2"
	"testing"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/tracking/marks"
)

// The test scenes here are rendered analytically (Gaussian spots and
// soft-edged bars evaluated at every pixel), so a body's true position is
// known exactly at any sub-pixel offset; no resampling sits between the
// truth and the image.

// shape is a Gaussian spot (len 0) or a soft-edged bar of half-length len
// and half-width wid along angle ang, in body coordinates.
type shape struct {
	x, y     float64
	sigma    float64 // spot radius, or bar edge softness
	amp      float64 // grey levels added
	len, wid float64 // bar half-length and half-width; len 0 = spot
	ang      float64 // bar direction, radians
}

// pose places a body: displacement and rotation about its origin.
type pose struct{ dx, dy, rot float64 }

// body is a rigid group of shapes that moves as one.
type body struct {
	shapes []shape
	ox, oy float64 // rotation centre
	move   func(i int) pose
}

// at maps a body point to the frame at frame i.
func (b *body) at(i int, x, y float64) (float64, float64) {
	p := pose{}
	if b.move != nil {
		p = b.move(i)
	}
	s, c := math.Sincos(p.rot)
	u, v := x-b.ox, y-b.oy
	return b.ox + c*u - s*v + p.dx, b.oy + s*u + c*v + p.dy
}

// scene is a test clip.
type scene struct {
	w, h    int
	bg      float64
	bodies  []body
	noise   float64 // Gaussian noise, grey levels
	flicker float64 // relative gain change, frame to frame (uniform +-)
	blur    float64 // Gaussian blur sigma, px; 0 = none
	jpeg    int     // JPEG quality; 0 = none
	// occlude, when set, paints a flat rectangle of grey occludeV over the
	// frame (empty rectangle = none).
	occlude  func(i int) image.Rectangle
	occludeV float64
	seed     uint64

	buf []float64
}

// start renders frame 0 and returns a tracker for m made on it, and the
// frame's Mat to render the next frames into; both are freed when the test
// ends.
func (s *scene) start(t *testing.T, m *marks.File, opt Options) (*Tracker, *gocv.Mat) {
	t.Helper()
	img := gocv.NewMat()
	t.Cleanup(func() { img.Close() })
	s.render(0, &img)
	tr, err := New(m, img, opt)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(tr.Close)
	return tr, &img
}

// render draws frame i into dst (8-bit grey).
func (s *scene) render(i int, dst *gocv.Mat) {
	if len(s.buf) != s.w*s.h {
		s.buf = make([]float64, s.w*s.h)
	}
	for k := range s.buf {
		s.buf[k] = s.bg
	}
	for bi := range s.bodies {
		b := &s.bodies[bi]
		p := pose{}
		if b.move != nil {
			p = b.move(i)
		}
		for _, sh := range b.shapes {
			cx, cy := b.at(i, sh.x, sh.y)
			if sh.len == 0 {
				s.spot(cx, cy, sh.sigma, sh.amp)
			} else {
				s.bar(cx, cy, sh.len, sh.wid, sh.ang+p.rot, sh.sigma, sh.amp)
			}
		}
	}
	if s.occlude != nil {
		r := s.occlude(i).Intersect(image.Rect(0, 0, s.w, s.h))
		for y := r.Min.Y; y < r.Max.Y; y++ {
			for x := r.Min.X; x < r.Max.X; x++ {
				s.buf[y*s.w+x] = s.occludeV
			}
		}
	}
	rng := rand.New(rand.NewPCG(s.seed, uint64(i)))
	gain := 1 + s.flicker*(2*rng.Float64()-1)
	if dst.Rows() != s.h || dst.Cols() != s.w || dst.Type() != gocv.MatTypeCV8UC1 {
		dst.Close()
		*dst = gocv.NewMatWithSize(s.h, s.w, gocv.MatTypeCV8UC1)
	}
	if s.blur > 0 {
		f := gocv.NewMatWithSize(s.h, s.w, gocv.MatTypeCV64F)
		d, _ := f.DataPtrFloat64()
		copy(d, s.buf)
		gocv.GaussianBlur(f, &f, image.Pt(0, 0), s.blur, s.blur, gocv.BorderReflect101)
		d, _ = f.DataPtrFloat64()
		copy(s.buf, d)
		f.Close()
	}
	pix, _ := dst.DataPtrUint8()
	for k, v := range s.buf {
		v = v*gain + s.noise*rng.NormFloat64()
		pix[k] = uint8(math.Max(0, math.Min(255, math.Round(v))))
	}
	if s.jpeg > 0 {
		buf, err := gocv.IMEncodeWithParams(gocv.JPEGFileExt, *dst, []int{gocv.IMWriteJpegQuality, s.jpeg})
		if err != nil {
			panic(err)
		}
		dec, err := gocv.IMDecode(buf.GetBytes(), gocv.IMReadGrayScale)
		buf.Close()
		if err != nil {
			panic(err)
		}
		dec.CopyTo(dst)
		dec.Close()
	}
}

func (s *scene) spot(cx, cy, sigma, amp float64) {
	r := int(math.Ceil(4 * sigma))
	x0, x1 := max(0, int(cx)-r), min(s.w-1, int(cx)+r+1)
	y0, y1 := max(0, int(cy)-r), min(s.h-1, int(cy)+r+1)
	k := -1 / (2 * sigma * sigma)
	for y := y0; y <= y1; y++ {
		dy := float64(y) - cy
		for x := x0; x <= x1; x++ {
			dx := float64(x) - cx
			s.buf[y*s.w+x] += amp * math.Exp(k*(dx*dx+dy*dy))
		}
	}
}

// bar paints an opaque rectangle with soft (error-function) edges, of grey
// bg+amp, over what is below it (members hide the background).
func (s *scene) bar(cx, cy, hl, hw, ang, soft, amp float64) {
	sn, cs := math.Sincos(ang)
	ext := math.Abs(cs)*hl + math.Abs(sn)*hw + 4*soft + 1
	eyt := math.Abs(sn)*hl + math.Abs(cs)*hw + 4*soft + 1
	x0, x1 := max(0, int(cx-ext)), min(s.w-1, int(cx+ext)+1)
	y0, y1 := max(0, int(cy-eyt)), min(s.h-1, int(cy+eyt)+1)
	step := func(d, half float64) float64 { return 0.5 * (1 + math.Erf((half-math.Abs(d))/(math.Sqrt2*soft))) }
	for y := y0; y <= y1; y++ {
		for x := x0; x <= x1; x++ {
			u := (float64(x)-cx)*cs + (float64(y)-cy)*sn
			v := -(float64(x)-cx)*sn + (float64(y)-cy)*cs
			a := step(u, hl) * step(v, hw)
			s.buf[y*s.w+x] = s.buf[y*s.w+x]*(1-a) + (s.bg+amp)*a
		}
	}
}

// speckle returns n random spots inside a box.
func speckle(rng *rand.Rand, x0, y0, x1, y1 float64, n int, sig0, sig1, amp float64) []shape {
	out := make([]shape, n)
	for i := range out {
		a := amp * (0.5 + 0.5*rng.Float64())
		if rng.IntN(2) == 0 {
			a = -a
		}
		out[i] = shape{x: x0 + (x1-x0)*rng.Float64(), y: y0 + (y1-y0)*rng.Float64(),
			sigma: sig0 + (sig1-sig0)*rng.Float64(), amp: a}
	}
	return out
}
