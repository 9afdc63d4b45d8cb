package synth

import "math"

// canvas is a float BGR image the scene is drawn into; each pixel's value is
// the area average of the scene over the pixel's square (centre at integer
// coordinates), found by sub-sampling where a shape's edge crosses it.
type canvas struct {
	w, h int
	px   []float32

	cov []float32 // scratch: a member's coverage over its bounding box
	col []float32 // scratch: a member's colour over its bounding box
}

// barPt is a point of a member's centre line in the image: position, half
// width in pixels and material coordinate u in mm.
type barPt struct{ x, y, hw, u float64 }

const edgeBand = 0.75 // beyond this distance (px) from an edge a pixel is fully in or out

// drawBar draws a member as one or more textured polylines (two after a
// break). Coverage inside one member is the largest over its segments, so
// joints between segments neither double up nor leave gaps.
func (c *canvas) drawBar(lines [][]barPt, tex *barTexture, base [3]float32) {
	minX, minY, maxX, maxY := math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)
	for _, l := range lines {
		for _, p := range l {
			r := 2*p.hw + 2
			minX, maxX = math.Min(minX, p.x-r), math.Max(maxX, p.x+r)
			minY, maxY = math.Min(minY, p.y-r), math.Max(maxY, p.y+r)
		}
	}
	x0, y0 := clampInt(int(math.Floor(minX)), 0, c.w), clampInt(int(math.Floor(minY)), 0, c.h)
	x1, y1 := clampInt(int(math.Ceil(maxX))+1, 0, c.w), clampInt(int(math.Ceil(maxY))+1, 0, c.h)
	bw, bh := x1-x0, y1-y0
	if bw <= 0 || bh <= 0 {
		return
	}
	if cap(c.cov) < bw*bh {
		c.cov = make([]float32, bw*bh)
		c.col = make([]float32, 3*bw*bh)
	}
	cov, col := c.cov[:bw*bh], c.col[:3*bw*bh]
	clear(cov)
	for _, l := range lines {
		for j := 0; j+1 < len(l); j++ {
			a, b := l[j], l[j+1]
			ext0, ext1 := 0.0, 0.0
			if j > 0 {
				ext0 = a.hw
			}
			if j+2 < len(l) {
				ext1 = b.hw
			}
			c.segment(a, b, ext0, ext1, tex, base, x0, y0, bw, bh, cov, col)
		}
	}
	for yy := 0; yy < bh; yy++ {
		for xx := 0; xx < bw; xx++ {
			k := yy*bw + xx
			a := cov[k]
			if a <= 0 {
				continue
			}
			i := ((y0+yy)*c.w + x0 + xx) * 3
			for ch := 0; ch < 3; ch++ {
				c.px[i+ch] = a*col[3*k+ch] + (1-a)*c.px[i+ch]
			}
		}
	}
}

func (c *canvas) segment(a, b barPt, ext0, ext1 float64, tex *barTexture, base [3]float32, x0, y0, bw, bh int, cov, col []float32) {
	dx, dy := b.x-a.x, b.y-a.y
	L := math.Hypot(dx, dy)
	if L < 1e-9 {
		return
	}
	ex, ey := dx/L, dy/L
	nx, ny := -ey, ex
	r := math.Max(a.hw, b.hw) + math.Max(ext0, ext1) + 1.5
	sx0 := clampInt(int(math.Floor(math.Min(a.x, b.x)-r)), x0, x0+bw)
	sx1 := clampInt(int(math.Ceil(math.Max(a.x, b.x)+r))+1, x0, x0+bw)
	sy0 := clampInt(int(math.Floor(math.Min(a.y, b.y)-r)), y0, y0+bh)
	sy1 := clampInt(int(math.Ceil(math.Max(a.y, b.y)+r))+1, y0, y0+bh)
	margin := func(px, py float64) (float64, float64, float64) {
		rx, ry := px-a.x, py-a.y
		along := rx*ex + ry*ey
		across := rx*nx + ry*ny
		t := along / L
		if t < 0 {
			t = 0
		} else if t > 1 {
			t = 1
		}
		hw := a.hw + (b.hw-a.hw)*t
		if across < 0 {
			across = -across
		}
		m := hw - across
		if e := along + ext0; e < m {
			m = e
		}
		if e := L + ext1 - along; e < m {
			m = e
		}
		return m, along, (rx*nx + ry*ny) / hw
	}
	band := math.Max(a.hw, b.hw) + edgeBand + 0.01
	for py := sy0; py < sy1; py++ {
		// the run of pixels within reach of the segment's band on this row
		lo, hi := float64(sx0), float64(sx1-1)
		ry := float64(py) - a.y
		if math.Abs(nx) > 1e-9 {
			p, q := (band-ry*ny)/nx, (-band-ry*ny)/nx
			lo, hi = math.Max(lo, a.x+math.Min(p, q)), math.Min(hi, a.x+math.Max(p, q))
		} else if math.Abs(ry*ny) > band {
			continue
		}
		if math.Abs(ex) > 1e-9 {
			p, q := (-ext0-edgeBand-ry*ey)/ex, (L+ext1+edgeBand-ry*ey)/ex
			lo, hi = math.Max(lo, a.x+math.Min(p, q)), math.Min(hi, a.x+math.Max(p, q))
		}
		if lo > hi {
			continue
		}
		for px := int(math.Floor(lo)); px <= int(math.Ceil(hi)); px++ {
			if px < sx0 || px >= sx1 {
				continue
			}
			m, along, v := margin(float64(px), float64(py))
			if m <= -edgeBand {
				continue
			}
			var cv float32 = 1
			if m < edgeBand {
				n := 0
				for sy := 0; sy < 4; sy++ {
					for sx := 0; sx < 4; sx++ {
						if mm, _, _ := margin(float64(px)+(float64(sx)+0.5)/4-0.5, float64(py)+(float64(sy)+0.5)/4-0.5); mm > 0 {
							n++
						}
					}
				}
				cv = float32(n) / 16
			}
			k := (py-y0)*bw + px - x0
			if cv <= cov[k] {
				continue
			}
			cov[k] = cv
			v = math.Max(-1, math.Min(1, v))
			u := a.u + (b.u-a.u)*along/L
			shade := tex.at(u, v) * float32(1-0.10*v-0.14*v*v)
			for ch := 0; ch < 3; ch++ {
				col[3*k+ch] = base[ch] * shade
			}
		}
	}
}

