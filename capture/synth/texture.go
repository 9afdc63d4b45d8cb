package synth

import (
	"math"
	"math/rand/v2"
)

// hash2 maps a lattice point to a pseudo-random value in [-1, 1].
func hash2(seed uint64, ix, iy int64) float64 {
	z := seed ^ uint64(ix)*0x9E3779B97F4A7C15 ^ uint64(iy)*0xC2B2AE3D27D4EB4F
	z ^= z >> 30
	z *= 0xBF58476D1CE4E5B9
	z ^= z >> 27
	z *= 0x94D049BB133111EB
	z ^= z >> 31
	return float64(z>>11)/float64(1<<52) - 1
}

// valueNoise is smooth lattice noise in about [-1, 1] with unit feature size.
func valueNoise(seed uint64, x, y float64) float64 {
	fx, fy := math.Floor(x), math.Floor(y)
	ix, iy := int64(fx), int64(fy)
	tx, ty := x-fx, y-fy
	tx = tx * tx * tx * (tx*(tx*6-15) + 10)
	ty = ty * ty * ty * (ty*(ty*6-15) + 10)
	a := hash2(seed, ix, iy)
	b := hash2(seed, ix+1, iy)
	c := hash2(seed, ix, iy+1)
	d := hash2(seed, ix+1, iy+1)
	return a + (b-a)*tx + (c-a)*ty + (a-b-c+d)*tx*ty
}

// fbm sums octaves of value noise, halving the size and amplitude each time.
func fbm(seed uint64, x, y float64, octaves int) float64 {
	var sum, amp, norm = 0.0, 1.0, 0.0
	for o := 0; o < octaves; o++ {
		sum += amp * valueNoise(seed+uint64(o)*101, x, y)
		norm += amp
		amp *= 0.5
		x, y = x*2.03, y*2.03
	}
	return sum / norm
}

// barTexture is a wood-grain brightness map for one member, in material
// coordinates: u in mm along the member, v from -1 to 1 across it.
type barTexture struct {
	pitch float64
	nu    int
	v     [barTexV][]float32
}

const barTexV = 5

func newBarTexture(rng *rand.Rand, length float64) *barTexture {
	seed := rng.Uint64()
	t := &barTexture{pitch: 0.25}
	t.nu = int(length/t.pitch) + 8
	// dark growth bands across the grain at irregular spacing
	type band struct{ pos, width, depth, slant float64 }
	var bands []band
	for pos := rng.Float64() * 6; pos < length+4; pos += 3 + 9*rng.Float64() {
		bands = append(bands, band{pos, 0.3 + 0.6*rng.Float64(), 0.10 + 0.22*rng.Float64(), (rng.Float64()*2 - 1) * 1.2})
	}
	var streak [barTexV]float64
	for j := range streak {
		streak[j] = (rng.Float64()*2 - 1) * 0.06
	}
	for j := 0; j < barTexV; j++ {
		vv := float64(j)/float64(barTexV-1)*2 - 1
		row := make([]float32, t.nu)
		for i := range row {
			u := float64(i)*t.pitch - 1
			val := 1 + 0.08*valueNoise(seed, u/4, float64(j)*0.6) + 0.05*valueNoise(seed+1, u/1.1, float64(j)*1.3) + streak[j]
			for _, b := range bands {
				d := (u - b.pos - b.slant*vv) / b.width
				if d > -3 && d < 3 {
					val -= b.depth * math.Exp(-d*d)
				}
			}
			row[i] = float32(val)
		}
		t.v[j] = row
	}
	return t
}

// at returns the brightness factor at u mm along and v (-1..1) across.
func (t *barTexture) at(u, v float64) float32 {
	fu := (u + 1) / t.pitch
	if fu < 0 {
		fu = 0
	}
	if fu > float64(t.nu-2) {
		fu = float64(t.nu - 2)
	}
	fv := (v + 1) / 2 * (barTexV - 1)
	if fv < 0 {
		fv = 0
	}
	if fv > barTexV-1.001 {
		fv = barTexV - 1.001
	}
	iu, iv := int(fu), int(fv)
	du, dv := float32(fu-float64(iu)), float32(fv-float64(iv))
	a := t.v[iv][iu] + (t.v[iv][iu+1]-t.v[iv][iu])*du
	b := t.v[iv+1][iu] + (t.v[iv+1][iu+1]-t.v[iv+1][iu])*du
	return a + (b-a)*dv
}

