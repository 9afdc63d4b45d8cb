package capture

import (
	"errors"
	"io"

	"gocv.io/x/gocv"
)

// ScanResult is what a full decode of a clip found.
type ScanResult struct {
	// Frames is one past the last frame number seen (decoded or reported bad).
	Frames int
	// Decoded is how many frames decoded cleanly.
	Decoded int
	// Bad lists the frames that were missing or could not be decoded, in order.
	Bad []*FrameError
	// Short is set when the stream ended before the container's frame count
	// (it wraps ErrShortClip); the frames from Short.Frame on are missing.
	Short *FrameError
}

// BadFrames returns the frame numbers of the bad frames.
func (r *ScanResult) BadFrames() []int {
	out := make([]int, len(r.Bad))
	for i, e := range r.Bad {
		out[i] = e.Frame
	}
	return out
}

// Scan decodes every frame of src from the start and reports which decoded
// and which did not. progress, when set, is called now and then with the
// frames done and the clip's stated frame count. The source is left at the
// end; Seek(0) to read it again.
func Scan(src Source, progress func(done, total int)) (*ScanResult, error) {
	if err := src.Seek(0); err != nil {
		return nil, err
	}
	total := src.Info().FrameCount
	m := gocv.NewMat()
	defer m.Close()
	res := &ScanResult{}
	for {
		f, err := src.Read(&m)
		if errors.Is(err, io.EOF) {
			break
		}
		var fe *FrameError
		switch {
		case errors.As(err, &fe) && errors.Is(err, ErrShortClip):
			res.Short = fe
			continue
		case errors.As(err, &fe):
			res.Bad = append(res.Bad, fe)
		case err != nil:
			return nil, err
		default:
			res.Decoded++
		}
		if f+1 > res.Frames {
			res.Frames = f + 1
		}
		if progress != nil && res.Frames%25 == 0 {
			progress(res.Frames, total)
		}
	}
	if progress != nil {
		progress(res.Frames, total)
	}
	return res, nil
}
