package measure

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/failframe/failframe/tracking/marks"
	"github.com/failframe/failframe/tracking/tracks"
)

// Failure-mode labels (see the package documentation for each rule).
const (
	ModeTowerTwist       = "tower_twist"
	ModeLegFullHeight    = "leg_full_height"
	ModeLegBetweenBraces = "leg_between_braces"
	ModeBraceBuckling    = "brace_buckling"
	ModeJointOrBase      = "joint_or_base"
	ModeUndetermined     = "undetermined"
)

// Event kinds.
const (
	EventOnset      = "onset"
	EventBreak      = "break"
	EventTwistOnset = "twist_onset"
	EventCollapse   = "collapse"
	EventLost       = "lost"
)

// Detection settings, shared by all detectors (documented in the package doc).
const (
	// CusumK is the CUSUM reference value in baseline standard deviations
	// (Montgomery's usual choice k = 0.5 sigma; from memory).
	CusumK = 0.5
	// CusumH is the CUSUM decision interval in baseline standard deviations
	// (h = 4 or 5 sigma is the usual choice; from memory).
	CusumH = 5.0
	// CusumCPK is the reference value, in baseline standard deviations,
	// of the sum whose maximum marks the change point once a shift is
	// confirmed; larger than CusumK so a slightly low baseline does not pull
	// the change point early (common practice).
	CusumCPK = 1.0
	// OnsetFloorFrac is the smallest bow taken as buckling, as a fraction of
	// the member's length (0.5 %).
	OnsetFloorFrac = 0.005
	// SustainRows is how many consecutive tracked rows must stay above the
	// floor to confirm an onset.
	SustainRows = 5
	// OnsetFitRows is the half-width, in rows, of the window over which a
	// straight line is fitted to the bow to place the onset where the bow's
	// trend, rather than its noisiest frame, crosses the floor (a local
	// linear regression; common practice).
	OnsetFitRows = 10
	// JumpRows is the most rows over which a bow may rise from under a
	// quarter of the floor to the floor and still count as a jump (a break
	// or a joint letting go) rather than buckling (common practice: a snap
	// is spread over a few frames by motion blur and tracking).
	JumpRows = 5
	// JumpLeadRows is how many tracked rows must come before a bow jump
	// for it to count: in the first frames the bow is measured against the
	// reference frame itself, so a point that starts drifting at once (a
	// cord or a hand already against its marker) would read as a jump from
	// straight (common practice: a change needs a baseline before it).
	JumpLeadRows = 10
	// JumpGapRows is the longest gap in a bow's record (its middle point
	// hidden) across which a rise still counts as a jump: after a longer
	// one the bow was simply not seen growing (common practice: a snap
	// blurs a marker for a few frames, a cord or a hand hides it longer).
	JumpGapRows = 30
	// BreakStrainPct is the smallest one-frame change of a member's chord
	// length, percent, taken as a break (with eight standard deviations of
	// the baseline's frame-to-frame changes).
	BreakStrainPct = 0.2
	// JointBreakStrainPct is the smallest chord step, percent, taken as a
	// break of a member that did not bow first.
	JointBreakStrainPct = 0.5
	// CollapseGuardRows is how many rows before a detected collapse a break
	// with no bow before it is taken as part of the collapse (a collapse is
	// found a frame or two after it starts).
	CollapseGuardRows = 3
	// CollapseLeadRows is how close to the collapse a member's onset may
	// come and still be taken as the failure's start when another member
	// broke before it: a bow beginning in the last rows before everything
	// falls is the collapse spreading (common practice).
	CollapseLeadRows = 10
	// TwistFloorDeg is the smallest twist change taken as a twist onset, degrees.
	TwistFloorDeg = 0.25
	// TwistRiseDeg is the departure from the early trend, degrees, through
	// which the twist's last rise to TwistFloorDeg is taken to start: the
	// twist onset is placed no earlier (a fifth of the floor, five times
	// the twist noise of a well-marked level; common practice, as the
	// collapse's rise is taken from half its level).
	TwistRiseDeg = 0.05
	// TwistModeDeg is the twist, degrees, that a level must reach before
	// collapse for its change to be a twist onset (the tower twisting, not
	// a braced tower turning a degree or so, smoothly and ever faster, as
	// it nears failure), and that, with no member bowing first, labels the
	// failure a tower twist.
	TwistModeDeg = 2.0
)

// Diagnosis is the account of a failure.
type Diagnosis struct {
	// Events are ordered by row (time).
	Events []Event
	// FirstMember is the first member to go ("" when undetermined).
	FirstMember string
	// Mode is one of the failure-mode labels.
	Mode string
	// Account is a plain-language account of the failure.
	Account string
	// Advice is what to change in the next build, one sentence an item.
	Advice []string
	// CollapseRow is the row of the collapse, -1 when none was seen.
	CollapseRow int
	// TopTwistDeg is the top observable level's twist just before collapse
	// (or at the end), degrees; NaN when no level's twist was observable.
	TopTwistDeg float64
}

// Event is one step in the failure.
type Event struct {
	// Kind is onset, break, twist_onset, collapse or lost.
	Kind string
	// Member is the member's id ("" for whole-tower events; the point id for lost).
	Member string
	// Row is the Tracks row and Frame its frame number.
	Row, Frame int
	// TimeS is Frame over the capture rate, seconds (NaN without a rate).
	TimeS float64
	// Detail says what was seen.
	Detail string
}

type memberFind struct {
	m                *Member
	onset, brk       int
	change           int
	onsetDet, brkDet string
	leg              string
}

