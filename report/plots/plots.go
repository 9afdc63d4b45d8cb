// Package plots draws the report's charts with gonum/plot and saves each as
// PNG and SVG. A chart is a set of named series (plain slices; NaN breaks a
// line) plus vertical marks for events.
package plots

import (
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/plotutil"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// Series is one line of a chart.
type Series struct {
	// Name is shown in the legend ("" = not in the legend).
	Name string
	// X and Y are the points; NaN in either breaks the line.
	X, Y []float64
	// Dots draws a dot at each point as well as the line.
	Dots bool
	// Faint draws the line thin and grey, as background to the coloured
	// lines; it takes no colour from the palette.
	Faint bool
}

// Len returns the number of points.
func (s Series) Len() int { return len(s.X) }

// XY returns point i.
func (s Series) XY(i int) (float64, float64) { return s.X[i], s.Y[i] }

// Mark is a vertical line at an x value, such as an event time.
type Mark struct {
	// X is where the line stands.
	X float64
	// Label is written at the top of the line.
	Label string
	// Strong draws the line in red instead of grey.
	Strong bool
}

// Chart is one figure.
type Chart struct {
	// Title, XLabel and YLabel are the texts around the plot.
	Title, XLabel, YLabel string
	// Series are the lines, drawn in order.
	Series []Series
	// Marks are vertical lines across the plot.
	Marks []Mark
	// WidthCM and HeightCM are the figure size; default 16 x 9 cm.
	WidthCM, HeightCM float64
	// LegendLeft puts the legend at the top left instead of the top right.
	LegendLeft bool
}

// Save writes the chart as dir/name.png and dir/name.svg and returns the two
// file names (relative to dir).
func (c Chart) Save(dir, name string) ([]string, error) {
	p, err := c.plot()
	if err != nil {
		return nil, fmt.Errorf("plot %s: %w", name, err)
	}
	w, h := c.WidthCM, c.HeightCM
	if w <= 0 {
		w = 16
	}
	if h <= 0 {
		h = 9
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("plot %s: %w", name, err)
	}
	width, height := vg.Length(w)*vg.Centimeter, vg.Length(h)*vg.Centimeter
	cv := vgimg.NewWith(vgimg.UseWH(width, height), vgimg.UseDPI(DPI))
	p.Draw(draw.New(cv))
	if err := writePNG(filepath.Join(dir, name+".png"), cv.Image()); err != nil {
		return nil, fmt.Errorf("plot %s.png: %w", name, err)
	}
	if err := p.Save(width, height, filepath.Join(dir, name+".svg")); err != nil {
		return nil, fmt.Errorf("plot %s.svg: %w", name, err)
	}
	return []string{name + ".png", name + ".svg"}, nil
}

// DPI is the resolution of the PNG copies.
const DPI = 144

// writePNG writes img as a PNG at zlib's fastest level: plots are flat
// colour and compress well at any level.
func writePNG(path string, img image.Image) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	enc := png.Encoder{CompressionLevel: png.BestSpeed}
	if err := enc.Encode(f, img); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

func (c Chart) plot() (*plot.Plot, error) {
	p := plot.New()
	p.Title.Text = c.Title
	p.X.Label.Text = c.XLabel
	p.Y.Label.Text = c.YLabel
	p.Add(plotter.NewGrid())
	p.Legend.Top = true
	p.Legend.Left = c.LegendLeft
	any := false
	colour := 0
	for _, s := range c.Series {
		if len(s.X) != len(s.Y) {
			return nil, fmt.Errorf("series %q: %d x values, %d y values", s.Name, len(s.X), len(s.Y))
		}
		var col color.Color = color.Gray{Y: 175}
		width := vg.Points(0.7)
		if !s.Faint {
			col = plotutil.Color(colour)
			colour++
			width = vg.Points(1.2)
		}
		first := true
		for _, seg := range segments(s) {
			any = true
			l, err := plotter.NewLine(seg)
			if err != nil {
				return nil, fmt.Errorf("series %q: %w", s.Name, err)
			}
			l.Color = col
			l.Width = width
			p.Add(l)
			if s.Dots {
				sc, err := plotter.NewScatter(seg)
				if err != nil {
					return nil, fmt.Errorf("series %q: %w", s.Name, err)
				}
				sc.Color = col
				sc.Radius = vg.Points(1.5)
				sc.Shape = draw.CircleGlyph{}
				p.Add(sc)
			}
			if first && s.Name != "" {
				p.Legend.Add(s.Name, l)
				first = false
			}
		}
	}
	if !any {
		// An empty chart still gets axes.
		p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0, 1
	}
	if len(c.Marks) > 0 {
		p.Add(&marks{marks: c.Marks})
	}
	return p, nil
}

// MaxPoints bounds the points drawn for one series: a longer one is thinned
// to the lowest and the highest point of each run of consecutive points
// (MaxPoints/2 runs), which keeps its peaks and its envelope at a chart's
// width of about a thousand pixels. A long clip's series would otherwise
// cost the drawing time and memory in proportion to its frames.
const MaxPoints = 2000

// segments splits a series at NaN points, thinning a series longer than
// MaxPoints (see thin).
func segments(s Series) []plotter.XYs {
	step := (len(s.X) + MaxPoints/2 - 1) / (MaxPoints / 2)
	var out []plotter.XYs
	var cur plotter.XYs
	flush := func() {
		if len(cur) > 0 {
			out = append(out, thin(cur, step))
			cur = nil
		}
	}
	for i := range s.X {
		x, y := s.X[i], s.Y[i]
		if math.IsNaN(x) || math.IsNaN(y) || math.IsInf(x, 0) || math.IsInf(y, 0) {
			flush()
			continue
		}
		cur = append(cur, plotter.XY{X: x, Y: y})
	}
	flush()
	return out
}

// thin keeps, of each run of step consecutive points, the lowest and the
// highest (in their order; one point when they are the same), and the first
// and the last point of the line; step < 3 keeps every point.
func thin(xy plotter.XYs, step int) plotter.XYs {
	if step < 3 || len(xy) <= 2 {
		return xy
	}
	out := make(plotter.XYs, 0, 2*(len(xy)/step+1)+2)
	out = append(out, xy[0])
	for a := 0; a < len(xy); a += step {
		b := min(a+step, len(xy))
		lo, hi := a, a
		for i := a + 1; i < b; i++ {
			if xy[i].Y < xy[lo].Y {
				lo = i
			}
			if xy[i].Y > xy[hi].Y {
				hi = i
			}
		}
		first, second := min(lo, hi), max(lo, hi)
		if first > 0 {
			out = append(out, xy[first])
		}
		if second != first {
			out = append(out, xy[second])
		}
	}
	if last := xy[len(xy)-1]; out[len(out)-1] != last {
		out = append(out, last)
	}
	return out
}

// marks draws vertical lines with labels.
type marks struct{ marks []Mark }

// Plot implements plot.Plotter.
func (m *marks) Plot(c draw.Canvas, plt *plot.Plot) {
	trX, _ := plt.Transforms(&c)
	sty := plt.Legend.TextStyle
	sty.Rotation = math.Pi / 2
	sty.XAlign = draw.XRight
	sty.YAlign = draw.YTop
	lastLabel := vg.Length(math.Inf(-1))
	for _, mk := range m.marks {
		x := trX(mk.X)
		if !c.ContainsX(x) {
			continue
		}
		label := mk.Label
		if x-lastLabel < sty.Font.Size*1.2 {
			label = "" // too close to the last label to be read
		} else if label != "" {
			lastLabel = x
		}
		ls := draw.LineStyle{Color: color.Gray{Y: 120}, Width: vg.Points(0.8), Dashes: []vg.Length{vg.Points(3), vg.Points(2)}}
		if mk.Strong {
			ls.Color = color.RGBA{R: 200, A: 255}
		}
		c.StrokeLine2(ls, x, c.Min.Y, x, c.Max.Y)
		if label != "" {
			sty.Color = ls.Color
			c.FillText(sty, vg.Point{X: x + vg.Points(1), Y: c.Max.Y - vg.Points(2)}, label)
		}
	}
}
