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
// pixels wide (area averaging, then turned grey) and with each frame's mean brightness scaled
// to 128, so a global flicker of the lights does not read as motion.
// A Meter is not safe for concurrent use.
type Meter struct {
	grey, small, cur, prev, diff gocv.Mat
	have                         bool
}

// NewMeter returns a meter with no previous frame.
func NewMeter() *Meter {
	return &Meter{grey: gocv.NewMat(), small: gocv.NewMat(), cur: gocv.NewMat(), prev: gocv.NewMat(), diff: gocv.NewMat()}
}

// Add takes the next frame (BGR, BGRA or grey, 8-bit) and returns its
// motion energy against the previous frame: 0 for the first frame and after
// a change of frame size, NaN for an empty frame (which also forgets the
// previous frame).
func (m *Meter) Add(img gocv.Mat) float64 {
	if img.Empty() || img.Cols() < 2 || img.Rows() < 2 {
		m.have = false
		return math.NaN()
	}
	// Shrink first, then turn grey: both are weighted averages, so the
	// order changes only rounding, and the colour conversion then runs on
	// a 64th of the pixels.
	w := Width
	if img.Cols() < w {
		w = img.Cols()
	}
	h := int(math.Round(float64(img.Rows()) * float64(w) / float64(img.Cols())))
	if h < 1 {
		h = 1
	}
	gocv.Resize(img, &m.grey, image.Pt(w, h), 0, 0, gocv.InterpolationArea)
	switch m.grey.Channels() {
	case 3:
		gocv.CvtColor(m.grey, &m.small, gocv.ColorBGRToGray)
	case 4:
		gocv.CvtColor(m.grey, &m.small, gocv.ColorBGRAToGray)
	default:
		m.grey.CopyTo(&m.small)
	}
	mean := m.small.Mean().Val1
	scale := 1.0
	if mean > 1 {
		scale = 128 / mean
	}
	m.small.ConvertToWithParams(&m.cur, gocv.MatTypeCV32F, float32(scale), 0)
	e := 0.0
	if m.have && m.prev.Cols() == m.cur.Cols() && m.prev.Rows() == m.cur.Rows() {
		gocv.AbsDiff(m.cur, m.prev, &m.diff)
		e = m.diff.Mean().Val1
	}
	m.cur.CopyTo(&m.prev)
	m.have = true
	return e
}

// Close frees the meter's buffers.
func (m *Meter) Close() {
	m.grey.Close()
	m.small.Close()
	m.cur.Close()
	m.prev.Close()
	m.diff.Close()
}