// Diagnose finds the failure's events, first member, mode, account and
// advice from measured quantities. It also re-summarises each leg's shape
// at its largest deflection before the collapse.
func Diagnose(res *Result, in Input) *Diagnosis {
	n := len(res.Frames)
	d := &Diagnosis{CollapseRow: -1, TopTwistDeg: math.NaN(), Mode: ModeUndetermined}
	if n == 0 {
		d.Account = "No frames were measured, so nothing can be said about the failure."
		d.Advice = adviceFor(d.Mode, nil, res)
		return d
	}
	nb := baselineRows(n)
	ev := func(kind, member string, row int, detail string) Event {
		return Event{Kind: kind, Member: member, Row: row, Frame: res.Frames[row], TimeS: timeOf(res.Frames[row], in.CaptureFPS), Detail: detail}
	}

	// Collapse: motion energy jump, top-level displacement jump, most points lost.
	colRow, colDet := collapse(res, in, nb)
	d.CollapseRow = colRow
	end := n
	if colRow >= 0 {
		end = colRow
	}

	// Members: onset and break.
	var finds []*memberFind
	for i := range res.Members {
		m := &res.Members[i]
		if m.Kind == marks.KindBlock {
			// The loading block is measured (its chord and tilt), but it
			// is not a member of the tower that can buckle or break.
			continue
		}
		f := &memberFind{m: m, onset: -1, brk: -1}
		if m.Kind == "leg" {
			f.leg = legOf(m, in)
		}
		f.onset, f.change, f.onsetDet = bowOnset(m, nb, end)
		f.brk, f.brkDet = memberBreak(m, in, nb, f.onset, n, end)
		if f.onset < 0 {
			// A bow that jumped to the buckling floor without buckling
			// first is the member breaking or coming off its joint.
			if r, det := bowJump(m, end); r >= 0 && (f.brk < 0 || r < f.brk) {
				f.brk, f.brkDet = r, det
			}
		}
		finds = append(finds, f)
	}

	// Twist onset on the top observable level.
	top := -1
	for i := range res.Levels {
		if res.Levels[i].Observable {
			top = i
		}
	}
	twRow := -1
	if top >= 0 {
		lv := &res.Levels[top]
		var det string
		twRow, det = twistOnset(lv.TwistDeg, nb, end)
		if twRow >= 0 {
			d.Events = append(d.Events, ev(EventTwistOnset, "", twRow, fmt.Sprintf("level %d began to twist (%s)", lv.Level, det)))
		}
		last := end - 1
		for last > 0 && math.IsNaN(lv.TwistDeg[last]) {
			last--
		}
		if last >= 0 {
			d.TopTwistDeg = lv.TwistDeg[last]
		}
	}

	// Legs: summarise a leg that began to bow at its largest deflection
	// before the collapse; the others did not buckle.
	bowed := map[string]bool{}
	legEnd := map[string]int{}
	for _, f := range finds {
		if f.onset >= 0 && f.leg != "" {
			bowed[f.leg] = true
			legEnd[f.leg] = end
			if f.brk >= 0 && f.brk < end {
				legEnd[f.leg] = f.brk // its shape before it broke
			}
		}
	}
	for i := range res.Legs {
		l := &res.Legs[i]
		if !bowed[l.Leg] {
			l.SummarizeAt(-1)
			l.Note = fmt.Sprintf("leg %s did not bow beyond 0.5%% of its length before the collapse", l.Leg)
			continue
		}
		best, bestRow := 0.0, -1
		for r := 0; r < legEnd[l.Leg] && r < len(l.DeflectionMM); r++ {
			row := l.DeflectionMM[r]
			okRow := true
			for _, v := range row {
				if math.IsNaN(v) {
					okRow = false
				}
			}
			if okRow && maxAbs(row) > best {
				best, bestRow = maxAbs(row), r
			}
		}
		l.SummarizeAt(bestRow)
	}

	// First member: earliest onset; without any, or when that onset comes
	// in the last CollapseLeadRows before the collapse and a member broke
	// without bowing before it, the earliest break before the collapse.
	var first *memberFind
	for _, f := range finds {
		if f.onset < 0 {
			continue
		}
		if first == nil || f.onset < first.onset || (f.onset == first.onset && peakFrac(f.m, f.onset, end) > peakFrac(first.m, first.onset, end)) {
			first = f
		}
	}
	var firstBreak *memberFind
	for _, f := range finds {
		// A break in the last CollapseGuardRows before the collapse is
		// part of it.
		if f.brk >= 0 && f.onset < 0 && (colRow < 0 || f.brk < colRow-CollapseGuardRows) && (firstBreak == nil || f.brk < firstBreak.brk) {
			firstBreak = f
		}
	}
	firstIsBreak := false
	if first == nil || (firstBreak != nil && firstBreak.brk < first.onset && colRow >= 0 && first.onset >= colRow-CollapseLeadRows) {
		first = firstBreak
		firstIsBreak = first != nil
		if first != nil {
			if lf := baseFoot(first, res, in); lf != nil {
				for _, f := range finds {
					if f.m == lf.m {
						f.brk, f.brkDet = lf.brk, lf.brkDet
						first = f
					}
				}
			}
		}
	}

	for _, f := range finds {
		if f.onset >= 0 {
			d.Events = append(d.Events, ev(EventOnset, f.m.ID, f.onset, describe(f.m, res)+" began to bow ("+f.onsetDet+")"))
		}
		// Breaks: members that bowed, and any break before the collapse.
		if f.brk >= 0 && (f.onset >= 0 || colRow < 0 || f.brk < colRow) {
			d.Events = append(d.Events, ev(EventBreak, f.m.ID, f.brk, describe(f.m, res)+" broke ("+f.brkDet+")"))
		}
	}
	if colRow >= 0 {
		d.Events = append(d.Events, ev(EventCollapse, "", colRow, colDet))
	}
	// Points lost before the collapse.
	if in.Tracks != nil {
		for j, id := range in.Tracks.IDs {
			for r := 0; r < end && r < len(in.Tracks.Samples); r++ {
				if in.Tracks.Samples[r][j].Lost {
					d.Events = append(d.Events, ev(EventLost, id, r, fmt.Sprintf("point %s could no longer be tracked", id)))
					break
				}
			}
		}
	}
	sort.SliceStable(d.Events, func(i, j int) bool { return d.Events[i].Row < d.Events[j].Row })

	// Mode.
	var firstLeg *Leg
	bigTwist := !math.IsNaN(d.TopTwistDeg) && math.Abs(d.TopTwistDeg) >= TwistModeDeg
	switch {
	case first == nil && twRow >= 0 && bigTwist:
		d.Mode = ModeTowerTwist
	case first != nil && !firstIsBreak && first.m.Kind == "leg":
		for i := range res.Legs {
			if res.Legs[i].Leg == first.leg {
				firstLeg = &res.Legs[i]
			}
		}
		d.Mode = ModeLegFullHeight
		if firstLeg != nil && firstLeg.Shape == ShapeBetweenBraces {
			d.Mode = ModeLegBetweenBraces
		}
	case first != nil && !firstIsBreak && first.m.Kind == "brace":
		d.Mode = ModeBraceBuckling
	case (firstIsBreak || (colRow >= 0 && top >= 0)) && bowVisible(res):
		// A break or a collapse without a bow first points at a joint or
		// the base only when a bow could have been seen: with no member
		// marked between its ends, a buckling member looks the same. A
		// collapse without any warning also needs a twist that could
		// have been seen: from a camera square to a face, a tower
		// twisting as a whole shows no twist at all.
		d.Mode = ModeJointOrBase
	}
	if first != nil {
		d.FirstMember = first.m.ID
	}
	d.Account = account(d, first, firstIsBreak, twRow, colRow, res, in)
	var fm *Member
	if first != nil {
		fm = first.m
	}
	d.Advice = adviceFor(d.Mode, fm, res)
	if firstLeg != nil && !math.IsNaN(firstLeg.K) {
		d.Advice = append(d.Advice, firstLeg.Note+".")
	}
	return d
}

// baselineRows is the early window used for baselines: a fifth of the rows,
// at least 10 and at most 200.
func baselineRows(n int) int {
	nb := n / 5
	if nb < 10 {
		nb = 10
	}
	if nb > 200 {
		nb = 200
	}
	if nb > n {
		nb = n
	}
	return nb
}

func timeOf(frame int, fps float64) float64 {
	if fps > 0 {
		return float64(frame) / fps
	}
	return math.NaN()
}

// bowOnset finds a member's buckling onset before row end: the first row
// of SustainRows tracked rows with the bow at or above OnsetFloorFrac of the
// member's length, provided Page's CUSUM on the bow (baseline from the early
// window) has signalled by then. It also returns the CUSUM change point, the
// row where the bow began to grow.
func bowOnset(m *Member, nb, end int) (onset, change int, detail string) {
	if m.LengthMM <= 0 {
		return -1, -1, ""
	}
	mu, sigma, cnt := meanStd(m.BowMM[:min(nb, len(m.BowMM))])
	if cnt < 3 {
		return -1, -1, ""
	}
	sigma = math.Max(math.Max(sigma, diffSigma(m.BowMM[:end])), 0.005) // mm: at least below any tracker's noise
	floor := OnsetFloorFrac * m.LengthMM
	c := CUSUM{Target: mu, K: CusumK * sigma, H: CusumH * sigma}
	x := m.BowMM[:end]
	from := 0
	for {
		f := sustainedAbove(x, floor, from)
		if f < 0 {
			return -1, -1, ""
		}
		// A bow that rose from under a quarter of the floor to over it
		// within JumpRows rows, or doubled in one frame, jumped: that is a
		// break or a joint letting go (spread over a few frames by blur
		// and tracking), not buckling, which grows with the load. The
		// whole run above the floor is then passed over, so the frame
		// after the jump is not taken as an onset either.
		if bowJumped(x, f, floor) {
			from = nextBelow(x, f, floor)
			if from < 0 {
				return -1, -1, ""
			}
			continue
		}
		alarm, _ := c.ChangePoint(x, f)
		if alarm < 0 {
			from = f + 1
			continue
		}
		_, start := CUSUM{Target: mu, K: CusumCPK * sigma}.ChangePoint(x, f)
		on := onsetCrossing(x, f, floor, start)
		det := fmt.Sprintf("bow reached %.2f mm, 0.5%% of its %.0f mm length (where a straight line fitted to the bow over %d frames either side crosses it; the bow stayed above it for %d frames from row %d); it had been growing since frame row %d (Page's CUSUM on the bow: baseline %.3f mm, k = %.3f mm, h = %.3f mm, alarm at row %d)", floor, m.LengthMM, OnsetFitRows, SustainRows, f, start, mu, c.K, c.H, alarm)
		if a, b := unseenBefore(x, f); b-a > JumpGapRows && f-b <= 2*SustainRows {
			det += fmt.Sprintf("; its bow was not seen from row %d to row %d (its middle point hidden), so it may have begun then", a, b-1)
		}
		return on, start, det
	}
}

