// Package align lines a load-cell log up with the video's time, so that each
// failure event gets the load held at that instant. Throughout,
// video_time = log_time + offset.
//
// Three ways are offered: Auto matches the collapse drop in the load (the
// highest load, then a fall of most of it within a short time) to the video's
// collapse instant and refines the match by cross-correlating the rate of
// the load's fall with the rise of the motion-energy signal; Manual takes an
// offset the user measured; Sync takes one frame the user matched to one
// logger time. The package is pure numerics: no video decoding.
package align

import (
	"errors"
	"fmt"
	"math"
	"sort"
)

// Methods, as written in report.json.
const (
	MethodAuto   = "auto"
	MethodManual = "manual"
	MethodSync   = "sync"
)

// MinFallFrac is the share of the peak load that must be lost for a fall to
// count as the collapse drop.
const MinFallFrac = 0.5

// MaxFallS is the longest a collapse drop may take, seconds.
const MaxFallS = 1.0

// Drop is the collapse drop found in a load log.
type Drop struct {
	// PeakIndex is the sample holding the highest load.
	PeakIndex int
	// PeakT is its logger time, seconds.
	PeakT float64
	// PeakG is the highest load, grams.
	PeakG float64
	// StartT is when the fall began (logger time, seconds): where the steepest
	// fall's tangent meets the load held before it.
	StartT float64
	// SteepT is the middle of the steepest fall between two samples.
	SteepT float64
	// FloorG is the lowest load within MaxFallS after the peak, grams.
	FloorG float64
}

// ErrNoDrop means the log shows no collapse drop.
var ErrNoDrop = errors.New("no collapse drop in the load log (the highest load is not followed by a fall of at least half of it within 1 s)")

// FindDrop finds the collapse drop in a load log (times strictly increasing).
func FindDrop(t, g []float64) (Drop, error) {
	if len(t) != len(g) || len(t) < 3 {
		return Drop{}, fmt.Errorf("align: need at least 3 load samples, have %d", len(t))
	}
	p := 0
	for i, v := range g {
		if v > g[p] {
			p = i
		}
	}
	d := Drop{PeakIndex: p, PeakT: t[p], PeakG: g[p], FloorG: g[p]}
	if g[p] <= 0 {
		return d, ErrNoDrop
	}
	end := p
	for i := p + 1; i < len(t) && t[i]-t[p] <= MaxFallS; i++ {
		if g[i] < d.FloorG {
			d.FloorG = g[i]
		}
		end = i
	}
	fall := g[p] - d.FloorG
	if fall < MinFallFrac*g[p] {
		return d, ErrNoDrop
	}
	// Steepest fall between consecutive samples, among those after the peak
	// and before the floor is reached.
	best, bestRate := -1, 0.0
	for i := p; i < end; i++ {
		rate := (g[i] - g[i+1]) / (t[i+1] - t[i])
		if rate > bestRate {
			best, bestRate = i, rate
		}
		if g[i+1] <= d.FloorG+0.05*fall {
			break
		}
	}
	if best < 0 {
		return d, ErrNoDrop
	}
	d.SteepT = (t[best] + t[best+1]) / 2
	gs := (g[best] + g[best+1]) / 2
	// The tangent at the steepest fall meets the level held just before it.
	held := g[best]
	for i := best; i >= p && t[best]-t[i] <= MaxFallS/10; i-- {
		held = math.Max(held, g[i])
	}
	d.StartT = d.SteepT - (held-gs)/bestRate
	if g[best]-g[best+1] > 0.5*fall && held-g[best] < 0.1*fall {
		// Most of the fall happened between two samples: it began somewhere
		// in that interval, so take its middle (error at most half a period).
		d.StartT = d.SteepT
	}
	if d.StartT < t[p] {
		d.StartT = t[p]
	}
	return d, nil
}

