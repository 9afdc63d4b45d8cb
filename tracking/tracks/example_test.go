package tracks_test

import (
	"math"
	"os"

	"github.com/failframe/failframe/tracking/tracks"
)

// A brace's mid point tracked over two frames at 960 fps, lost in the
// second, with a scale of 0.4 mm per pixel.
func ExampleWriteCSV() {
	t := &tracks.Tracks{
		IDs:    []string{"A2", "AB-d1-mid"},
		Frames: []int{0, 96},
		Samples: [][]tracks.Sample{
			{{X: 412.35, Y: 288.1, Quality: 1}, {X: 450, Y: 300, Quality: 1}},
			{{X: 413.35, Y: 287.6, Quality: 0.97}, {X: math.NaN(), Y: math.NaN(), Quality: 0.2, Lost: true}},
		},
		Ref: [][2]float64{{412.35, 288.1}, {450, 300}},
	}
	if err := tracks.WriteCSV(os.Stdout, t, 960, 0.4); err != nil {
		panic(err)
	}
	// Output:
	// frame,time_s,point,x_px,y_px,x_mm,y_mm,quality,lost
	// 0,0.000000,A2,412.3500,288.1000,0.0000,0.0000,1.0000,0
	// 0,0.000000,AB-d1-mid,450.0000,300.0000,0.0000,0.0000,1.0000,0
	// 96,0.100000,A2,413.3500,287.6000,0.4000,-0.2000,0.9700,0
	// 96,0.100000,AB-d1-mid,,,,,0.2000,1
}