// onsetCrossing refines a confirmed onset: f is the first row of the first
// run of SustainRows rows at or above floor, which noise near the floor
// delays (one low frame restarts the run). A straight line is fitted by
// least squares to the bow over OnsetFitRows rows either side of a centre,
// starting at f and moved to the line's crossing of floor (twice more: a
// local linear regression centred on the crossing, so the trend's curvature
// hardly biases it). The onset is the first row at or after the crossing,
// kept between the CUSUM change point and f + SustainRows - 1 (the
// confirmed run); f is kept when the line does not rise.
func onsetCrossing(x []float64, f int, floor float64, change int) int {
	lo := max(change, 0)
	hi := min(f+SustainRows-1, len(x)-1)
	if hi < lo {
		return f
	}
	centre := float64(f)
	on := f
	for it := 0; it < 3; it++ {
		c := int(math.Round(centre))
		var sw, st, sy, stt, sty float64
		for i := max(c-OnsetFitRows, 0); i <= min(c+OnsetFitRows, len(x)-1); i++ {
			if math.IsNaN(x[i]) {
				continue
			}
			t := float64(i - c)
			sw++
			st += t
			sy += x[i]
			stt += t * t
			sty += t * x[i]
		}
		den := sw*stt - st*st
		if sw < float64(OnsetFitRows) || den <= 0 {
			return on
		}
		slope := (sw*sty - st*sy) / den
		if slope <= 0 {
			return on
		}
		icept := (sy - slope*st) / sw
		cross := float64(c) + (floor-icept)/slope
		r := int(math.Ceil(cross - 1e-9))
		r = min(max(r, lo), hi)
		on = r
		if math.Abs(cross-centre) < 0.5 {
			break
		}
		centre = math.Min(math.Max(cross, float64(lo)), float64(hi))
	}
	return on
}

// bowJumped reports whether the bow reached row f (the first of a run at
// or above floor) by a jump: from under a quarter of the floor within
// JumpRows tracked rows, or from under half its value in one frame.
func bowJumped(x []float64, f int, floor float64) bool {
	p := f
	for k := 0; k < JumpRows; k++ {
		if p = prevValid(x, p); p < 0 {
			return false
		}
		if k == 0 && f-p > JumpGapRows {
			return false // not seen rising: it may have grown while hidden
		}
		if k == 0 && x[p] < 0.5*x[f] {
			return true
		}
		if x[p] < 0.25*floor {
			return true
		}
	}
	return false
}

// unseenBefore returns the last gap of NaN rows [a, b) before the run of
// tracked rows that holds row f; a == b when there is none.
func unseenBefore(x []float64, f int) (a, b int) {
	b = f
	for b > 0 && !math.IsNaN(x[b-1]) {
		b--
	}
	a = b
	for a > 0 && math.IsNaN(x[a-1]) {
		a--
	}
	return a, b
}

// bowJump finds the first run of the bow at or above the buckling floor
// before row end that the bow reached by a jump (see bowJumped) after at
// least JumpLeadRows tracked rows, and returns the row where the jump
// began: the first row within JumpRows before the run with a one-frame
// rise of at least 15 % of the floor.
func bowJump(m *Member, end int) (int, string) {
	if m.LengthMM <= 0 {
		return -1, ""
	}
	floor := OnsetFloorFrac * m.LengthMM
	x := m.BowMM[:min(end, len(m.BowMM))]
	for from := 0; from >= 0; from = nextBelow(x, from, floor) {
		f := sustainedAbove(x, floor, from)
		if f < 0 {
			return -1, ""
		}
		if !bowJumped(x, f, floor) {
			from = f
			continue
		}
		// A bow that later settles back near straight for a while was
		// something passing in front of the member's middle (a cord, a
		// hand) pulling its tracked point aside, not the member snapping.
		if back := sustainedBelow(x, 0.25*floor, f); back >= 0 {
			from = back
			continue
		}
		start := f
		for r := max(f-JumpRows+1, 1); r <= f; r++ {
			if !math.IsNaN(x[r]) && !math.IsNaN(x[r-1]) && x[r]-x[r-1] >= 0.15*floor {
				start = r
				break
			}
		}
		p := prevValid(x, start)
		if p < 0 {
			p = start
		}
		if tracked(x[:p+1]) < JumpLeadRows {
			from = f // too early to tell a jump from where tracking began
			continue
		}
		return start, fmt.Sprintf("bow jumped from %.2f mm to %.2f mm within %d frames, past 0.5%% of its %.0f mm length without growing first", x[p], x[f], f-p, m.LengthMM)
	}
	return -1, ""
}

// tracked counts the tracked (not NaN) values of x.
func tracked(x []float64) int {
	n := 0
	for _, v := range x {
		if !math.IsNaN(v) {
			n++
		}
	}
	return n
}

// nextBelow returns the first tracked row after f with x under level, or -1.
func nextBelow(x []float64, f int, level float64) int {
	for i := f + 1; i < len(x); i++ {
		if !math.IsNaN(x[i]) && x[i] < level {
			return i
		}
	}
	return -1
}

// sustainedAbove returns the first row from which SustainRows consecutive
// tracked values are at or above level, or -1.
func sustainedAbove(x []float64, level float64, from int) int {
	return firstRun(x, max(from, 0), SustainRows, func(v float64) bool { return v >= level })
}

// firstRun returns the first row of the first run of rows tracked rows
// from row from on whose values all satisfy in (NaN rows are skipped and do
// not break a run), or -1.
func firstRun(x []float64, from, rows int, in func(float64) bool) int {
	run, first := 0, -1
	for i := from; i < len(x); i++ {
		if math.IsNaN(x[i]) {
			continue
		}
		if !in(x[i]) {
			run = 0
			continue
		}
		if run == 0 {
			first = i
		}
		run++
		if run >= rows {
			return first
		}
	}
	return -1
}

// sustainedBelow returns the first row of the first run of SettleRows
// tracked rows after from with |x| under level, or -1.
func sustainedBelow(x []float64, level float64, from int) int {
	return firstRun(x, from+1, SettleRows, func(v float64) bool { return math.Abs(v) < level })
}

// SettleRows is how many tracked rows a jumped bow must stay near straight
// afterwards to count as a passing disturbance rather than a break.
const SettleRows = 10

func prevValid(x []float64, i int) int {
	for j := i - 1; j >= 0; j-- {
		if !math.IsNaN(x[j]) {
			return j
		}
	}
	return -1
}

