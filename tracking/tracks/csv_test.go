package tracks

import (
	"bytes"
	"errors"
	"math"
	"strings"
	"testing"
)

func sampleTracks() *Tracks {
	return &Tracks{
		IDs:    []string{"A0", "AB-d1-mid"},
		Frames: []int{0, 480, 960},
		Samples: [][]Sample{
			{{X: 100, Y: 200, Quality: 1}, {X: 50.25, Y: 60.5, Quality: 0.99}},
			{{X: 102, Y: 199, Quality: 0.98}, {X: 51.25, Y: 62.5, Quality: 0.9}},
			{{X: 104.5, Y: 196, Quality: 0.97}, {X: math.NaN(), Y: math.NaN(), Quality: 0.31, Lost: true}},
		},
		Ref: [][2]float64{{100, 200}, {50.25, 60.5}},
	}
}

func TestWriteCSV(t *testing.T) {
	var buf bytes.Buffer
	if err := WriteCSV(&buf, sampleTracks(), 960, 0.5); err != nil {
		t.Fatal(err)
	}
	// Worked by hand: frame 480 at 960 fps is 0.5 s; A0 moved (+2, -1) px,
	// which at 0.5 mm/px is (+1, -0.5) mm (y positive down).
	want := `frame,time_s,point,x_px,y_px,x_mm,y_mm,quality,lost
0,0.000000,A0,100.0000,200.0000,0.0000,0.0000,1.0000,0
0,0.000000,AB-d1-mid,50.2500,60.5000,0.0000,0.0000,0.9900,0
480,0.500000,A0,102.0000,199.0000,1.0000,-0.5000,0.9800,0
480,0.500000,AB-d1-mid,51.2500,62.5000,0.5000,1.0000,0.9000,0
960,1.000000,A0,104.5000,196.0000,2.2500,-2.0000,0.9700,0
960,1.000000,AB-d1-mid,,,,,0.3100,1
`
	if got := buf.String(); got != want {
		t.Errorf("got\n%s\nwant\n%s", got, want)
	}
}

func TestWriteCSVNoScaleNoRate(t *testing.T) {
	var buf bytes.Buffer
	tr := sampleTracks()
	if err := WriteCSV(&buf, tr, 0, 0); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(buf.String(), "\n")
	if lines[3] != "480,,A0,102.0000,199.0000,,,0.9800,0" {
		t.Errorf("line 4 = %q, want empty time and mm columns", lines[3])
	}
	for _, bad := range []struct {
		fps, mm float64
	}{{-1, 0}, {math.NaN(), 0}, {960, -0.1}, {960, math.Inf(1)}} {
		if err := WriteCSV(&buf, tr, bad.fps, bad.mm); err == nil {
			t.Errorf("fps %g, scale %g: want an error", bad.fps, bad.mm)
		}
	}
}

func TestCSVRoundTrip(t *testing.T) {
	in := sampleTracks()
	var buf bytes.Buffer
	if err := WriteCSV(&buf, in, 960, 0.5); err != nil {
		t.Fatal(err)
	}
	out, err := ReadCSV(&buf)
	if err != nil {
		t.Fatal(err)
	}
	if strings.Join(out.IDs, ",") != strings.Join(in.IDs, ",") {
		t.Fatalf("ids %v, want %v", out.IDs, in.IDs)
	}
	if len(out.Frames) != 3 || out.Frames[2] != 960 {
		t.Fatalf("frames %v", out.Frames)
	}
	for i := range in.Samples {
		for j, s := range in.Samples[i] {
			g := out.Samples[i][j]
			if g.Lost != s.Lost || math.Abs(g.Quality-s.Quality) > 1e-4 {
				t.Errorf("row %d point %d: %+v, want %+v", i, j, g, s)
			}
			if !s.Lost && (math.Abs(g.X-s.X) > 1e-4 || math.Abs(g.Y-s.Y) > 1e-4) {
				t.Errorf("row %d point %d: %+v, want %+v", i, j, g, s)
			}
			if s.Lost && !math.IsNaN(g.X) {
				t.Errorf("row %d point %d: lost sample has X %g, want NaN", i, j, g.X)
			}
		}
	}
	if out.Ref == nil {
		t.Fatal("Ref not recovered")
	}
	for j := range in.Ref {
		if math.Abs(out.Ref[j][0]-in.Ref[j][0]) > 1e-3 || math.Abs(out.Ref[j][1]-in.Ref[j][1]) > 1e-3 {
			t.Errorf("Ref[%d] = %v, want %v", j, out.Ref[j], in.Ref[j])
		}
	}
}

func TestReadCSVErrors(t *testing.T) {
	const head = "frame,time_s,point,x_px,y_px,x_mm,y_mm,quality,lost\n"
	cases := []struct {
		name, in string
		line     int
		msg      string
	}{
		{"empty", "", 1, "empty file"},
		{"missing column", "frame,time_s,point,x_px,y_px,x_mm,y_mm,lost\n", 1, `missing column "quality"`},
		{"no rows", head, 1, "no rows"},
		{"bad frame", head + "x,0,A0,1,2,,,1,0\n", 2, "not a frame number"},
		{"negative frame", head + "-3,0,A0,1,2,,,1,0\n", 2, "not a frame number"},
		{"descending", head + "5,0,A0,1,2,,,1,0\n4,0,A0,1,2,,,1,0\n", 3, "ascending"},
		{"bad quality", head + "0,0,A0,1,2,,,1.5,0\n", 2, "quality"},
		{"bad lost", head + "0,0,A0,1,2,,,1,maybe\n", 2, "lost"},
		{"bad x", head + "0,0,A0,abc,2,,,1,0\n", 2, "x_px"},
		{"nan y", head + "0,0,A0,1,NaN,,,1,0\n", 2, "y_px"},
		{"half mm", head + "0,0,A0,1,2,0.5,,1,0\n", 2, "y_mm"},
		{"short row", head + "0,0,A0,1,2\n", 2, "fields"},
		{"duplicate point", head + "0,0,A0,1,2,,,1,0\n0,0,A0,1,2,,,1,0\n", 3, "twice"},
		{"order changes", head + "0,0,A0,1,2,,,1,0\n0,0,B0,1,2,,,1,0\n1,0,B0,1,2,,,1,0\n", 4, "out of order"},
		{"point missing", head + "0,0,A0,1,2,,,1,0\n0,0,B0,1,2,,,1,0\n1,0,A0,1,2,,,1,0\n2,0,A0,1,2,,,1,0\n", 4, "lists 1 points"},
		{"empty id", head + "0,0,,1,2,,,1,0\n", 2, "empty point id"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ReadCSV(strings.NewReader(c.in))
			var ce *CSVError
			if !errors.As(err, &ce) {
				t.Fatalf("error %v, want a *CSVError", err)
			}
			if ce.Line != c.line || !strings.Contains(err.Error(), c.msg) {
				t.Errorf("error %q (line %d), want line %d mentioning %q", err, ce.Line, c.line, c.msg)
			}
		})
	}
}
