package capture_test

import (
	"fmt"

	"github.com/failframe/failframe/capture"
)

// A clip stored at 30 fps but filmed at 960 fps: positions given in real
// seconds become frame numbers at the capture rate.
func ExampleParsePosition() {
	tb, warn, err := capture.ChooseRate(960, 0, 30)
	if err != nil {
		panic(err)
	}
	for _, s := range []string{"123", "0.128125s", "1.25s"} {
		f, err := capture.ParsePosition(s, tb)
		fmt.Println(s, "->", f, err, warn == "")
	}
	// Output:
	// 123 -> 123 <nil> true
	// 0.128125s -> 123 <nil> true
	// 1.25s -> 1200 <nil> true
}

// Real time of a frame is frame / capture rate, not frame / container rate.
func ExampleTimebase_Time() {
	tb := capture.Timebase{CaptureFPS: 960, From: capture.RateFromFlag}
	fmt.Printf("frame 480 is at %.3f s real time (%.0f s of playback at 30 fps)\n", tb.Time(480), 480.0/30)
	// Output:
	// frame 480 is at 0.500 s real time (16 s of playback at 30 fps)
}