// memberBreak finds a sudden change after onset (or after the baseline);
// rows from end on (the collapse) do not count as the bow settling back.
func memberBreak(m *Member, in Input, nb, onset, n, end int) (int, string) {
	from := nb
	if onset >= 0 {
		from = onset + 1
	}
	// Jumps in strain compared with the baseline's frame-to-frame noise.
	// Chord steps: the mean of three frames against the mean of the three
	// before, less the same difference one window earlier, so a jump spread
	// over a couple of frames stands out and a steady stretch (the trend of
	// the twelve frames before) does not.
	mean3 := func(r int) float64 { return (m.StrainPct[r] + m.StrainPct[r+1] + m.StrainPct[r+2]) / 3 }
	step := func(r int) float64 {
		if r < 15 || r+2 >= n {
			return math.NaN()
		}
		return (mean3(r) - mean3(r-3)) - (mean3(r-3)-mean3(r-15))/4
	}
	var ds []float64
	for r := 15; r < min(nb, n); r++ {
		ds = append(ds, step(r))
	}
	_, sd, _ := robustBaseline(ds)
	if math.IsNaN(sd) {
		sd = 0
	}
	strainJump := math.Max(6*sd, BreakStrainPct) // percent
	if onset < 0 {
		// Without a bow first, only a clear step counts (a glue joint or
		// the base letting go), not the stretching of a brace whose end is
		// carried by a bending leg.
		strainJump = math.Max(strainJump, JointBreakStrainPct)
	}
	var db []float64
	for r := 1; r < min(nb, n); r++ {
		db = append(db, m.BowMM[r]-m.BowMM[r-1])
	}
	_, bsd, _ := robustBaseline(db)
	bowJump := 8 * bsd
	if math.IsNaN(bowJump) {
		bowJump = 0
	}
	var cols []int
	if in.Tracks != nil {
		for _, id := range m.Points {
			cols = append(cols, in.Tracks.Index(id))
		}
	}
	peak := 0.0
	floor := OnsetFloorFrac * m.LengthMM
	// A leg marked at mid-panel bows (and snaps) over a panel: a jump of
	// its bow is judged against the panel's length.
	jumpFloor := floor
	if m.panelMM > 0 {
		jumpFloor = OnsetFloorFrac * m.panelMM
	}
	for r := max(from, 1); r < n; r++ {
		for k, c := range cols {
			if m.slidFrom != nil && m.slidFrom[k] >= 0 && r >= m.slidFrom[k] {
				continue // its track had left the member (see SlideRatio)
			}
			if tol := math.Max(2, ReappearFrac*m.LengthMM/res0(in)); c >= 0 && in.Tracks.Samples[r][c].Lost && !in.Tracks.Samples[r-1][c].Lost &&
				!hiddenOnly(in.Tracks, c, r, tol) && !fadedInPlace(in.Tracks, c, r, tol) {
				return r, fmt.Sprintf("lost track of point %s", m.Points[k])
			}
		}
		if st := step(r); !math.IsNaN(st) && math.Abs(st) > strainJump && r+5 < n &&
			// and it lasts: the next six frames stay off by half as much
			math.Abs((mean3(r)+mean3(r+3))/2-mean3(r-3)) > strainJump/2 && sameSign((mean3(r)+mean3(r+3))/2-mean3(r-3), st) &&
			// and the chord stepped in the image too, not only the levels'
			// motions divided out of it (a level's fit shifts when one of
			// its points is lost or taken up again)
			imageStepped(m, r, st) {
			// The jump is in the frame of the largest one-frame change nearby.
			best, br := 0.0, r
			for q := r; q <= r+2 && q < n; q++ {
				if d := math.Abs(m.StrainPct[q] - m.StrainPct[q-1]); d > best {
					best, br = d, q
				}
			}
			return br, fmt.Sprintf("chord length stepped by %.1f%% within three frames", st)
		}
		if in.Tracks != nil && len(cols) >= 2 {
			for _, k := range []int{0, len(cols) - 1} {
				c := cols[k]
				if c < 0 {
					continue
				}
				s0, s1 := in.Tracks.Samples[r-1][c], in.Tracks.Samples[r][c]
				if !s0.Lost && !s1.Lost && math.Hypot(s1.X-s0.X, s1.Y-s0.Y)*res0(in) > math.Max(0.02*m.LengthMM, 2) {
					return r, fmt.Sprintf("end point %s jumped %.1f mm in one frame", m.Points[k], math.Hypot(s1.X-s0.X, s1.Y-s0.Y)*res0(in))
				}
			}
		}
		if b, b0 := m.BowMM[r], m.BowMM[r-1]; !math.IsNaN(b) && !math.IsNaN(b0) && b-b0 > math.Max(bowJump, 2*jumpFloor) &&
			// and it stays: a bow that settles back near straight was
			// something passing in front (see bowJump)
			(onset >= 0 || sustainedBelow(m.BowMM[:min(end, len(m.BowMM))], 0.25*floor, r) < 0) {
			return r, fmt.Sprintf("bow jumped from %.1f mm to %.1f mm in one frame", b0, b)
		}
		if onset >= 0 {
			b := m.BowMM[r]
			if !math.IsNaN(b) {
				if peak >= 2*floor && b < 0.5*peak {
					return r, fmt.Sprintf("bow fell from %.1f mm to %.1f mm", peak, b)
				}
				peak = math.Max(peak, b)
			}
		}
	}
	return -1, ""
}

// imageStepped reports whether the member's chord, as seen in the image
// (before the levels' motions are divided out), changed from the three rows
// before r to the three from r by at least half of step, percent, the same
// way, and by at least ChordStepMinPx; true when the image series was not
// kept.
func imageStepped(m *Member, r int, step float64) bool {
	x := m.rawStrain
	if x == nil {
		return true
	}
	if r < 3 || r+2 >= len(x) {
		return false
	}
	d := (x[r]+x[r+1]+x[r+2])/3 - (x[r-3]+x[r-2]+x[r-1])/3
	return !math.IsNaN(d) && sameSign(d, step) && math.Abs(d) >= math.Abs(step)/2 &&
		(m.refPx == 0 || math.Abs(d)/100*m.refPx >= ChordStepMinPx)
}

// ChordStepMinPx is the smallest step of a chord's length in the image, in
// pixels, that can be a break: a member seen end-on is short in the image,
// and there a tenth of a pixel, which a compressed clip's block update moves
// a track by, is a large fraction of its length. Common practice, set
// between what was seen: a clip re-encoded at CRF 36 moved a joint's track
// by 0.14 px in one frame (a false break of a 30 px brace), while the
// synthesizer's X-brace snapping stepped its 100 px chord by 0.27-0.40 px
// over three frames.
const ChordStepMinPx = 0.2

// ReappearFrac is how far, as a fraction of its member's length, a point
// lost for a while may turn up from where it was last seen and still count
// as having been hidden (by a cord, a hand, a falling weight), not broken off.
const ReappearFrac = 0.02

// hiddenOnly reports whether point column c, lost from row r, is tracked
// again later within tolPx of where it was last seen: then the loss was
// something passing in front of it, not its member breaking (a broken-off
// piece moves away, or stays lost).
func hiddenOnly(tr *tracks.Tracks, c, r int, tolPx float64) bool {
	last := tr.Samples[r-1][c]
	for q := r + 1; q < len(tr.Samples); q++ {
		if s := tr.Samples[q][c]; !s.Lost {
			return math.Hypot(s.X-last.X, s.Y-last.Y) <= tolPx
		}
	}
	return false
}

// FadeRows and FadeQuality describe a point being covered up rather than
// breaking off: over the FadeRows rows before it was lost it stayed where it
// was while its match quality fell by FadeQuality or more (something sliding
// over the marker), where a member snapping moves the point, or loses it
// from a good match at once (common practice).
const (
	FadeRows    = 30
	FadeQuality = 0.1
)

