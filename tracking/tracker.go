// Package tracking follows the points marked on a tower's legs and braces
// through every frame of a clip to a small fraction of a pixel, and says when
// a point can no longer be trusted.
//
// Each point's patch in the reference frame is its template. In every frame
// the template is aligned to the frame by inverse-compositional Gauss-Newton
// on the zero-mean normalised sum of squared differences with cubic
// resampling (Baker & Matthews 2004; Pan et al., "Fast, robust and accurate
// digital image correlation calculation without redundant computations",
// Experimental Mechanics 53:1277-1289, 2013). Matching always against the
// reference, never the previous frame, keeps errors from adding up over
// thousands of frames (no drift), and the normalised criterion ignores
// flicker. The alignment starts from a constant-velocity prediction; when
// that does not land cleanly (fast motion, collapse), pyramidal Lucas-Kanade
// (Bouguet 2000, OpenCV calcOpticalFlowPyrLK) from the previous frame with a
// forward-backward check gives the start, with pyramid depth chosen from the
// point's speed, and failing that a normalised cross-correlation search
// (OpenCV matchTemplate) over a window that widens with speed.
//
// Each sample's Quality is the normalised correlation with the reference
// patch (0..1; the lower of the whole window's and its core's). A result is
// taken only where an independent estimate agrees (the prediction, or
// Lucas-Kanade that passed its forward-backward check) and the speed changes
// smoothly: markers look alike, so a match elsewhere may be another marker.
// Otherwise, or when the quality falls below Options.MinQuality, the point
// is lost; a lost point is taken up again only on a strong match near where
// it was lost, found twice running at the same place.
//
// Background that stays still while a point moves (a textured wall behind a
// thin member) is learned pixel by pixel and weighted out of the point's
// patch. Frames are read as grey in place; a whole grey frame is made only
// when a point needs Lucas-Kanade or a search, or moves fast.
package tracking

import (
	"errors"
	"fmt"
	"image"
	"math"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/tracks"
)

// Options tune the tracker. The zero value is not usable: start from
// DefaultOptions.
type Options struct {
	// Window is the side of the square reference patch in pixels, odd;
	// default 17. Smaller windows follow thin members without picking up
	// the background; larger ones average more noise away.
	Window int
	// Sigma is the radius in pixels of the Gaussian that weights the
	// reference patch, so that the marker counts more than background near
	// the window's edge (which need not move with the point); 0 weights all
	// pixels alike; default 4.
	Sigma float64
	// LKWindow is the side of the Lucas-Kanade window in pixels, odd; default 21.
	LKWindow int
	// MaxLevels is the deepest pyramid level Lucas-Kanade may use; default 5.
	// The depth used for a point grows with its speed.
	MaxLevels int
	// MaxIter bounds the iterations of each alignment; default 30.
	MaxIter int
	// Epsilon is the step in pixels below which an alignment has converged;
	// default 0.003 (Gauss-Newton here shrinks the step about fivefold per
	// iteration, so the position is then within about 0.001 px).
	Epsilon float64
	// MinQuality is the match quality (normalised correlation with the
	// reference patch, the lower of the whole window's and its core's) below
	// which a point is lost; default 0.6.
	MinQuality float64
	// QualityDrop is how far below its running quality a point may fall
	// before the fast path is distrusted and the slower checks run; default 0.15.
	QualityDrop float64
	// ReacquireQuality is the correlation a lost point must reach, twice
	// running at the same place, to be taken up again; default 0.85.
	ReacquireQuality float64
	// MaxFB is the largest forward-backward error in pixels for a
	// frame-to-frame step to count; default 1.
	MaxFB float64
	// SearchRadius is the smallest radius in pixels of the correlation
	// search; default 16. It widens with the point's speed.
	SearchRadius int
	// MaxSearchRadius bounds the search radius; default 128.
	MaxSearchRadius int
	// MinTexture is the least texture a marked point needs: the smaller
	// eigenvalue of the patch's weighted structure matrix over its weighted
	// variance, in 1/px^2 (a flat patch has 0); default 0.002.
	MinTexture float64
	// MinIsotropy is the least ratio of the smaller to the larger
	// eigenvalue of a point's weighted structure matrix in the reference
	// frame below which the tracker warns that the patch is one straight
	// edge (a marker hidden behind a cord, or a spot on a plain stick);
	// default 0.15.
	MinIsotropy float64
	// UncoverFrames is for how many of the first frames tracked a point may
	// wait whose reference patch is one straight edge running across its
	// members (its marker hidden behind a cord, say; a point in no member is
	// only warned about): it is reported lost until its patch at the marked
	// place shows a marker again, and tracked from there with that patch;
	// one still hidden after these frames stays lost. 0 tracks such points
	// from the reference patch. Default 150.
	UncoverFrames int
	// AverageFrames is how many still frames at the start are averaged into
	// each point's reference patch, to take the reference frame's own noise
	// out of it; a point counts as still while within 0.1 px of its mark.
	// It helps noisy clips that start still, and biases the patch when the
	// points creep from the start (by up to half their creep over those
	// frames). Default 0 (off).
	AverageFrames int
	// PlainLK switches the reference alignment off: points follow pyramidal
	// Lucas-Kanade from frame to frame only (full frames, all points in one
	// call, LKWindow, MaxLevels, MaxIter and LKEpsilon), lost when the
	// forward-backward error exceeds MaxFB. For comparisons; it drifts.
	PlainLK bool
	// LKEpsilon is Lucas-Kanade's stopping step in pixels; default 0.01.
	LKEpsilon float64

	// keepBackground switches off learning of still background (for tests).
	keepBackground bool
}

