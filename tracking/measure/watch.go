package measure

import (
	"math"

	"github.com/failframe/failframe/tracking/tracks"
)

// CollapseWatch looks, while the frames are still being read, for the first
// sign that the tower has started to go: a jump in the whole-frame motion
// energy (the rule Diagnose applies to it, one value at a time), a jump in
// the fastest tracked point's speed in pixels per frame (past the baseline's
// mean + 10 sigma, twice its mean and WatchSpeedPX), or more than half the
// points lost (Diagnose's rule). That is usually a member breaking or the
// collapse itself; sometimes an earlier knock.
//
// It lets the pass over the clip act early, for instance to keep the frames
// around that moment for the evidence; it decides nothing in the report,
// which Diagnose makes from the whole series.
// A CollapseWatch is not safe for concurrent use.
type CollapseWatch struct {
	energy, speed jumpWatch
	prev          []tracks.Sample
	row           int
	fired         int // the row found; -1 none yet
}

// WatchSpeedPX is the least speed of the fastest tracked point, pixels per
// frame, that CollapseWatch takes for the start of a failure.
const WatchSpeedPX = 0.5

// NewCollapseWatch returns a watch for a series expected to be about
// expectedRows long (it sets the baseline window as Diagnose does; 0 or
// less = unknown, taken as long).
func NewCollapseWatch(expectedRows int) *CollapseWatch {
	nb := baselineRows(math.MaxInt32)
	if expectedRows > 0 {
		nb = baselineRows(expectedRows)
	}
	return &CollapseWatch{
		energy: jumpWatch{nb: nb, factor: 2, pending: -1},
		speed:  jumpWatch{nb: nb, floor: WatchSpeedPX, factor: 2, pending: -1},
		fired:  -1,
	}
}

// Add takes the next frame's motion energy (NaN when unknown) and its
// samples (nil when not tracked), and returns the row, counted from 0, where
// the sign began, on the call that confirms it; later calls return it again
// with found false.
func (w *CollapseWatch) Add(energy float64, samples []tracks.Sample) (row int, found bool) {
	r := w.row
	w.row++
	speed, lost := math.NaN(), 0
	if samples != nil {
		for i, s := range samples {
			if s.Lost {
				lost++
				continue
			}
			if i < len(w.prev) && !w.prev[i].Lost {
				d := math.Hypot(s.X-w.prev[i].X, s.Y-w.prev[i].Y)
				if math.IsNaN(speed) || d > speed {
					speed = d
				}
			}
		}
		w.prev = append(w.prev[:0], samples...)
	} else {
		w.prev = nil
	}
	e, eok := w.energy.add(r, energy)
	v, vok := w.speed.add(r, speed)
	if w.fired >= 0 {
		return w.fired, false
	}
	best := -1
	if eok {
		best = e
	}
	if vok && (best < 0 || v < best) {
		best = v
	}
	if samples != nil && 2*lost > len(samples) && (best < 0 || r < best) {
		best = r
	}
	if best < 0 {
		return -1, false
	}
	w.fired = best
	return best, true
}

// jumpWatch applies jumpStart's test for the jump (a value at or past the
// baseline level that the next value, or a NaN, confirms) one value at a time.
type jumpWatch struct {
	nb            int
	floor, factor float64
	base          []float64
	level         float64
	ready         bool
	pending       int // row of a value at the level awaiting confirmation; -1 none
	fired         bool
}

// add takes value x of row r; it returns the jump's row on the call that
// confirms it.
func (j *jumpWatch) add(r int, x float64) (int, bool) {
	if j.fired {
		return -1, false
	}
	if r < j.nb {
		j.base = append(j.base, x)
		if r == j.nb-1 {
			j.level, _, _, j.ready = jumpLevel(j.base, j.floor, j.factor)
			j.base = nil
		}
		return -1, false
	}
	if !j.ready {
		return -1, false
	}
	if j.pending >= 0 {
		if x >= j.level || math.IsNaN(x) {
			j.fired = true
			return j.pending, true
		}
		j.pending = -1
	}
	if x >= j.level {
		j.pending = r
	}
	return -1, false
}
