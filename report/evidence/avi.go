package evidence

import (
	"bufio"
	"encoding/binary"
	"fmt"
	"math"
	"os"

	"gocv.io/x/gocv"
)

// aviWriter writes a Motion-JPEG AVI (RIFF AVI 1.0 with an idx1 index, the
// layout of Microsoft's AVI RIFF File Reference), each frame compressed by
// OpenCV's JPEG encoder (libjpeg-turbo on Debian). It is several times
// cheaper per frame than OpenCV's FFmpeg video writer for the same frames,
// and any player that reads MJPG AVI plays it.
type aviWriter struct {
	f        *os.File
	w        *bufio.Writer
	width    int
	height   int
	fps      float64
	quality  int
	pos      int64    // bytes written so far
	moviPos  int64    // offset of the 'movi' list's fourcc
	index    []uint32 // per frame: offset from moviPos, size
	maxChunk uint32
	err      error
}

// AVI header field offsets patched when the file is closed.
const (
	aviRIFFSize   = 4
	aviTotalFrms  = 48  // avih dwTotalFrames
	aviSuggestBuf = 60  // avih dwSuggestedBufferSize
	aviStrhLength = 140 // strh dwLength
	aviStrhBuf    = 144 // strh dwSuggestedBufferSize
	aviMoviSize   = 216 // LIST movi size
	aviHeaderLen  = 224 // bytes up to the first frame chunk
)

// newAVIWriter creates path for frames of w x h pixels played at fps.
func newAVIWriter(path string, w, h int, fps float64, quality int) (*aviWriter, error) {
	if w <= 0 || h <= 0 || !(fps > 0) || math.IsInf(fps, 0) {
		return nil, fmt.Errorf("avi %s: bad size %dx%d or rate %g", path, w, h, fps)
	}
	f, err := os.Create(path)
	if err != nil {
		return nil, err
	}
	a := &aviWriter{f: f, w: bufio.NewWriterSize(f, 1<<16), width: w, height: h, fps: fps, quality: quality}
	a.header()
	if a.err != nil {
		f.Close()
		return nil, a.err
	}
	return a, nil
}

func (a *aviWriter) put(v ...any) {
	for _, x := range v {
		if a.err != nil {
			return
		}
		switch t := x.(type) {
		case string: // a fourcc
			_, a.err = a.w.WriteString(t)
			a.pos += int64(len(t))
		case []byte:
			_, a.err = a.w.Write(t)
			a.pos += int64(len(t))
		default:
			a.err = binary.Write(a.w, binary.LittleEndian, t)
			a.pos += int64(binary.Size(t))
		}
	}
}

// header writes everything before the first frame, with the sizes and
// counts that depend on the frames left at zero.
func (a *aviWriter) header() {
	rate := uint32(math.Round(a.fps * 1000))
	usPerFrame := uint32(math.Round(1e6 / a.fps))
	a.put("RIFF", uint32(0), "AVI ")
	a.put("LIST", uint32(192), "hdrl")
	// MainAVIHeader: flags AVIF_HASINDEX (0x10).
	a.put("avih", uint32(56), usPerFrame, uint32(0), uint32(0), uint32(0x10),
		uint32(0), uint32(0), uint32(1), uint32(0), uint32(a.width), uint32(a.height),
		[4]uint32{})
	a.put("LIST", uint32(116), "strl")
	// AVIStreamHeader: video, MJPG, scale 1000 / rate fps*1000.
	a.put("strh", uint32(56), "vids", "MJPG", uint32(0), uint16(0), uint16(0),
		uint32(0), uint32(1000), rate, uint32(0), uint32(0), uint32(0),
		uint32(0xFFFFFFFF), uint32(0), [4]int16{0, 0, int16(a.width), int16(a.height)})
	// BITMAPINFOHEADER.
	a.put("strf", uint32(40), uint32(40), int32(a.width), int32(a.height), uint16(1), uint16(24),
		"MJPG", uint32(a.width*a.height*3), int32(0), int32(0), uint32(0), uint32(0))
	a.put("LIST", uint32(0))
	a.moviPos = a.pos
	a.put("movi")
	if a.err == nil && a.pos != aviHeaderLen {
		a.err = fmt.Errorf("avi header is %d bytes, want %d", a.pos, aviHeaderLen)
	}
}

// Write compresses img (BGR, the writer's size) and appends it.
func (a *aviWriter) Write(img gocv.Mat) error {
	if a.err != nil {
		return a.err
	}
	if img.Cols() != a.width || img.Rows() != a.height {
		return fmt.Errorf("avi: frame %dx%d, the clip is %dx%d", img.Cols(), img.Rows(), a.width, a.height)
	}
	buf, err := gocv.IMEncodeWithParams(gocv.JPEGFileExt, img, []int{gocv.IMWriteJpegQuality, a.quality})
	if err != nil {
		return fmt.Errorf("avi: encode frame: %w", err)
	}
	defer buf.Close()
	data := buf.GetBytes()
	n := uint32(len(data))
	a.index = append(a.index, uint32(a.pos-a.moviPos), n)
	a.maxChunk = max(a.maxChunk, n)
	a.put("00dc", n, data)
	if n%2 == 1 {
		a.put([]byte{0})
	}
	return a.err
}

// Close writes the index, fills in the sizes and counts, and closes the
// file.
func (a *aviWriter) Close() error {
	if a.f == nil {
		return a.err
	}
	defer func() { a.f = nil }()
	moviEnd := a.pos
	a.put("idx1", uint32(len(a.index)*8))
	for i := 0; i+1 < len(a.index); i += 2 {
		a.put("00dc", uint32(0x10), a.index[i], a.index[i+1]) // AVIIF_KEYFRAME
	}
	if a.err == nil {
		a.err = a.w.Flush()
	}
	frames := uint32(len(a.index) / 2)
	patch := func(off int64, v uint32) {
		if a.err == nil {
			var b [4]byte
			binary.LittleEndian.PutUint32(b[:], v)
			_, a.err = a.f.WriteAt(b[:], off)
		}
	}
	patch(aviRIFFSize, uint32(a.pos-8))
	patch(aviTotalFrms, frames)
	patch(aviSuggestBuf, a.maxChunk+8)
	patch(aviStrhLength, frames)
	patch(aviStrhBuf, a.maxChunk+8)
	patch(aviMoviSize, uint32(moviEnd-a.moviPos))
	if err := a.f.Close(); a.err == nil {
		a.err = err
	}
	if a.err != nil {
		return fmt.Errorf("avi: %w", a.err)
	}
	return nil
}
