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
// its twist is reported as not observable rather than as a number, and its
// sway is then only the sideways motion of the face toward the camera with
// any twist not separated from it (the level's note says so).
//
// That near-orthographic model is the fallback. When the marks give plan
// positions and heights for at least six points not in one plane (leg
// joints on two faces with the tower block), a pinhole camera is fitted to
// them by the direct linear transform, and each level's twist, plan
// displacement and settlement are solved through it frame by frame
// (Levenberg-Marquardt on the points' displacements from the reference
// frame); the level's weakly seen motion toward the camera is first
// estimated, smoothed over DepthWindow frames and then held as a firm prior.
//
// Definitions shared with the synthesizer's truth: twist in degrees,
// counter-clockwise seen from above positive; sway in mm, the displacement of
// the level centre along the camera's right vector (image-horizontal);
// settlement in mm, positive down.
//
// # Members and legs
//
// A member's bow is the 3D distance of its interior points from its chord,
// as a change since the reference frame. Bending moves points
// perpendicular to the member, so with a camera fitted to the marked points
// (a pinhole fitted by the direct linear transform to the points with known
// plan positions and heights) the image offset across the chord gives the
// smallest bow that explains it; the offset along the chord, where trackers
// slip on thin members, may raise that by at most BowObliqueMax. A brace's
// middle point whose track runs along the brace far beyond that while the
// brace's ends hold still has left the brace (a cord passing in front took
// it along) and is not used from where it began to go (SlideRatio). A member's
// strain is its chord length change; where both ends are at levels, the
// image length change that the levels' rigid motions explain is replaced by
// the 3D length change they imply. A leg's deflection is each marked
// point's offset from the straight line through the leg's ends; its shape is
// fitted with half-sines of 1 to 4 half-waves, giving the half-wavelength
// and the effective length factor K = half-wavelength / leg length (Euler:
// P = pi^2 E I / (K L)^2). A leg marked at mid-panel (points with a leg but
// no level, between two of its level points) is first checked for one panel
// buckling alone: a mid-panel point's offset from the line through its
// panel's two joints at least PanelBowRatio times every joint's deflection
// and every other panel's bow. Its half-wave is then the panel (K = 1 over
// the panel, Leg.PanelK; Leg.Between names the panel's joints), and the leg
// member's bow is measured against the panel's joints, so the tower's own
// sway, which curves the line of the leg's joints, does not shift its onset.
//
// # Events
//
// Legs and braces are the members that buckle and break; a loading block
// marked as a member is measured (chord, tilt) but never named.
// A member's buckling is confirmed at the first frame from which its bow
// stays at or above 0.5 % of its length for SustainRows frames, provided
// Page's one-sided CUSUM on the bow (baseline mean and standard deviation
// from the first fifth of the clip, 10 to 200 frames; reference value
// k = 0.5 sigma, decision interval h = 5 sigma) has signalled by then; a bow
// that jumps over that floor in one frame is a break, not buckling. The
// onset is then placed where a straight line fitted to the bow over
// OnsetFitRows frames either side of the crossing (a local linear
// regression) crosses the floor, kept between the CUSUM change point and
// the end of the confirmed run, so one noisy frame near the floor does not
// delay it. The CUSUM's change
// point, where the bow began to grow, is given in the event's detail.
// A break is a step of the chord length (three frames against the three
// before, less the trend of the twelve before that, lasting at least six
// frames, and seen in the image's chord too, not only after the levels'
// motions are divided out), a jump of an end point, a lost track on one of the member's
// points, or a collapse of the bow after onset. Four things that look like
// a break are not one: a point lost for a while and then seen again where
// it was (within ReappearFrac of the member's length) was hidden; a point
// lost after fading in place (over the FadeRows frames before, it stayed
// within that distance while its match quality fell by FadeQuality) was
// covered up; a bow that jumps and then settles back near straight for
// SettleRows frames before the collapse was something passing in front of
// the member's middle; a bow "jump" with fewer than JumpLeadRows
// tracked frames before it is only the tracking settling from the
// reference frame; and a bow first seen past the floor after its middle
// point was hidden for more than JumpGapRows frames was not seen growing,
// so it is an onset (with a word that it may have begun earlier), not a
// jump. Twist onset is where the
// top observable level's twist leaves the straight-line trend of the
// baseline window (a two-sided CUSUM on the departure, which must reach
// TwistFloorDeg), provided the level then twists by TwistModeDeg that way
// before the collapse: a braced tower turns a degree or so as it nears
// failure, smoothly and ever faster, which curves away from that line too
// but is not the tower starting to twist. The departure is placed at the
// CUSUM's change point, but no earlier than its last rise through
// TwistRiseDeg (an early trend a little off, extended far, would otherwise
// pull it back toward the baseline window). A runaway that starts slowly
// leaves the trend only some frames after it began, so the onset is then
// moved back to where the twist's trend bent: the row where a straight
// line turning into a parabola best fits the twist over up to
// 2*TwistHingeRows rows before the departure (a two-phase regression,
// hingeRow), when that fits clearly better than one parabola (HingeF) and
// the bend lies inside the window. Collapse is where a jump of the
// motion energy (when given) or of the top level's speed began, or where
// most points were lost.
//
// A level's twist and sway are those of the mean of its four corners: a
// corner carried off by its own bending leg is left out of the rigid fit
// and then added back with a quarter weight, as the mean of the corners
// takes it; when such a corner is lost, or snaps away with too few points
// left, the frame gets no number rather than a wrong one.
//
// # Failure modes
//
// Diagnose labels a failure with one of these, checked in this order:
//
//   - tower_twist: no member began to bow before the collapse (nor broke
//     more than CollapseGuardRows before it), the top observable level's
//     twist left its early trend (twist_onset), and it had twisted by
//     TwistModeDeg or more before the collapse.
//   - leg_full_height: the first member to bow is a leg and its deflected
//     shape is one half-wave over the leg's whole height (K near 1).
//   - leg_between_braces: the first member to bow is a leg and its deflected
//     shape has two or more half-waves, or one panel bowed alone between
//     joints that stayed in line, i.e. it buckled between braced points
//     (this needs marked points between the levels on the legs).
//   - brace_buckling: the first member to bow is a brace.
//   - joint_or_base: no member bowed, but one broke or lost its track before
//     the collapse, or the tower collapsed without warning: a glue joint or
//     the base let go (a bow that reaches 0.5 % within JumpRows frames
//     without growing first counts as a break). When other members came
//     off within TogetherRows frames and all share one end point, the
//     account names that joint. This needs at least one
//     member marked between its ends (a bow that could have been seen),
//     and a collapse without any warning also needs a level whose twist
//     is observable; otherwise the failure is undetermined, since a
//     buckling member or a twisting tower would look the same.
//   - undetermined: nothing of the above was seen.
//
// When points marked near the first member (within half its image length of
// its chord, its own included) were lost from view in the HiddenNearRows
// frames up to its onset, or up to its break when it broke without bowing,
// the account says so, naming them and the frames: a cord or a hand passing
// there may have pulled the member's tracked points. The verdict itself is
// unchanged; the caution asks for a look at the evidence frames.
package measure
