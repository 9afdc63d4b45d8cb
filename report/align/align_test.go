package align

import (
	"errors"
	"math"
	"math/rand"
	"testing"
)

// scene builds a load log that ramps to a peak and falls at collapseLog
// (logger time), and a motion-energy series at fps whose motion starts at
// collapseLog+offset (video time).
type scene struct {
	periodS, phaseS, offsetS, collapseLog, fallS, noiseG float64
	fps, energyTau                                       float64
	seed                                                 int64
	// ramp makes the motion energy climb steadily (an accelerating
	// collapse) instead of jumping.
	ramp bool
}

func (s scene) build() (t, g []float64, v Video) {
	rng := rand.New(rand.NewSource(s.seed))
	peak := 5000.0
	for x := s.phaseS; x < s.collapseLog+1.5; x += s.periodS {
		var load float64
		switch {
		case x <= s.collapseLog:
			load = peak * x / s.collapseLog
		case x < s.collapseLog+s.fallS:
			load = peak - (peak-150)*(x-s.collapseLog)/s.fallS
		default:
			load = 150
		}
		t = append(t, x)
		g = append(g, load+rng.NormFloat64()*s.noiseG)
	}
	v.FramePeriodS = 1 / s.fps
	v.CollapseS = math.NaN()
	start := s.collapseLog + s.offsetS - 0.3
	for k := 0; k < int(0.6*s.fps); k++ {
		vt := start + float64(k)/s.fps
		e := 0.4 + 0.05*rng.NormFloat64()
		if dt := vt - (s.collapseLog + s.offsetS); dt > 0 {
			if s.ramp {
				e += 60 * dt
			} else {
				e += 12 * (1 - math.Exp(-dt/s.energyTau))
			}
		}
		v.TimesS = append(v.TimesS, vt)
		v.Energy = append(v.Energy, e)
	}
	return t, g, v
}

func TestAutoRecoversOffset(t *testing.T) {
	tests := []struct {
		name string
		s    scene
		// collapseKnown passes the true video collapse instant, off by this much.
		collapseErr float64
		useEvent    bool
	}{
		{name: "100 Hz sharp fall, energy only", s: scene{periodS: 0.01, phaseS: 0.0037, offsetS: -7.25, collapseLog: 9.3, fallS: 0.004, noiseG: 5, fps: 960, energyTau: 0.01, seed: 1}},
		{name: "80 Hz slow fall, energy only", s: scene{periodS: 0.0125, phaseS: 0.001, offsetS: 3.1, collapseLog: 12.04, fallS: 0.06, noiseG: 10, fps: 1000, energyTau: 0.03, seed: 2}},
		{name: "1 kHz log, 240 fps video", s: scene{periodS: 0.001, phaseS: 0.0002, offsetS: 0.52, collapseLog: 6.5, fallS: 0.02, noiseG: 3, fps: 240, energyTau: 0.02, seed: 3}},
		{name: "collapse event a few frames late", s: scene{periodS: 0.01, phaseS: 0.006, offsetS: -1.0, collapseLog: 8.0, fallS: 0.03, noiseG: 8, fps: 960, energyTau: 0.015, seed: 4}, useEvent: true, collapseErr: 0.006},
		{name: "accelerating collapse, event 18 ms late", s: scene{periodS: 0.0125, phaseS: 0.004, offsetS: -34.959, collapseLog: 35.3675, fallS: 0.009, noiseG: 2.5, fps: 960, ramp: true, seed: 6}, useEvent: true, collapseErr: 0.018},
		{name: "accelerating collapse, event 10 ms early", s: scene{periodS: 0.01, phaseS: 0.002, offsetS: 2.5, collapseLog: 20, fallS: 0.02, noiseG: 5, fps: 500, ramp: true, seed: 7}, useEvent: true, collapseErr: -0.010},
		{name: "noisy 50 Hz", s: scene{periodS: 0.02, phaseS: 0.013, offsetS: 20, collapseLog: 30, fallS: 0.01, noiseG: 40, fps: 500, energyTau: 0.01, seed: 5}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			lt, lg, v := tt.s.build()
			if tt.useEvent {
				v.CollapseS = tt.s.collapseLog + tt.s.offsetS + tt.collapseErr
			}
			res, err := Auto(lt, lg, tt.s.periodS, v)
			if err != nil {
				t.Fatal(err)
			}
			// Done-when criterion of the alignment: within one log sample period
			// of the truth (or one frame, when frames are longer than samples:
			// the video cannot place the collapse more finely).
			tol := math.Max(tt.s.periodS, 1/tt.s.fps)
			if e := math.Abs(res.OffsetS - tt.s.offsetS); e > tol {
				t.Errorf("offset %.5f, want %.5f (error %.5f s > %.4f s); %s", res.OffsetS, tt.s.offsetS, e, tol, res.Detail)
			}
			if res.UncertaintyS < tt.s.periodS {
				t.Errorf("uncertainty %g below one period %g", res.UncertaintyS, tt.s.periodS)
			}
			if res.Method != MethodAuto || res.Drop == nil {
				t.Errorf("method %q drop %v", res.Method, res.Drop)
			}
		})
	}
}

