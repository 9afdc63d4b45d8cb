// Package synth renders synthetic slow-motion clips of a model tower loaded
// to failure, with exact ground truth, so that every measurement failframe
// makes can be checked against known values.
//
// The tower is square and tapered with four legs A, B, C, D running
// counter-clockwise seen from above and braced levels 0 (base) to n (top).
// Plan coordinates follow the marks contract: x along face A-B from A toward
// B, y from face A-B toward face C-D, z up, origin on the tower axis at the
// base. The camera is a pinhole camera (with optional radial lens distortion,
// OpenCV's k1) aimed at the tower axis halfway up the tower and its loading
// block; its azimuth is the direction from the tower axis toward the camera,
// counter-clockwise seen from above, from face A-B's outward normal (the -y
// direction).
//
// A scenario can also hang a swinging cord in front of the tower (markers
// hidden now and then; the truth says when) and shake the camera when the
// load lands (the truth's positions include the shake).
//
// All deformation is computed in 3D and projected. Frame 0 shows the tower in
// its nominal shape; twist, sway and settlement are relative to it. Members
// are drawn as textured bars and the marker stickers (a dark dot on a light
// paper disc) are drawn with exact area coverage, so that the truth position
// of a marker is the centre of its drawn dot.
//
// Every frame is a pure function of the scenario (with its seed) and the frame
// number: the same scenario reproduces the same clip bit for bit.
package synth

import (
	"errors"
	"fmt"
	"math"
	"strings"
)

// Bracing patterns.
const (
	// BracingHorizontal has horizontal members at every level and no diagonals.
	BracingHorizontal = "horizontal"
	// BracingDiagonal has one diagonal per face panel, alternating direction,
	// and a horizontal ring at the top only.
	BracingDiagonal = "diagonal"
	// BracingZ has horizontals at every level and one diagonal per panel, all
	// running the same way.
	BracingZ = "z"
	// BracingX has two crossed diagonals per panel glued at the crossing and a
	// horizontal ring at the top only.
	BracingX = "x"
)

// Patterns lists the bracing patterns in the order they are documented.
var Patterns = []string{BracingHorizontal, BracingDiagonal, BracingZ, BracingX}

// FailTwist as Scenario.Fail makes the tower fail by twisting as a whole, with
// no member bowing first.
const FailTwist = "twist"

// Failure-mode labels, shared with the measurement and report packages.
const (
	// ModeTowerTwist: the tower twisted as a whole before any member gave way.
	ModeTowerTwist = "tower_twist"
	// ModeLegFullHeight: a leg buckled over the tower's full height (bracing did not hold it).
	ModeLegFullHeight = "leg_full_height"
	// ModeLegBetweenBraces: a leg buckled between two braced levels.
	ModeLegBetweenBraces = "leg_between_braces"
	// ModeBraceBuckling: a brace bowed and snapped first.
	ModeBraceBuckling = "brace_buckling"
	// ModeJointOrBase: a joint or the base let go (not synthesized).
	ModeJointOrBase = "joint_or_base"
	// ModeUndetermined: the evidence does not tell (not synthesized).
	ModeUndetermined = "undetermined"
)

