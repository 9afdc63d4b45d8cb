package marks

import (
	"errors"
	"fmt"
	"math"
)

// Validate checks the rules that need no clip: unique ids, members naming
// known points, a usable scale, legs A-D, levels inside the tower block.
func (f *File) Validate() error {
	return f.withPath(f.validate())
}

// withPath names the file an error from Load came from, when it has no path.
func (f *File) withPath(err error) error {
	var me *Error
	if f.path != "" && errors.As(err, &me) && me.Path == "" {
		me.Path = f.path
	}
	return err
}

func (f *File) validate() error {
	if f.ReferenceFrame < 0 {
		return &Error{Line: f.line("reference_frame"), Err: fmt.Errorf("reference_frame %d is negative", f.ReferenceFrame)}
	}
	if f.CaptureFPS < 0 || f.CaptureFPS > 1e6 || math.IsNaN(f.CaptureFPS) {
		return &Error{Line: f.line("capture_fps"), Err: fmt.Errorf("capture_fps %g is not a usable rate (0 < fps <= 1000000)", f.CaptureFPS)}
	}
	if c := f.Camera; c != nil && (math.IsNaN(c.AzimuthDeg) || math.IsInf(c.AzimuthDeg, 0)) {
		return &Error{Line: f.line("camera"), Err: errors.New("camera.azimuth_deg is not a number")}
	}
	if t := f.Tower; t != nil {
		if !(t.BaseMM > 0) || !(t.TopMM >= 0) || !(t.HeightMM > 0) || math.IsInf(t.BaseMM+t.TopMM+t.HeightMM, 0) {
			return &Error{Line: f.line("tower"), Err: fmt.Errorf("tower: base_mm %g and height_mm %g must be positive lengths, top_mm %g not negative", t.BaseMM, t.HeightMM, t.TopMM)}
		}
		for i, z := range t.LevelsMM {
			if math.IsNaN(z) || z < 0 || z > t.HeightMM || (i > 0 && z <= t.LevelsMM[i-1]) {
				return &Error{Line: f.line("tower"), Err: fmt.Errorf("tower: levels_mm must rise from 0 to height_mm %g; level %d is %g", t.HeightMM, i, z)}
			}
		}
	}
	ids := make(map[string]int, len(f.Points))
	for _, p := range f.Points {
		if p.ID == "" {
			return &Error{Line: p.Line, Err: fmt.Errorf("point without id")}
		}
		if prev, dup := ids[p.ID]; dup {
			return &Error{Line: p.Line, Err: fmt.Errorf("duplicate point id %q (first on line %d)", p.ID, prev)}
		}
		ids[p.ID] = p.Line
		if math.IsNaN(p.PX[0]) || math.IsNaN(p.PX[1]) || math.IsInf(p.PX[0], 0) || math.IsInf(p.PX[1], 0) {
			return &Error{Line: p.Line, Err: fmt.Errorf("point %s: px is not a number", p.ID)}
		}
		switch p.Leg {
		case "", "A", "B", "C", "D":
		default:
			return &Error{Line: p.Line, Err: fmt.Errorf("point %s: leg %q is not one of A, B, C, D", p.ID, p.Leg)}
		}
		if p.Level != nil && f.Tower != nil && (*p.Level < 0 || *p.Level >= len(f.Tower.LevelsMM)) {
			return &Error{Line: p.Line, Err: fmt.Errorf("point %s: level %d is not in tower.levels_mm (0..%d)", p.ID, *p.Level, len(f.Tower.LevelsMM)-1)}
		}
	}
	mids := make(map[string]int, len(f.Members))
	for _, m := range f.Members {
		if m.ID == "" {
			return &Error{Line: m.Line, Err: fmt.Errorf("member without id")}
		}
		if prev, dup := mids[m.ID]; dup {
			return &Error{Line: m.Line, Err: fmt.Errorf("duplicate member id %q (first on line %d)", m.ID, prev)}
		}
		mids[m.ID] = m.Line
		switch m.Kind {
		case KindLeg, KindBrace, KindBlock:
		default:
			return &Error{Line: m.Line, Err: fmt.Errorf("member %s: kind %q is not leg, brace or block", m.ID, m.Kind)}
		}
		if len(m.Points) < 2 {
			return &Error{Line: m.Line, Err: fmt.Errorf("member %s: needs at least two points", m.ID)}
		}
		for _, id := range m.Points {
			if _, ok := ids[id]; !ok {
				return &Error{Line: m.Line, Err: fmt.Errorf("member %s: unknown point id %q", m.ID, id)}
			}
		}
	}
	if s := f.Scale; s != nil {
		a, okA := f.Point(s.From)
		b, okB := f.Point(s.To)
		if !okA || !okB {
			return &Error{Line: f.line("scale"), Err: fmt.Errorf("scale: unknown point id (from %q, to %q)", s.From, s.To)}
		}
		if !(s.MM > 0) || math.IsInf(s.MM, 0) {
			return &Error{Line: f.line("scale"), Err: fmt.Errorf("scale: mm %g must be a positive length (zero length)", s.MM)}
		}
		if math.Hypot(a.PX[0]-b.PX[0], a.PX[1]-b.PX[1]) < 1 {
			return &Error{Line: f.line("scale"), Err: fmt.Errorf("scale: points %s and %s are less than 1 px apart (zero length)", s.From, s.To)}
		}
	}
	return nil
}

