package synth

import "math"

// vec3 is a point or direction in tower coordinates (mm): x along face A-B,
// y from face A-B toward C-D, z up.
type vec3 struct{ x, y, z float64 }

func (a vec3) add(b vec3) vec3        { return vec3{a.x + b.x, a.y + b.y, a.z + b.z} }
func (a vec3) sub(b vec3) vec3        { return vec3{a.x - b.x, a.y - b.y, a.z - b.z} }
func (a vec3) scale(k float64) vec3   { return vec3{a.x * k, a.y * k, a.z * k} }
func (a vec3) dot(b vec3) float64     { return a.x*b.x + a.y*b.y + a.z*b.z }
func (a vec3) norm() float64          { return math.Sqrt(a.dot(a)) }
func lerp3(a, b vec3, t float64) vec3 { return a.add(b.sub(a).scale(t)) }

func (a vec3) cross(b vec3) vec3 {
	return vec3{a.y*b.z - a.z*b.y, a.z*b.x - a.x*b.z, a.x*b.y - a.y*b.x}
}

func (a vec3) unit() vec3 {
	n := a.norm()
	if n == 0 {
		return a
	}
	return a.scale(1 / n)
}

// rotate turns p about the unit axis k through the origin by angle a
// (radians, right-handed), by Rodrigues' rotation formula.
func rotate(p, k vec3, a float64) vec3 {
	c, s := math.Cos(a), math.Sin(a)
	return p.scale(c).add(k.cross(p).scale(s)).add(k.scale(k.dot(p) * (1 - c)))
}

// rotZ turns p about the vertical axis through the origin, counter-clockwise
// seen from above.
func rotZ(p vec3, a float64) vec3 {
	c, s := math.Cos(a), math.Sin(a)
	return vec3{c*p.x - s*p.y, s*p.x + c*p.y, p.z}
}

// camera is a pinhole camera without distortion. Its rows are the camera
// axes in tower coordinates (OpenCV convention: x right, y down, z forward);
// pixel centres lie at integer coordinates.
type camera struct {
	f, cx, cy float64
	k1        float64 // radial distortion, OpenCV's model
	rows      [3]vec3
	pos       vec3
}

func newCamera(s Scenario, target vec3) camera {
	az := s.AzimuthDeg * math.Pi / 180
	toward := vec3{math.Sin(az), -math.Cos(az), 0}
	pos := toward.scale(s.DistanceMM).add(vec3{0, 0, s.CameraHeightMM})
	fwd := target.sub(pos).unit()
	right := fwd.cross(vec3{0, 0, 1}).unit()
	down := fwd.cross(right)
	return camera{
		k1:   s.K1,
		f:    s.FocalPX,
		cx:   float64(s.Width-1) / 2,
		cy:   float64(s.Height-1) / 2,
		rows: [3]vec3{right, down, fwd},
		pos:  pos,
	}
}

// project returns the image position of p in pixels and its depth along the
// optical axis in mm.
func (c *camera) project(p vec3) (x, y, depth float64) {
	d := p.sub(c.pos)
	xc, yc, zc := c.rows[0].dot(d), c.rows[1].dot(d), c.rows[2].dot(d)
	xn, yn := xc/zc, yc/zc
	if c.k1 != 0 {
		k := 1 + c.k1*(xn*xn+yn*yn)
		xn, yn = xn*k, yn*k
	}
	return c.f*xn + c.cx, c.f*yn + c.cy, zc
}

// ray returns the unit direction of the ray through pixel (x, y).
func (c *camera) ray(x, y float64) vec3 {
	a, b := (x-c.cx)/c.f, (y-c.cy)/c.f
	if c.k1 != 0 {
		// undo the radial distortion by fixed-point iteration
		ua, ub := a, b
		for i := 0; i < 20; i++ {
			k := 1 + c.k1*(ua*ua+ub*ub)
			ua, ub = a/k, b/k
		}
		a, b = ua, ub
	}
	return c.rows[0].scale(a).add(c.rows[1].scale(b)).add(c.rows[2]).unit()
}

// rotation returns the world-to-camera rotation matrix, row-major.
func (c *camera) rotation() [3][3]float64 {
	var r [3][3]float64
	for i, row := range c.rows {
		r[i] = [3]float64{row.x, row.y, row.z}
	}
	return r
}

// tvec returns the translation of the world-to-camera transform, -R * pos.
func (c *camera) tvec() [3]float64 {
	return [3]float64{-c.rows[0].dot(c.pos), -c.rows[1].dot(c.pos), -c.rows[2].dot(c.pos)}
}

// rvec returns the rotation as a Rodrigues vector (axis times angle), as
// OpenCV's projectPoints takes it. It goes through a unit quaternion
// (Shepperd's method), which stays accurate for angles near 180 degrees.
func (c *camera) rvec() [3]float64 {
	r := c.rotation()
	tr := r[0][0] + r[1][1] + r[2][2]
	var w, x, y, z float64
	switch {
	case tr > 0:
		s := math.Sqrt(tr+1) * 2
		w, x, y, z = s/4, (r[2][1]-r[1][2])/s, (r[0][2]-r[2][0])/s, (r[1][0]-r[0][1])/s
	case r[0][0] > r[1][1] && r[0][0] > r[2][2]:
		s := math.Sqrt(1+r[0][0]-r[1][1]-r[2][2]) * 2
		w, x, y, z = (r[2][1]-r[1][2])/s, s/4, (r[0][1]+r[1][0])/s, (r[0][2]+r[2][0])/s
	case r[1][1] > r[2][2]:
		s := math.Sqrt(1+r[1][1]-r[0][0]-r[2][2]) * 2
		w, x, y, z = (r[0][2]-r[2][0])/s, (r[0][1]+r[1][0])/s, s/4, (r[1][2]+r[2][1])/s
	default:
		s := math.Sqrt(1+r[2][2]-r[0][0]-r[1][1]) * 2
		w, x, y, z = (r[1][0]-r[0][1])/s, (r[0][2]+r[2][0])/s, (r[1][2]+r[2][1])/s, s/4
	}
	if w < 0 {
		w, x, y, z = -w, -x, -y, -z
	}
	sn := math.Sqrt(x*x + y*y + z*z)
	if sn < 1e-15 {
		return [3]float64{}
	}
	angle := 2 * math.Atan2(sn, w)
	return [3]float64{x / sn * angle, y / sn * angle, z / sn * angle}
}