// DefaultOptions returns the tracker's default settings.
func DefaultOptions() Options {
	return Options{
		Window:           17,
		Sigma:            4,
		LKWindow:         21,
		MaxLevels:        5,
		MaxIter:          30,
		Epsilon:          0.003,
		MinQuality:       0.6,
		QualityDrop:      0.15,
		ReacquireQuality: 0.85,
		MaxFB:            1,
		SearchRadius:     16,
		MaxSearchRadius:  128,
		MinTexture:       0.002,
		MinIsotropy:      0.15,
		UncoverFrames:    150,
		LKEpsilon:        0.01,
	}
}

func (o Options) check() error {
	switch {
	case o.Window < 5 || o.Window%2 == 0:
		return fmt.Errorf("window %d must be odd and at least 5", o.Window)
	case o.LKWindow < 5 || o.LKWindow%2 == 0:
		return fmt.Errorf("Lucas-Kanade window %d must be odd and at least 5", o.LKWindow)
	case !(o.Sigma >= 0):
		return fmt.Errorf("weight radius %g must not be negative", o.Sigma)
	case o.MaxLevels < 0 || o.MaxLevels > 8:
		return fmt.Errorf("pyramid levels %d must be 0..8", o.MaxLevels)
	case o.MaxIter < 1:
		return fmt.Errorf("iterations %d must be at least 1", o.MaxIter)
	case !(o.Epsilon > 0) || !(o.LKEpsilon > 0):
		return errors.New("stopping steps must be positive")
	case !(o.MinQuality > 0 && o.MinQuality < 1) || !(o.ReacquireQuality >= o.MinQuality && o.ReacquireQuality < 1):
		return fmt.Errorf("qualities must satisfy 0 < min (%g) <= reacquire (%g) < 1", o.MinQuality, o.ReacquireQuality)
	case !(o.MaxFB > 0):
		return fmt.Errorf("forward-backward limit %g must be positive", o.MaxFB)
	case o.AverageFrames < 0:
		return fmt.Errorf("average frames %d must not be negative", o.AverageFrames)
	case o.SearchRadius < 1 || o.MaxSearchRadius < o.SearchRadius:
		return fmt.Errorf("search radius %d..%d is not usable", o.SearchRadius, o.MaxSearchRadius)
	}
	return nil
}

// pointState is what the tracker knows about one point.
type pointState struct {
	id   string
	line int
	tp   *template
	tmpl gocv.Mat // reference patch for the correlation search
	// d0x, d0y is the marked position minus the template's integer anchor.
	d0x, d0y float64
	// cx, cy is the template centre in the last frame; vx, vy its last step.
	cx, cy, vx, vy float64
	// typ is the running quality; 0 before the first frame.
	typ     float64
	lost    bool
	lostFor int
	// steps counts accepted frames.
	steps int
	// avg sums the grey blocks of still frames at the start; avgN counts
	// them (the reference included); avgDone is set once averaging is over.
	avg     []float64
	avgN    int
	avgDone bool
	// candX, candY is a strong match found while lost, awaiting confirmation.
	candX, candY float64
	candOK       bool
	// waiting is set while the point's marker, covered in the reference
	// frame, has not shown yet (see Options.UncoverFrames); seen counts the
	// frames running in which its patch has looked like a marker, the same
	// each time, and seenRaw is the first of them.
	waiting bool
	seen    int
	seenRaw []float64
	// edgeRef is set for a point tracked from a reference patch that is one
	// straight edge along its members (warned about, not held): when it is
	// lost within the first Options.UncoverFrames frames it waits for its
	// marker at the marked place like a covered one (the edge may have
	// been a cord over the marker, which has now moved on), and goes back to
	// the plain search for a lost point when those frames are over.
	edgeRef bool
	// retemplated is set once the point's template was taken again at its
	// marked place (uncover): lost again within the first UncoverFrames
	// frames, it waits there again, as the new patch may still have held
	// part of what covered the marker.
	retemplated bool
	// nearMark is set when the point was lost within markedNear of its
	// marked place (see markedPlace).
	nearMark bool
}

// Tracker follows the marked points frame by frame. It is not safe for
// concurrent use. Close releases its OpenCV memory.
type Tracker struct {
	opt      Options
	pts      []pointState
	width    int
	height   int
	gray     gocv.Mat // the current frame in grey, when grayOK
	prev     gocv.Mat // the previous frame in grey, when prevOK
	grayOK   bool
	prevOK   bool
	frame    gocv.Mat // the frame being stepped (not owned)
	gen      uint64   // counts Steps, for the refiner's block cache
	rowBuf   []float64
	rf       refiner
	crit     gocv.TermCriteria
	lkIn     gocv.Mat
	lkOut    gocv.Mat
	lkBack   gocv.Mat
	lkStatus gocv.Mat
	lkErr    gocv.Mat
	match    gocv.Mat
	noMask   gocv.Mat
	warnings []string
	// voided lists, after a Step, the points whose samples before it were
	// found to be of something else (see pointState.edgeRef): their marker
	// showed at the marked place looking unlike their reference patch.
	voided []int
}