// Video is what the video says about the collapse.
type Video struct {
	// TimesS are the video times of the motion-energy samples, seconds, ascending.
	TimesS []float64
	// Energy is the motion energy per sample (mean absolute frame difference).
	Energy []float64
	// CollapseS is the video time of the collapse from the measurements;
	// NaN when not found (the steepest rise of the energy is used instead).
	CollapseS float64
	// FramePeriodS is one frame's duration, seconds.
	FramePeriodS float64
}

// Result is an alignment of the logger clock to video time.
type Result struct {
	// Method is auto, manual or sync.
	Method string
	// OffsetS is added to logger time to get video time.
	OffsetS float64
	// UncertaintyS is the offset's uncertainty, at least one log sample period.
	UncertaintyS float64
	// Detail says how the offset was found.
	Detail string
	// Drop is the collapse drop used by Auto; nil otherwise.
	Drop *Drop
}

// Manual returns the alignment for an offset the user gave.
func Manual(offsetS, periodS float64) Result {
	return Result{Method: MethodManual, OffsetS: offsetS, UncertaintyS: periodS,
		Detail: fmt.Sprintf("offset %.4f s given by the user; uncertainty one log sample period", offsetS)}
}

// Sync returns the alignment from a frame's video time matched to a logger time.
func Sync(frame int, videoS, logS, periodS, framePeriodS float64) Result {
	u := math.Max(periodS, framePeriodS)
	return Result{Method: MethodSync, OffsetS: videoS - logS, UncertaintyS: u,
		Detail: fmt.Sprintf("frame %d (%.4f s) matched to logger time %.4f s by the user", frame, videoS, logS)}
}

// Auto aligns by matching the load's collapse drop to the video's collapse
// and checking the match by cross-correlating the load's fall rate with the
// rise of motion energy (a disagreement widens the uncertainty); t and g are the log, periodS
// its sampling period.
//
// The video's collapse instant is where the motion energy starts to climb:
// a baseline-then-ramp (hinge) fit to the energy near the collapse event
// (or near the energy's steepest rise when no event is given), so a late
// or early event does not shift the match. The load's drop starts where the
// steepest fall's tangent meets the load held before it.
func Auto(t, g []float64, periodS float64, v Video) (Result, error) {
	d, err := FindDrop(t, g)
	if err != nil {
		return Result{}, err
	}
	rough, from := v.CollapseS, "the collapse event"
	if math.IsNaN(rough) {
		k := steepestRise(v, periodS)
		if k < 0 {
			return Result{}, errors.New("align: the video shows no collapse to match the load drop to")
		}
		rough, from = v.TimesS[k], "the steepest rise of motion energy"
	}
	collapse := rough
	how := from
	if on, ok := EnergyOnset(v, rough); ok {
		collapse = on
		how = fmt.Sprintf("the start of the motion-energy climb near %s (%.4f s)", from, rough)
	}
	off := collapse - d.StartT
	res := Result{Method: MethodAuto, OffsetS: off, Drop: &d,
		UncertaintyS: math.Max(periodS, v.FramePeriodS)}
	res.Detail = fmt.Sprintf("load drop from %.0f g starting at logger time %.4f s matched to %s at %.4f s", d.PeakG, d.StartT, how, collapse)
	if xc, corr, ok := refine(t, g, d, periodS, v, off); ok && corr >= 0.3 {
		// The cross-correlation is a check: it leans late when the energy
		// climbs gradually, so it widens the uncertainty instead of moving
		// the offset.
		diff := xc - off
		if math.Abs(diff) <= periodS {
			res.Detail += fmt.Sprintf("; cross-correlating the load's fall rate with the rise of motion energy agrees within %.4f s (correlation %.2f)", math.Abs(diff), corr)
		} else {
			res.UncertaintyS = math.Max(res.UncertaintyS, math.Abs(diff)/2)
			res.Detail += fmt.Sprintf("; cross-correlating the load's fall rate with the rise of motion energy gives %.4f s (correlation %.2f), %.4f s away", xc, corr, math.Abs(diff))
		}
	}
	return res, nil
}

