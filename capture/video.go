package capture

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strings"
	"sync"

	"gocv.io/x/gocv"
)

// Options tune how a clip is opened.
type Options struct {
	// ImageFPS is the rate stated for a folder of stills (0 = unknown). It
	// becomes the folder's ContainerFPS.
	ImageFPS float64
	// CountFrames makes Open count the frames of a video by decoding it even
	// when the container states a count (default false: trust a stated count
	// and count only when it is missing).
	CountFrames bool
	// Progress, when set, is called while Open counts frames by decoding.
	// total is the container's count, or 0 when it has none.
	Progress func(done, total int)
}

// ClipError is a problem with a clip as a whole: a missing file, a file that
// is not a video, a clip with no frames, an image folder that cannot be read
// as one clip.
type ClipError struct {
	// Path is the clip file or image folder.
	Path string
	// Err is the problem.
	Err error
}

// Error names the clip and the problem.
func (e *ClipError) Error() string { return fmt.Sprintf("clip %s: %v", e.Path, e.Err) }

// Unwrap returns the underlying problem.
func (e *ClipError) Unwrap() error { return e.Err }

// Open opens a video file (MP4, MOV, AVI and whatever else the OpenCV FFmpeg
// backend reads) or a folder of numbered stills (see openImages). Errors with
// the clip as a whole are *ClipError; a missing path also matches
// fs.ErrNotExist.
func Open(path string, opt Options) (Source, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, &ClipError{Path: path, Err: err}
	}
	if st.IsDir() {
		return openImages(path, opt)
	}
	return openVideo(path, opt)
}

// ErrShortClip is wrapped in the *FrameError that Read returns once when a
// video ends before the frame count its container states (a truncated or
// damaged file); the next Read returns io.EOF.
var ErrShortClip = errors.New("clip truncated or damaged")

// quietFFmpeg keeps the FFmpeg library's decoder chatter off standard error
// (the tool reports bad frames itself) unless the user set the level.
var quietFFmpeg sync.Once

const (
	// readRetries bounds how many failed reads in a row are tried before the
	// stream is taken to have ended; each failed read consumes at least one
	// damaged packet, and at the true end each is cheap.
	readRetries = 512
	// forwardGrab is the largest forward jump done by decoding through the
	// frames in between rather than by seeking.
	forwardGrab = 48
	// ptsSlack is how far (in frames) a timestamp may sit from a whole frame
	// number before timestamps are no longer trusted to number frames.
	ptsSlack = 0.3
)

// videoSource reads a video file through OpenCV's FFmpeg backend. It numbers
// frames itself: from the decoder's timestamps while they fall on whole
// frames of the container rate, else by counting. A gap in the timestamps is
// a frame that could not be decoded and is reported as a *FrameError.
type videoSource struct {
	info Info
	vc   *gocv.VideoCapture
	// next is the frame number the next Read returns.
	next int
	// fps is the container rate used to turn timestamps into frame numbers.
	fps float64
	// ptsOK is true while timestamps have fallen on whole frame numbers.
	ptsOK bool
	// firstPTS is frame 0's timestamp in frames.
	firstPTS float64
	// gapEnd is the first frame after a run of missing frames starting at
	// next; frames next..gapEnd-1 are reported as missing. held holds the
	// decoded frame gapEnd while that happens (heldOK false when none).
	gapEnd int
	held   gocv.Mat
	heldOK bool
	// ended is set once the stream has ended; endReported once a short
	// stream (fewer frames than the container lists) has been reported.
	ended, endReported bool
	// unsure is set after a decoding failure until a frame with a
	// timestamp fixes the frame numbers again.
	unsure bool
}

