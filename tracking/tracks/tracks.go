// Package tracks holds the result of point tracking: per frame, per point, a
// sub-pixel position with a quality figure and a lost flag. It has no OpenCV
// dependency, so the measurements built on it test fast and alone.
package tracks

import "math"

// Sample is one point in one frame.
type Sample struct {
	// X and Y are the image position in pixels, x right, y down.
	X, Y float64
	// Quality is the tracker's confidence, 0 (none) to 1 (perfect match).
	Quality float64
	// Lost is true when the point can no longer be trusted in this frame;
	// X and Y are then NaN.
	Lost bool
}

// Tracks are the tracked positions of marked points over a run of frames.
type Tracks struct {
	// IDs are the point ids, in the marks file's order.
	IDs []string
	// Frames are the frame numbers, ascending.
	Frames []int
	// Samples holds one row per frame, one column per point: Samples[i][j] is
	// point IDs[j] in frame Frames[i].
	Samples [][]Sample
	// Ref holds each point's reference position in pixels (the marked px),
	// in IDs order; nil when not known. Millimetre columns of points.csv are
	// measured from it.
	Ref [][2]float64
}

// Index returns the column of a point id, or -1.
func (t *Tracks) Index(id string) int {
	for j, s := range t.IDs {
		if s == id {
			return j
		}
	}
	return -1
}

// Len returns the number of frames.
func (t *Tracks) Len() int { return len(t.Frames) }

// At returns point id's sample in the i-th row; ok is false for an unknown id.
func (t *Tracks) At(i int, id string) (s Sample, ok bool) {
	j := t.Index(id)
	if j < 0 {
		return Sample{X: math.NaN(), Y: math.NaN(), Lost: true}, false
	}
	return t.Samples[i][j], true
}

// Row returns the row of a frame number, or -1.
func (t *Tracks) Row(frame int) int {
	lo, hi := 0, len(t.Frames)
	for lo < hi {
		m := (lo + hi) / 2
		if t.Frames[m] < frame {
			lo = m + 1
		} else {
			hi = m
		}
	}
	if lo < len(t.Frames) && t.Frames[lo] == frame {
		return lo
	}
	return -1
}