// EnergyOnset returns the video time where the motion energy starts to
// climb near rough: the knee of a least-squares fit of a flat baseline
// followed by a straight ramp, over a window from before rough up to where
// the energy has made most of its climb. ok is false when there is no climb.
func EnergyOnset(v Video, rough float64) (float64, bool) {
	n := len(v.Energy)
	if n != len(v.TimesS) || n < 8 || !(v.FramePeriodS > 0) {
		return 0, false
	}
	k0 := sort.SearchFloat64s(v.TimesS, rough)
	if k0 >= n {
		k0 = n - 1
	}
	frames := func(s float64) int { return int(math.Ceil(s / v.FramePeriodS)) }
	wb := max(20, frames(0.08))
	wa := max(10, frames(0.1))
	lo := max(0, k0-wb)
	hi := min(n-1, k0+wa)
	// Baseline from the first half of the window before rough.
	var base []float64
	for k := lo; k < max(lo+3, k0-wb/2) && k < n; k++ {
		if !math.IsNaN(v.Energy[k]) {
			base = append(base, v.Energy[k])
		}
	}
	if len(base) < 3 {
		return 0, false
	}
	b0 := medianOf(base)
	peak := b0
	for k := lo; k <= hi; k++ {
		if !math.IsNaN(v.Energy[k]) {
			peak = math.Max(peak, v.Energy[k])
		}
	}
	if peak <= b0 {
		return 0, false
	}
	// The end of the fit: where the energy first stays above 60 % of its climb.
	level := b0 + 0.6*(peak-b0)
	end := -1
	for k := lo; k+2 <= hi; k++ {
		if v.Energy[k] >= level && v.Energy[k+1] >= level && v.Energy[k+2] >= level {
			end = k
			break
		}
	}
	if end < 0 {
		end = hi
	}
	if end-lo < 6 {
		return 0, false
	}
	bestJ, bestSSE := -1, math.Inf(1)
	for j := lo + 2; j < end; j++ {
		// Fit E = b + a*max(0, t - t_j) by least squares.
		var sx, sy, sxx, sxy float64
		m := 0
		for k := lo; k <= end; k++ {
			e := v.Energy[k]
			if math.IsNaN(e) {
				continue
			}
			x := math.Max(0, v.TimesS[k]-v.TimesS[j])
			sx += x
			sy += e
			sxx += x * x
			sxy += x * e
			m++
		}
		den := float64(m)*sxx - sx*sx
		if m < 4 || den <= 0 {
			continue
		}
		a := (float64(m)*sxy - sx*sy) / den
		b := (sy - a*sx) / float64(m)
		if a <= 0 {
			continue
		}
		sse := 0.0
		for k := lo; k <= end; k++ {
			e := v.Energy[k]
			if math.IsNaN(e) {
				continue
			}
			r := e - b - a*math.Max(0, v.TimesS[k]-v.TimesS[j])
			sse += r * r
		}
		if sse < bestSSE {
			bestJ, bestSSE = j, sse
		}
	}
	if bestJ < 0 {
		return 0, false
	}
	return v.TimesS[bestJ], true
}

func medianOf(v []float64) float64 {
	c := append([]float64(nil), v...)
	sort.Float64s(c)
	if len(c)%2 == 1 {
		return c[len(c)/2]
	}
	return (c[len(c)/2-1] + c[len(c)/2]) / 2
}

// riseSeries returns, per energy sample, how much the energy rises over the
// next log sample period (never negative), after a 3-sample moving average:
// largest where motion starts.
func riseSeries(v Video, periodS float64) []float64 {
	n := len(v.Energy)
	sm := make([]float64, n)
	for k := range v.Energy {
		s, c := 0.0, 0
		for j := k - 1; j <= k+1; j++ {
			if j >= 0 && j < n && !math.IsNaN(v.Energy[j]) {
				s += v.Energy[j]
				c++
			}
		}
		if c > 0 {
			sm[k] = s / float64(c)
		}
	}
	lag := 1
	if v.FramePeriodS > 0 {
		lag = int(math.Max(1, math.Round(periodS/v.FramePeriodS)))
	}
	rise := make([]float64, n)
	for k := range sm {
		j := k + lag
		if j >= n {
			j = n - 1
		}
		rise[k] = math.Max(0, sm[j]-sm[k])
	}
	return rise
}

