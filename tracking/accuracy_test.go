package tracking

import (
	"fmt"
	"image"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/failframe/failframe/tracking/marks"
)

// probe is a tracked point fixed to a body, in body coordinates.
type probe struct {
	id   string
	body int
	x, y float64
}

// trackStats summarises one point's errors against the truth.
type trackStats struct {
	rms, max  float64
	lost      int
	firstLost int // -1 when never lost
	lastLost  int // -1 when never lost
	n         int
}

// runScene renders frames 0..n-1 of sc, tracks the probes marked in frame 0
// and compares every sample with the truth. check, when set, sees every
// sample with its truth.
func runScene(t *testing.T, sc *scene, probes []probe, n int, opt Options) []trackStats {
	t.Helper()
	return runSceneCheck(t, sc, probes, n, opt, math.Inf(1))
}

// runSceneCheck is runScene that also fails the test for any tracked
// sample farther than maxErr px from the truth.
func runSceneCheck(t *testing.T, sc *scene, probes []probe, n int, opt Options, maxErr float64) []trackStats {
	t.Helper()
	m := &marks.File{}
	for _, p := range probes {
		x, y := sc.bodies[p.body].at(0, p.x, p.y)
		m.Points = append(m.Points, marks.Point{ID: p.id, PX: [2]float64{x, y}})
	}
	tr, img := sc.start(t, m, opt)
	st := make([]trackStats, len(probes))
	for i := range st {
		st[i].firstLost, st[i].lastLost = -1, -1
	}
	for i := 0; i < n; i++ {
		sc.render(i, img)
		out, err := tr.Step(i, *img)
		if err != nil {
			t.Fatal(err)
		}
		for j, p := range probes {
			s := out[j]
			if s.Lost {
				st[j].lost++
				if st[j].firstLost < 0 {
					st[j].firstLost = i
				}
				st[j].lastLost = i
				continue
			}
			tx, ty := sc.bodies[p.body].at(i, p.x, p.y)
			e := math.Hypot(s.X-tx, s.Y-ty)
			if e > maxErr {
				t.Errorf("frame %d: %s tracked at (%.2f, %.2f), truth (%.2f, %.2f), %.2f px off", i, p.id, s.X, s.Y, tx, ty, e)
			}
			st[j].rms += e * e
			st[j].max = math.Max(st[j].max, e)
			st[j].n++
		}
	}
	for j := range st {
		if st[j].n > 0 {
			st[j].rms = math.Sqrt(st[j].rms / float64(st[j].n))
		}
	}
	return st
}

// slowSway is a slow sinusoidal motion with a drift, a few pixels over the clip.
func slowSway(ax, ay, period, drift float64) func(int) pose {
	return func(i int) pose {
		f := float64(i)
		return pose{dx: ax*math.Sin(2*math.Pi*f/period) + drift*f, dy: ay * math.Sin(2*math.Pi*f/(1.3*period))}
	}
}

// towerScene is a leg and a diagonal brace (light wood bars with dark dot
// markers) in front of a static, faintly textured background.
func towerScene(seed uint64, contrast float64, legMove, braceMove func(int) pose) (*scene, []probe) {
	rng := rand.New(rand.NewPCG(seed, 1))
	bgTex := body{shapes: speckle(rng, 0, 0, 240, 180, 900, 1, 3, 12*contrast)}
	leg := body{ox: 80, oy: 170, move: legMove, shapes: []shape{{x: 80, y: 90, len: 85, wid: 5, ang: math.Pi / 2, sigma: 0.7, amp: 90 * contrast}}}
	brace := body{ox: 80, oy: 150, move: braceMove, shapes: []shape{{x: 150, y: 85, len: 60, wid: 3.5, ang: -0.75, sigma: 0.7, amp: 80 * contrast}}}
	var probes []probe
	for k, y := range []float64{25, 65, 105, 160} {
		leg.shapes = append(leg.shapes, shape{x: 80.3, y: y + 0.4, sigma: 2.2, amp: -75 * contrast})
		probes = append(probes, probe{id: fmt.Sprintf("A%d", k), body: 1, x: 80.3, y: y + 0.4})
	}
	sn, cs := math.Sincos(-0.75)
	for k, d := range []float64{-45, 0, 45} {
		x, y := 150+cs*d, 85+sn*d
		brace.shapes = append(brace.shapes, shape{x: x, y: y, sigma: 1.8, amp: -60 * contrast})
		probes = append(probes, probe{id: fmt.Sprintf("AB-d%d", k), body: 2, x: x, y: y})
	}
	return &scene{w: 240, h: 180, bg: 70, bodies: []body{bgTex, leg, brace}, seed: seed}, probes
}

