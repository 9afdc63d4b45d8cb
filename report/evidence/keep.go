package evidence

import (
	"fmt"
	"image"
	"math"
	"sort"

	"gocv.io/x/gocv"
)

// Evidence frames are drawn at a reduced size, so that the frames they need
// can be kept from the one pass over the clip instead of decoding the
// failure window a second time: at most MaxWidth pixels wide and MaxPixels
// pixels in all (the clip's full resolution stays in the clip, and in the
// review page).
const (
	MaxWidth  = 640
	MaxPixels = 640 * 480
)

// Size returns the evidence frame size for a clip of w x h pixels: the clip
// shrunk to fit MaxWidth and MaxPixels, keeping its shape, with even sides.
func Size(w, h int) image.Point {
	if w <= 0 || h <= 0 {
		return image.Point{}
	}
	s := math.Min(1, math.Min(float64(MaxWidth)/float64(w), math.Sqrt(float64(MaxPixels)/float64(w*h))))
	even := func(v float64) int { return max(2, int(math.Floor(v/2+1e-6))*2) }
	return image.Pt(even(float64(w)*s), even(float64(h)*s))
}

// KeepPolicy says which frames a Keeper holds. Around the sign that the
// tower is going (Keeper.Sign) it holds every frame, from Before frames
// before the sign to After frames after it, and takes no frame after that.
// Elsewhere it holds every frame whose number is a multiple of Every among
// the last Span frames taken, and the last Before frames.
type KeepPolicy struct {
	Before, After int
	Every, Span   int
}

// DefaultKeep holds enough for the failure clip and the events' frames
// around the sign, and for the contact sheet and the onset across the
// longest failure window drawn.
var DefaultKeep = KeepPolicy{Before: 40, After: 160, Every: 8, Span: 680}

// Max returns the most frames the policy holds at once.
func (p KeepPolicy) Max() int {
	return p.Before + 1 + p.After + (p.Span+p.Every-1)/max(1, p.Every)
}

// keepQuality is the JPEG quality of the frames held (IJG scale).
const keepQuality = 90

// Keeper keeps frames of the pass over the clip, shrunk to the evidence size
// and held as JPEG (about 35 kB a frame at 640x360), as its policy says:
// memory is bounded by the policy's Max frames however long the clip is.
// A Keeper is not safe for concurrent use.
type Keeper struct {
	pol     KeepPolicy
	size    image.Point
	small   gocv.Mat
	recent  []gocv.Mat // the last Before frames taken, shrunk (a ring)
	recNum  []int      // their frame numbers; -1 = empty slot
	held    map[int][]byte
	sign    int // frame of the sign; -1 = none yet
	newest  int
	evicted int // frames up to this one have been let go
	err     error
}

// NewKeeper returns a keeper for frames of a w x h clip.
func NewKeeper(pol KeepPolicy, w, h int) *Keeper {
	pol.Every = max(1, pol.Every)
	pol.Before = max(1, pol.Before)
	k := &Keeper{pol: pol, size: Size(w, h), small: gocv.NewMat(), held: map[int][]byte{}, sign: -1, newest: -1, evicted: -1}
	k.recent = make([]gocv.Mat, pol.Before)
	k.recNum = make([]int, pol.Before)
	for i := range k.recent {
		k.recent[i] = gocv.NewMat()
		k.recNum[i] = -1
	}
	return k
}

// Size returns the size of the frames kept.
func (k *Keeper) Size() image.Point { return k.size }

// Policy returns the keeper's policy.
func (k *Keeper) Policy() KeepPolicy { return k.pol }

// Err returns the first problem met while keeping frames (a frame that could
// not be encoded); the frames concerned are simply not held.
func (k *Keeper) Err() error { return k.err }

// Sign marks frame as the first sign of the tower going: the last Before
// frames are held, frames up to After after it will be, and none later. Only
// the first sign counts.
func (k *Keeper) Sign(frame int) {
	if k.sign >= 0 {
		return
	}
	k.sign = frame
	for i, n := range k.recNum {
		if n >= 0 && n >= frame-k.pol.Before {
			k.hold(n, k.recent[i])
		}
	}
}