// Scenario holds every knob of a synthetic load test. Lengths are in mm,
// angles in degrees, rates in frames per second, masses and loads in grams.
type Scenario struct {
	// Seed picks the textures, noise, load log and small random choices. Default 7.
	Seed int64
	// Bracing is the pattern: horizontal, diagonal, z or x. Default "z".
	Bracing string
	// Levels is the number of braced levels above the base (panels). Default 4.
	Levels int
	// BaseMM is the width at the base, leg centre to leg centre. Default 100.
	BaseMM float64
	// TopMM is the width at the top. Default 60.
	TopMM float64
	// HeightMM is the height from base to top level. Default 300.
	HeightMM float64
	// LegMM is the square section of the legs. Default 4.
	LegMM float64
	// BraceMM is the square section of the braces. Default 3.
	BraceMM float64
	// MarkerMM is the diameter of the dark marker dots; the paper disc around
	// each is 1.8 times wider. Default 4.5.
	MarkerMM float64

	// Width and Height are the frame size in pixels. Default 640 x 480.
	Width, Height int
	// FocalPX is the focal length in pixels. Default 740.
	FocalPX float64
	// DistanceMM is the horizontal distance from the tower axis to the camera. Default 650.
	DistanceMM float64
	// CameraHeightMM is the camera's height above the base. Default 170.
	CameraHeightMM float64
	// AzimuthDeg is the direction from the tower axis toward the camera,
	// counter-clockwise seen from above, from face A-B's outward normal. Default 25.
	AzimuthDeg float64

	// K1 is the lens's radial distortion coefficient (OpenCV's k1; negative
	// = barrel). Default 0.
	K1 float64

	// CaptureFPS is the true capture rate. Default 960.
	CaptureFPS float64
	// ContainerFPS is the playback rate written into the clip files. Default 30.
	ContainerFPS float64
	// Frames is the number of frames in the clip. Default 600.
	Frames int
	// OnsetFrame is the first frame where the failing member's bow exceeds
	// 0.5 % of its length (for Fail = "twist": where the twist starts to run
	// away; for a joint failure: where the joint starts to creep). Default 250.
	OnsetFrame int
	// BreakFrame is the first frame showing the failing member broken (its
	// halves spring apart within a few frames). Ignored for Fail = "twist".
	// Default 380.
	BreakFrame int
	// CollapseFrame is the first frame of the global collapse, which then
	// takes about 0.05 s of capture (at least 8 frames). Default 392.
	CollapseFrame int
	// Fail is the member that buckles first (a member id such as "AB-d1" or
	// "leg-B"), "twist" for a tower that twists as a whole, "joint-<leg><level>"
	// for a glued joint that lets go (e.g. "joint-B2": its braces come off;
	// "joint-A0": leg A's foot slides off the base), or "" for the pattern's
	// default: a long diagonal on the face nearest the camera, or for
	// horizontal-only bracing the leg nearest the camera over its full height.
	//
	// A leg fails over its full height with horizontal-only bracing and
	// between two braced levels otherwise: "leg-B" buckles in panel 1
	// (between levels 0 and 1); "leg-B:2" names the panel, here between
	// levels 1 and 2 (any bracing). Between braces, the leg bows as a
	// half-sine over that panel only, then snaps and the tower collapses.
	Fail string
	// TwistDeg is the top level's twist when the first member breaks (for
	// Fail = "twist": at the collapse), degrees counter-clockwise from above;
	// negative means the pattern default (6 for horizontal-only bracing or
	// Fail = "twist", 0.8 otherwise). The panel that lost its member twists a
	// quarter of this more between the break and the collapse. Default -1.
	TwistDeg float64
	// SwayMM is the top level's sideways sway when the first member breaks
	// (for Fail = "twist": at the collapse). Default 1.5.
	SwayMM float64

	// Noise is the standard deviation of the sensor noise in 8-bit grey
	// levels at mid grey (128); like shot noise it grows with brightness. Default 2.
	Noise float64
	// Flicker is the relative amplitude of the light flicker (0.03 = 3 %). Default 0.03.
	Flicker float64
	// BlurPX is the standard deviation of the lens blur in pixels. Default 0.6.
	BlurPX float64

	// MassG is the tower's mass. Default 21.4.
	MassG float64
	// PeakLoadG is the load at collapse (the peak of the load log). Default 6350.
	PeakLoadG float64
	// CordMM is the thickness of a dark cord hanging between the camera and
	// the tower and swinging slowly sideways, hiding markers now and then;
	// 0 = no cord. Default 0.
	CordMM float64
	// ShakePX is the peak camera shake, in pixels, when the falling load hits
	// the floor at the end of the collapse; 0 = a still camera. Default 0.
	ShakePX float64

	// LegMidMarkers puts a marker at mid-panel on each leg (half-way
	// between two levels), so that a leg buckling between braces shows.
	// The point of leg A in panel p (between levels p-1 and p) is named
	// "leg-A-midp" (e.g. "leg-A-mid2"), after its member as a brace's
	// mid-span point is, and numbered by panel as diagonals are; leg
	// members then run A0, leg-A-mid1, A1, leg-A-mid2, A2, ... Default true.
	LegMidMarkers bool

	// SkipMP4 skips the H.264 copy of the clip even when ffmpeg is present.
	SkipMP4 bool
}

