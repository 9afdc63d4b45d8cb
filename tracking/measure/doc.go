// Package measure turns tracked image points into engineering quantities
// (twist, sway and settlement per braced level, leg deflection and its
// buckled half-wavelength, member strain, rotation and bow) and then into an
// ordered account of a failure (Diagnose). It is pure numerics on gonum and
// never imports OpenCV, so it tests fast and alone.
//
// # Geometry
//
// Plan coordinates follow the marks contract (tracking/marks): origin on the
// tower axis, x from leg A toward leg B, y from face A-B toward face C-D. The
// camera azimuth phi is the direction from the tower axis toward the camera,
// counter-clockwise seen from above from face A-B's outward normal (-y). So
// the camera's right vector in plan is r = (cos phi, sin phi), the direction
// toward the camera is c = (sin phi, -cos phi), and a point's depth along the
// view direction is -p.c.
//
// A level is treated as a rigid plan figure that turns by theta about the
// tower axis and moves by d. Seen near-orthographically at scale s mm/px, a
// point p of the level appears at image-horizontal u = u0 + (R(theta)p + d).r / s.
// Twist therefore shows only through depth differences: a small twist moves a
// point sideways by theta times its distance toward the camera. When a
// level's points span less than MinDepthFrac of the level's width in depth,
// its twist is reported as not observable rather than as a number.
//
// Definitions shared with the synthesizer's truth: twist in degrees,
// counter-clockwise seen from above positive; sway in mm, the displacement of
// the level centre along the camera's right vector (image-horizontal);
// settlement in mm, positive down.
//
// # Events
//
// A member's buckling onset is the first frame from which its bow stays at
// or above 0.5 % of its length for several frames (SustainRows), provided
// Page's one-sided CUSUM on the bow has signalled a departure from the
// baseline taken in an early window (reference value k = 0.5 sigma,
// decision interval h = 5 sigma); the CUSUM's change point (where the bow
// began to grow) is given in the event's detail. A bow is the 3D distance of
// an interior point from the member's chord: bending moves points
// perpendicular to the member, and with a camera fitted to the marked points
// both components of that offset are read from the image while the member
// keeps its place. A break is a sudden jump of the chord length or of an end
// point, a lost track on one of the member's points, or a collapse of the
// bow after onset. Twist onset is where the top observable level's twist
// leaves its early trend (a two-sided CUSUM on the departure, at least
// TwistFloorDeg). Collapse is a jump of the motion energy (when given), of
// the top level's displacement, or the loss of most points.
//
// A level's twist and sway are those of the mean of its four corners: a
// corner carried off by its own bending leg is left out of the rigid fit
// and then added back with a quarter weight, as the mean of the corners
// takes it.
//
// # Failure modes
//
// Diagnose labels a failure with one of these, checked in this order:
//
//   - tower_twist: no member began to bow before the collapse, the top
//     observable level's twist left its early trend (twist_onset), and it
//     had twisted by TwistModeDeg or more before the collapse.
//   - leg_full_height: the first member to go is a leg and its deflected
//     shape is one half-wave over the leg's whole height (K near 1).
//   - leg_between_braces: the first member to go is a leg and its deflected
//     shape has two or more half-waves, i.e. it buckled between braced levels.
//   - brace_buckling: the first member to go is a brace that bowed before it
//     broke.
//   - joint_or_base: a member broke or lost its track, or the tower
//     collapsed, with no bow onset before it: a glue joint or the base let go.
//   - undetermined: none of the above could be seen.
package measure
