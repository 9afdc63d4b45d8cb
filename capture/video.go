package capture

import (
	"errors"
	"fmt"
	"io"
	"os"

	"gocv.io/x/gocv"
)

// Options tune how a clip is opened.
type Options struct {
	// ImageFPS is the rate stated for a folder of stills (0 = unknown).
	ImageFPS float64
}

// videoSource reads a video file through OpenCV.
type videoSource struct {
	info Info
	vc   *gocv.VideoCapture
	next int
}

// Open opens a video file or a folder of numbered stills.
func Open(path string, opt Options) (Source, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, fmt.Errorf("open clip %s: %w", path, err)
	}
	if st.IsDir() {
		return nil, fmt.Errorf("open clip %s: image folders are not read yet", path)
	}
	vc, err := gocv.OpenVideoCaptureWithAPI(path, gocv.VideoCaptureFFmpeg)
	if err != nil || !vc.IsOpened() {
		if vc != nil {
			vc.Close()
		}
		return nil, fmt.Errorf("open clip %s: not a readable video", path)
	}
	info := Info{
		Path:         path,
		Width:        int(vc.Get(gocv.VideoCaptureFrameWidth)),
		Height:       int(vc.Get(gocv.VideoCaptureFrameHeight)),
		Codec:        vc.CodecString(),
		ContainerFPS: vc.Get(gocv.VideoCaptureFPS),
		FrameCount:   int(vc.Get(gocv.VideoCaptureFrameCount)),
		CountSource:  "container",
	}
	return &videoSource{info: info, vc: vc}, nil
}

func (s *videoSource) Info() Info { return s.info }

func (s *videoSource) Read(dst *gocv.Mat) (int, error) {
	if !s.vc.Read(dst) || dst.Empty() {
		return s.next, io.EOF
	}
	i := s.next
	s.next++
	return i, nil
}

func (s *videoSource) Seek(frame int) error {
	if frame < 0 {
		return &FrameError{Path: s.info.Path, Frame: frame, Err: errors.New("negative frame number")}
	}
	s.vc.Set(gocv.VideoCapturePosFrames, 0)
	s.next = 0
	m := gocv.NewMat()
	defer m.Close()
	for s.next < frame {
		if _, err := s.Read(&m); err != nil {
			return &FrameError{Path: s.info.Path, Frame: frame, Err: fmt.Errorf("seek: %w", err)}
		}
	}
	return nil
}

func (s *videoSource) Close() error { return s.vc.Close() }
