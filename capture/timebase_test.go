package capture

import (
	"math"
	"strconv"
	"strings"
	"testing"
)

// The expected frames are plain arithmetic, frame = round(seconds x rate)
// (common practice for a constant-rate clip).
func TestParsePosition(t *testing.T) {
	tb := Timebase{CaptureFPS: 960, From: RateFromFlag}
	tests := []struct {
		in      string
		tb      Timebase
		want    int
		wantErr string
	}{
		{"123", tb, 123, ""},
		{"0", tb, 0, ""},
		{" 7 ", tb, 7, ""},
		{"0.128125s", tb, 123, ""}, // 123 / 960 = 0.128125 exactly
		{"1.25s", tb, 1200, ""},
		{"1.2500001s", tb, 1200, ""}, // nearest frame
		{"0s", tb, 0, ""},
		{"1.5", tb, 0, "must be whole"},
		{"-3", tb, 0, "negative frame"},
		{"-1s", tb, 0, "negative time"},
		{"abc", tb, 0, "not a frame number"},
		{"xs", tb, 0, "not a number of seconds"},
		{"", tb, 0, "empty"},
		{"1s", Timebase{}, 0, "need a capture rate"},
		{"1e12s", tb, 0, "too far"},
	}
	for _, tt := range tests {
		got, err := ParsePosition(tt.in, tt.tb)
		if tt.wantErr != "" {
			if err == nil || !strings.Contains(err.Error(), tt.wantErr) {
				t.Errorf("ParsePosition(%q) error %v, want %q", tt.in, err, tt.wantErr)
			}
			continue
		}
		if err != nil || got != tt.want {
			t.Errorf("ParsePosition(%q) = %d, %v; want %d", tt.in, got, err, tt.want)
		}
	}
}

// TestChooseRate checks the order flag, marks file, container and the
// limits of a usable rate (above 0, at most 1e6 fps: common practice, the
// fastest cameras used on model tests film at a few thousand fps).
func TestChooseRate(t *testing.T) {
	tests := []struct {
		flag, marks, container float64
		want                   float64
		from                   string
		warn                   bool
		wantErr                string
	}{
		{960, 240, 30, 960, RateFromFlag, false, ""},
		{0, 240, 30, 240, RateFromMarks, false, ""},
		{0, 0, 30, 30, RateFromContainer, true, ""},
		{-5, 0, 30, 0, "", false, "flag rate"},
		{2e6, 0, 30, 0, "", false, "at most"},
		{0, 0, 0, 0, "", false, "container rate"},
		{math.NaN(), 0, 30, 0, "", false, "not usable"},
	}
	for _, tt := range tests {
		tb, warn, err := ChooseRate(tt.flag, tt.marks, tt.container)
		if tt.wantErr != "" {
			if err == nil || !strings.Contains(err.Error(), tt.wantErr) {
				t.Errorf("ChooseRate(%g,%g,%g) error %v, want %q", tt.flag, tt.marks, tt.container, err, tt.wantErr)
			}
			continue
		}
		if err != nil || tb.CaptureFPS != tt.want || tb.From != tt.from || (warn != "") != tt.warn {
			t.Errorf("ChooseRate(%g,%g,%g) = %+v %q %v", tt.flag, tt.marks, tt.container, tb, warn, err)
		}
	}
}

// TestContainerRateDiffersFromCapture checks real times on a slow-motion
// clip stored at 30 fps but filmed at 960 fps: ffprobe's stored timestamp
// of a frame times 30/960 is the real time capture reports.
func TestContainerRateDiffersFromCapture(t *testing.T) {
	clip := sparseH264(t) // stored at 30 fps
	src, err := Open(clip, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	info := src.Info()
	if r := parseRatio(t, ffprobeValue(t, clip, "r_frame_rate")); info.ContainerFPS != r {
		t.Fatalf("container rate %g, ffprobe says %g", info.ContainerFPS, r)
	}
	tb, warn, err := ChooseRate(960, 0, info.ContainerFPS)
	if err != nil || warn != "" {
		t.Fatal(err, warn)
	}
	// Outside check: ffprobe's stored presentation time of frame 123.
	out := run(t, "ffprobe", "-v", "error", "-select_streams", "v:0", "-show_entries", "frame=pts_time", "-of", "csv=p=0", clip)
	lines := strings.Fields(out)
	stored, err := strconv.ParseFloat(lines[123], 64)
	if err != nil {
		t.Fatal(err)
	}
	real := stored * info.ContainerFPS / 960
	if got := tb.Time(123); math.Abs(got-real) > 1e-9 || math.Abs(got-0.128125) > 1e-12 {
		t.Errorf("real time of frame 123 = %g s, ffprobe's stored %g s scales to %g s", got, stored, real)
	}
	if f, err := ParsePosition("0.128125s", tb); err != nil || f != 123 {
		t.Errorf("ParsePosition(0.128125s) = %d, %v", f, err)
	}
	// Without a capture rate the container's is used, with a warning.
	tb2, warn, err := ChooseRate(0, 0, info.ContainerFPS)
	if err != nil || warn == "" || tb2.From != RateFromContainer || math.Abs(tb2.Time(123)-stored) > 1e-9 {
		t.Errorf("fallback: %+v %q %v", tb2, warn, err)
	}
}
