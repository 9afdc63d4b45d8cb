package capture

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// ParsePosition reads a position in a clip: a whole frame number ("123") or
// real time in seconds with an "s" suffix ("1.25s"), turned into the nearest
// frame with tb. Seconds need a usable capture rate in tb.
func ParsePosition(s string, tb Timebase) (int, error) {
	t := strings.TrimSpace(s)
	if t == "" {
		return 0, fmt.Errorf("position %q: empty (give a frame number like 120 or real seconds like 1.25s)", s)
	}
	if sec, ok := strings.CutSuffix(t, "s"); ok {
		v, err := strconv.ParseFloat(strings.TrimSpace(sec), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return 0, fmt.Errorf("position %q: not a number of seconds", s)
		}
		if v < 0 {
			return 0, fmt.Errorf("position %q: negative time", s)
		}
		if err := CheckRate(tb.CaptureFPS); err != nil {
			return 0, fmt.Errorf("position %q: seconds need a capture rate: %w", s, err)
		}
		f := v * tb.CaptureFPS
		if f > math.MaxInt32 {
			return 0, fmt.Errorf("position %q: too far into the clip", s)
		}
		return tb.Frame(v), nil
	}
	n, err := strconv.Atoi(t)
	if err != nil {
		if _, ferr := strconv.ParseFloat(t, 64); ferr == nil {
			return 0, fmt.Errorf("position %q: a frame number must be whole; for real time add the unit, e.g. %ss", s, t)
		}
		return 0, fmt.Errorf("position %q: not a frame number or a time in seconds (e.g. 120 or 1.25s)", s)
	}
	if n < 0 {
		return 0, fmt.Errorf("position %q: negative frame number", s)
	}
	return n, nil
}