// CheckBounds reports the first point outside a frame of the given size,
// naming the file the marks were loaded from.
func (f *File) CheckBounds(width, height int) error {
	for _, p := range f.Points {
		if p.PX[0] < 0 || p.PX[1] < 0 || p.PX[0] > float64(width-1) || p.PX[1] > float64(height-1) {
			return &Error{Path: f.path, Line: p.Line, Err: fmt.Errorf("point %s at (%.2f, %.2f) px is outside the %dx%d frame", p.ID, p.PX[0], p.PX[1], width, height)}
		}
	}
	return nil
}

// Point returns the point with the given id.
func (f *File) Point(id string) (Point, bool) {
	for _, p := range f.Points {
		if p.ID == id {
			return p, true
		}
	}
	return Point{}, false
}

// PlanOf returns a point's plan position in mm: the explicit plan_mm, or one
// derived from the tower block, the point's leg and its level.
func (f *File) PlanOf(p Point) ([2]float64, bool) {
	if p.PlanMM != nil {
		return *p.PlanMM, true
	}
	if f.Tower == nil || p.Leg == "" || p.Level == nil || *p.Level >= len(f.Tower.LevelsMM) {
		return [2]float64{}, false
	}
	t := f.Tower
	z := t.LevelsMM[*p.Level]
	w := t.BaseMM
	if t.HeightMM > 0 {
		w = t.BaseMM + (t.TopMM-t.BaseMM)*z/t.HeightMM
	}
	h := w / 2
	switch p.Leg {
	case "A":
		return [2]float64{-h, -h}, true
	case "B":
		return [2]float64{h, -h}, true
	case "C":
		return [2]float64{h, h}, true
	case "D":
		return [2]float64{-h, h}, true
	}
	return [2]float64{}, false
}

// MMPerPixel returns the scale at the tower in millimetres per pixel, from the
// scale entry's distance over its pixel length in the reference frame.
func (f *File) MMPerPixel() (float64, bool) {
	if f.Scale == nil {
		return 0, false
	}
	a, okA := f.Point(f.Scale.From)
	b, okB := f.Point(f.Scale.To)
	if !okA || !okB {
		return 0, false
	}
	d := math.Hypot(a.PX[0]-b.PX[0], a.PX[1]-b.PX[1])
	if d == 0 {
		return 0, false
	}
	return f.Scale.MM / d, true
}