func openVideo(path string, opt Options) (Source, error) {
	quietFFmpeg.Do(func() {
		if os.Getenv("OPENCV_FFMPEG_LOGLEVEL") == "" {
			os.Setenv("OPENCV_FFMPEG_LOGLEVEL", "-8") // AV_LOG_QUIET
		}
	})
	s := &videoSource{info: Info{Path: path}, held: gocv.NewMat()}
	if err := s.reopen(); err != nil {
		s.held.Close()
		return nil, &ClipError{Path: path, Err: err}
	}
	s.info.Codec = codecName(s.vc)
	s.info.IntraOnly = IntraCodec(s.info.Codec)
	s.info.ContainerFPS = s.vc.Get(gocv.VideoCaptureFPS)
	if math.IsNaN(s.info.ContainerFPS) || math.IsInf(s.info.ContainerFPS, 0) || s.info.ContainerFPS < 0 {
		s.info.ContainerFPS = 0
	}
	s.fps = s.info.ContainerFPS
	s.ptsOK = s.fps > 0
	n := s.vc.Get(gocv.VideoCaptureFrameCount)
	if n >= 1 && n < 1e9 {
		s.info.FrameCount = int(n)
		s.info.CountSource = "container"
	}

	// The first frame sets the true frame size (after any rotation the
	// backend applies) and the timestamp of frame 0.
	first := gocv.NewMat()
	defer first.Close()
	if !s.vc.Read(&first) || first.Empty() {
		s.Close()
		return nil, &ClipError{Path: path, Err: errors.New("no frame could be decoded (not a video, empty, or damaged at the start)")}
	}
	s.info.Width, s.info.Height = first.Cols(), first.Rows()
	if s.ptsOK {
		s.firstPTS = s.vc.Get(gocv.VideoCapturePosMsec) / 1000 * s.fps
		// A stream without timestamps (a bare H.264 stream, say) shows
		// none on its second frame either: number its frames by counting.
		before := s.vc.Get(gocv.VideoCapturePosFrames)
		s.vc.Grab(1)
		if s.vc.Get(gocv.VideoCapturePosFrames) > before && s.vc.Get(gocv.VideoCapturePosMsec) == 0 {
			s.ptsOK = false
		}
	}
	if !s.ptsOK {
		s.info.Warnings = append(s.info.Warnings, "the stream has no usable timestamps: frames are numbered by counting, so a frame lost to damage cannot be told from the next")
	}

	if opt.CountFrames || s.info.FrameCount == 0 {
		if err := s.count(opt.Progress); err != nil {
			s.Close()
			return nil, err
		}
	}
	if err := s.rewind(); err != nil {
		s.Close()
		return nil, &ClipError{Path: path, Err: err}
	}
	return s, nil
}

// count decodes the whole clip to find its frame count. Damaged frames are
// counted (they have frame numbers) and left for Read to report.
func (s *videoSource) count(progress func(done, total int)) error {
	if err := s.rewind(); err != nil {
		return &ClipError{Path: s.info.Path, Err: err}
	}
	total := s.info.FrameCount
	// Counting must not stop short because of the container's own count.
	s.info.FrameCount = 0
	m := gocv.NewMat()
	defer m.Close()
	n := 0
	for {
		f, err := s.Read(&m)
		if errors.Is(err, io.EOF) {
			break
		}
		if errors.Is(err, ErrShortClip) {
			continue // the end report names a frame that is not there
		}
		n = f + 1
		if progress != nil && n%25 == 0 {
			progress(n, total)
		}
	}
	if progress != nil {
		progress(n, total)
	}
	if n == 0 {
		return &ClipError{Path: s.info.Path, Err: errors.New("the clip has no frames")}
	}
	s.info.FrameCount = n
	s.info.CountSource = "counted"
	return nil
}

// reopen opens the file afresh, positioned before frame 0.
func (s *videoSource) reopen() error {
	if s.vc != nil {
		s.vc.Close()
		s.vc = nil
	}
	vc, err := gocv.OpenVideoCaptureWithAPI(s.info.Path, gocv.VideoCaptureFFmpeg)
	if err != nil || vc == nil || !vc.IsOpened() {
		if vc != nil {
			vc.Close()
		}
		return errors.New("not a readable video (the FFmpeg backend cannot open it)")
	}
	s.vc = vc
	s.resetCursor(0)
	return nil
}

// rewind positions the source before frame 0.
func (s *videoSource) rewind() error { return s.reopen() }

func (s *videoSource) resetCursor(next int) {
	s.next = next
	s.gapEnd = next
	s.heldOK = false
	s.ended = false
	s.endReported = false
	s.unsure = false
}