// New prepares a tracker for the points of m, whose px positions are in the
// reference frame ref (BGR, BGRA or grey, 8 bits).
func New(m *marks.File, ref gocv.Mat, opt Options) (*Tracker, error) {
	if err := opt.check(); err != nil {
		return nil, fmt.Errorf("tracking: %w", err)
	}
	if len(m.Points) == 0 {
		return nil, errors.New("tracking: the marks name no points")
	}
	if ref.Empty() {
		return nil, errors.New("tracking: empty reference frame")
	}
	t := &Tracker{
		opt:      opt,
		width:    ref.Cols(),
		height:   ref.Rows(),
		gray:     gocv.NewMat(),
		prev:     gocv.NewMat(),
		crit:     gocv.NewTermCriteria(gocv.Count|gocv.EPS, opt.MaxIter, opt.LKEpsilon),
		lkIn:     gocv.NewMat(),
		lkOut:    gocv.NewMat(),
		lkBack:   gocv.NewMat(),
		lkStatus: gocv.NewMat(),
		lkErr:    gocv.NewMat(),
		match:    gocv.NewMat(),
		noMask:   gocv.NewMat(),
	}
	if err := toGray(ref, &t.prev); err != nil {
		t.Close()
		return nil, fmt.Errorf("tracking: reference frame: %w", err)
	}
	t.prevOK = true
	refImg, err := view(t.prev)
	if err != nil {
		t.Close()
		return nil, err
	}
	if err := m.CheckBounds(t.width, t.height); err != nil {
		t.Close()
		return nil, err
	}
	dirs := memberDirs(m)
	for _, p := range m.Points {
		ax, ay := int(math.Round(p.PX[0])), int(math.Round(p.PX[1]))
		// The patch plus the gradient border must fit; shrink it near edges.
		r := opt.Window / 2
		edge := min(ax, ay, t.width-1-ax, t.height-1-ay) - 3
		if edge < r {
			r = edge
		}
		if r < 3 {
			t.Close()
			return nil, &marks.Error{Line: p.Line, Err: fmt.Errorf("point %s at (%.2f, %.2f) px is too near the edge of the %dx%d frame to track", p.ID, p.PX[0], p.PX[1], t.width, t.height)}
		}
		tp := newTemplate(refImg, ax, ay, r, opt.Sigma)
		if tp.minEig < opt.MinTexture {
			t.Close()
			return nil, &marks.Error{Line: p.Line, Err: fmt.Errorf("point %s at (%.2f, %.2f) px has too little texture to track (%.4f < %.4f): put a dot or cross marker there, or mark a more detailed spot", p.ID, p.PX[0], p.PX[1], tp.minEig, opt.MinTexture)}
		}
		waiting := false
		if tp.isotropy < opt.MinIsotropy {
			where := p.ID
			if p.Line > 0 {
				where = fmt.Sprintf("%s (marks line %d)", p.ID, p.Line)
			}
			what := "its track can slide along that edge"
			if waiting = opt.UncoverFrames > 0 && !opt.PlainLK && len(dirs[p.ID]) > 0 && !alongMember(tp.edgeDir, dirs[p.ID]); waiting {
				what = fmt.Sprintf("the edge runs across its members, so it is held as lost until its marker shows at the marked place (within %d frames)", opt.UncoverFrames)
			}
			t.warnings = append(t.warnings, fmt.Sprintf("point %s: in the reference frame its patch is mostly one straight edge (eigenvalue ratio %.2f < %.2f); %s; if a cord, a hand or another member covers its marker there, set reference_frame to a frame where the marker is clear, else put a dot or cross on it", where, tp.isotropy, opt.MinIsotropy, what))
		}
		side := 2*r + 1
		region := t.prev.Region(image.Rect(ax-r, ay-r, ax-r+side, ay-r+side))
		tmpl := region.Clone()
		region.Close()
		t.pts = append(t.pts, pointState{
			id: p.ID, line: p.Line, tp: tp, tmpl: tmpl,
			d0x: p.PX[0] - float64(ax), d0y: p.PX[1] - float64(ay),
			cx: float64(ax), cy: float64(ay),
			waiting: waiting, lost: waiting,
			edgeRef: tp.isotropy < opt.MinIsotropy && !waiting && opt.UncoverFrames > 0 && !opt.PlainLK,
		})
	}
	t.rf.ensure(opt.Window / 2)
	return t, nil
}

// memberDirs returns, per point id, the image directions (radians) of the
// members the point belongs to, from their end points' marked positions.
func memberDirs(m *marks.File) map[string][]float64 {
	px := map[string][2]float64{}
	for _, p := range m.Points {
		px[p.ID] = p.PX
	}
	out := map[string][]float64{}
	for _, mm := range m.Members {
		if len(mm.Points) < 2 {
			continue
		}
		a, b := px[mm.Points[0]], px[mm.Points[len(mm.Points)-1]]
		d := math.Atan2(b[1]-a[1], b[0]-a[0])
		for _, id := range mm.Points {
			out[id] = append(out[id], d)
		}
	}
	return out
}

// alongMember reports whether an edge in direction dir runs along one of
// the directions dirs, within 20 degrees either way.
func alongMember(dir float64, dirs []float64) bool {
	for _, d := range dirs {
		diff := math.Mod(math.Abs(dir-d), math.Pi)
		if math.Min(diff, math.Pi-diff) <= 20*math.Pi/180 {
			return true
		}
	}
	return false
}

// uncover looks for the marker of a waiting point at its marked place in
// cur (the frame being stepped): once the patch there is a marker again (twice the isotropy the
// warning asks for), it becomes the point's template and the point is
// tracked from there. The point stays lost until then, and for good after
// UncoverFrames frames.
func (t *Tracker) uncover(p *pointState, cur grayImage) tracks.Sample {
	if t.gen > uint64(t.opt.UncoverFrames) {
		if p.edgeRef || p.retemplated {
			// It was tracked once: search for it as for any lost point.
			p.waiting, p.edgeRef, p.retemplated = false, false, false
			return t.stepPoint(p, cur)
		}
		return p.sample(0)
	}
	ax, ay, r := p.tp.anchorX, p.tp.anchorY, p.tp.r
	tp := newTemplate(cur, ax, ay, r, t.opt.Sigma)
	if tp.isotropy < 2*t.opt.MinIsotropy || tp.minEig < t.opt.MinTexture ||
		(p.seen > 0 && zncc(p.seenRaw, tp.raw) < uncoverSame) {
		p.seen, p.seenRaw = 0, nil
		return p.sample(0)
	}
	// The patch must hold still for uncoverRuns frames: a cord still
	// sliding off the marker changes it from frame to frame.
	if p.seen++; p.seen == 1 {
		p.seenRaw = append([]float64(nil), tp.raw...)
	}
	if p.seen < uncoverRuns {
		return p.sample(0)
	}
	return t.retemplate(p, tp, p.edgeRef && zncc(p.tp.raw, tp.raw) < voidSame)
}

