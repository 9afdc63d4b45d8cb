// Package motion measures how much a whole frame changes from one frame to
// the next, so the instant a tower collapses can be found even where no
// point was marked.
package motion

import (
	"image"
	"math"

	"gocv.io/x/gocv"
)

// Width is the width, in pixels, frames are shrunk to before they are compared.
const Width = 160

// Meter computes the motion energy of a stream of frames: the mean absolute
// difference, in grey levels, between consecutive frames shrunk to Width
// pixels wide (area averaging: halved while at least twice as wide, then
// resized the rest of the way), then turned grey as OpenCV's BGR-to-grey
// conversion does, BT.601 weights in 14-bit fixed point) and with each
// frame's mean brightness scaled to 128, so a global flicker of the lights
// does not read as motion.
// A Meter is not safe for concurrent use.
type Meter struct {
	small     gocv.Mat
	half      gocv.Mat
	cur, prev []float64
	have      bool
}

// NewMeter returns a meter with no previous frame.
func NewMeter() *Meter {
	return &Meter{small: gocv.NewMat(), half: gocv.NewMat()}
}

// Add takes the next frame (BGR, BGRA or grey, 8-bit) and returns its
// motion energy against the previous frame: 0 for the first frame and after
// a change of frame size, NaN for an empty frame (which also forgets the
// previous frame).
func (m *Meter) Add(img gocv.Mat) float64 {
	if img.Empty() || img.Cols() < 2 || img.Rows() < 2 || img.Type()&7 != 0 {
		m.have = false
		return math.NaN()
	}
	// One shrink in OpenCV, the rest in Go on the few pixels left.
	w := Width
	if img.Cols() < w {
		w = img.Cols()
	}
	h := int(math.Round(float64(img.Rows()) * float64(w) / float64(img.Cols())))
	if h < 1 {
		h = 1
	}
	shrink(img, &m.small, &m.half, image.Pt(w, h))
	px, err := m.small.DataPtrUint8()
	ch := m.small.Channels()
	if err != nil || len(px) < w*h*ch {
		m.have = false
		return math.NaN()
	}
	n := w * h
	if cap(m.cur) < n {
		m.cur = make([]float64, n)
	}
	cur := m.cur[:n]
	sum := 0.0
	for i := 0; i < n; i++ {
		var g int
		if ch >= 3 {
			b, gg, r := int(px[i*ch]), int(px[i*ch+1]), int(px[i*ch+2])
			g = (b*grayB + gg*grayG + r*grayR + 1<<(grayShift-1)) >> grayShift
		} else {
			g = int(px[i*ch])
		}
		cur[i] = float64(g)
		sum += float64(g)
	}
	mean := sum / float64(n)
	scale := 1.0
	if mean > 1 {
		scale = 128 / mean
	}
	for i := range cur {
		cur[i] *= scale
	}
	e := 0.0
	if m.have && len(m.prev) == n {
		for i, v := range cur {
			e += math.Abs(v - m.prev[i])
		}
		e /= float64(n)
	}
	m.cur, m.prev = m.prev, cur
	m.have = true
	return e
}

// OpenCV's fixed-point BGR-to-grey weights (BT.601: 0.114, 0.587, 0.299
// times 2^14, rounded so they sum to 2^14).
const (
	grayB, grayG, grayR = 1868, 9617, 4899
	grayShift           = 14
)

// Close frees the meter's buffers.
func (m *Meter) Close() {
	m.small.Close()
	m.half.Close()
}

// shrink shrinks img to size by area averaging: halving (2x2 blocks, which
// OpenCV does fast) while the frame is at least twice the target, then one
// area resize for the rest. dst and tmp are scratch; the result is in dst.
func shrink(img gocv.Mat, dst, tmp *gocv.Mat, size image.Point) {
	cur := img
	for cur.Cols() >= 2*size.X && cur.Rows() >= 2*size.Y {
		half := image.Pt(cur.Cols()/2, cur.Rows()/2)
		out := dst
		if cur.Ptr() == dst.Ptr() {
			out = tmp
		}
		gocv.Resize(cur, out, half, 0, 0, gocv.InterpolationArea)
		cur = *out
	}
	if cur.Cols() != size.X || cur.Rows() != size.Y {
		out := dst
		if cur.Ptr() == dst.Ptr() {
			out = tmp
		}
		gocv.Resize(cur, out, size, 0, 0, gocv.InterpolationArea)
		cur = *out
	}
	if cur.Ptr() != dst.Ptr() {
		cur.CopyTo(dst)
	}
}