// ptsFrame returns the frame number of the last decoded frame from its
// timestamp, and false when the timestamp cannot say (none, or timestamps
// have stopped falling on whole frames, in which case they are no longer
// used at all).
func (s *videoSource) ptsFrame() (int, bool) {
	if !s.ptsOK {
		return 0, false
	}
	ms := s.vc.Get(gocv.VideoCapturePosMsec)
	if ms == 0 && s.next != 0 {
		// The backend reports 0 when a frame has no timestamp (for instance
		// frames flushed from the decoder at the end of an H.264 stream).
		return 0, false
	}
	x := ms/1000*s.fps - s.firstPTS
	r := math.Round(x)
	if math.Abs(x-r) > ptsSlack || math.IsNaN(x) {
		s.ptsOK = false
		return 0, false
	}
	return int(r), true
}

func (s *videoSource) Info() Info { return s.info }

func (s *videoSource) frameErr(frame int, format string, a ...any) *FrameError {
	return &FrameError{Path: s.info.Path, Frame: frame, Err: fmt.Errorf(format, a...)}
}

func (s *videoSource) Read(dst *gocv.Mat) (int, error) {
	if s.next < s.gapEnd {
		f := s.next
		s.next++
		return f, s.frameErr(f, "frame missing or could not be decoded (the stream goes on at frame %d)", s.gapEnd)
	}
	if s.heldOK {
		s.held.CopyTo(dst)
		s.heldOK = false
		f := s.next
		s.next++
		return f, nil
	}
	if s.ended {
		return s.next, io.EOF
	}
	failed := 0
	var idx int
	for {
		if !s.vc.Read(dst) || dst.Empty() {
			failed++
			atEnd := s.info.FrameCount > 0 && s.next >= s.info.FrameCount
			if failed < readRetries && !atEnd {
				continue // a damaged packet; the decoder goes on with the next
			}
			s.ended = true
			short := s.info.FrameCount > 0 && s.next < s.info.FrameCount
			if (short || s.unsure) && !s.endReported {
				s.endReported = true
				msg := fmt.Sprintf("the stream ends here but the container lists %d frames", s.info.FrameCount)
				if !short {
					msg = "the stream ends in a damaged stretch"
				}
				return s.next, &FrameError{Path: s.info.Path, Frame: s.next, Err: fmt.Errorf("%w: %s", ErrShortClip, msg)}
			}
			return s.next, io.EOF
		}
		if dst.Cols() != s.info.Width || dst.Rows() != s.info.Height {
			// Not a frame of this clip's size: treat it as undecodable; it
			// shows as a gap before the next good frame.
			failed++
			continue
		}
		var known bool
		idx, known = s.ptsFrame()
		if !known && s.ptsOK && (failed > 0 || s.unsure) {
			// A frame after a decoding failure with no timestamp (frames
			// flushed from the decoder have none): its number cannot be
			// told, so it is dropped rather than numbered by guess. The
			// frames lost show as a gap before the next timestamped frame,
			// or as a short clip at the end.
			s.unsure = true
			failed++
			if failed < readRetries {
				continue
			}
		}
		switch {
		case known:
			s.unsure = false
		case !known:
			// No usable timestamp: count. Each failed read is taken as one lost
			// frame, the best that can be said without timestamps.
			idx = s.next + failed
		}
		if known && idx < s.next {
			// Timestamps went backwards: stop trusting them and count.
			s.ptsOK = false
			idx = s.next + failed
		}
		break
	}
	if idx > s.next {
		// Frames next..idx-1 were lost: report them one by one, then idx.
		dst.CopyTo(&s.held)
		s.heldOK = true
		s.gapEnd = idx
		f := s.next
		s.next++
		return f, s.frameErr(f, "frame missing or could not be decoded (the stream goes on at frame %d)", idx)
	}
	s.next++
	return idx, nil
}