// fadedInPlace reports whether point column c, lost from row r, was being
// covered up: tracked over the FadeRows rows before r, within tolPx of its
// last position all along, with its quality fallen by FadeQuality.
func fadedInPlace(tr *tracks.Tracks, c, r int, tolPx float64) bool {
	if r < FadeRows {
		return false
	}
	last := tr.Samples[r-1][c]
	top := last.Quality
	for q := r - FadeRows; q < r; q++ {
		s := tr.Samples[q][c]
		if s.Lost || math.Hypot(s.X-last.X, s.Y-last.Y) > tolPx {
			return false
		}
		top = math.Max(top, s.Quality)
	}
	return top-last.Quality >= FadeQuality
}

// jumpLevel is the level a jump must pass, max(mean + 10 sigma, floor,
// factor x mean) of the baseline values base, with their mean and sigma
// (the larger of the plain and the difference-based estimate); ok is false
// with fewer than three finite baseline values.
func jumpLevel(base []float64, floor, factor float64) (level, mu, sd float64, ok bool) {
	mu, sd, cnt := meanStd(base)
	if cnt < 3 {
		return 0, 0, 0, false
	}
	sd = math.Max(sd, diffSigma(base))
	return math.Max(math.Max(mu+10*sd, floor), factor*mu), mu, sd, true
}

// diffSigma estimates the noise of a series from its frame-to-frame
// differences, robustly (1.4826 MAD / sqrt 2), so slow trends and a few
// jumps do not count as noise.
func diffSigma(x []float64) float64 {
	var d []float64
	for i := 1; i < len(x); i++ {
		if !math.IsNaN(x[i]) && !math.IsNaN(x[i-1]) {
			d = append(d, x[i]-x[i-1])
		}
	}
	_, s, n := robustBaseline(d)
	if n < 3 {
		return 0
	}
	return s / math.Sqrt2
}

// meanStd returns the mean and standard deviation of the finite values in x.
func meanStd(x []float64) (mu, sigma float64, n int) {
	var sum, ss float64
	for _, v := range x {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			sum += v
			n++
		}
	}
	if n == 0 {
		return math.NaN(), math.NaN(), 0
	}
	mu = sum / float64(n)
	for _, v := range x {
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			ss += (v - mu) * (v - mu)
		}
	}
	if n > 1 {
		sigma = math.Sqrt(ss / float64(n-1))
	}
	return mu, sigma, n
}

// res0 returns the marks' scale in mm per pixel (1 when unknown).
func res0(in Input) float64 {
	if in.Marks != nil {
		if s, ok := in.Marks.MMPerPixel(); ok {
			return s
		}
	}
	return 1
}

// twistOnset finds where the twist of a level departs from its early
// trend: a straight line fitted to the baseline window is extended, and a
// two-sided CUSUM runs on the twist's departure from it (so a steady twist
// rate is the baseline and a change of rate is the event). The departure
// must reach TwistFloorDeg for SustainRows frames, and the twist itself
// TwistModeDeg the same way from there on: a small twist that grows
// smoothly also curves away from any line fitted to the early frames, and
// that is not the tower starting to twist. The change point is reported,
// but no earlier than the departure's last rise through TwistRiseDeg.
func twistOnset(tw []float64, nb, end int) (int, string) {
	var ts, ys []float64
	for i := 0; i < min(nb, len(tw)); i++ {
		if !math.IsNaN(tw[i]) {
			ts = append(ts, float64(i))
			ys = append(ys, tw[i])
		}
	}
	if len(ts) < 3 {
		return -1, ""
	}
	slope, icept := lineFit(ts, ys)
	if math.IsNaN(slope) {
		return -1, ""
	}
	res := make([]float64, end)
	for i := 0; i < end; i++ {
		res[i] = tw[i] - (icept + slope*float64(i))
	}
	_, sigma, _ := meanStd(res[:min(nb, end)])
	sigma = math.Max(math.Max(sigma, diffSigma(tw[:end])), 0.01)
	best := -1
	var det string
	for _, sign := range []float64{1, -1} {
		x := make([]float64, end)
		for i := range x {
			x[i] = sign * res[i]
		}
		c := CUSUM{Target: 0, K: CusumK * sigma, H: CusumH * sigma}
		f := sustainedAbove(x, TwistFloorDeg, 0)
		if f < 0 {
			continue
		}
		turned := make([]float64, end)
		for i := range turned {
			turned[i] = sign * tw[i]
		}
		g := sustainedAbove(turned, TwistModeDeg, f)
		if g < 0 {
			continue // it changed, but the tower did not twist
		}
		alarm, _ := c.ChangePoint(x, f)
		if alarm < 0 {
			continue
		}
		_, start := CUSUM{Target: 0, K: CusumCPK * sigma}.ChangePoint(x, f)
		// Not before the departure last rose through TwistRiseDeg: an
		// early trend a little off, extended far, lets the change point
		// drift back toward the baseline window.
		rise := f
		for rise > 0 && (math.IsNaN(x[rise-1]) || x[rise-1] > TwistRiseDeg) {
			rise--
		}
		start = max(start, rise)
		// Where the trend bent: a local two-phase fit around the rise,
		// which a slow start of the runaway does not delay.
		lo := max(0, start-2*TwistHingeRows)
		bend := hingeRow(x, lo, f, start)
		if bend >= 0 {
			start = bend
		}
		if best >= 0 && start >= best {
			continue
		}
		best = start
		dir := "counter-clockwise"
		if sign < 0 {
			dir = "clockwise"
		}
		det = fmt.Sprintf("%s from above; the twist left its early trend of %.4f deg per frame (Page's CUSUM, sigma %.3f deg, alarm at row %d) and was %.2f deg off it for %d frames from row %d; it had twisted %.1f deg by row %d", dir, slope, sigma, alarm, TwistFloorDeg, SustainRows, f, TwistModeDeg, g)
		if bend >= 0 {
			det += fmt.Sprintf("; its trend bent at row %d (a straight line turning into a parabola there fits rows %d to %d best: two-phase regression)", bend, lo, f)
		}
	}
	return best, det
}

// TwistHingeRows sets the reach of the two-phase fit that places a twist
// onset (hingeRow): it looks for the bend up to 2*TwistHingeRows rows
// before the departure's rise (common practice: a few times the rows a
// runaway takes to grow from the noise to TwistFloorDeg).
const TwistHingeRows = 60

// hingeRow finds where the series x bends within rows lo..hi: for each
// candidate row t0 from lo+10 to last it fits, by least squares over the
// rows lo..hi that are not NaN, a straight line that at t0 changes slope
// and starts to curve, x = a + b (t-t0) + c h + d h^2 with h = max(0, t-t0)
// (a continuous two-phase regression: D. V. Hinkley, "Inference in
// two-phase regression", JASA 66:736-743, 1971, from memory; here the
// second phase is a parabola, as a runaway starts slowly), and returns the
// t0 with the smallest residual sum of squares; -1 when fewer than 20 rows
// are usable, no fit is possible, or the best t0 is within 3 rows of the
// first candidate (the bend lies before the window: a curve that has been
// bending from the start has no one place where it bent).
func hingeRow(x []float64, lo, hi, last int) int {
	hi = min(hi, len(x)-1)
	last = min(last, hi-3)
	if n := tracked(x[max(lo, 0) : hi+1]); lo < 0 || n < 20 {
		return -1
	}
	best, bestRSS := -1, math.Inf(1)
	for t0 := lo + 10; t0 <= last; t0++ {
		rss, _, ok := fitRSS(x, lo, hi, func(t int) [4]float64 {
			h := math.Max(0, float64(t-t0))
			return [4]float64{1, float64(t - t0), h, h * h}
		})
		if ok && rss < bestRSS {
			best, bestRSS = t0, rss
		}
	}
	if best < 0 || best < lo+10+3 {
		return -1
	}
	// A curve that bends the same way all along (a parabola over the
	// whole window) has no one place where it bent: the two-phase fit must
	// beat a single parabola by the F ratio HingeF (its two extra
	// parameters against the residual variance). The parabola's unused
	// fourth parameter is pinned by a unit diagonal.
	rssQ, n, ok := fitRSS(x, lo, hi, func(t int) [4]float64 {
		u := float64(t - best)
		return [4]float64{1, u, u * u, 0}
	})
	if !ok || n <= 5 || bestRSS <= 0 || (rssQ-bestRSS)/2/(bestRSS/float64(n-5)) < HingeF {
		return -1
	}
	return best
}