// retemplate makes tp, the patch at p's marked place in the frame being
// stepped, p's template and tracks p from there; void marks p's earlier
// samples as of something else (Tracker.voided).
func (t *Tracker) retemplate(p *pointState, tp *template, void bool) tracks.Sample {
	ax, ay, r := tp.anchorX, tp.anchorY, tp.r
	p.seen, p.seenRaw = 0, nil
	t.ensureGray()
	side := 2*r + 1
	region := t.gray.Region(image.Rect(ax-r, ay-r, ax-r+side, ay-r+side))
	p.tmpl.Close()
	p.tmpl = region.Clone()
	region.Close()
	if void {
		t.voided = append(t.voided, t.pointIndex(p))
	}
	p.tp, p.waiting, p.avgDone, p.edgeRef, p.retemplated = tp, false, true, false, true
	p.cx, p.cy, p.typ = float64(ax), float64(ay), 0
	p.accept(p.cx, p.cy, 1)
	return p.sample(1)
}

// voidSame is the correlation below which a marker found at its marked
// place is not what the reference patch showed, so that the track followed
// from that patch was of something else (common practice: the same marker
// under the same light correlates above 0.9).
const voidSame = 0.8

// pointIndex returns p's index in t.pts.
func (t *Tracker) pointIndex(p *pointState) int {
	for i := range t.pts {
		if &t.pts[i] == p {
			return i
		}
	}
	return -1
}

// A waiting point's marker counts as uncovered when its patch looks like a
// marker on uncoverRuns frames running, each correlating with the first by
// at least uncoverSame (common practice: a still scene repeats to within its
// noise).
const (
	uncoverRuns = 3
	uncoverSame = 0.95
)

// zncc is the zero-mean normalised cross-correlation of two patches of the
// same size, -1 to 1 (0 for a flat patch).
func zncc(a, b []float64) float64 {
	if len(a) != len(b) || len(a) == 0 {
		return 0
	}
	var ma, mb float64
	for i := range a {
		ma += a[i]
		mb += b[i]
	}
	ma /= float64(len(a))
	mb /= float64(len(b))
	var sab, saa, sbb float64
	for i := range a {
		da, db := a[i]-ma, b[i]-mb
		sab += da * db
		saa += da * da
		sbb += db * db
	}
	if saa == 0 || sbb == 0 {
		return 0
	}
	return sab / math.Sqrt(saa*sbb)
}

// Warnings returns what New found doubtful about the marked points in the
// reference frame (it tracks them all the same, a covered marker once it
// shows).
func (t *Tracker) Warnings() []string { return append([]string(nil), t.warnings...) }

// IDs returns the point ids in marks order, the order of Step's samples.
func (t *Tracker) IDs() []string {
	ids := make([]string, len(t.pts))
	for i, p := range t.pts {
		ids[i] = p.id
	}
	return ids
}

// Close releases the tracker's OpenCV memory.
func (t *Tracker) Close() {
	for i := range t.pts {
		t.pts[i].tmpl.Close()
	}
	for _, m := range []*gocv.Mat{&t.gray, &t.prev, &t.lkIn, &t.lkOut, &t.lkBack, &t.lkStatus, &t.lkErr, &t.match, &t.noMask} {
		m.Close()
	}
}

// toGray converts an 8-bit frame to grey into dst.
func toGray(img gocv.Mat, dst *gocv.Mat) error {
	switch img.Type() {
	case gocv.MatTypeCV8UC3:
		gocv.CvtColor(img, dst, gocv.ColorBGRToGray)
	case gocv.MatTypeCV8UC4:
		gocv.CvtColor(img, dst, gocv.ColorBGRAToGray)
	case gocv.MatTypeCV8UC1:
		img.CopyTo(dst)
	default:
		return fmt.Errorf("frame type %v is not 8-bit grey, BGR or BGRA", img.Type())
	}
	return nil
}

// view exposes a continuous 8-bit grey, BGR or BGRA Mat's pixels as grey,
// without copying.
func view(m gocv.Mat) (grayImage, error) {
	if !m.IsContinuous() {
		return grayImage{}, errors.New("tracking: frame memory is not continuous")
	}
	ch := 0
	switch m.Type() {
	case gocv.MatTypeCV8UC1:
		ch = 1
	case gocv.MatTypeCV8UC3:
		ch = 3
	case gocv.MatTypeCV8UC4:
		ch = 4
	default:
		return grayImage{}, fmt.Errorf("tracking: frame type %v is not 8-bit grey, BGR or BGRA", m.Type())
	}
	pix, err := m.DataPtrUint8()
	if err != nil {
		return grayImage{}, fmt.Errorf("tracking: %w", err)
	}
	return grayImage{pix: pix, width: m.Cols(), height: m.Rows(), stride: m.Cols() * ch, ch: ch}, nil
}

// ensureGray converts the current frame to grey, once per frame, for the
// steps that need a whole grey frame (Lucas-Kanade, correlation search).
// Frames where every point takes the fast path are never converted whole.
func (t *Tracker) ensureGray() {
	if !t.grayOK {
		toGray(t.frame, &t.gray)
		t.grayOK = true
	}
}