func TestFindDrop(t *testing.T) {
	// Ramp to 1000 g at t = 1.0 s, then 1000 -> 0 between 1.00 and 1.04 s, 100 Hz.
	var ts, gs []float64
	for i := 0; i <= 200; i++ {
		x := float64(i) * 0.01
		var v float64
		switch {
		case x <= 1.0:
			v = 1000 * x
		case x < 1.04:
			v = 1000 - 25000*(x-1.0)
		}
		ts, gs = append(ts, x), append(gs, v)
	}
	d, err := FindDrop(ts, gs)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(d.StartT-1.0) > 0.01 || d.PeakG != 1000 || d.FloorG != 0 {
		t.Errorf("drop %+v, want start 1.0 s, peak 1000 g, floor 0", d)
	}
	// A log that only rises has no drop.
	_, err = FindDrop(ts[:100], gs[:100])
	if !errors.Is(err, ErrNoDrop) {
		t.Errorf("rising log: err = %v, want ErrNoDrop", err)
	}
	// A dip of 20 % is no collapse.
	dip := append([]float64(nil), gs[:101]...)
	dip = append(dip, 800, 800, 810)
	_, err = FindDrop(ts[:104], dip)
	if !errors.Is(err, ErrNoDrop) {
		t.Errorf("small dip: err = %v, want ErrNoDrop", err)
	}
}

func TestManualAndSync(t *testing.T) {
	m := Manual(-2.5, 0.01)
	if m.OffsetS != -2.5 || m.UncertaintyS != 0.01 || m.Method != MethodManual {
		t.Errorf("Manual = %+v", m)
	}
	// Frame 480 at 960 fps is 0.5 s of video; matched to logger time 12.25 s.
	s := Sync(480, 480.0/960, 12.25, 0.0125, 1.0/960)
	if math.Abs(s.OffsetS-(0.5-12.25)) > 1e-12 || s.UncertaintyS != 0.0125 || s.Method != MethodSync {
		t.Errorf("Sync = %+v", s)
	}
}

func TestEfficiency(t *testing.T) {
	// common practice (structure contests): a 2.0 g tower holding 5.0 kg scores 2500.
	e, err := Efficiency(5000, 2.0)
	if err != nil || e != 2500 {
		t.Errorf("Efficiency(5000 g, 2 g) = %g, %v; want 2500", e, err)
	}
	if _, err := Efficiency(5000, 0); err == nil {
		t.Error("zero mass accepted")
	}
	if _, err := Efficiency(math.NaN(), 2); err == nil {
		t.Error("NaN load accepted")
	}
}