// speckleScene is a speckled plate moving over the whole frame.
func speckleScene(seed uint64, move func(int) pose) (*scene, []probe) {
	rng := rand.New(rand.NewPCG(seed, 2))
	plate := body{ox: 120, oy: 90, move: move, shapes: speckle(rng, -20, -20, 260, 200, 4000, 1.0, 2.2, 45)}
	var probes []probe
	for j := 0; j < 2; j++ {
		for i := 0; i < 3; i++ {
			probes = append(probes, probe{id: fmt.Sprintf("s%d%d", i, j), body: 0, x: 60 + 60*float64(i) + 0.37, y: 60 + 60*float64(j) + 0.81})
		}
	}
	return &scene{w: 240, h: 180, bg: 120, bodies: []body{plate}, seed: seed}, probes
}

// crossScene is a bar with cross-shaped markers (two thin dark strokes).
func crossScene(seed uint64, move func(int) pose) (*scene, []probe) {
	bar := body{ox: 120, oy: 90, move: move, shapes: []shape{{x: 120, y: 90, len: 100, wid: 9, ang: 0.1, sigma: 0.8, amp: 80}}}
	var probes []probe
	for k, x := range []float64{50, 100, 150, 190} {
		y := 90 + math.Tan(0.1)*(x-120)
		bar.shapes = append(bar.shapes,
			shape{x: x, y: y, len: 6, wid: 1.2, ang: math.Pi / 4, sigma: 0.6, amp: -70},
			shape{x: x, y: y, len: 6, wid: 1.2, ang: -math.Pi / 4, sigma: 0.6, amp: -70})
		probes = append(probes, probe{id: fmt.Sprintf("x%d", k), body: 0, x: x, y: y})
	}
	return &scene{w: 240, h: 180, bg: 90, bodies: []body{bar}, seed: seed}, probes
}