// Step tracks the points into the next frame img (same size and kind as the
// reference) and returns one sample per point, in marks order. frame is the
// frame's number, used in error messages.
func (t *Tracker) Step(frame int, img gocv.Mat) ([]tracks.Sample, error) {
	if img.Cols() != t.width || img.Rows() != t.height {
		return nil, fmt.Errorf("tracking: frame %d is %dx%d, the reference is %dx%d", frame, img.Cols(), img.Rows(), t.width, t.height)
	}
	cur, err := view(img)
	if err != nil {
		return nil, fmt.Errorf("tracking: frame %d: %w", frame, err)
	}
	t.frame, t.grayOK = img, false
	t.gen++
	t.voided = t.voided[:0]
	t.rf.gen = t.gen
	out := make([]tracks.Sample, len(t.pts))
	if t.opt.PlainLK {
		t.ensureGray()
		t.stepPlain(out)
	} else {
		fast := false
		for i := range t.pts {
			p := &t.pts[i]
			if p.waiting {
				out[i] = t.uncover(p, cur)
				continue
			}
			out[i] = t.stepPoint(p, cur)
			if !p.lost && math.Hypot(p.vx, p.vy) > 0.5 {
				fast = true
			}
		}
		// Keep a grey copy for the next frame's Lucas-Kanade while points
		// move fast; for slow points the fast path does not need it.
		if fast {
			t.ensureGray()
		}
	}
	t.gray, t.prev = t.prev, t.gray
	t.prevOK, t.grayOK = t.grayOK, false
	t.frame = gocv.Mat{}
	return out, nil
}

// sampleOf turns a point's state into a sample.
func (p *pointState) sample(q float64) tracks.Sample {
	if p.lost {
		return tracks.Sample{X: math.NaN(), Y: math.NaN(), Quality: math.Max(0, q), Lost: true}
	}
	return tracks.Sample{X: p.cx + p.d0x, Y: p.cy + p.d0y, Quality: math.Max(0, math.Min(1, q))}
}

// accept moves the point to (x, y) with quality q.
func (p *pointState) accept(x, y, q float64) {
	if p.lost {
		p.vx, p.vy = 0, 0
	} else {
		// Smooth the velocity a little: the last step alone carries the
		// positions' noise twice.
		p.vx, p.vy = 0.5*p.vx+0.5*(x-p.cx), 0.5*p.vy+0.5*(y-p.cy)
	}
	p.cx, p.cy = x, y
	if p.typ == 0 {
		p.typ = q
	} else {
		p.typ = 0.9*p.typ + 0.1*q
	}
	p.lost, p.lostFor = false, 0
}

// stepPoint tracks one point into cur.
func (t *Tracker) stepPoint(p *pointState, cur grayImage) tracks.Sample {
	o := &t.opt
	r := float64(p.tp.r)
	if p.lost {
		p.lostFor++
		// Lost early, near its marked place: was the reference patch the
		// marker at all? (See markedPlace.)
		if p.nearMark && t.gen <= uint64(o.UncoverFrames) {
			if s, ok := t.markedPlace(p, cur); ok {
				return s
			}
		}
		// Try to take the point up again: often at first, then now and then.
		// A strong match must be found twice running at the same place
		// before the point counts as found.
		if p.lostFor <= 10 || p.lostFor%10 == 0 || p.candOK {
			t.ensureGray()
			x, y, q, ok := t.search(p, cur, p.cx, p.cy, o.SearchRadius, o.ReacquireQuality, true)
			// Two marks are never on one marker: a match where another
			// point is tracked is that point's marker.
			ok = ok && !t.occupied(p, x, y)
			switch {
			case ok && p.candOK && math.Hypot(x-p.candX, y-p.candY) <= 0.5:
				p.candOK = false
				p.accept(x, y, q)
				return p.sample(q)
			case ok:
				p.candX, p.candY, p.candOK = x, y, true
			default:
				p.candOK = false
			}
			return p.sample(q)
		}
		return p.sample(0)
	}
	px, py := p.cx+p.vx, p.cy+p.vy
	speed := math.Hypot(p.vx, p.vy)
	// A result is taken only where an independent estimate agrees: the
	// constant-velocity prediction (within near px) or Lucas-Kanade from
	// the previous frame (within agree px); and only if the point's speed
	// changes by less than maxAccel px per frame. Markers look alike, so
	// even a strong match elsewhere may be another marker: a point is never
	// carried off onto another feature, it is reported lost instead.
	near := math.Max(1.5, r/4)
	const agree = 1.0
	dist := func(x0, y0, x1, y1 float64) float64 { return math.Hypot(x1-x0, y1-y0) }
	smooth := func(x, y float64) bool {
		return dist(x-p.cx, y-p.cy, p.vx, p.vy) <= 3+0.5*speed
	}

	// Fast path: align the reference patch starting at the prediction.
	res := t.rf.refine(p.tp, cur, px, py, o.MaxIter, o.Epsilon, r)
	if res.ok && res.converged && res.q() >= o.MinQuality &&
		(p.typ == 0 || res.q() >= p.typ-o.QualityDrop) &&
		dist(res.x, res.y, px, py) <= near {
		p.accept(res.x, res.y, res.q())
		t.average(p, cur, res.zncc)
		t.learn(p, cur, res.x, res.y)
		return p.sample(res.q())
	}
	best := res.q()
	t.finishAverage(p)

	// Part of the window hidden? A robust alignment from the prediction
	// leaves out what does not fit; what it keeps must match closely
	// (correlation 0.9), and its share times that correlation is the
	// quality.
	rob := t.rf.refineRobust(p.tp, cur, px, py, o.MaxIter, o.Epsilon, r)
	if rob.ok && rob.converged && rob.q() >= o.MinQuality && rob.zncc >= 0.9 &&
		dist(rob.x, rob.y, px, py) <= near && smooth(rob.x, rob.y) {
		p.accept(rob.x, rob.y, rob.q())
		return p.sample(rob.q())
	}
	best = math.Max(best, rob.q())

	// Frame-to-frame Lucas-Kanade with a forward-backward check, when the
	// previous frame is at hand in grey.
	t.ensureGray()
	var lx, ly, fb float64
	lkOK := false
	if t.prevOK {
		lx, ly, fb, lkOK = t.lkStep(p.cx, p.cy, px, py, speed)
		lkOK = lkOK && fb <= o.MaxFB && smooth(lx, ly)
	}
	if lkOK {
		res2 := t.rf.refine(p.tp, cur, lx, ly, o.MaxIter, o.Epsilon, r)
		if res2.ok && res2.q() >= o.MinQuality && dist(res2.x, res2.y, lx, ly) <= agree {
			p.accept(res2.x, res2.y, res2.q())
			t.learn(p, cur, res2.x, res2.y)
			return p.sample(res2.q())
		}
		best = math.Max(best, res2.q())
	}

	// Correlation search around the prediction, wider for faster points.
	rad := min(o.MaxSearchRadius, max(o.SearchRadius, int(math.Ceil(3*speed))))
	x, y, q, ok := t.search(p, cur, px, py, rad, o.MinQuality, false)
	if ok && smooth(x, y) && (dist(x, y, px, py) <= near || lkOK && dist(x, y, lx, ly) <= agree) {
		p.accept(x, y, q)
		return p.sample(q)
	}
	best = math.Max(best, q)
	p.lost, p.lostFor, p.candOK = true, 0, false
	p.seen, p.seenRaw = 0, nil
	if (p.edgeRef || p.retemplated) && t.gen <= uint64(o.UncoverFrames) {
		p.waiting = true
	}
	ax, ay := float64(p.tp.anchorX), float64(p.tp.anchorY)
	p.nearMark = math.Hypot(p.cx-ax, p.cy-ay) <= markedNear
	return p.sample(best)
}

