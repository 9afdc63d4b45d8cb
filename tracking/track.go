package tracking

import (
	"errors"
	"fmt"
	"io"
	"math"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/tracks"
)

// Range is a run of frames to track.
type Range struct {
	// From is the first frame.
	From int
	// To is the last frame, included; negative means to the end of the clip.
	To int
}

// Hooks let a caller share the decoded frames and follow progress.
type Hooks struct {
	// OnFrame, when set, is called with every decoded frame (BGR) after it
	// has been tracked, with the frame's samples (in the marks' point order;
	// not to be kept: copy what is needed); an error stops tracking and is
	// returned.
	OnFrame func(frame int, img gocv.Mat, samples []tracks.Sample) error
	// Progress, when set, is called after each frame with the frames done and
	// the total (0 when the total is not known).
	Progress func(done, total int)
	// OnFrameError, when set, is called for a frame that cannot be decoded:
	// returning nil skips the frame (it gets no row; tracking goes on from
	// the next), returning an error stops tracking with it. When nil, a bad
	// frame stops tracking with an error naming it.
	OnFrameError func(err *capture.FrameError) error
	// Warn, when set, is given each doubt about a marked point found in the
	// reference frame (see Tracker.Warnings) before tracking starts.
	Warn func(msg string)
}

// Track follows the points of m through src over rng: it reads the reference
// frame m.ReferenceFrame, then every frame of the range once. A frame that
// cannot be decoded stops tracking with an error naming it, unless
// hooks.OnFrameError lets it be skipped. The next frames are decoded on
// another goroutine while one is tracked, so the hooks must not use src; it
// is free again when Track returns.
func Track(src capture.Source, m *marks.File, opt Options, rng Range, hooks Hooks) (*tracks.Tracks, error) {
	info := src.Info()
	if rng.From < 0 {
		return nil, fmt.Errorf("track %s: first frame %d is negative", info.Path, rng.From)
	}
	if rng.To >= 0 && rng.To < rng.From {
		return nil, fmt.Errorf("track %s: last frame %d is before the first frame %d", info.Path, rng.To, rng.From)
	}
	if info.FrameCount > 0 && rng.From >= info.FrameCount {
		return nil, fmt.Errorf("track %s: first frame %d is past the end of the clip (%d frames)", info.Path, rng.From, info.FrameCount)
	}
	if err := m.CheckBounds(info.Width, info.Height); err != nil {
		return nil, err
	}
	img := gocv.NewMat()
	defer img.Close()

	// The reference frame.
	if err := src.Seek(m.ReferenceFrame); err != nil {
		return nil, fmt.Errorf("track %s: reference frame %d: %w", info.Path, m.ReferenceFrame, err)
	}
	if _, err := src.Read(&img); err != nil {
		if errors.Is(err, io.EOF) {
			return nil, fmt.Errorf("track %s: reference frame %d is past the end of the clip", info.Path, m.ReferenceFrame)
		}
		return nil, fmt.Errorf("track %s: reference frame %d: %w", info.Path, m.ReferenceFrame, err)
	}
	tr, err := New(m, img, opt)
	if err != nil {
		return nil, err
	}
	defer tr.Close()
	if hooks.Warn != nil {
		for _, w := range tr.Warnings() {
			hooks.Warn(w)
		}
	}

	// When the run starts at the reference frame, it is at hand already.
	haveFirst := rng.From == m.ReferenceFrame
	if !haveFirst {
		if err := src.Seek(rng.From); err != nil {
			return nil, fmt.Errorf("track %s: first frame %d: %w", info.Path, rng.From, err)
		}
	}
	total := 0
	if info.FrameCount > 0 {
		last := info.FrameCount - 1
		if rng.To >= 0 && rng.To < last {
			last = rng.To
		}
		total = last - rng.From + 1
	} else if rng.To >= 0 {
		total = rng.To - rng.From + 1
	}
	out := &tracks.Tracks{IDs: tr.IDs(), Ref: make([][2]float64, len(m.Points))}
	for i, p := range m.Points {
		out.Ref[i] = p.PX
	}
	if total > 0 {
		out.Frames = make([]int, 0, total)
		out.Samples = make([][]tracks.Sample, 0, total)
	}
	// Decoding runs one frame ahead of tracking on its own goroutine (see
	// readAhead), so the two overlap on a machine with more than one core.
	var first *gocv.Mat
	if haveFirst {
		first = &img
	}
	rd := newReadAhead(src, first, rng.From, rng.To)
	defer rd.stop()
	for {
		fr, ok := rd.next()
		if !ok {
			break
		}
		frame, err := fr.frame, fr.err
		if errors.Is(err, io.EOF) {
			break
		}
		var fe *capture.FrameError
		if errors.As(err, &fe) && hooks.OnFrameError != nil {
			if rng.To >= 0 && fe.Frame > rng.To {
				break
			}
			if herr := hooks.OnFrameError(fe); herr != nil {
				return nil, herr
			}
			rd.release(fr)
			continue
		}
		if err != nil {
			return nil, fmt.Errorf("track %s: %w", info.Path, err)
		}
		if rng.To >= 0 && frame > rng.To {
			break
		}
		s, err := tr.Step(frame, *fr.img)
		if err != nil {
			return nil, fmt.Errorf("track %s: %w", info.Path, err)
		}
		out.Frames = append(out.Frames, frame)
		out.Samples = append(out.Samples, s)
		// A point whose reference patch turned out not to be its marker:
		// what was tracked before is not the point.
		for _, k := range tr.voided {
			if k < 0 {
				continue
			}
			for r := 0; r < len(out.Samples)-1; r++ {
				if out.Frames[r] != m.ReferenceFrame {
					out.Samples[r][k] = tracks.Sample{X: math.NaN(), Y: math.NaN(), Lost: true}
				}
			}
			if hooks.Warn != nil {
				hooks.Warn(fmt.Sprintf("point %s: its marker showed at the marked place at frame %d looking unlike its reference patch (a cord or a hand was over it there), so its track before that followed something else and is reported lost", out.IDs[k], frame))
			}
		}
		if hooks.OnFrame != nil {
			if err := hooks.OnFrame(frame, *fr.img, s); err != nil {
				return nil, err
			}
		}
		rd.release(fr)
		if hooks.Progress != nil {
			hooks.Progress(len(out.Frames), total)
		}
	}
	if len(out.Frames) == 0 {
		return nil, fmt.Errorf("track %s: no frames from %d on", info.Path, rng.From)
	}
	return out, nil
}