// TestAccuracySlowMotion tracks slowly moving markers on varied scenes and
// checks the RMS error against the rendered truth. The bound of 0.05 px RMS
// for static and slowly moving markers is the project's target; it sits well
// above the 0.01 px noise floor of digital image correlation and within its
// typical 0.01-0.02 px interpolation bias (Schreier, Braasch & Sutton,
// Optical Engineering 39:2915, 2000; from memory).
func TestAccuracySlowMotion(t *testing.T) {
	cases := []struct {
		name   string
		build  func() (*scene, []probe)
		tweak  func(*scene)
		frames int
		maxRMS float64
	}{
		{"speckle noise flicker", func() (*scene, []probe) { return speckleScene(1, slowSway(2.5, 1.5, 200, 0.004)) },
			func(s *scene) { s.noise, s.flicker = 2, 0.05 }, 300, 0.05},
		// Dots on thin bars: sensor noise in the reference frame and in
		// each frame limits a Gaussian dot of amplitude A, radius s to
		// about sigma_n / (A sqrt(pi/2)) px per axis and frame (Cramer-Rao
		// bound for translation; common practice): 0.027 px for the brace
		// dots here, about 0.07 px RMS in 2D with both frames' noise and
		// the window weighting; allow 0.1 px.
		{"tower dots", func() (*scene, []probe) {
			return towerScene(2, 1, slowSway(3, 0.3, 250, 0), slowSway(2.5, 0.8, 250, 0.002))
		}, func(s *scene) { s.noise, s.flicker = 2, 0.08 }, 300, 0.1},
		{"tower dots static", func() (*scene, []probe) { return towerScene(3, 1, nil, nil) },
			func(s *scene) { s.noise, s.flicker = 2, 0.1 }, 200, 0.1},
		// Without noise what is left is the pull of the textured wall seen
		// beside the thin members, which does not move with them, and the
		// mixed pixels at their edges; from our runs up to 0.06 px on the
		// thin brace; allow 0.08 px.
		{"tower dots no noise", func() (*scene, []probe) {
			return towerScene(6, 1, slowSway(3, 0.3, 250, 0), slowSway(2.5, 0.8, 250, 0.002))
		}, func(s *scene) {}, 300, 0.08},
		// At half contrast the bound above doubles; allow 0.2 px.
		{"tower dots half contrast", func() (*scene, []probe) {
			return towerScene(5, 0.5, slowSway(3, 0.3, 250, 0), slowSway(2.5, 0.8, 250, 0.002))
		}, func(s *scene) { s.noise, s.flicker = 2, 0.08 }, 300, 0.2},
		// JPEG at quality 70 quantises the 8x8 blocks' spectra; thin
		// blurred strokes lose contrast: allow 0.08 px (from our runs,
		// about 0.05 px).
		{"crosses blur jpeg70", func() (*scene, []probe) { return crossScene(4, slowSway(2, 1, 220, 0.003)) },
			func(s *scene) { s.noise, s.blur, s.jpeg = 2, 1.2, 70 }, 250, 0.08},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			sc, probes := c.build()
			c.tweak(sc)
			st := runScene(t, sc, probes, c.frames, DefaultOptions())
			for j, s := range st {
				t.Logf("%s: rms %.4f max %.4f px, lost %d", probes[j].id, s.rms, s.max, s.lost)
				if s.lost > 0 {
					t.Errorf("%s lost in %d frames (first %d)", probes[j].id, s.lost, s.firstLost)
				}
				if s.rms > c.maxRMS {
					t.Errorf("%s: RMS error %.4f px > %.3f px", probes[j].id, s.rms, c.maxRMS)
				}
			}
		})
	}
}

// TestNoDriftStaticScene tracks a still scene with noise and flicker over
// 5000 frames (small frames, so it runs in seconds) and checks that no point
// drifts: the mean position over any 250-frame block stays within 0.1 px of
// the first block's (the project's target), and no point is lost.
func TestNoDriftStaticScene(t *testing.T) {
	const n, block = 5000, 250
	rng := rand.New(rand.NewPCG(31, 32))
	plate := body{shapes: speckle(rng, 0, 0, 160, 120, 700, 1, 2.2, 40)}
	bar := body{shapes: []shape{{x: 80, y: 60, len: 70, wid: 5, ang: 0.3, sigma: 0.7, amp: 70}}}
	var probes []probe
	for k, d := range []float64{-40, 0, 40} {
		x, y := 80+d*math.Cos(0.3)+0.3, 60+d*math.Sin(0.3)+0.6
		bar.shapes = append(bar.shapes, shape{x: x, y: y, sigma: 2, amp: -70})
		probes = append(probes, probe{id: fmt.Sprintf("dot%d", k), body: 1, x: x, y: y})
	}
	probes = append(probes, probe{id: "speckle0", body: 0, x: 30.4, y: 95.2}, probe{id: "speckle1", body: 0, x: 135.7, y: 20.9})
	sc := &scene{w: 160, h: 120, bg: 90, bodies: []body{plate, bar}, noise: 2, flicker: 0.05, seed: 33}
	m := &marks.File{}
	for _, p := range probes {
		m.Points = append(m.Points, marks.Point{ID: p.id, PX: [2]float64{p.x, p.y}})
	}
	tr, img := sc.start(t, m, DefaultOptions())
	// The scene is still: render the noise-free frame once and add fresh
	// noise and flicker per frame.
	clean := append([]float64(nil), sc.buf...)
	pix, _ := img.DataPtrUint8()
	sums := make([][2]float64, len(probes))
	var first [][2]float64
	for i := 0; i < n; i++ {
		frng := rand.New(rand.NewPCG(34, uint64(i)))
		gain := 1 + sc.flicker*(2*frng.Float64()-1)
		for k, v := range clean {
			pix[k] = uint8(math.Max(0, math.Min(255, math.Round(v*gain+sc.noise*frng.NormFloat64()))))
		}
		out, err := tr.Step(i, *img)
		if err != nil {
			t.Fatal(err)
		}
		for j, s := range out {
			if s.Lost {
				t.Fatalf("frame %d: %s lost", i, probes[j].id)
			}
			sums[j][0] += s.X
			sums[j][1] += s.Y
		}
		if (i+1)%block == 0 {
			means := make([][2]float64, len(probes))
			for j := range sums {
				means[j] = [2]float64{sums[j][0] / block, sums[j][1] / block}
				sums[j] = [2]float64{}
			}
			if first == nil {
				first = means
				continue
			}
			for j := range means {
				d := math.Hypot(means[j][0]-first[j][0], means[j][1]-first[j][1])
				if d > 0.1 {
					t.Errorf("%s drifted %.4f px by frame %d", probes[j].id, d, i)
				}
				if i == n-1 {
					t.Logf("%s: last block %.4f px from the first; from the truth %.4f px", probes[j].id, d,
						math.Hypot(means[j][0]-probes[j].x, means[j][1]-probes[j].y))
				}
			}
		}
	}
}

