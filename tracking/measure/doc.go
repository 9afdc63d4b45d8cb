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
// Member buckling onset is found by Page's one-sided CUSUM on the member's
// bow (mm) against a baseline taken from an early window of the clip, with
// reference value k = 0.5 sigma and decision interval h = 5 sigma, and
// confirmed only when the bow exceeds the baseline by at least 0.5 % of the
// member's length for several consecutive frames. The reported frame is the
// change point (the start of the CUSUM run), not the alarm. A break is a
// sudden jump of the chord length or of an end point, a lost track on one of
// the member's points, or a collapse of the bow after onset. Twist onset is a
// two-sided CUSUM on the top observable level's twist. Collapse is a jump of
// the motion energy (when given) or of the top level's displacement.
//
// # Failure modes
//
// Diagnose labels a failure with one of these, checked in this order:
//
//   - tower_twist: the tower's twist started (twist_onset) before any member
//     began to bow, or no member bowed but the top level twisted by more than
//     TwistModeDeg before collapse.
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