// Add offers the next frame of the pass (BGR, clip size; frame numbers
// rising) and returns it shrunk to the keeper's size (owned by the keeper,
// valid until the next call; the frame itself when the size is unknown).
// The frame is held if the policy says so.
func (k *Keeper) Add(frame int, img gocv.Mat) gocv.Mat {
	if k.size.X == 0 || img.Empty() {
		return img
	}
	taking := frame > k.newest && (k.sign < 0 || frame <= k.sign+k.pol.After) && img.Channels() == 3
	dst := &k.small
	slot := 0
	if taking {
		slot = frame % len(k.recent)
		dst = &k.recent[slot]
		k.recNum[slot] = -1
	}
	if img.Cols() == k.size.X && img.Rows() == k.size.Y {
		img.CopyTo(dst)
	} else {
		gocv.Resize(img, dst, k.size, 0, 0, gocv.InterpolationArea)
	}
	if !taking {
		return *dst
	}
	k.newest = frame
	k.recNum[slot] = frame
	if k.sign >= 0 || frame%k.pol.Every == 0 {
		k.hold(frame, *dst)
	}
	if k.sign < 0 {
		// Before any sign, let go of sparse frames older than the span.
		// Normally one frame number a frame; after a long gap, a scan.
		lo, hi := k.evicted+1, frame-k.pol.Span
		if hi-lo > 4*len(k.held) {
			for n := range k.held {
				if n <= hi {
					delete(k.held, n)
				}
			}
		} else {
			for n := lo; n <= hi; n++ {
				delete(k.held, n)
			}
		}
		k.evicted = max(k.evicted, hi)
	}
	return *dst
}

func (k *Keeper) hold(frame int, img gocv.Mat) {
	if _, ok := k.held[frame]; ok {
		return
	}
	buf, err := gocv.IMEncodeWithParams(gocv.JPEGFileExt, img, []int{gocv.IMWriteJpegQuality, keepQuality})
	if err != nil {
		if k.err == nil {
			k.err = fmt.Errorf("keep frame %d for the evidence: %w", frame, err)
		}
		return
	}
	k.held[frame] = append([]byte(nil), buf.GetBytes()...)
	buf.Close()
}

// Has reports whether frame n is held.
func (k *Keeper) Has(n int) bool {
	if _, ok := k.held[n]; ok {
		return true
	}
	return n >= 0 && k.recNum[n%len(k.recNum)] == n
}

// Frame writes frame n (BGR, the keeper's size) into dst; false when it is
// not held.
func (k *Keeper) Frame(n int, dst *gocv.Mat) bool {
	if n >= 0 && k.recNum[n%len(k.recNum)] == n {
		k.recent[n%len(k.recent)].CopyTo(dst)
		return true
	}
	b, ok := k.held[n]
	if !ok {
		return false
	}
	m, err := gocv.IMDecode(b, gocv.IMReadColor)
	if err != nil || m.Empty() {
		m.Close()
		return false
	}
	m.CopyTo(dst)
	m.Close()
	return true
}

// Held returns the numbers of the frames held, ascending.
func (k *Keeper) Held() []int {
	var out []int
	for n := range k.held {
		out = append(out, n)
	}
	for _, n := range k.recNum {
		if _, ok := k.held[n]; n >= 0 && !ok {
			out = append(out, n)
		}
	}
	sort.Ints(out)
	return out
}

// Nearest returns the held frame closest to n, and false when none lies
// within `within` frames of it; of two equally close, the earlier.
func (k *Keeper) Nearest(n, within int) (int, bool) {
	for d := 0; d <= within; d++ {
		if k.Has(n - d) {
			return n - d, true
		}
		if d > 0 && k.Has(n+d) {
			return n + d, true
		}
	}
	return -1, false
}

// Close frees the frames.
func (k *Keeper) Close() {
	for i := range k.recent {
		k.recent[i].Close()
		k.recNum[i] = -1
	}
	k.held = map[int][]byte{}
	k.small.Close()
}