// readDepth is how many decoded frames may wait for the tracker; with the
// frame being decoded and the one being tracked, readDepth+2 frames are held.
const readDepth = 2

// readFrame is one result of Source.Read.
type readFrame struct {
	frame int
	err   error
	img   *gocv.Mat
}

// readAhead reads frames from a source on its own goroutine into a small
// pool of Mats, so that decoding the next frame overlaps tracking this one.
// Frames arrive in the order Read returned them. It stops after io.EOF, an
// error that is not a *capture.FrameError, or a frame past last (last < 0:
// no limit), and when stop is called; stop waits until the goroutine no
// longer touches the source.
type readAhead struct {
	out  chan readFrame
	free chan *gocv.Mat
	quit chan struct{}
	done chan struct{}
	mats []*gocv.Mat
}

// newReadAhead starts reading. first, when not nil, is frame firstFrame
// already read: it is handed out first, and not closed by stop.
func newReadAhead(src capture.Source, first *gocv.Mat, firstFrame, last int) *readAhead {
	r := &readAhead{
		out:  make(chan readFrame, readDepth),
		free: make(chan *gocv.Mat, readDepth+2),
		quit: make(chan struct{}),
		done: make(chan struct{}),
	}
	for i := 0; i < readDepth+2; i++ {
		m := gocv.NewMat()
		r.mats = append(r.mats, &m)
		r.free <- &m
	}
	go func() {
		defer close(r.done)
		defer close(r.out)
		if first != nil {
			select {
			case r.out <- readFrame{frame: firstFrame, img: first}:
			case <-r.quit:
				return
			}
		}
		for {
			var m *gocv.Mat
			select {
			case m = <-r.free:
			case <-r.quit:
				return
			}
			f, err := src.Read(m)
			select {
			case r.out <- readFrame{frame: f, err: err, img: m}:
			case <-r.quit:
				return
			}
			var fe *capture.FrameError
			if err != nil && !errors.As(err, &fe) {
				return
			}
			if last >= 0 && f > last {
				return
			}
		}
	}()
	return r
}

// next returns the next frame read; false when reading has stopped.
func (r *readAhead) next() (readFrame, bool) {
	fr, ok := <-r.out
	return fr, ok
}

// release gives a frame's Mat back for reading into.
func (r *readAhead) release(fr readFrame) {
	for _, m := range r.mats {
		if m == fr.img {
			r.free <- m
			return
		}
	}
}

// stop ends reading, waits for the goroutine and frees the Mats.
func (r *readAhead) stop() {
	close(r.quit)
	<-r.done
	for _, m := range r.mats {
		m.Close()
	}
}