// Default returns the demo scenario.
func Default() Scenario {
	return Scenario{
		Seed:           7,
		Bracing:        BracingZ,
		Levels:         4,
		BaseMM:         100,
		TopMM:          60,
		HeightMM:       300,
		LegMM:          4,
		BraceMM:        3,
		MarkerMM:       4.5,
		Width:          640,
		Height:         480,
		FocalPX:        740,
		DistanceMM:     650,
		CameraHeightMM: 170,
		AzimuthDeg:     25,
		CaptureFPS:     960,
		ContainerFPS:   30,
		Frames:         600,
		OnsetFrame:     250,
		BreakFrame:     380,
		CollapseFrame:  392,
		Fail:           "",
		TwistDeg:       -1,
		SwayMM:         1.5,
		Noise:          2,
		Flicker:        0.03,
		BlurPX:         0.6,
		MassG:          21.4,
		PeakLoadG:      6350,
		LegMidMarkers:  true,
	}
}

func finite(v ...float64) bool {
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}

// Validate checks the scenario: known pattern and failing member, positive
// sizes and rates, onset before break before collapse before the clip's end,
// and a tower that fits in the frame.
func (s Scenario) Validate() error {
	if err := s.validateFields(); err != nil {
		return err
	}
	m := newModel(s)
	return m.checkFits()
}