// Colours (B, G, R), linear 8-bit scale.
var (
	balsaColour = [3]float32{138, 180, 212}
	paperColour = [3]float32{222, 226, 229}
	dotColour   = [3]float32{30, 27, 33}
	blockColour = [3]float32{92, 118, 150}
	cordColour  = [3]float32{48, 58, 70}
)

// renderBackground fills bg (BGR, float, W*H*3) with the static scene: a
// fabric-covered wall behind the tower and a wooden table with the tower's
// base board.
func (m *model) renderBackground(bg []float32) {
	s := m.s
	W, H := s.Width, s.Height
	seed := uint64(s.Seed)*0x9E37 + 11
	wallDist := 350.0 // mm behind the tower axis
	wallP := m.camDir.scale(-wallDist)
	right := m.cam.rows[0]
	half := s.BaseMM/2 + 22
	// kind says what the ray through (x, y) meets: 0 wall, 1 table, 2 base board
	kind := func(x, y float64) (int, vec3) {
		d := m.cam.ray(x, y)
		o := m.cam.pos
		if d.z < 0 {
			p := o.add(d.scale(-o.z / d.z))
			if p.sub(wallP).dot(m.camDir) > 0 {
				if math.Abs(p.x) < half && math.Abs(p.y) < half {
					return 2, p
				}
				return 1, p
			}
		}
		lam := wallP.sub(o).dot(m.camDir) / d.dot(m.camDir)
		return 0, o.add(d.scale(lam))
	}
	shade := func(k int, p vec3) [3]float32 {
		switch k {
		case 2:
			g := 1 + 0.06*fbm(seed+5, p.x/6, p.y/40, 3) + 0.05*math.Sin(p.x*0.9+3*fbm(seed+6, p.x/20, p.y/20, 2))
			return [3]float32{float32(150 * g), float32(176 * g), float32(196 * g)}
		case 1:
			g := 1 + 0.10*fbm(seed+1, p.x/80, p.y/9, 3) + 0.06*math.Sin(p.y*0.7+4*fbm(seed+2, p.x/50, p.y/30, 2))
			return [3]float32{float32(62 * g), float32(86 * g), float32(116 * g)}
		}
		u, v := p.dot(right), p.z
		g := 1 + 0.07*fbm(seed+3, u/45, v/45, 3) + 0.05*fbm(seed+4, u/4, v/4, 2) +
			0.02*math.Sin(u*2*math.Pi/5)*math.Sin(v*2*math.Pi/5)
		g *= 1 + 0.12*(v-150)/300 - 0.05*u/300
		return [3]float32{float32(126 * g), float32(116 * g), float32(104 * g)}
	}
	// one ray per pixel, four where the surface changes (edges of the table
	// and the base board), so edges are smooth
	kinds := make([]int8, W*H)
	for y := 0; y < H; y++ {
		for x := 0; x < W; x++ {
			k, _ := kind(float64(x), float64(y))
			kinds[y*W+x] = int8(k)
		}
	}
	cx, cy := float64(W-1)/2, float64(H-1)/2
	r2max := cx*cx + cy*cy
	for y := 0; y < H; y++ {
		for x := 0; x < W; x++ {
			k0 := kinds[y*W+x]
			edge := false
			for _, o := range [4][2]int{{-1, 0}, {1, 0}, {0, -1}, {0, 1}} {
				xx, yy := x+o[0], y+o[1]
				if xx >= 0 && yy >= 0 && xx < W && yy < H && kinds[yy*W+xx] != k0 {
					edge = true
				}
			}
			var acc [3]float32
			if edge {
				for _, o := range [4][2]float64{{-0.25, -0.25}, {0.25, -0.25}, {-0.25, 0.25}, {0.25, 0.25}} {
					c := shade(kind(float64(x)+o[0], float64(y)+o[1]))
					for k := range acc {
						acc[k] += c[k] / 4
					}
				}
			} else {
				acc = shade(kind(float64(x), float64(y)))
			}
			dx, dy := float64(x)-cx, float64(y)-cy
			vig := float32(1 - 0.18*(dx*dx+dy*dy)/r2max)
			i := (y*W + x) * 3
			for k := 0; k < 3; k++ {
				bg[i+k] = acc[k] * vig
			}
		}
	}
}