// fitRSS fits x over rows lo..hi (NaN rows skipped) by least squares to the
// four basis values of each row (a basis that is always 0 leaves its
// parameter pinned at 0) and returns the residual sum of squares and the
// number of rows used; false when the normal equations cannot be solved.
func fitRSS(x []float64, lo, hi int, basis func(t int) [4]float64) (float64, int, bool) {
	var A [4][4]float64
	var b [4]float64
	n := 0
	for t := lo; t <= hi; t++ {
		if math.IsNaN(x[t]) {
			continue
		}
		v := basis(t)
		for i := 0; i < 4; i++ {
			for j := 0; j <= i; j++ {
				A[i][j] += v[i] * v[j]
			}
			b[i] += v[i] * x[t]
		}
		n++
	}
	for i := 0; i < 4; i++ {
		if A[i][i] == 0 {
			A[i][i] = 1 // an unused parameter
		}
	}
	c, ok := solve4(A, b)
	if !ok {
		return 0, n, false
	}
	rss := 0.0
	for t := lo; t <= hi; t++ {
		if math.IsNaN(x[t]) {
			continue
		}
		v := basis(t)
		e := x[t] - (c[0]*v[0] + c[1]*v[1] + c[2]*v[2] + c[3]*v[3])
		rss += e * e
	}
	return rss, n, true
}

// HingeF is the F ratio by which hingeRow's two-phase fit must beat a single
// parabola: 10, above the 0.1 % point of the F distribution with 2 and 100
// degrees of freedom (7.4, from memory), as the bend's row is itself fitted
// (common practice: a change-point test is stricter than the plain F test).
const HingeF = 10.0

// collapse finds the collapse row from motion energy, the top level's
// speed, and lost points: for each signal the change point of the jump
// that first holds above a high level for two frames.
func collapse(res *Result, in Input, nb int) (int, string) {
	n := len(res.Frames)
	best, det := -1, ""
	take := func(r int, s string) {
		if r >= 0 && (best < 0 || r < best) {
			best, det = r, s
		}
	}
	if len(in.Energy) == n {
		if r, f := jumpStart(in.Energy, nb, 0, 2); r >= 0 {
			take(r, fmt.Sprintf("the whole-frame motion energy rose from frame row %d and jumped to %.3g by row %d", r, in.Energy[f], f))
		}
	}
	// The top level with a sway series: its speed in mm per frame.
	for li := len(res.Levels) - 1; li >= 0; li-- {
		lv := &res.Levels[li]
		v := nanSlice(n)
		for r := 1; r < n; r++ {
			dt := 0.0
			if !math.IsNaN(lv.TwistDeg[r]) && !math.IsNaN(lv.TwistDeg[r-1]) {
				dt = (lv.TwistDeg[r] - lv.TwistDeg[r-1]) * math.Pi / 180 * lv.WidthMM / 2
			}
			v[r] = math.Sqrt(sq(lv.SwayMM[r]-lv.SwayMM[r-1]) + sq(lv.SettleMM[r]-lv.SettleMM[r-1]) + dt*dt)
		}
		if _, _, cnt := meanStd(v[:min(nb, n)]); cnt < 3 {
			continue
		}
		if r, f := jumpStart(v, nb, CollapseSpeedMM, 0); r >= 0 {
			take(r, fmt.Sprintf("level %d started to move fast at frame row %d, %.1f mm in one frame by row %d", lv.Level, r, v[f], f))
		}
		break
	}
	if in.Tracks != nil && len(in.Tracks.IDs) > 0 {
		for r := 0; r < n && r < len(in.Tracks.Samples); r++ {
			lost := 0
			for _, s := range in.Tracks.Samples[r] {
				if s.Lost {
					lost++
				}
			}
			if 2*lost > len(in.Tracks.IDs) {
				take(r, fmt.Sprintf("%d of %d points could no longer be tracked", lost, len(in.Tracks.IDs)))
				break
			}
		}
	}
	if best >= 0 {
		det = "the tower collapsed: " + det
	}
	return best, det
}

// CollapseSpeedMM is the smallest speed of the top level, mm per frame,
// taken as a collapse (with ten baseline standard deviations).
const CollapseSpeedMM = 0.5

// jumpStart finds the first row f from which x stays for two rows above
// max(mean + 10 sigma, floor, factor x mean) of the baseline window, and
// returns where that rise began (the last rise through half that level)
// and f; -1, -1 when none.
func jumpStart(x []float64, nb int, floor, factor float64) (start, f int) {
	level, mu, sd, ok := jumpLevel(x[:min(nb, len(x))], floor, factor)
	if !ok {
		return -1, -1
	}
	f = -1
	for r := nb; r < len(x); r++ {
		if x[r] >= level && (r+1 >= len(x) || x[r+1] >= level || math.IsNaN(x[r+1])) {
			f = r
			break
		}
	}
	if f < 0 {
		return -1, -1
	}
	// The rise starts where the signal last came up through half the
	// level (and mean + 3 sigma), so a slow build-up before it is not taken
	// for the jump.
	start = f
	for start > nb && (math.IsNaN(x[start-1]) || x[start-1] > math.Max(mu+3*sd, level/2)) {
		start--
	}
	return start, f
}

func peakFrac(m *Member, from, end int) float64 {
	p := 0.0
	for r := from; r < end && r < len(m.BowFrac); r++ {
		if !math.IsNaN(m.BowFrac[r]) {
			p = math.Max(p, m.BowFrac[r])
		}
	}
	return p
}

// baseFoot checks a member that broke without bowing first for the base
// letting go: when one of its ends is a leg's foot (a level-0 point) that
// moved at least twice as far as the other end, and at least 0.5 px, over
// the rows around the break, the failure is the leg's foot on the base, and
// the leg's member (when marked) is returned as the first to go.
func baseFoot(f *memberFind, res *Result, in Input) *memberFind {
	m := f.m
	if in.Tracks == nil || in.Marks == nil || len(m.Points) < 2 || f.brk < 0 {
		return nil
	}
	r0, r1 := max(f.brk-JumpRows, 0), min(f.brk+2, len(in.Tracks.Samples)-1)
	moved := func(id string) float64 {
		c := in.Tracks.Index(id)
		if c < 0 {
			return math.NaN()
		}
		a, b := in.Tracks.Samples[r0][c], in.Tracks.Samples[r1][c]
		if a.Lost || b.Lost {
			return math.NaN()
		}
		return math.Hypot(b.X-a.X, b.Y-a.Y)
	}
	ends := [2]string{m.Points[0], m.Points[len(m.Points)-1]}
	for k, id := range ends {
		p, ok := in.Marks.Point(id)
		if !ok || p.Leg == "" || p.Level == nil || *p.Level != 0 {
			continue
		}
		dFoot, dOther := moved(id), moved(ends[1-k])
		if !(dFoot >= 0.5 && dFoot >= 2*dOther) {
			continue
		}
		for i := range res.Members {
			lm := &res.Members[i]
			if lm.Kind != "leg" || legOf(lm, in) != p.Leg {
				continue
			}
			return &memberFind{m: lm, onset: -1, brk: f.brk, change: -1, leg: p.Leg,
				brkDet: fmt.Sprintf("its foot %s moved %.1f px around frame row %d while %s's other end %s moved %.1f px: the base let go under leg %s", id, dFoot, f.brk, m.ID, ends[1-k], dOther, p.Leg)}
		}
	}
	return nil
}