// grab decodes the next frame without converting it and advances the
// cursor. It returns false at the end of the stream or when a gap in the
// timestamps skipped over frames (then the cursor is already past them).
func (s *videoSource) grab() (gap, ok bool) {
	before := s.vc.Get(gocv.VideoCapturePosFrames)
	for failed := 0; ; failed++ {
		s.vc.Grab(1)
		if s.vc.Get(gocv.VideoCapturePosFrames) > before {
			idx, known := s.ptsFrame()
			if !known && s.ptsOK && (failed > 0 || s.unsure) {
				// Its number cannot be told: let seekSlow sort it out.
				s.unsure = true
				s.next = math.MaxInt32
				return true, true
			}
			if known {
				s.unsure = false
			}
			if !known || idx < s.next {
				idx = s.next + failed
			}
			gap = idx > s.next
			s.next = idx + 1
			s.gapEnd = s.next
			return gap, true
		}
		if failed >= readRetries {
			return false, false
		}
	}
}

// Seek positions the source so that the next Read returns frame. The
// backend's own frame positioning is not trusted: the source lands on an
// earlier frame, checks where it landed from the frame's timestamp (or
// rewinds to the start when timestamps cannot say), and decodes forward.
func (s *videoSource) Seek(frame int) error {
	if frame < 0 {
		return s.frameErr(frame, "seek: negative frame number")
	}
	if s.info.FrameCount > 0 && frame >= s.info.FrameCount && s.info.CountSource == "counted" {
		return s.frameErr(frame, "seek: beyond the last frame %d", s.info.FrameCount-1)
	}
	if frame == s.next && !s.ended {
		return nil
	}
	if s.next < frame && frame <= s.gapEnd {
		s.next = frame // inside a reported gap, or at the held frame
		return nil
	}
	if s.heldOK && frame > s.gapEnd {
		// Drop the held frame; the decoder stands just after it.
		s.resetCursor(s.gapEnd + 1)
	}
	if !(frame > s.next && frame-s.next <= forwardGrab && !s.ended) {
		if err := s.land(frame); err != nil {
			return err
		}
	}
	s.heldOK = false
	for s.next < frame {
		gap, ok := s.grab()
		if !ok {
			return s.frameErr(frame, "seek: the clip ends at frame %d", s.next-1)
		}
		if gap && s.next > frame {
			// A damaged stretch covers frame: go again, decoding fully so
			// that the gap is reported frame by frame.
			return s.seekSlow(frame)
		}
	}
	return nil
}

// land positions the cursor at or before frame, at a known frame number.
func (s *videoSource) land(frame int) error {
	for margin := 0; ; margin = 2*margin + 16 {
		at := frame - 1 - margin
		if at <= 0 || !s.ptsOK {
			return s.rewind()
		}
		s.resetCursor(0)
		s.vc.Set(gocv.VideoCapturePosFrames, float64(at))
		before := s.vc.Get(gocv.VideoCapturePosFrames)
		s.vc.Grab(1)
		if s.vc.Get(gocv.VideoCapturePosFrames) <= before {
			continue // landed in a damaged stretch or past the end
		}
		s.next = math.MaxInt32 // so that a 0 timestamp reads as unknown
		idx, known := s.ptsFrame()
		if known && idx >= 0 && idx < frame {
			s.resetCursor(idx + 1)
			return nil
		}
	}
}

// seekSlow positions the source at frame by decoding every frame from a
// landing point, so that missing frames before and at frame are handled as
// Read reports them.
func (s *videoSource) seekSlow(frame int) error {
	if err := s.land(frame); err != nil {
		return err
	}
	m := gocv.NewMat()
	defer m.Close()
	for s.next < frame {
		if s.next < s.gapEnd && frame <= s.gapEnd {
			s.next = frame
			break
		}
		if _, err := s.Read(&m); errors.Is(err, io.EOF) {
			return s.frameErr(frame, "seek: the clip ends at frame %d", s.next-1)
		}
	}
	return nil
}

func (s *videoSource) Close() error {
	s.held.Close()
	if s.vc != nil {
		err := s.vc.Close()
		s.vc = nil
		return err
	}
	return nil
}

// codecName is the clip's four-character codec code, or the raw tag in hex
// when the container gives a number rather than letters (MPEG-TS stream types).
func codecName(vc *gocv.VideoCapture) string {
	name := vc.CodecString()
	for _, r := range name {
		if r < ' ' || r > '~' {
			return fmt.Sprintf("unknown (tag 0x%x)", uint32(vc.Get(gocv.VideoCaptureFOURCC)))
		}
	}
	return strings.TrimSpace(name)
}