func (s Scenario) validateFields() error {
	if !finite(s.BaseMM, s.TopMM, s.HeightMM, s.LegMM, s.BraceMM, s.MarkerMM, s.FocalPX, s.DistanceMM,
		s.CameraHeightMM, s.AzimuthDeg, s.CaptureFPS, s.ContainerFPS, s.TwistDeg, s.SwayMM, s.Noise,
		s.Flicker, s.BlurPX, s.MassG, s.PeakLoadG, s.CordMM, s.ShakePX, s.K1) {
		return errors.New("synth: a numeric option is not a finite number")
	}
	known := false
	for _, p := range Patterns {
		if s.Bracing == p {
			known = true
		}
	}
	if !known {
		return fmt.Errorf("unknown bracing pattern %q (use one of %s)", s.Bracing, strings.Join(Patterns, ", "))
	}
	switch {
	case s.Levels < 1 || s.Levels > 12:
		return fmt.Errorf("levels %d: must be 1 to 12", s.Levels)
	case s.BaseMM <= 0 || s.TopMM <= 0 || s.HeightMM <= 0:
		return fmt.Errorf("base %g mm, top %g mm, height %g mm: all must be positive", s.BaseMM, s.TopMM, s.HeightMM)
	case s.TopMM > s.BaseMM:
		return fmt.Errorf("top width %g mm is wider than the base %g mm (the tower tapers upward)", s.TopMM, s.BaseMM)
	case s.LegMM <= 0 || s.BraceMM <= 0 || s.MarkerMM <= 0:
		return fmt.Errorf("leg %g mm, brace %g mm, marker %g mm: all must be positive", s.LegMM, s.BraceMM, s.MarkerMM)
	case s.Width < 64 || s.Height < 64 || s.Width > 4096 || s.Height > 4096:
		return fmt.Errorf("frame size %dx%d: width and height must be 64 to 4096 px", s.Width, s.Height)
	case s.Width%2 != 0 || s.Height%2 != 0:
		return fmt.Errorf("frame size %dx%d: width and height must be even (H.264 with 4:2:0 colour)", s.Width, s.Height)
	case s.FocalPX <= 0:
		return fmt.Errorf("focal length %g px must be positive", s.FocalPX)
	case s.CameraHeightMM <= 0:
		return fmt.Errorf("camera height %g mm must be above the table (positive)", s.CameraHeightMM)
	case s.DistanceMM <= s.BaseMM:
		return fmt.Errorf("camera distance %g mm must be larger than the base width %g mm", s.DistanceMM, s.BaseMM)
	case s.CaptureFPS <= 0 || s.CaptureFPS > 1e6:
		return fmt.Errorf("capture rate %g fps must be above 0 and at most 1000000", s.CaptureFPS)
	case s.ContainerFPS <= 0 || s.ContainerFPS > 1000:
		return fmt.Errorf("container rate %g fps must be above 0 and at most 1000", s.ContainerFPS)
	case s.Frames < 2 || s.Frames > 100000:
		return fmt.Errorf("frames %d: must be 2 to 100000", s.Frames)
	case s.OnsetFrame < 0:
		return fmt.Errorf("onset frame %d is negative", s.OnsetFrame)
	case s.CollapseFrame >= s.Frames:
		return fmt.Errorf("collapse frame %d is not inside the clip of %d frames", s.CollapseFrame, s.Frames)
	case s.OnsetFrame >= s.CollapseFrame:
		return fmt.Errorf("onset frame %d is not before the collapse frame %d", s.OnsetFrame, s.CollapseFrame)
	case s.Fail != FailTwist && (s.BreakFrame <= s.OnsetFrame || s.BreakFrame > s.CollapseFrame):
		return fmt.Errorf("break frame %d must be after the onset frame %d and not after the collapse frame %d", s.BreakFrame, s.OnsetFrame, s.CollapseFrame)
	case s.SwayMM < 0:
		return fmt.Errorf("sway %g mm is negative", s.SwayMM)
	case s.TwistDeg > 45:
		return fmt.Errorf("twist %g degrees is more than 45", s.TwistDeg)
	case s.Noise < 0 || s.Noise > 50:
		return fmt.Errorf("noise %g grey levels: must be 0 to 50", s.Noise)
	case s.Flicker < 0 || s.Flicker > 0.5:
		return fmt.Errorf("flicker %g: must be 0 to 0.5 (a fraction of the light)", s.Flicker)
	case s.BlurPX < 0 || s.BlurPX > 5:
		return fmt.Errorf("blur %g px: must be 0 to 5", s.BlurPX)
	case s.MassG <= 0:
		return fmt.Errorf("tower mass %g g must be positive", s.MassG)
	case s.PeakLoadG <= 0:
		return fmt.Errorf("peak load %g g must be positive", s.PeakLoadG)
	case math.Abs(s.K1) > 0.5:
		return fmt.Errorf("lens distortion k1 %g: must be -0.5 to 0.5", s.K1)
	case s.CordMM < 0 || s.CordMM > 20:
		return fmt.Errorf("cord thickness %g mm: must be 0 to 20", s.CordMM)
	case s.ShakePX < 0 || s.ShakePX > 50:
		return fmt.Errorf("camera shake %g px: must be 0 to 50", s.ShakePX)
	}
	if strings.HasPrefix(s.Fail, JointPrefix) {
		j := strings.TrimPrefix(s.Fail, JointPrefix)
		ok := len(j) >= 2 && strings.ContainsRune(legLetters, rune(j[0]))
		if ok {
			var lv int
			_, err := fmt.Sscanf(j[1:], "%d", &lv)
			ok = err == nil && fmt.Sprintf("%c%d", j[0], lv) == j && lv >= 0 && lv <= s.Levels
		}
		if !ok {
			return fmt.Errorf("unknown joint %q for --fail (use joint-<leg><level>, e.g. joint-B2 or joint-A0, levels 0..%d)", s.Fail, s.Levels)
		}
		return nil
	}
	if leg, panel, ok := splitLegPanel(s.Fail); ok {
		if len(leg) != 5 || !strings.HasPrefix(leg, "leg-") || !strings.ContainsRune(legLetters, rune(leg[4])) || panel < 1 || panel > s.Levels {
			return fmt.Errorf("unknown leg panel %q for --fail (use leg-<leg>:<panel>, e.g. leg-B:2 for leg B between levels 1 and 2, panels 1..%d)", s.Fail, s.Levels)
		}
		return nil
	}
	if s.Fail != "" && s.Fail != FailTwist {
		ids := memberIDs(s)
		found := false
		for _, id := range ids {
			if id == s.Fail {
				found = true
			}
		}
		if !found {
			return fmt.Errorf("unknown member %q for --fail with %s bracing (members: %s, or %q)", s.Fail, s.Bracing, strings.Join(ids, ", "), FailTwist)
		}
	}
	return nil
}

// splitLegPanel splits a Fail value of the form "leg-B:2" into the leg
// member id and the panel; ok is false when fail has no colon. A panel that
// is not a number comes back as 0.
func splitLegPanel(fail string) (leg string, panel int, ok bool) {
	i := strings.IndexByte(fail, ':')
	if i < 0 {
		return fail, 0, false
	}
	var p int
	if _, err := fmt.Sscanf(fail[i+1:], "%d", &p); err != nil || fmt.Sprint(p) != fail[i+1:] {
		p = 0
	}
	return fail[:i], p, true
}

// twistDeg returns the effective top twist before collapse.
func (s Scenario) twistDeg() float64 {
	if s.TwistDeg >= 0 {
		return s.TwistDeg
	}
	if s.Bracing == BracingHorizontal || s.Fail == FailTwist {
		return 6
	}
	return 0.8
}