func legOf(m *Member, in Input) string {
	if in.Marks == nil {
		return ""
	}
	for _, id := range m.Points {
		if p, ok := in.Marks.Point(id); ok && p.Leg != "" {
			return p.Leg
		}
	}
	return ""
}

// describe names a member in words: "diagonal AB-d1 between levels 0 and 1".
// A leg whose buckled half-wave ran between two braced joints is named by
// that panel ("leg B (leg-B) between joints B1 and B2"), not its whole height.
func describe(m *Member, res *Result) string {
	lv := ""
	panel := legPanel(m, res)
	switch {
	case panel != "":
		lv = panel
	case m.Levels[0] >= 0 && m.Levels[1] > m.Levels[0]:
		lv = fmt.Sprintf(" between levels %d and %d", m.Levels[0], m.Levels[1])
	case m.Levels[0] >= 0:
		lv = fmt.Sprintf(" at level %d", m.Levels[0])
	}
	switch m.Kind {
	case "leg":
		if m.Leg != "" && m.ID != m.Leg {
			return "leg " + m.Leg + " (" + m.ID + ")" + lv
		}
		return "leg " + m.ID + lv
	case "block":
		return "loading block " + m.ID
	case "brace":
		if m.Levels[0] >= 0 && m.Levels[1] > m.Levels[0] {
			return "diagonal " + m.ID + lv
		}
		if m.Levels[0] >= 0 {
			return "horizontal brace " + m.ID + lv
		}
		return "brace " + m.ID
	}
	return m.ID
}

// legPanel returns " between joints X and Y" for a leg member that buckled
// between braced points, else "".
func legPanel(m *Member, res *Result) string {
	if m.Kind != "leg" || res == nil {
		return ""
	}
	for _, l := range res.Legs {
		if l.Leg == m.Leg && l.Shape == ShapeBetweenBraces && l.Between[0] != "" {
			return fmt.Sprintf(" between joints %s and %s", l.Between[0], l.Between[1])
		}
	}
	return ""
}

func fmtTime(row int, res *Result, fps float64) string {
	if fps > 0 {
		return fmt.Sprintf("%.3f s (frame %d)", float64(res.Frames[row])/fps, res.Frames[row])
	}
	return fmt.Sprintf("frame %d", res.Frames[row])
}

func fmtGap(a, b int, res *Result, fps float64) string {
	df := res.Frames[b] - res.Frames[a]
	if fps > 0 {
		ms := 1000 * float64(df) / fps
		if ms < 1000 {
			return fmt.Sprintf("%.0f ms", ms)
		}
		return fmt.Sprintf("%.2f s", ms/1000)
	}
	return fmt.Sprintf("%d frames", df)
}

func account(d *Diagnosis, first *memberFind, firstIsBreak bool, twRow, colRow int, res *Result, in Input) string {
	fps := in.CaptureFPS
	var parts []string
	last := -1
	switch {
	case first != nil && !firstIsBreak:
		s := fmt.Sprintf("%s began to bow at %s", describe(first.m, res), fmtTime(first.onset, res, fps))
		if strings.Contains(first.onsetDet, "was not seen from row") {
			s += " (when it was first seen again: its middle point had been hidden, so it may have begun earlier)"
		}
		last = first.onset
		if first.brk >= 0 {
			s += fmt.Sprintf(", broke at %s", fmtTime(first.brk, res, fps))
			last = first.brk
		}
		parts = append(parts, s)
		if c := hiddenCaution(first.m, first.onset, res, in); c != "" {
			parts = append(parts, c)
		}
	case first != nil:
		parts = append(parts, fmt.Sprintf("%s broke without bowing first at %s (%s)", describe(first.m, res), fmtTime(first.brk, res, fps), first.brkDet))
		if c := hiddenCaution(first.m, first.brk, res, in); c != "" {
			parts = append(parts, c)
		}
		if others, joint := cameOffTogether(d, first, res); joint != "" {
			parts = append(parts, fmt.Sprintf("%s came off with it within %d frames, and they meet at joint %s, so that joint most likely let go", strings.Join(others, " and "), TogetherRows, joint))
		}
		last = first.brk
	}
	if twRow >= 0 {
		s := fmt.Sprintf("the tower began to twist at %s", fmtTime(twRow, res, fps))
		if len(parts) == 0 {
			last = twRow
		}
		parts = append(parts, s)
	}
	if colRow >= 0 {
		if last >= 0 && colRow == last {
			parts = append(parts, "the tower collapsed in the same frame")
		} else if last >= 0 && colRow > last {
			parts = append(parts, fmt.Sprintf("collapse followed %s later", fmtGap(last, colRow, res, fps)))
		} else {
			parts = append(parts, fmt.Sprintf("the tower collapsed at %s", fmtTime(colRow, res, fps)))
		}
	}
	if len(parts) == 0 {
		return "No member bowed, broke or lost its track and no collapse was seen in the measured frames; the failure could not be determined from this clip."
	}
	if !math.IsNaN(d.TopTwistDeg) {
		when := "by the end of the clip"
		if colRow >= 0 {
			when = "just before collapse"
		}
		tw := d.TopTwistDeg
		if math.Abs(tw) < 0.05 {
			tw = 0
		}
		parts = append(parts, fmt.Sprintf("the top observable level had twisted %.1f degrees %s", tw, when))
	}
	s := strings.Join(parts, "; ")
	s = strings.ToUpper(s[:1]) + s[1:] + "."
	return s + " Failure mode: " + strings.ReplaceAll(d.Mode, "_", " ") + "."
}

// HiddenNearRows is how many frames before the first member's onset (or its
// break, when it broke without bowing) the account looks for points near it
// that were hidden from view (common practice: a cord, a hanger or a hand
// passing in front of the tower hides the markers around the member it
// disturbs, and can pull the member's own tracked points with it).
const HiddenNearRows = 15

// hiddenCaution returns a caution for the account when points near member m
// (marked within half its image length of its chord), its own included,
// were lost from view in the HiddenNearRows rows up to row; "" when none
// were.
func hiddenCaution(m *Member, row int, res *Result, in Input) string {
	t := in.Tracks
	if t == nil || in.Marks == nil || len(m.Points) < 2 || row < 0 {
		return ""
	}
	at := map[string][2]float64{}
	for _, p := range in.Marks.Points {
		at[p.ID] = p.PX
	}
	a, okA := at[m.Points[0]]
	b, okB := at[m.Points[len(m.Points)-1]]
	if !okA || !okB {
		return ""
	}
	reach := 0.5 * math.Hypot(b[0]-a[0], b[1]-a[1])
	var ids []string
	first, lastRow := -1, -1
	for j, id := range t.IDs {
		p, ok := at[id]
		if !ok || segDist(a, b, p) > reach {
			continue
		}
		hid := false
		for r := max(0, row-HiddenNearRows); r <= row && r < len(t.Samples); r++ {
			if t.Samples[r][j].Lost {
				hid = true
				if first < 0 || r < first {
					first = r
				}
				lastRow = max(lastRow, r)
			}
		}
		if hid {
			ids = append(ids, id)
		}
	}
	if len(ids) == 0 {
		return ""
	}
	who := "point " + ids[0] + " near it was"
	switch {
	case len(ids) > 3:
		who = fmt.Sprintf("points %s and %d more near it were", strings.Join(ids[:3], ", "), len(ids)-3)
	case len(ids) > 1:
		who = "points " + strings.Join(ids[:len(ids)-1], ", ") + " and " + ids[len(ids)-1] + " near it were"
	}
	span := "at " + fmtTime(first, res, in.CaptureFPS)
	if lastRow > first {
		span = "between " + fmtTime(first, res, in.CaptureFPS) + " and " + fmtTime(lastRow, res, in.CaptureFPS)
	}
	return fmt.Sprintf("but %s hidden from view %s, so something may have passed in front of it: check this against the evidence frames", who, span)
}