// TestBraceBreaksAndFliesOff follows dots on a brace that snaps at frame 40
// and is flung out of the frame, turning as it goes: its points must be
// reported lost, and no sample may sit away from the truth (never carried
// onto another feature), while the leg beside it is tracked throughout.
func TestBraceBreaksAndFliesOff(t *testing.T) {
	const brk = 40
	fly := func(i int) pose {
		if i < brk {
			return pose{dx: 0.01 * float64(i)}
		}
		k := float64(i - brk)
		return pose{dx: 0.4 + 1.5*k*k, dy: -0.8 * k * k, rot: 0.04 * k * k}
	}
	sc, probes := towerScene(41, 1, slowSway(1, 0.2, 200, 0), fly)
	sc.noise, sc.flicker = 2, 0.05
	st := runSceneCheck(t, sc, probes, 90, DefaultOptions(), 1.0)
	for j, p := range probes {
		onBrace := p.body == 2
		switch {
		case onBrace && st[j].firstLost < 0:
			t.Errorf("%s on the flung brace never reported lost", p.id)
		case onBrace && st[j].firstLost < brk:
			t.Errorf("%s lost at frame %d, before the break at %d", p.id, st[j].firstLost, brk)
		case onBrace && st[j].firstLost > brk+12:
			t.Errorf("%s lost only at frame %d, %d frames after the break", p.id, st[j].firstLost, st[j].firstLost-brk)
		case !onBrace && st[j].lost > 0:
			t.Errorf("%s on the leg lost in %d frames", p.id, st[j].lost)
		}
		t.Logf("%s: first lost %d, RMS while tracked %.4f px, worst %.4f px", p.id, st[j].firstLost, st[j].rms, st[j].max)
	}
}

// TestPartialOcclusion slides a flat occluder over part of a marker's
// window. While a strip of about a sixth of the window is hidden the point
// must be tracked within 0.2 px; hidden more, it must stay within 0.2 px or
// be reported lost, and be tracked again once the occluder has passed.
func TestPartialOcclusion(t *testing.T) {
	for _, c := range []struct {
		name  string
		reach int // how far left of its start the occluder's edge goes, px
		light bool
	}{{"light", 14, true}, {"heavy", 24, false}} {
		t.Run(c.name, func(t *testing.T) {
			sc, probes := speckleScene(51, slowSway(1.5, 1, 150, 0))
			sc.noise = 2
			// Probe s11 sits near (120.4, 120.8); the occluder's edge sweeps
			// in from x = 140 and back.
			sc.occlude = func(i int) image.Rectangle {
				if i < 30 || i > 90 {
					return image.Rectangle{}
				}
				edge := 140 - int(float64(c.reach)*math.Sin(math.Pi*float64(i-30)/60))
				return image.Rect(edge, 90, 240, 150)
			}
			sc.occludeV = 200
			st := runSceneCheck(t, sc, probes, 130, DefaultOptions(), 0.2)
			for j, p := range probes {
				t.Logf("%s: lost %d frames, RMS while tracked %.4f px, worst %.4f px", p.id, st[j].lost, st[j].rms, st[j].max)
				if st[j].lastLost > 100 {
					t.Errorf("%s still lost at frame %d, after the occluder left", p.id, st[j].lastLost)
				}
				if c.light && p.id == "s11" && st[j].lost > 0 {
					t.Errorf("%s lost in %d frames with a sixth of its window hidden", p.id, st[j].lost)
				}
			}
		})
	}
}