// markedNear is how far, in px, from its marked place a point lost in the
// first Options.UncoverFrames frames may have been for markedPlace to look
// there: a tower barely moves early in a test, while a track that followed
// a cord off a half-covered marker drifts a pixel or two before it is lost
// (common practice; 1.8 px in the QA scene that prompted it).
const markedNear = 4.0

// markedGain is how many times the reference patch's isotropy (the ratio of
// its structure matrix's eigenvalues) a patch at the marked place must reach
// to replace it (common practice: clear markers scored 0.4-1 in the QA
// scenes, markers half behind a cord about 0.2).
const markedGain = 1.5

// markedPlace checks, for a point lost early near its marked place, whether
// a marker now shows at that place, the same for uncoverRuns frames running,
// more like a marker than the reference patch (markedGain) and not like it
// (correlation under voidSame):
// the reference patch then held part of what covered the marker (a cord),
// and the track so far followed that. The point is then tracked from the
// marker found, its earlier samples are void (Tracker.voided), and ok is
// true. Otherwise it returns false and the point is searched for as usual.
func (t *Tracker) markedPlace(p *pointState, cur grayImage) (tracks.Sample, bool) {
	ax, ay, r := p.tp.anchorX, p.tp.anchorY, p.tp.r
	tp := newTemplate(cur, ax, ay, r, t.opt.Sigma)
	// It must look more like a marker than the reference patch did (a
	// marker half behind a cord scores about half what a clear one does):
	// a clear reference and a patch with a cord resting on it must not
	// trade places.
	if tp.isotropy < math.Max(2*t.opt.MinIsotropy, markedGain*p.tp.isotropy) || tp.minEig < t.opt.MinTexture || zncc(p.tp.raw, tp.raw) >= voidSame ||
		(p.seen > 0 && zncc(p.seenRaw, tp.raw) < uncoverSame) {
		p.seen, p.seenRaw = 0, nil
		return tracks.Sample{}, false
	}
	if p.seen++; p.seen == 1 {
		p.seenRaw = append([]float64(nil), tp.raw...)
	}
	if p.seen < uncoverRuns {
		return tracks.Sample{}, false
	}
	return t.retemplate(p, tp, true), true
}

// learn gathers still-background evidence for p every few frames (the
// evidence needs motion, which builds up over frames anyway).
func (t *Tracker) learn(p *pointState, cur grayImage, x, y float64) {
	p.steps++
	if t.opt.keepBackground || p.steps%4 != 0 {
		return
	}
	t.rf.learnStatic(p.tp, cur, x, y)
}

// average adds the frame's block around p's anchor to p's running sum while
// p is still (within 0.1 px of its mark), for the first AverageFrames
// frames; then the reference patch is rebuilt from the mean. Averaging N
// frames divides the reference frame's noise, and the position bias it
// causes, by about sqrt(N).
func (t *Tracker) average(p *pointState, cur grayImage, zncc float64) {
	if p.avgDone {
		return
	}
	tp := p.tp
	d := math.Hypot(p.cx-float64(tp.anchorX), p.cy-float64(tp.anchorY))
	if d > 0.1 || t.opt.AverageFrames < 2 {
		t.finishAverage(p)
		return
	}
	if d < 1e-9 && zncc > 1-1e-9 {
		return // the reference frame itself
	}
	bs := 2*tp.r + 5
	if p.avg == nil {
		p.avg = append([]float64(nil), tp.block...)
		p.avgN = 1
	}
	if len(t.rowBuf) < bs {
		t.rowBuf = make([]float64, bs)
	}
	row := t.rowBuf[:bs]
	for j := 0; j < bs; j++ {
		cur.row(row, tp.anchorX-tp.r-2, tp.anchorY-tp.r-2+j)
		a := p.avg[j*bs : (j+1)*bs]
		for i, v := range row {
			a[i] += v
		}
	}
	p.avgN++
	if p.avgN >= t.opt.AverageFrames {
		t.finishAverage(p)
	}
}

