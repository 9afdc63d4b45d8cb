package capture

import (
	"fmt"
	"math"
)

// Where a capture rate came from.
const (
	RateFromFlag      = "flag"
	RateFromMarks     = "marks"
	RateFromContainer = "container"
)

// MaxCaptureFPS is the largest capture rate accepted.
const MaxCaptureFPS = 1e6

// Timebase turns frame numbers into real time.
type Timebase struct {
	// CaptureFPS is the true capture rate in frames per second.
	CaptureFPS float64
	// From says where the rate came from: flag, marks or container.
	From string
}

// Time returns the real time of a frame in seconds.
func (t Timebase) Time(frame int) float64 { return float64(frame) / t.CaptureFPS }

// Frame returns the frame nearest a real time in seconds.
func (t Timebase) Frame(seconds float64) int { return int(math.Round(seconds * t.CaptureFPS)) }

// CheckRate reports whether fps is a usable capture rate.
func CheckRate(fps float64) error {
	if math.IsNaN(fps) || fps <= 0 || fps > MaxCaptureFPS {
		return fmt.Errorf("capture rate %g fps is not usable (must be above 0 and at most %g)", fps, MaxCaptureFPS)
	}
	return nil
}

// ChooseRate picks the capture rate: the flag when set, else the marks file's,
// else the container's. warn is non-empty when the container rate was used,
// since real times may then be wrong for a slow-motion clip.
func ChooseRate(flagFPS, marksFPS, containerFPS float64) (tb Timebase, warn string, err error) {
	switch {
	case flagFPS != 0:
		tb = Timebase{CaptureFPS: flagFPS, From: RateFromFlag}
	case marksFPS != 0:
		tb = Timebase{CaptureFPS: marksFPS, From: RateFromMarks}
	default:
		tb = Timebase{CaptureFPS: containerFPS, From: RateFromContainer}
		warn = fmt.Sprintf("no capture rate given: using the container rate %g fps; for a slow-motion clip real times will be wrong (set --capture-fps or capture_fps in the marks file)", containerFPS)
	}
	if err := CheckRate(tb.CaptureFPS); err != nil {
		return Timebase{}, "", fmt.Errorf("%s rate: %w", tb.From, err)
	}
	return tb, warn, nil
}
