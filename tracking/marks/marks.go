// Package marks reads and writes the marks file: the YAML contract that names
// the points a user marked on a tower's legs and braces in a reference frame,
// the members that join them, the camera azimuth, the tower's nominal shape and
// a known distance for scale.
//
// Every error names the file and, where it comes from the YAML, the line.
// Plan coordinates: origin on the tower axis; x along face A-B from A toward B;
// y from face A-B toward face C-D. Legs A, B, C, D run counter-clockwise seen
// from above, so at a level of width w: A = (-w/2, -w/2), B = (w/2, -w/2),
// C = (w/2, w/2), D = (-w/2, w/2). Twist is positive counter-clockwise seen
// from above. The camera azimuth is the direction from the tower axis toward
// the camera, counter-clockwise seen from above from face A-B's outward normal
// (the -y direction).
package marks

// Member kinds.
const (
	KindLeg   = "leg"
	KindBrace = "brace"
	KindBlock = "block"
)

// File is the whole marks file.
type File struct {
	// Clip is the clip's path, relative to the marks file; optional.
	Clip string `yaml:"clip,omitempty"`
	// CaptureFPS is the true capture rate in frames per second; optional (0 = not given).
	CaptureFPS float64 `yaml:"capture_fps,omitempty"`
	// ReferenceFrame is the frame in which the px positions were marked; default 0.
	ReferenceFrame int `yaml:"reference_frame"`
	// Camera describes where the camera stands; optional.
	Camera *Camera `yaml:"camera,omitempty"`
	// Tower is the nominal tower shape; optional, lets plan positions be derived.
	Tower *Tower `yaml:"tower,omitempty"`
	// Scale is a known distance in the reference frame; optional.
	Scale *Scale `yaml:"scale,omitempty"`
	// Points are the marked points.
	Points []Point `yaml:"points"`
	// Members join points into legs, braces and the loading block.
	Members []Member `yaml:"members,omitempty"`

	// keyLines holds the YAML line of each top-level key (nil when built in code).
	keyLines map[string]int
	// path is the file the marks were parsed from, for error messages ("" when built in code).
	path string
}

// line returns the YAML line of a top-level key, or 0.
func (f *File) line(key string) int { return f.keyLines[key] }

// Camera holds the camera's placement relative to the tower.
type Camera struct {
	// AzimuthDeg is the angle from face A-B's outward normal to the direction
	// toward the camera, counter-clockwise seen from above, in degrees.
	AzimuthDeg float64 `yaml:"azimuth_deg"`
}

// Tower is the nominal shape of a square, tapered tower.
type Tower struct {
	// BaseMM is the width of the base, leg centre to leg centre, in mm.
	BaseMM float64 `yaml:"base_mm"`
	// TopMM is the width at the top, in mm.
	TopMM float64 `yaml:"top_mm"`
	// HeightMM is the height from base to top, in mm.
	HeightMM float64 `yaml:"height_mm"`
	// LevelsMM are the heights of the braced levels, base (level 0) first, in mm.
	LevelsMM []float64 `yaml:"levels_mm"`
}

// Scale is a known distance between two marked points in the reference frame.
type Scale struct {
	// From is the first point's id.
	From string `yaml:"from"`
	// To is the second point's id.
	To string `yaml:"to"`
	// MM is the true distance between them in mm.
	MM float64 `yaml:"mm"`
}

// Point is one marked point.
type Point struct {
	// ID names the point, unique in the file.
	ID string `yaml:"id"`
	// PX is the position in the reference frame in pixels, x right, y down.
	PX [2]float64 `yaml:"px,flow"`
	// Leg is the leg the point sits on (A-D); optional.
	Leg string `yaml:"leg,omitempty"`
	// Level is the braced level the point sits at; optional (nil = not at a level).
	Level *int `yaml:"level,omitempty"`
	// PlanMM is the plan position in mm; optional when derivable from Tower, Leg and Level.
	PlanMM *[2]float64 `yaml:"plan_mm,omitempty,flow"`
	// Line is the YAML line the point was read from (0 when built in code).
	Line int `yaml:"-"`
}

// Member is a leg, brace or block made of marked points.
type Member struct {
	// ID names the member, unique in the file.
	ID string `yaml:"id"`
	// Kind is leg, brace or block.
	Kind string `yaml:"kind"`
	// Points are the member's point ids: end, interior points..., end.
	Points []string `yaml:"points,flow"`
	// Line is the YAML line the member was read from (0 when built in code).
	Line int `yaml:"-"`
}