// finishAverage ends averaging for p, rebuilding its patch from the mean
// when at least four frames went in.
func (t *Tracker) finishAverage(p *pointState) {
	if p.avgDone {
		return
	}
	p.avgDone = true
	if p.avgN >= 4 {
		for i := range p.avg {
			p.avg[i] /= float64(p.avgN)
		}
		old := p.tp
		tp := templateFromBlock(p.avg, old.anchorX, old.anchorY, old.r, old.sigma)
		if tp.norm > 0 && tp.minEig > 0 {
			copy(tp.static, old.static)
			tp.ev = old.ev
			tp.weigh()
			p.tp = tp
		}
	}
	p.avg = nil
}

// levelsFor picks the pyramid depth for an expected motion in pixels: the
// shallowest whose reach, half a window times 2^(L+1)-1 (Bouguet 2000),
// covers twice the motion.
func (t *Tracker) levelsFor(motion float64) int {
	half := float64(t.opt.LKWindow / 2)
	for l := 0; l < t.opt.MaxLevels; l++ {
		if half*float64(int(1)<<(l+1)-1) >= 2*motion+2 {
			return l
		}
	}
	return t.opt.MaxLevels
}

// lkStep runs pyramidal Lucas-Kanade for one point from (x, y) in the
// previous frame, starting at the guess (gx, gy), and back again, on a crop
// around the point. It returns the new position and the forward-backward
// error.
func (t *Tracker) lkStep(x, y, gx, gy, speed float64) (nx, ny, fb float64, ok bool) {
	levels := t.levelsFor(speed + 1)
	m := float64(t.opt.LKWindow/2+2)*float64(int(1)<<levels) + 4
	rect := image.Rect(int(math.Floor(math.Min(x, gx)-m)), int(math.Floor(math.Min(y, gy)-m)),
		int(math.Ceil(math.Max(x, gx)+m)), int(math.Ceil(math.Max(y, gy)+m))).
		Intersect(image.Rect(0, 0, t.width, t.height))
	if rect.Dx() < t.opt.LKWindow || rect.Dy() < t.opt.LKWindow {
		return 0, 0, 0, false
	}
	ox, oy := float64(rect.Min.X), float64(rect.Min.Y)
	a := t.prev.Region(rect)
	b := t.gray.Region(rect)
	defer a.Close()
	defer b.Close()
	win := image.Pt(t.opt.LKWindow, t.opt.LKWindow)
	setPoint(&t.lkIn, x-ox, y-oy)
	setPoint(&t.lkOut, gx-ox, gy-oy)
	gocv.CalcOpticalFlowPyrLKWithParams(a, b, t.lkIn, t.lkOut, &t.lkStatus, &t.lkErr, win, levels, t.crit, gocv.OptflowUseInitialFlow, 1e-4)
	if t.lkStatus.GetUCharAt(0, 0) == 0 {
		return 0, 0, 0, false
	}
	fx, fy := getPoint(t.lkOut)
	setPoint(&t.lkBack, x-ox, y-oy)
	gocv.CalcOpticalFlowPyrLKWithParams(b, a, t.lkOut, t.lkBack, &t.lkStatus, &t.lkErr, win, levels, t.crit, gocv.OptflowUseInitialFlow, 1e-4)
	if t.lkStatus.GetUCharAt(0, 0) == 0 {
		return 0, 0, 0, false
	}
	bx, by := getPoint(t.lkBack)
	return fx + ox, fy + oy, math.Hypot(bx+ox-x, by+oy-y), true
}

// setPoint makes m a 1x1 two-channel float point holding (x, y).
func setPoint(m *gocv.Mat, x, y float64) {
	if m.Rows() != 1 || m.Cols() != 1 || m.Type() != gocv.MatTypeCV32FC2 {
		m.Close()
		*m = gocv.NewMatWithSize(1, 1, gocv.MatTypeCV32FC2)
	}
	m.SetFloatAt(0, 0, float32(x))
	m.SetFloatAt(0, 1, float32(y))
}

func getPoint(m gocv.Mat) (x, y float64) {
	return float64(m.GetFloatAt(0, 0)), float64(m.GetFloatAt(0, 1))
}

// search looks for p's reference patch within rad pixels of (x, y) by
// normalised cross-correlation, aligns it at the best peak and reports it
// when the aligned correlation reaches need; q is the best correlation seen.
//
// With unique set, the match must also stand out: no other peak, farther
// than the patch's half-size from the best, may come within 0.15 of it
// (two look-alike markers in reach make the answer unsafe).
func (t *Tracker) search(p *pointState, cur grayImage, x, y float64, rad int, need float64, unique bool) (nx, ny, q float64, ok bool) {
	r := p.tp.r
	cx, cy := int(math.Round(x)), int(math.Round(y))
	rect := image.Rect(cx-rad-r, cy-rad-r, cx+rad+r+1, cy+rad+r+1).Intersect(image.Rect(0, 0, t.width, t.height))
	if rect.Dx() <= 2*r+1 || rect.Dy() <= 2*r+1 {
		return 0, 0, 0, false
	}
	region := t.gray.Region(rect)
	gocv.MatchTemplate(region, p.tmpl, &t.match, gocv.TmCcoeffNormed, t.noMask)
	region.Close()
	if unique {
		t.maskOthers(p, rect, r)
	}
	_, peak, _, loc := gocv.MinMaxLoc(t.match)
	if float64(peak) < need-0.1 {
		return 0, 0, float64(peak), false
	}
	if unique && !t.standsOut(loc, peak, r) {
		return 0, 0, float64(peak), false
	}
	sx, sy := float64(rect.Min.X+loc.X+r), float64(rect.Min.Y+loc.Y+r)
	res := t.rf.refine(p.tp, cur, sx, sy, t.opt.MaxIter, t.opt.Epsilon, float64(r))
	if !res.ok || res.q() < need {
		return 0, 0, math.Min(float64(peak), res.q()), false
	}
	return res.x, res.y, res.q(), true
}

