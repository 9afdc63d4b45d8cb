package synth

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
)

// loadModel is the load history of a test as a load cell would see it: an
// empty bucket hung on the loading block, sand poured in unevenly until the
// tower collapses, then a drop within a few samples as the bucket lands.
type loadModel struct {
	offsetS  float64 // video_time = log_time + offsetS
	periodS  float64 // logger sample period
	durS     float64 // logger run time
	hangS    float64 // log time the empty bucket was hung
	bucketG  float64
	pourS    float64 // log time pouring started
	collapse float64 // log time of collapse
	peakG    float64
	residual float64
	noiseG   float64
	// uneven pouring: the pour's cumulative fraction at knots
	knotT, knotF []float64
	seed         int64
}

func newLoadModel(s Scenario) *loadModel {
	rng := rand.New(rand.NewPCG(uint64(s.Seed), 0x10ad))
	lead := 34 + 9*rng.Float64() // seconds the logger ran before the first video frame
	lm := &loadModel{
		offsetS:  -math.Round(lead*1e6) / 1e6,
		periodS:  0.0125,
		hangS:    1.2 + 1.5*rng.Float64(),
		bucketG:  math.Min(0.06*s.PeakLoadG, 150+250*rng.Float64()),
		peakG:    s.PeakLoadG,
		residual: 0.03 * s.PeakLoadG,
		noiseG:   2.5,
		seed:     s.Seed,
	}
	lm.collapse = float64(s.CollapseFrame)/s.CaptureFPS - lm.offsetS
	lm.pourS = lm.hangS + 2 + 2*rng.Float64()
	lm.durS = lm.collapse + 2 + rng.Float64()
	// piecewise-constant pour rates, a pause among them
	n := 14
	lm.knotT = make([]float64, n+1)
	lm.knotF = make([]float64, n+1)
	rates := make([]float64, n)
	var total float64
	pause := 2 + rng.IntN(n-4)
	for i := range rates {
		rates[i] = 0.3 + 1.4*rng.Float64()
		if i == pause {
			rates[i] = 0.03
		}
	}
	span := (lm.collapse - lm.pourS) / float64(n)
	for i := range rates {
		total += rates[i] * span
	}
	for i := 0; i <= n; i++ {
		lm.knotT[i] = lm.pourS + span*float64(i)
		if i > 0 {
			lm.knotF[i] = lm.knotF[i-1] + rates[i-1]*span/total
		}
	}
	lm.knotF[n] = 1
	return lm
}

// atLog returns the noise-free load in grams at logger time tl (seconds).
func (lm *loadModel) atLog(tl float64) float64 {
	switch {
	case tl < lm.hangS:
		return 0
	case tl < lm.pourS:
		return lm.bucketG
	case tl <= lm.collapse:
		i := 0
		for i < len(lm.knotT)-2 && tl > lm.knotT[i+1] {
			i++
		}
		f := lm.knotF[i] + (lm.knotF[i+1]-lm.knotF[i])*(tl-lm.knotT[i])/(lm.knotT[i+1]-lm.knotT[i])
		return lm.bucketG + (lm.peakG-lm.bucketG)*f
	}
	d := tl - lm.collapse
	return lm.residual + (lm.peakG-lm.residual)*math.Exp(-d/0.009) + 0.02*lm.peakG*math.Exp(-d/0.15)*math.Sin(2*math.Pi*11*d)
}

// at returns the noise-free load at video time tv (seconds).
func (lm *loadModel) at(tv float64) float64 { return lm.atLog(tv - lm.offsetS) }

// write writes the log as CSV: a header, then milliseconds since the logger
// started (whole milliseconds, as a microcontroller's clock gives them) and
// the load in grams to 0.1 g.
func (lm *loadModel) write(w io.Writer) error {
	rng := rand.New(rand.NewPCG(uint64(lm.seed), 0x5eed))
	bw := bufio.NewWriter(w)
	fmt.Fprintln(bw, "time_ms,load_g")
	n := int(lm.durS / lm.periodS)
	for k := 0; k <= n; k++ {
		tl := float64(k) * lm.periodS
		g := lm.atLog(tl) + lm.noiseG*rng.NormFloat64()
		fmt.Fprintf(bw, "%d,%.1f\n", int64(math.Floor(tl*1000+1e-9)), g)
	}
	return bw.Flush()
}
