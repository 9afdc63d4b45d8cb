package measure

import (
	"math"
	"sort"
)

// CUSUM is Page's tabular cumulative sum for a shift of a process mean
// (Page, "Continuous Inspection Schemes", Biometrika 41, 1954). The upper sum
// is S_H(i) = max(0, x_i - (Target + K) + S_H(i-1)) and the lower sum
// S_L(i) = max(0, (Target - K) - x_i + S_L(i-1)); an alarm is raised when
// either exceeds H.
type CUSUM struct {
	// Target is the in-control mean.
	Target float64
	// K is the reference value (slack), usually half the shift to detect.
	K float64
	// H is the decision interval.
	H float64
}

// Run returns the upper and lower sums for x and the first alarm index
// (-1 when none). NaN samples leave the sums unchanged.
func (c CUSUM) Run(x []float64) (hi, lo []float64, alarm int) {
	hi = make([]float64, len(x))
	lo = make([]float64, len(x))
	alarm = -1
	var sh, sl float64
	for i, v := range x {
		if !math.IsNaN(v) {
			sh = math.Max(0, v-(c.Target+c.K)+sh)
			sl = math.Max(0, (c.Target-c.K)-v+sl)
		}
		hi[i], lo[i] = sh, sl
		if alarm < 0 && (sh > c.H || sl > c.H) {
			alarm = i
		}
	}
	return hi, lo, alarm
}

// Upper runs the one-sided upper CUSUM from index from and returns the
// first alarm index and the change point (the first index of the run of
// positive sums that led to it); both -1 when there is no alarm.
func (c CUSUM) Upper(x []float64, from int) (alarm, start int) {
	s := 0.0
	start = -1
	for i := from; i < len(x); i++ {
		if math.IsNaN(x[i]) {
			continue
		}
		s = math.Max(0, x[i]-(c.Target+c.K)+s)
		if s == 0 {
			start = -1
			continue
		}
		if start < 0 {
			start = i
		}
		if s > c.H {
			return i, start
		}
	}
	return -1, -1
}

// ChangePoint returns, for a shift confirmed at index f, the first upper
// CUSUM alarm at or before f and the change point: the index c <= f that
// maximises the sum of (x_i - Target - K) over c..f, which is where the
// upper CUSUM run leading to f starts when the sum is restarted after false
// alarms. Both are -1 when the CUSUM does not alarm by f.
func (c CUSUM) ChangePoint(x []float64, f int) (alarm, start int) {
	if f < 0 || f >= len(x) {
		return -1, -1
	}
	s := 0.0
	alarm = -1
	for i := 0; i <= f; i++ {
		if math.IsNaN(x[i]) {
			continue
		}
		s = math.Max(0, x[i]-(c.Target+c.K)+s)
		if s > c.H && alarm < 0 {
			alarm = i
		}
		if s == 0 {
			alarm = -1 // the run ended: only a run still open at f counts
		}
	}
	if alarm < 0 {
		return -1, -1
	}
	acc, best := 0.0, math.Inf(-1)
	start = f
	for i := f; i >= 0; i-- {
		if math.IsNaN(x[i]) {
			continue
		}
		acc += x[i] - (c.Target + c.K)
		if acc > best {
			best, start = acc, i
		}
	}
	return alarm, start
}

// robustBaseline returns the median and a robust standard deviation
// (1.4826 x median absolute deviation) of the finite values in x.
func robustBaseline(x []float64) (med, sigma float64, n int) {
	var v []float64
	for _, a := range x {
		if !math.IsNaN(a) && !math.IsInf(a, 0) {
			v = append(v, a)
		}
	}
	if len(v) == 0 {
		return math.NaN(), math.NaN(), 0
	}
	med = median(v)
	dev := make([]float64, len(v))
	for i, a := range v {
		dev[i] = math.Abs(a - med)
	}
	return med, 1.4826 * median(dev), len(v)
}

func median(v []float64) float64 {
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	n := len(s)
	if n == 0 {
		return math.NaN()
	}
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}