// steepestRise returns the energy sample where the energy rises most, -1 when it never rises.
func steepestRise(v Video, periodS float64) int {
	if len(v.Energy) != len(v.TimesS) || len(v.Energy) < 2 {
		return -1
	}
	rise := riseSeries(v, periodS)
	best := -1
	for k, r := range rise {
		if r > 0 && (best < 0 || r > rise[best]) {
			best = k
		}
	}
	return best
}

// refine searches offsets near coarse for the best match between the load's
// fall rate and the energy's rise; corr is the normalised correlation there.
func refine(t, g []float64, d Drop, periodS float64, v Video, coarse float64) (offset, corr float64, ok bool) {
	if len(v.Energy) != len(v.TimesS) || len(v.Energy) < 4 || periodS <= 0 {
		return coarse, 0, false
	}
	rise := riseSeries(v, periodS)
	// Fall rate at the middle of each log interval around the drop.
	var mt, rate []float64
	lo, hi := d.StartT-5*periodS, d.SteepT+MaxFallS/4
	for i := 0; i+1 < len(t); i++ {
		m := (t[i] + t[i+1]) / 2
		if m < lo || m > hi {
			continue
		}
		mt = append(mt, m)
		rate = append(rate, math.Max(0, (g[i]-g[i+1])/(t[i+1]-t[i])))
	}
	if len(mt) < 2 {
		return coarse, 0, false
	}
	search := math.Max(3*periodS, 10*v.FramePeriodS)
	step := v.FramePeriodS
	if step <= 0 || step > periodS/4 {
		step = periodS / 4
	}
	nSteps := int(math.Ceil(search / step))
	scores := make([]float64, 2*nSteps+1)
	best := -1
	for s := -nSteps; s <= nSteps; s++ {
		o := coarse + float64(s)*step
		var sum, rr, ee float64
		for i, m := range mt {
			e := interp(v.TimesS, rise, m+o)
			sum += rate[i] * e
			rr += rate[i] * rate[i]
			ee += e * e
		}
		sc := 0.0
		if rr > 0 && ee > 0 {
			sc = sum / math.Sqrt(rr*ee)
		}
		scores[s+nSteps] = sc
		if best < 0 || sc > scores[best] {
			best = s + nSteps
		}
	}
	if scores[best] <= 0 {
		return coarse, 0, false
	}
	off := float64(best - nSteps)
	// Parabola through the best score and its neighbours.
	if best > 0 && best < len(scores)-1 {
		a, b, c := scores[best-1], scores[best], scores[best+1]
		if den := a - 2*b + c; den < 0 {
			off += 0.5 * (a - c) / den
		}
	}
	return coarse + off*step, scores[best], true
}

// interp is linear interpolation of y(x) at q, 0 outside x.
func interp(x, y []float64, q float64) float64 {
	n := len(x)
	if n == 0 || q < x[0] || q > x[n-1] {
		return 0
	}
	i := sort.SearchFloat64s(x, q)
	if i < n && x[i] == q {
		return y[i]
	}
	f := (q - x[i-1]) / (x[i] - x[i-1])
	return y[i-1] + f*(y[i]-y[i-1])
}

// Efficiency returns load held over structure mass, both in grams (common
// practice in school structure contests).
func Efficiency(peakG, massG float64) (float64, error) {
	if !(massG > 0) || math.IsInf(massG, 0) {
		return 0, fmt.Errorf("align: structure mass %g g is not usable", massG)
	}
	if math.IsNaN(peakG) || peakG < 0 {
		return 0, fmt.Errorf("align: peak load %g g is not usable", peakG)
	}
	return peakG / massG, nil
}