// occupied reports whether another point is within half a patch (at least
// 3 px) of where p's template centre (x, y) puts p: where it is tracked, or,
// for a point lost too, where it was last seen (its marker is most likely
// still there, hidden or not, and must not be taken for p's).
func (t *Tracker) occupied(p *pointState, x, y float64) bool {
	px, py := x+p.d0x, y+p.d0y
	lim := math.Max(3, float64(p.tp.r)/2)
	for i := range t.pts {
		q := &t.pts[i]
		if q == p {
			continue
		}
		if math.Hypot(q.cx+q.d0x-px, q.cy+q.d0y-py) < lim {
			return true
		}
	}
	return false
}

// maskOthers blanks, in the correlation map t.match of p's template over
// rect, the places where p's marker would sit on another point's marker
// (where that point is tracked, or was last seen): look-alike markers near
// a lost point neither get taken for it nor make its own match look
// ambiguous.
func (t *Tracker) maskOthers(p *pointState, rect image.Rectangle, r int) {
	vals, err := t.match.DataPtrFloat32()
	if err != nil || !t.match.IsContinuous() {
		return
	}
	w, h := t.match.Cols(), t.match.Rows()
	for i := range t.pts {
		q := &t.pts[i]
		if q == p {
			continue
		}
		mx := q.cx + q.d0x - p.d0x - float64(rect.Min.X+r)
		my := q.cy + q.d0y - p.d0y - float64(rect.Min.Y+r)
		x0, x1 := max(0, int(math.Floor(mx))-r), min(w-1, int(math.Ceil(mx))+r)
		y0, y1 := max(0, int(math.Floor(my))-r), min(h-1, int(math.Ceil(my))+r)
		for y := y0; y <= y1; y++ {
			for x := x0; x <= x1; x++ {
				if dx, dy := float64(x)-mx, float64(y)-my; dx*dx+dy*dy <= float64(r*r) {
					vals[y*w+x] = -1
				}
			}
		}
	}
}

// standsOut reports whether the correlation peak at loc is at least 0.15
// above every value farther than r from it in t.match.
func (t *Tracker) standsOut(loc image.Point, peak float32, r int) bool {
	vals, err := t.match.DataPtrFloat32()
	if err != nil || !t.match.IsContinuous() {
		return false
	}
	w, h := t.match.Cols(), t.match.Rows()
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			dx, dy := x-loc.X, y-loc.Y
			if dx*dx+dy*dy > r*r && vals[y*w+x] > peak-0.15 {
				return false
			}
		}
	}
	return true
}

// stepPlain runs frame-to-frame Lucas-Kanade for all points in one call.
func (t *Tracker) stepPlain(out []tracks.Sample) {
	n := len(t.pts)
	if t.lkIn.Rows() != n || t.lkIn.Type() != gocv.MatTypeCV32FC2 {
		for _, m := range []*gocv.Mat{&t.lkIn, &t.lkOut, &t.lkBack} {
			m.Close()
			*m = gocv.NewMatWithSize(n, 1, gocv.MatTypeCV32FC2)
		}
	}
	for i, p := range t.pts {
		x, y := p.cx+p.d0x, p.cy+p.d0y
		t.lkIn.SetFloatAt(i, 0, float32(x))
		t.lkIn.SetFloatAt(i, 1, float32(y))
	}
	win := image.Pt(t.opt.LKWindow, t.opt.LKWindow)
	gocv.CalcOpticalFlowPyrLKWithParams(t.prev, t.gray, t.lkIn, t.lkOut, &t.lkStatus, &t.lkErr, win, t.opt.MaxLevels, t.crit, 0, 1e-4)
	st := make([]bool, n)
	for i := range n {
		st[i] = t.lkStatus.GetUCharAt(i, 0) != 0
	}
	gocv.CalcOpticalFlowPyrLKWithParams(t.gray, t.prev, t.lkOut, t.lkBack, &t.lkStatus, &t.lkErr, win, t.opt.MaxLevels, t.crit, 0, 1e-4)
	for i := range t.pts {
		p := &t.pts[i]
		if p.lost {
			out[i] = p.sample(0)
			continue
		}
		fx, fy := float64(t.lkOut.GetFloatAt(i, 0)), float64(t.lkOut.GetFloatAt(i, 1))
		bx, by := float64(t.lkBack.GetFloatAt(i, 0)), float64(t.lkBack.GetFloatAt(i, 1))
		fb := math.Hypot(bx-float64(t.lkIn.GetFloatAt(i, 0)), by-float64(t.lkIn.GetFloatAt(i, 1)))
		if !st[i] || t.lkStatus.GetUCharAt(i, 0) == 0 || !(fb <= t.opt.MaxFB) {
			p.lost = true
			out[i] = p.sample(0)
			continue
		}
		p.vx, p.vy = fx-p.d0x-p.cx, fy-p.d0y-p.cy
		p.cx, p.cy = fx-p.d0x, fy-p.d0y
		out[i] = p.sample(1 - fb/t.opt.MaxFB)
	}
}