// TestAverageStillStart checks Options.AverageFrames on a still, noisy
// scene: averaging the first frames into the reference patches must lower
// the RMS error (the reference frame's noise otherwise biases every frame).
func TestAverageStillStart(t *testing.T) {
	rms := func(af int) float64 {
		sc, probes := towerScene(3, 1, nil, nil)
		sc.noise, sc.flicker = 2, 0.1
		o := DefaultOptions()
		o.AverageFrames = af
		st := runScene(t, sc, probes, 120, o)
		var sum float64
		for _, s := range st {
			if s.lost > 0 {
				t.Fatalf("averaging %d: a point was lost", af)
			}
			sum += s.rms * s.rms
		}
		return math.Sqrt(sum / float64(len(st)))
	}
	off, on := rms(0), rms(16)
	t.Logf("RMS without averaging %.4f px, with 16 frames %.4f px", off, on)
	if !(on < 0.8*off) {
		t.Errorf("averaging 16 still frames: RMS %.4f px, without %.4f px; want at least 20 %% lower", on, off)
	}
}

// TestLostPointsDoNotSwapMarkers hides two look-alike markers 14 px apart,
// then uncovers one of them while the other stays hidden: the still-hidden
// point must not be taken up on its neighbour's marker (markers are
// distinct, so two points never share one; common practice), even while
// the neighbour itself is still lost and not yet taken up again; both must
// be tracked again once uncovered.
func TestLostPointsDoNotSwapMarkers(t *testing.T) {
	for _, c := range []struct {
		name   string
		px, qx float64 // first and second point (the first is looked at first each frame)
	}{{"hidden point first", 100.3, 114.3}, {"hidden point second", 114.3, 100.3}} {
		t.Run(c.name, func(t *testing.T) {
			spots := body{shapes: []shape{
				{x: 100.3, y: 90.6, sigma: 2.2, amp: -75},
				{x: 114.3, y: 90.6, sigma: 2.2, amp: -75},
			}, move: slowSway(0.6, 0.4, 120, 0)}
			sc := &scene{w: 200, h: 160, bg: 120, bodies: []body{spots}, noise: 1.5, seed: 9, occludeV: 120}
			// c.px is hidden from frame 20 to 79, c.qx from 20 to 49.
			sc.occlude = func(i int) image.Rectangle {
				switch {
				case i >= 20 && i < 50:
					return image.Rect(86, 76, 129, 106)
				case i >= 50 && i < 80:
					x := int(c.px)
					return image.Rect(x-7, 76, x+7, 106)
				}
				return image.Rectangle{}
			}
			probes := []probe{{id: "P", x: c.px, y: 90.6}, {id: "Q", x: c.qx, y: 90.6}}
			st := runSceneCheck(t, sc, probes, 110, DefaultOptions(), 1.0)
			for j, p := range probes {
				t.Logf("%s: lost %d frames (%d..%d), RMS while tracked %.4f px", p.id, st[j].lost, st[j].firstLost, st[j].lastLost, st[j].rms)
				if st[j].lastLost > 95 {
					t.Errorf("%s still lost at frame %d, long after it was uncovered", p.id, st[j].lastLost)
				}
			}
		})
	}
}