// segDist is point p's distance from the segment a-b.
func segDist(a, b, p [2]float64) float64 {
	dx, dy := b[0]-a[0], b[1]-a[1]
	l2 := dx*dx + dy*dy
	u := 0.0
	if l2 > 0 {
		u = math.Max(0, math.Min(1, ((p[0]-a[0])*dx+(p[1]-a[1])*dy)/l2))
	}
	return math.Hypot(p[0]-a[0]-u*dx, p[1]-a[1]-u*dy)
}

// TogetherRows is how many frames apart breaks may be and still count as
// members coming off together (common practice: a glued joint letting go
// frees all its members in the same instant; blur and tracking spread that
// over a frame or two).
const TogetherRows = 2

// cameOffTogether returns the other members whose breaks came within
// TogetherRows of the first member's, and the one joint (an end point) all
// of them, the first member included, share; "" when there are none or
// they share no single joint.
func cameOffTogether(d *Diagnosis, first *memberFind, res *Result) ([]string, string) {
	ends := func(m *Member) []string {
		if len(m.Points) < 2 {
			return nil
		}
		return []string{m.Points[0], m.Points[len(m.Points)-1]}
	}
	common := map[string]bool{}
	for _, p := range ends(first.m) {
		common[p] = true
	}
	var others []string
	for _, e := range d.Events {
		if e.Kind != EventBreak || e.Member == first.m.ID || e.Row < first.brk-TogetherRows || e.Row > first.brk+TogetherRows {
			continue
		}
		var m *Member
		for i := range res.Members {
			if res.Members[i].ID == e.Member {
				m = &res.Members[i]
			}
		}
		if m == nil || m.Kind == marks.KindBlock {
			continue
		}
		has := map[string]bool{}
		for _, p := range ends(m) {
			has[p] = true
		}
		for p := range common {
			if !has[p] {
				delete(common, p)
			}
		}
		others = append(others, e.Member)
	}
	if len(others) == 0 || len(common) != 1 {
		return nil, ""
	}
	for p := range common {
		return others, p
	}
	return nil, ""
}

func hasDiagonals(res *Result) bool {
	for _, m := range res.Members {
		if m.Kind == "brace" && m.Levels[0] >= 0 && m.Levels[1] > m.Levels[0] {
			return true
		}
	}
	return false
}

// adviceFor gives next-build advice tied to the physics of the mode.
func adviceFor(mode string, first *Member, res *Result) []string {
	var a []string
	switch mode {
	case ModeTowerTwist:
		a = append(a, "The tower twisted as a whole: horizontal braces alone do not stop a square frame racking, so add a diagonal (or an X pair) in every face of every panel; diagonals turn twist into axial force in the braces.")
		a = append(a, "Once twist is stopped, each leg only has to span one panel: its effective length drops from the full height to the panel height, and the Euler load P = pi^2 E I / (K L)^2 rises with the square of that ratio (halving the length gives 4 times the load).")
	case ModeLegFullHeight:
		if !hasDiagonals(res) {
			a = append(a, "A leg buckled over its full height: the horizontal braces let the tower twist, so they did not hold the legs sideways. Add diagonals in each face to stop the twist; the legs' effective length then becomes the panel height (4 times the Euler load at half the length).")
		} else {
			a = append(a, "A leg buckled over its full height although the faces are braced: check that the braces are glued to the legs at each level and that they are stiff enough to hold the leg (a brace needs only a few percent of the leg's load, but it must not slip).")
		}
	case ModeLegBetweenBraces:
		a = append(a, "A leg buckled between braced levels, so the bracing did its job: to go further, shorten the panels (more levels: halving the panel height gives 4 times the Euler load) or use a stiffer leg section (the second moment of area of a square leg grows with the fourth power of its side).")
	case ModeBraceBuckling:
		if first != nil && crossed(first, res) {
			a = append(a, fmt.Sprintf("The crossed diagonal %s (%.0f mm long) buckled between its end and the crossing: the crossing already halves its length, so give it a deeper section (the second moment of area grows with the cube of the depth in the bending direction) or shorten the panels.", first.ID, first.LengthMM))
		} else if first != nil && first.Levels[1] > first.Levels[0] && first.Levels[0] >= 0 {
			a = append(a, fmt.Sprintf("The diagonal %s (%.0f mm long) buckled first: glue an X crossing at its mid-length so it buckles over half the length (4 times the Euler load), or use a deeper section for it.", first.ID, first.LengthMM))
		} else if first != nil {
			a = append(a, fmt.Sprintf("The brace %s (%.0f mm long) buckled first: brace it at mid-length or use a stiffer section; halving its unbraced length gives 4 times the Euler load.", first.ID, first.LengthMM))
		}
		a = append(a, "The legs held longer than the bracing: the tower is limited by its longest compression braces, so material may come off the legs and go into the braces.")
	case ModeJointOrBase:
		a = append(a, "A member let go without bowing first: a glue joint or the base failed before any member buckled. Give the joints more glue area (gussets or notched joints), let glue cure fully, and check the tower sits flat and the load is centred.")
		if legsOnlyAtLevels(res) {
			a = append(a, "The legs were marked only at braced levels, so a leg buckling between two braces would not show: next time mark each leg at mid-panel too.")
		}
	default:
		if !bowVisible(res) {
			a = append(a, "No marked member has a point between its ends, so a member bowing before it broke could not be seen: mark the middle of each long brace and each leg at mid-panel as well as the joints.")
		}
		a = append(a, "The clip did not show how the tower failed: mark points on two faces (legs at every level and the middle of long braces), film from a camera azimuth of 15-35 degrees off a face, and keep the whole tower in frame.")
	}
	for _, lv := range res.Levels {
		if !lv.Observable {
			a = append(a, fmt.Sprintf("Twist at level %d could not be measured from this camera position; next time film from 15-35 degrees off a face and mark points on two faces.", lv.Level))
			break
		}
	}
	return a
}

func sameSign(a, b float64) bool { return (a > 0) == (b > 0) }

// crossed reports whether a brace shares an interior point with another
// brace (an X pair glued at the crossing).
func crossed(m *Member, res *Result) bool {
	if len(m.Points) < 3 {
		return false
	}
	inner := map[string]bool{}
	for _, id := range m.Points[1 : len(m.Points)-1] {
		inner[id] = true
	}
	for i := range res.Members {
		o := &res.Members[i]
		if o.ID == m.ID || o.Kind != "brace" || len(o.Points) < 3 {
			continue
		}
		for _, id := range o.Points[1 : len(o.Points)-1] {
			if inner[id] {
				return true
			}
		}
	}
	return false
}

// legsOnlyAtLevels reports whether every leg member's interior points sit
// at braced levels (so buckling between braces cannot be seen).
func legsOnlyAtLevels(res *Result) bool {
	seen := false
	for _, l := range res.Legs {
		seen = true
		if len(l.HeightsMM) > 0 && l.midPanel {
			return false
		}
	}
	return seen
}

// bowVisible reports whether any member was marked with interior points and
// has a bow figure in some frame, so that buckling could have been seen.
func bowVisible(res *Result) bool {
	for i := range res.Members {
		m := &res.Members[i]
		if len(m.Points) < 3 {
			continue
		}
		for _, v := range m.BowMM {
			if !math.IsNaN(v) {
				return true
			}
		}
	}
	return false
}
