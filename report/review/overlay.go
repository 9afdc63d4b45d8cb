package review

import (
	"fmt"
	"image"
	"image/color"
	"math"

	"gocv.io/x/gocv"

	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/tracks"
)

// Bow fractions at which member colours change: up to bowLow a member is
// drawn green, from there to bowHigh it runs through amber, above bowHigh it
// is red. 3 % of a member's length is a clearly buckling brace (common practice).
const (
	bowLow  = 0.005
	bowHigh = 0.03
)

// Overlay colours.
var (
	colorLow     = color.RGBA{46, 184, 92, 255}
	colorMid     = color.RGBA{240, 176, 20, 255}
	colorHigh    = color.RGBA{226, 60, 52, 255}
	colorUnknown = color.RGBA{150, 170, 200, 255}
	colorPoint   = color.RGBA{80, 220, 255, 255}
	colorLost    = color.RGBA{255, 80, 200, 255}
	colorFirst   = color.RGBA{255, 255, 255, 255}
)

// bowColor maps a bow fraction to the overlay colour; nil means unknown.
func bowColor(frac *float64) color.RGBA {
	if frac == nil || math.IsNaN(*frac) {
		return colorUnknown
	}
	f := *frac
	switch {
	case f <= bowLow:
		return colorLow
	case f >= bowHigh:
		return colorHigh
	}
	mid := (bowLow + bowHigh) / 2
	if f < mid {
		return mix(colorLow, colorMid, (f-bowLow)/(mid-bowLow))
	}
	return mix(colorMid, colorHigh, (f-mid)/(bowHigh-mid))
}

func mix(a, b color.RGBA, t float64) color.RGBA {
	l := func(x, y uint8) uint8 { return uint8(math.Round(float64(x) + (float64(y)-float64(x))*t)) }
	return color.RGBA{l(a.R, b.R), l(a.G, b.G), l(a.B, b.B), 255}
}

func hexColor(c color.RGBA) string { return fmt.Sprintf("#%02x%02x%02x", c.R, c.G, c.B) }

// bowTable holds each member's bow fraction (sideways bow over length) per
// frame, from the report's members.csv when it has one, else computed from
// the tracks (see newBowTable).
type bowTable struct {
	// first is the frame of index 0 in each slice.
	first int
	byID  map[string][]float64
}

// newBowTable computes bow fractions from tracks: the largest sideways offset
// of an interior point from the line through the member's end points,
// relative to that offset in the first row (the reference frame), over the
// member's reference length. Members with only two points have no bow.
func newBowTable(m *marks.File, tr *tracks.Tracks) *bowTable {
	if tr.Len() == 0 {
		return &bowTable{byID: map[string][]float64{}}
	}
	first, last := tr.Frames[0], tr.Frames[tr.Len()-1]
	bt := &bowTable{first: first, byID: map[string][]float64{}}
	for _, mb := range m.Members {
		if len(mb.Points) < 3 {
			continue
		}
		cols := make([]int, len(mb.Points))
		ok := true
		for i, id := range mb.Points {
			if cols[i] = tr.Index(id); cols[i] < 0 {
				ok = false
			}
		}
		if !ok {
			continue
		}
		offsets := func(row int) ([]float64, float64) {
			s := tr.Samples[row]
			a, b := s[cols[0]], s[cols[len(cols)-1]]
			dx, dy := b.X-a.X, b.Y-a.Y
			l := math.Hypot(dx, dy)
			out := make([]float64, len(cols)-2)
			for k := 1; k < len(cols)-1; k++ {
				p := s[cols[k]]
				if p.Lost || a.Lost || b.Lost || l == 0 {
					out[k-1] = math.NaN()
					continue
				}
				out[k-1] = (dx*(p.Y-a.Y) - dy*(p.X-a.X)) / l
			}
			return out, l
		}
		ref, refLen := offsets(0)
		if !(refLen > 0) {
			continue
		}
		vals := make([]float64, last-first+1)
		for i := range vals {
			vals[i] = math.NaN()
		}
		for row := 0; row < tr.Len(); row++ {
			cur, _ := offsets(row)
			best := math.NaN()
			for k := range cur {
				d := math.Abs(cur[k] - ref[k])
				if !math.IsNaN(d) && (math.IsNaN(best) || d > best) {
					best = d
				}
			}
			vals[tr.Frames[row]-first] = best / refLen
		}
		bt.byID[mb.ID] = vals
	}
	return bt
}

// at returns a member's bow fraction in a frame.
func (bt *bowTable) at(id string, frame int) (float64, bool) {
	if bt == nil {
		return 0, false
	}
	v, ok := bt.byID[id]
	i := frame - bt.first
	if !ok || i < 0 || i >= len(v) || math.IsNaN(v[i]) {
		return 0, false
	}
	return v[i], true
}

// drawStill draws the overlays of a frame onto img as the page shows them.
func (s *Server) drawStill(img *gocv.Mat, req stillRequest) {
	ov := s.overlay(req.Frame)
	pos := map[string]overlayPoint{}
	for _, p := range ov.Points {
		pos[p.ID] = p
	}
	thick := max(1, s.width/400)
	const shift = 4 // sub-pixel drawing: coordinates in 1/16 px
	fix := func(x, y float64) image.Point {
		return image.Pt(int(math.Round(x*(1<<shift))), int(math.Round(y*(1<<shift))))
	}
	rnd := func(x, y float64) image.Point { return image.Pt(int(math.Round(x)), int(math.Round(y))) }
	if req.Members {
		for _, m := range ov.Members {
			c := bowColor(m.BowFrac)
			for k := 0; k+1 < len(m.Points); k++ {
				a, b := pos[m.Points[k]], pos[m.Points[k+1]]
				if a.X == nil || b.X == nil {
					continue
				}
				if m.First {
					gocv.Line(img, rnd(*a.X, *a.Y), rnd(*b.X, *b.Y), colorFirst, thick*4)
				}
				gocv.Line(img, rnd(*a.X, *a.Y), rnd(*b.X, *b.Y), c, thick*2)
			}
		}
	}
	if req.Points {
		for _, p := range ov.Points {
			if p.X == nil {
				continue
			}
			gocv.CircleWithParams(img, fix(*p.X, *p.Y), (thick*3)<<shift, colorPoint, thick, gocv.LineAA, shift)
			if req.Labels {
				gocv.PutTextWithParams(img, p.ID, image.Pt(int(*p.X)+thick*4, int(*p.Y)-thick*2),
					gocv.FontHersheySimplex, 0.35*float64(thick), colorPoint, 1, gocv.LineAA, false)
			}
		}
	}
	// A caption with frame, real time and load, as on the page.
	text := fmt.Sprintf("frame %d  t = %.4f s", req.Frame, s.tb.Time(req.Frame))
	if g, ok := s.load.at(s.tb.Time(req.Frame)); ok {
		text += fmt.Sprintf("  load %.0f g", g)
	}
	scale := 0.45 * float64(thick)
	sz := gocv.GetTextSize(text, gocv.FontHersheySimplex, scale, 1)
	gocv.Rectangle(img, image.Rect(0, 0, sz.X+12*thick, sz.Y+12*thick), color.RGBA{0, 0, 0, 255}, -1)
	gocv.PutTextWithParams(img, text, image.Pt(6*thick, sz.Y+6*thick), gocv.FontHersheySimplex, scale,
		color.RGBA{255, 255, 255, 255}, 1, gocv.LineAA, false)
}
