package marks

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// goodMarks is the example marks file of the contract.
const goodMarks = `clip: tower.mp4
capture_fps: 960
reference_frame: 0
camera:
  azimuth_deg: 25
tower:
  base_mm: 100
  top_mm: 50
  height_mm: 280
  levels_mm: [0, 70, 140, 210, 280]
scale: {from: A0, to: A4, mm: 280.5}
points:
  - id: A0
    px: [400.0, 600.0]
    leg: A
    level: 0
  - id: A2
    px: [412.35, 288.10]
    leg: A
    level: 2
    plan_mm: [-32.1, -32.1]
  - id: A4
    px: [420.0, 100.0]
    leg: A
    level: 4
  - id: AB-d1-mid
    px: [450.5, 500.25]
members:
  - id: leg-A
    kind: leg
    points: [A0, A2, A4]
  - id: AB-d1
    kind: brace
    points: [A0, AB-d1-mid, A2]
`

func TestParseGood(t *testing.T) {
	f, err := Parse("m.yaml", []byte(goodMarks))
	if err != nil {
		t.Fatal(err)
	}
	if len(f.Points) != 4 || f.Points[1].PX != [2]float64{412.35, 288.10} || f.Points[1].Line != 17 {
		t.Errorf("points %+v", f.Points)
	}
	if f.Members[1].Line != 32 {
		t.Errorf("member AB-d1 on line %d, want 32", f.Members[1].Line)
	}
	if err := f.CheckBounds(640, 720); err != nil {
		t.Errorf("CheckBounds: %v", err)
	}
	// Level 4 of a tower tapering from 100 mm to 50 mm over 280 mm is
	// 50 mm wide; leg A sits at (-w/2, -w/2) (the contract's plan axes).
	p, _ := f.Point("A4")
	if xy, ok := f.PlanOf(p); !ok || xy != [2]float64{-25, -25} {
		t.Errorf("PlanOf(A4) = %v, %v; want [-25 -25]", xy, ok)
	}
}

// TestParseErrors feeds broken marks files and checks that each error names
// the line at fault.
func TestParseErrors(t *testing.T) {
	edit := func(old, new string) string {
		if !strings.Contains(goodMarks, old) {
			t.Fatalf("test setup: %q not in the example", old)
		}
		return strings.Replace(goodMarks, old, new, 1)
	}
	cases := []struct {
		name string
		yaml string
		line int
		msg  string
	}{
		{"unknown top-level key", edit("clip: tower.mp4\n", "clip: tower.mp4\ncolour: red\n"), 2, `unknown key "colour"`},
		{"unknown point key", edit("    leg: A\n    level: 2\n", "    leg: A\n    levle: 2\n"), 20, `unknown key "levle" in point`},
		{"unknown member key", edit("    kind: brace\n", "    knd: brace\n"), 33, `unknown key "knd" in member`},
		{"repeated key", edit("    px: [412.35, 288.10]\n", "    px: [412.35, 288.10]\n    px: [1, 2]\n"), 19, `"px" already defined`},
		{"duplicate point id", edit("  - id: A4\n", "  - id: A2\n"), 22, `duplicate point id "A2" (first on line 17)`},
		{"duplicate member id", edit("  - id: AB-d1\n", "  - id: leg-A\n"), 32, `duplicate member id "leg-A"`},
		{"member names missing point", edit("[A0, AB-d1-mid, A2]", "[A0, AB-d1-middle, A2]"), 32, `unknown point id "AB-d1-middle"`},
		{"member with one point", edit("[A0, AB-d1-mid, A2]", "[A0]"), 32, "at least two points"},
		{"unknown member kind", edit("kind: brace", "kind: strut"), 32, `kind "strut"`},
		{"scale zero mm", edit("mm: 280.5", "mm: 0"), 11, "zero length"},
		{"scale same point", edit("{from: A0, to: A4", "{from: A0, to: A0"), 11, "zero length"},
		{"scale coincident points", edit("px: [420.0, 100.0]", "px: [400.5, 600.0]"), 11, "zero length"},
		{"scale unknown point", edit("to: A4,", "to: A9,"), 11, `to "A9"`},
		{"px one number", edit("px: [450.5, 500.25]", "px: [450.5]"), 27, "two numbers"},
		{"px not a number", edit("px: [450.5, 500.25]", "px: [left, 500.25]"), 27, "cannot unmarshal"},
		{"point without px", edit("    px: [450.5, 500.25]\n", ""), 26, "without px"},
		{"point without id", edit("  - id: AB-d1-mid\n    px", "  - px"), 26, "without id"},
		{"bad leg", edit("leg: A\n    level: 0", "leg: E\n    level: 0"), 13, `leg "E"`},
		{"level past tower", edit("level: 4", "level: 7"), 22, "level 7"},
		{"negative reference frame", edit("reference_frame: 0", "reference_frame: -2"), 3, "negative"},
		{"bad rate", edit("capture_fps: 960", "capture_fps: -960"), 2, "capture_fps"},
		{"levels not rising", edit("[0, 70, 140, 210, 280]", "[0, 140, 70, 210, 280]"), 6, "levels_mm"},
		{"syntax", edit("members:\n", "members: [\n"), 28, ""},
		{"not a mapping", "- just\n- a list\n", 1, "mapping"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Parse("m.yaml", []byte(c.yaml))
			var me *Error
			if !errors.As(err, &me) {
				t.Fatalf("error %v, want a *marks.Error", err)
			}
			if me.Path != "m.yaml" || me.Line != c.line || !strings.Contains(err.Error(), c.msg) {
				t.Errorf("error %q (line %d), want line %d mentioning %q", err, me.Line, c.line, c.msg)
			}
			if !strings.Contains(err.Error(), "m.yaml") {
				t.Errorf("error %q does not name the file", err)
			}
		})
	}
}