// drawDisc draws a flat disc of radius r px centred at (x, y) with exact
// area coverage (16 x 16 sub-samples on edge pixels).
func (c *canvas) drawDisc(x, y, r float64, colour [3]float32) {
	x0, x1 := clampInt(int(math.Floor(x-r-1)), 0, c.w), clampInt(int(math.Ceil(x+r+1))+1, 0, c.w)
	y0, y1 := clampInt(int(math.Floor(y-r-1)), 0, c.h), clampInt(int(math.Ceil(y+r+1))+1, 0, c.h)
	r2 := r * r
	for py := y0; py < y1; py++ {
		for px := x0; px < x1; px++ {
			d := math.Hypot(float64(px)-x, float64(py)-y)
			if d >= r+edgeBand {
				continue
			}
			var a float32 = 1
			if d > r-edgeBand {
				n := 0
				for sy := 0; sy < 16; sy++ {
					yy := float64(py) + (float64(sy)+0.5)/16 - 0.5 - y
					for sx := 0; sx < 16; sx++ {
						xx := float64(px) + (float64(sx)+0.5)/16 - 0.5 - x
						if xx*xx+yy*yy < r2 {
							n++
						}
					}
				}
				a = float32(n) / 256
			}
			i := (py*c.w + px) * 3
			for ch := 0; ch < 3; ch++ {
				c.px[i+ch] = a*colour[ch] + (1-a)*c.px[i+ch]
			}
		}
	}
}

// drawFace draws the planar rectangle p0 + a*U + b*V (0 <= a, b <= 1; U and V
// perpendicular) seen through cam, coloured by colour(u mm, v mm).
func (c *canvas) drawFace(cam *camera, p0, U, V vec3, colour func(u, v float64) [3]float32) {
	corners := [4]vec3{p0, p0.add(U), p0.add(U).add(V), p0.add(V)}
	minX, minY, maxX, maxY := math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)
	for _, q := range corners {
		x, y, d := cam.project(q)
		if d <= 1 {
			return
		}
		minX, maxX = math.Min(minX, x), math.Max(maxX, x)
		minY, maxY = math.Min(minY, y), math.Max(maxY, y)
	}
	x0, x1 := clampInt(int(math.Floor(minX))-1, 0, c.w), clampInt(int(math.Ceil(maxX))+2, 0, c.w)
	y0, y1 := clampInt(int(math.Floor(minY))-1, 0, c.h), clampInt(int(math.Ceil(maxY))+2, 0, c.h)
	n := U.cross(V)
	lu, lv := U.norm(), V.norm()
	uu, vv := U.scale(1/(lu*lu)), V.scale(1/(lv*lv))
	num := p0.sub(cam.pos).dot(n)
	hit := func(px, py float64) (a, b, marginPX float64, ok bool) {
		d := cam.ray(px, py)
		den := d.dot(n)
		if math.Abs(den) < 1e-12 {
			return 0, 0, 0, false
		}
		lam := num / den
		q := cam.pos.add(d.scale(lam)).sub(p0)
		a, b = q.dot(uu), q.dot(vv)
		mm := math.Min(math.Min(a*lu, (1-a)*lu), math.Min(b*lv, (1-b)*lv))
		depth := lam * d.dot(cam.rows[2])
		return a, b, mm * cam.f / depth, true
	}
	for py := y0; py < y1; py++ {
		for px := x0; px < x1; px++ {
			a, b, m, ok := hit(float64(px), float64(py))
			if !ok || m <= -edgeBand {
				continue
			}
			var cv float32 = 1
			if m < edgeBand {
				k := 0
				for sy := 0; sy < 4; sy++ {
					for sx := 0; sx < 4; sx++ {
						if _, _, mm, ok := hit(float64(px)+(float64(sx)+0.5)/4-0.5, float64(py)+(float64(sy)+0.5)/4-0.5); ok && mm > 0 {
							k++
						}
					}
				}
				cv = float32(k) / 16
			}
			col := colour(a*lu, b*lv)
			i := (py*c.w + px) * 3
			for ch := 0; ch < 3; ch++ {
				c.px[i+ch] = cv*col[ch] + (1-cv)*c.px[i+ch]
			}
		}
	}
}

func clampInt(v, lo, hi int) int {
	if v < lo {
		return lo
	}
	if v > hi {
		return hi
	}
	return v
}
