// Package capture reads slow-motion clips of load tests on the CPU: video
// files through OpenCV's FFmpeg backend and folders of numbered stills. Frames
// stream one at a time, so memory stays bounded whatever the clip length.
// Every time this package reports is real time, t = frame / capture rate.
//
// Frame numbers are the clip's own, not a count of what decoded: a video's
// frames are numbered from their timestamps (frame = time x container rate)
// while those fall on whole frames, else by counting; a still's number is
// the last number in its file name, counted from the lowest. A frame that is
// missing or cannot be decoded is reported by Read as a *FrameError with its
// number and skipped; the frames after it keep their numbers. Seek does not
// trust the decoder's own positioning: it lands before the frame, checks
// where it landed from the timestamp (or starts again from the beginning
// when there are none) and decodes forward to the exact frame.
package capture

import (
	"fmt"
	"strings"

	"gocv.io/x/gocv"
)

// Info describes an opened clip.
type Info struct {
	// Path is the clip file or image folder.
	Path string
	// Width and Height are the frame size in pixels.
	Width, Height int
	// Codec is the four-character codec code, or the image format for a folder.
	Codec string
	// ContainerFPS is the playback rate stored in the container (0 when unknown).
	ContainerFPS float64
	// FrameCount is the number of frames; see CountSource for how it was found.
	FrameCount int
	// CountSource says where FrameCount came from: "container" (stated by the
	// file) or "counted" (found by decoding, or from an image folder's names).
	CountSource string
	// Warnings are problems found on opening that do not stop reading, such
	// as a gap in an image folder's numbering.
	Warnings []string
	// IntraOnly is true when every frame decodes on its own (still images,
	// Motion-JPEG, uncompressed and other intra-frame codecs), so reading
	// one frame again costs one frame's decoding, not a run from a key frame.
	IntraOnly bool
}

// intraCodecs are codec tags (lower case) whose frames all decode on their
// own: Motion-JPEG, JPEG, PNG, uncompressed and packed YUV, FFV1, ProRes,
// DNxHD and DV (common practice: none of them predicts one frame from
// another).
var intraCodecs = map[string]bool{
	"mjpg": true, "mjpa": true, "mjpb": true, "avdj": true, "jpeg": true, "dmb1": true,
	"png": true, "mpng": true, "raw": true, "rgb": true, "i420": true, "iyuv": true,
	"yv12": true, "yuy2": true, "uyvy": true, "y800": true, "grey": true, "ffv1": true,
	"apch": true, "apcn": true, "apcs": true, "apco": true, "ap4h": true,
	"avdn": true, "avdh": true, "dvsd": true, "dvhd": true, "dv25": true, "dv50": true,
}

// IntraCodec reports whether the codec tag names an intra-frame-only codec.
func IntraCodec(tag string) bool {
	return intraCodecs[strings.ToLower(strings.TrimSpace(tag))]
}

// Source streams the frames of a clip. Frame numbers start at 0.
type Source interface {
	// Info describes the clip.
	Info() Info
	// Read decodes the next frame into dst (BGR, 8 bits) and returns its frame
	// number. It returns io.EOF after the last frame and a *FrameError for a
	// frame that could not be decoded; reading may go on after a FrameError.
	Read(dst *gocv.Mat) (int, error)
	// Seek makes the next Read return exactly the given frame.
	Seek(frame int) error
	// Close releases the decoder.
	Close() error
}

// FrameError is a problem with one frame of a clip.
type FrameError struct {
	// Path is the clip.
	Path string
	// Frame is the frame number.
	Frame int
	// Err is the problem.
	Err error
}

func (e *FrameError) Error() string {
	return fmt.Sprintf("%s frame %d: %v", e.Path, e.Frame, e.Err)
}

// Unwrap returns the underlying problem.
func (e *FrameError) Unwrap() error { return e.Err }