func TestParseEmpty(t *testing.T) {
	for _, in := range []string{"", "  \n\n"} {
		_, err := Parse("m.yaml", []byte(in))
		if err == nil || !strings.Contains(err.Error(), "empty") {
			t.Errorf("%q: error %v, want one saying the file is empty", in, err)
		}
	}
}

func TestCheckBounds(t *testing.T) {
	f, err := Parse("m.yaml", []byte(goodMarks))
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		w, h int
		line int
		id   string
	}{
		{640, 720, 0, ""},
		{640, 600, 13, "A0"}, // y = 600 is past the last row 599
		{412, 720, 17, "A2"}, // x = 412.35 is past the last column 411
	}
	for _, c := range cases {
		err := f.CheckBounds(c.w, c.h)
		if c.id == "" {
			if err != nil {
				t.Errorf("%dx%d: %v", c.w, c.h, err)
			}
			continue
		}
		var me *Error
		if !errors.As(err, &me) || me.Line != c.line || !strings.Contains(err.Error(), "point "+c.id) || !strings.Contains(err.Error(), "outside") {
			t.Errorf("%dx%d: error %v, want point %s outside the frame on line %d", c.w, c.h, err, c.id, c.line)
		}
		// The error names the file the marks came from, so every caller's
		// message says which file to fix.
		if me != nil && (me.Path != "m.yaml" || !strings.HasPrefix(err.Error(), "marks m.yaml line ")) {
			t.Errorf("%dx%d: error %q does not name the marks file m.yaml", c.w, c.h, err)
		}
	}
	// A check again after an edit in code also names the file.
	f.Points[0].ID = ""
	if err := f.Validate(); err == nil || !strings.HasPrefix(err.Error(), "marks m.yaml line ") {
		t.Errorf("Validate after an edit: %v, want an error naming m.yaml", err)
	}
}

func TestSaveLoadRoundTrip(t *testing.T) {
	f, err := Parse("m.yaml", []byte(goodMarks))
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "marks.yaml")
	if err := Save(path, f); err != nil {
		t.Fatal(err)
	}
	g, err := Load(path)
	if err != nil {
		t.Fatal(err)
	}
	if len(g.Points) != len(f.Points) || g.Points[1].PX != f.Points[1].PX || *g.Points[1].PlanMM != *f.Points[1].PlanMM || g.Scale.MM != 280.5 {
		t.Errorf("round trip changed the marks: %+v", g)
	}
	if _, err := os.Stat(path); err != nil {
		t.Fatal(err)
	}
	if _, err := Load(filepath.Join(t.TempDir(), "none.yaml")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: %v, want not-exist", err)
	}
}
