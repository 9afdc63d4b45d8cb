package review

import (
	"container/list"
	"errors"
	"fmt"
	"io"
	"sync"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/capture"
)

// errOutOfRange is returned for a frame number outside the clip.
var errOutOfRange = errors.New("frame out of range")

// forwardGap is how many frames the store reads forward instead of seeking.
const forwardGap = 24

// frameStore decodes frames of one clip on demand. It keeps one Source open,
// reads forward when the next frame is asked for in order, and caches a few
// recently encoded images. It is safe for concurrent use.
type frameStore struct {
	mu     sync.Mutex
	src    capture.Source
	path   string
	frames int // frame count; reduced if the clip turns out shorter
	next   int // the frame the next src.Read returns
	cur    int // the frame in mat, -1 for none
	mat    gocv.Mat

	cache    *list.List // of *cacheEntry, most recent first
	index    map[cacheKey]*list.Element
	maxBytes int
	bytes    int

	// reads and seeks count decoder work (for tests and the status line).
	reads, seeks int
}

type cacheKey struct {
	frame int
	ext   gocv.FileExt
}

type cacheEntry struct {
	key  cacheKey
	data []byte
}

// newFrameStore wraps src; maxBytes bounds the cache of encoded images.
func newFrameStore(src capture.Source, maxBytes int) *frameStore {
	return &frameStore{
		src:      src,
		path:     src.Info().Path,
		frames:   src.Info().FrameCount,
		mat:      gocv.NewMat(),
		cur:      -1,
		cache:    list.New(),
		index:    map[cacheKey]*list.Element{},
		maxBytes: maxBytes,
	}
}

// Frames returns the number of frames known to be in the clip.
func (s *frameStore) Frames() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.frames
}

// Close releases the decoder.
func (s *frameStore) Close() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.mat.Close()
	return s.src.Close()
}

// decodeLocked leaves frame n in s.mat. The caller holds s.mu.
func (s *frameStore) decodeLocked(n int) error {
	if n < 0 || n >= s.frames {
		return fmt.Errorf("%s frame %d: %w (clip has %d frames)", s.path, n, errOutOfRange, s.frames)
	}
	if n == s.cur {
		return nil
	}
	s.cur = -1
	if n < s.next || n > s.next+forwardGap {
		if err := s.src.Seek(n); err != nil {
			s.next = -1 << 30 // unknown position: seek next time
			return err
		}
		s.seeks++
		s.next = n
	}
	got := -1
	for s.next <= n {
		var err error
		got, err = s.src.Read(&s.mat)
		s.reads++
		if errors.Is(err, io.EOF) || errors.Is(err, capture.ErrShortClip) {
			// The container over-stated the frame count.
			s.frames = max(got, 1)
			s.next = -1 << 30
			return fmt.Errorf("%s frame %d: %w (the clip ends at %d frames)", s.path, n, errOutOfRange, s.frames)
		}
		s.next = got + 1
		if err != nil && got == n {
			return err
		}
	}
	if got != n {
		return &capture.FrameError{Path: s.path, Frame: n, Err: errors.New("frame could not be decoded")}
	}
	s.cur = n
	return nil
}

// Encoded returns frame n encoded as JPEG (ext ".jpg") or PNG (".png").
func (s *frameStore) Encoded(n int, ext gocv.FileExt) ([]byte, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	key := cacheKey{n, ext}
	if el, ok := s.index[key]; ok {
		s.cache.MoveToFront(el)
		return el.Value.(*cacheEntry).data, nil
	}
	if err := s.decodeLocked(n); err != nil {
		return nil, err
	}
	var buf *gocv.NativeByteBuffer
	var err error
	if ext == gocv.JPEGFileExt {
		buf, err = gocv.IMEncodeWithParams(ext, s.mat, []int{gocv.IMWriteJpegQuality, 90})
	} else {
		buf, err = gocv.IMEncode(ext, s.mat)
	}
	if err != nil {
		return nil, fmt.Errorf("%s frame %d: encode: %w", s.path, n, err)
	}
	data := append([]byte(nil), buf.GetBytes()...)
	buf.Close()
	s.addLocked(key, data)
	return data, nil
}

// Mat returns a copy of frame n; the caller closes it.
func (s *frameStore) Mat(n int) (gocv.Mat, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if err := s.decodeLocked(n); err != nil {
		return gocv.NewMat(), err
	}
	return s.mat.Clone(), nil
}

func (s *frameStore) addLocked(key cacheKey, data []byte) {
	if len(data) > s.maxBytes {
		return
	}
	s.index[key] = s.cache.PushFront(&cacheEntry{key: key, data: data})
	s.bytes += len(data)
	for s.bytes > s.maxBytes {
		el := s.cache.Back()
		e := el.Value.(*cacheEntry)
		s.cache.Remove(el)
		delete(s.index, e.key)
		s.bytes -= len(e.data)
	}
}
