package measure

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Pinhole is a 3x4 projection matrix from tower coordinates (plan x, y and
// height z, mm) to image pixels, fitted from the marked points by the direct
// linear transform with Hartley's normalisation.
type Pinhole struct {
	P [3][4]float64
	// RMS is the reprojection error of the points it was fitted to, px.
	RMS float64
}

// Project maps a tower point to the image; ok is false behind the camera.
func (c *Pinhole) Project(x, y, z float64) (u, v float64, ok bool) {
	p := &c.P
	w := p[2][0]*x + p[2][1]*y + p[2][2]*z + p[2][3]
	if w == 0 {
		return math.NaN(), math.NaN(), false
	}
	u = (p[0][0]*x + p[0][1]*y + p[0][2]*z + p[0][3]) / w
	v = (p[1][0]*x + p[1][1]*y + p[1][2]*z + p[1][3]) / w
	return u, v, true
}

// Azimuth returns the camera azimuth in degrees (the direction from the tower
// axis toward the camera centre, counter-clockwise seen from above from face
// A-B's outward normal, as in the marks file); ok is false for a nil camera
// or one whose centre cannot be found or sits on the tower axis.
func (c *Pinhole) Azimuth() (deg float64, ok bool) {
	if c == nil {
		return 0, false
	}
	// The camera centre C solves M C = -p4 (M the left 3x3 of P): Cramer's rule.
	p := &c.P
	det3 := func(a, b, d [3]float64) float64 {
		return a[0]*(b[1]*d[2]-b[2]*d[1]) - b[0]*(a[1]*d[2]-a[2]*d[1]) + d[0]*(a[1]*b[2]-a[2]*b[1])
	}
	col := func(j int) [3]float64 { return [3]float64{p[0][j], p[1][j], p[2][j]} }
	rhs := [3]float64{-p[0][3], -p[1][3], -p[2][3]}
	d := det3(col(0), col(1), col(2))
	if d == 0 || math.IsNaN(d) {
		return 0, false
	}
	cx := det3(rhs, col(1), col(2)) / d
	cy := det3(col(0), rhs, col(2)) / d
	if math.Hypot(cx, cy) < 1 || math.IsNaN(cx+cy) {
		return 0, false
	}
	// Toward the camera is (sin phi, -cos phi) in plan.
	return math.Atan2(cx, -cy) * 180 / math.Pi, true
}

// FitPinhole fits a projection matrix to at least six points that are not
// all in one plane: xyz are tower coordinates (mm), uv image positions (px).
func FitPinhole(xyz [][3]float64, uv [][2]float64) (*Pinhole, error) {
	n := len(xyz)
	if n < 6 || len(uv) != n {
		return nil, fmt.Errorf("camera fit needs at least 6 points with known 3D positions, have %d", n)
	}
	// Points must span 3D: smallest principal spread well above zero.
	var c3 [3]float64
	for _, p := range xyz {
		for k := 0; k < 3; k++ {
			c3[k] += p[k] / float64(n)
		}
	}
	cov := mat.NewSymDense(3, nil)
	for _, p := range xyz {
		for a := 0; a < 3; a++ {
			for b := a; b < 3; b++ {
				cov.SetSym(a, b, cov.At(a, b)+(p[a]-c3[a])*(p[b]-c3[b])/float64(n))
			}
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(cov, false) {
		return nil, errors.New("camera fit: eigen decomposition failed")
	}
	ev := eig.Values(nil)
	if ev[0] < 1e-4*ev[2] || ev[0] <= 0 {
		return nil, errors.New("camera fit: the marked points lie in one plane (mark points on two faces)")
	}
	var s3 float64
	for _, p := range xyz {
		s3 += math.Sqrt(sq(p[0]-c3[0])+sq(p[1]-c3[1])+sq(p[2]-c3[2])) / float64(n)
	}
	s3 = math.Sqrt(3) / s3
	var c2 [2]float64
	for _, q := range uv {
		c2[0] += q[0] / float64(n)
		c2[1] += q[1] / float64(n)
	}
	var s2 float64
	for _, q := range uv {
		s2 += math.Hypot(q[0]-c2[0], q[1]-c2[1]) / float64(n)
	}
	if s2 == 0 {
		return nil, errors.New("camera fit: all points at one image position")
	}
	s2 = math.Sqrt(2) / s2
	A := mat.NewDense(2*n, 12, nil)
	for i := 0; i < n; i++ {
		X := [4]float64{(xyz[i][0] - c3[0]) * s3, (xyz[i][1] - c3[1]) * s3, (xyz[i][2] - c3[2]) * s3, 1}
		u := (uv[i][0] - c2[0]) * s2
		v := (uv[i][1] - c2[1]) * s2
		for k := 0; k < 4; k++ {
			A.Set(2*i, k, X[k])
			A.Set(2*i, 8+k, -u*X[k])
			A.Set(2*i+1, 4+k, X[k])
			A.Set(2*i+1, 8+k, -v*X[k])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(A, mat.SVDFullV) {
		return nil, errors.New("camera fit: SVD failed")
	}
	var V mat.Dense
	svd.VTo(&V)
	var Pn [3][4]float64
	for r := 0; r < 3; r++ {
		for k := 0; k < 4; k++ {
			Pn[r][k] = V.At(4*r+k, 11)
		}
	}
	// Denormalise: P = T2^-1 Pn T3.
	T3 := [4][4]float64{{s3, 0, 0, -s3 * c3[0]}, {0, s3, 0, -s3 * c3[1]}, {0, 0, s3, -s3 * c3[2]}, {0, 0, 0, 1}}
	T2i := [3][3]float64{{1 / s2, 0, c2[0]}, {0, 1 / s2, c2[1]}, {0, 0, 1}}
	var PT [3][4]float64
	for r := 0; r < 3; r++ {
		for k := 0; k < 4; k++ {
			for j := 0; j < 4; j++ {
				PT[r][k] += Pn[r][j] * T3[j][k]
			}
		}
	}
	cam := &Pinhole{}
	for r := 0; r < 3; r++ {
		for k := 0; k < 4; k++ {
			for j := 0; j < 3; j++ {
				cam.P[r][k] += T2i[r][j] * PT[j][k]
			}
		}
	}
	var ss float64
	for i := 0; i < n; i++ {
		u, v, ok := cam.Project(xyz[i][0], xyz[i][1], xyz[i][2])
		if !ok {
			return nil, errors.New("camera fit: a point projects to infinity")
		}
		ss += sq(u-uv[i][0]) + sq(v-uv[i][1])
	}
	cam.RMS = math.Sqrt(ss / float64(n))
	// All points in front of the camera (same sign of w).
	sign := 0.0
	for _, p := range xyz {
		w := cam.P[2][0]*p[0] + cam.P[2][1]*p[1] + cam.P[2][2]*p[2] + cam.P[2][3]
		if sign == 0 {
			sign = math.Copysign(1, w)
		} else if w*sign <= 0 {
			return nil, errors.New("camera fit: points on both sides of the camera")
		}
	}
	return cam, nil
}

// levelPose fits one level's twist, plan displacement and settlement to the
// observed displacements of its points through a fitted pinhole camera.
// For point i at rest position xyz[i] (mm) with reference image position
// ref[i] and observed position obs[i] (px), the model is
// obs = ref + Project(moved) - Project(rest), which cancels fixed errors
// of the camera fit. Motion toward the camera is weakly observable, so it
// carries a soft prior: a departure of priorMM from prior0 (mm toward the
// camera) costs one pixel. Returns twist (rad), plan displacement (mm) and
// settlement (mm, down).
func (c *Pinhole) levelPose(xyz [][3]float64, ref, obs [][2]float64, toward [2]float64, x0 [4]float64, prior0, priorMM float64, fitTwist bool) (x [4]float64, ok bool) {
	n := len(xyz)
	base := make([][2]float64, n)
	for i := range xyz {
		u, v, okp := c.Project(xyz[i][0], xyz[i][1], xyz[i][2])
		if !okp {
			return x, false
		}
		base[i] = [2]float64{u, v}
	}
	resid := func(p [4]float64, out []float64) bool {
		ct, st := math.Cos(p[0]), math.Sin(p[0])
		for i := range xyz {
			X := ct*xyz[i][0] - st*xyz[i][1] + p[1]
			Y := st*xyz[i][0] + ct*xyz[i][1] + p[2]
			u, v, okp := c.Project(X, Y, xyz[i][2]-p[3])
			if !okp {
				return false
			}
			out[2*i] = ref[i][0] + u - base[i][0] - obs[i][0]
			out[2*i+1] = ref[i][1] + v - base[i][1] - obs[i][1]
		}
		out[2*n] = (p[1]*toward[0] + p[2]*toward[1] - prior0) / priorMM
		out[2*n+1] = 0
		if !fitTwist {
			out[2*n+1] = p[0] * 1e3
		}
		return true
	}
	m := 2*n + 2
	r := make([]float64, m)
	rp := make([]float64, m)
	x = x0
	lambda := 1e-3
	if !resid(x, r) {
		return x, false
	}
	cost := dot(r, r)
	J := make([][4]float64, m)
	steps := [4]float64{1e-6, 1e-4, 1e-4, 1e-4}
	for it := 0; it < 30; it++ {
		for k := 0; k < 4; k++ {
			xp := x
			xp[k] += steps[k]
			if !resid(xp, rp) {
				return x, false
			}
			for i := 0; i < m; i++ {
				J[i][k] = (rp[i] - r[i]) / steps[k]
			}
		}
		var JtJ [4][4]float64
		var g [4]float64
		for i := 0; i < m; i++ {
			for a := 0; a < 4; a++ {
				g[a] += J[i][a] * r[i]
				for b := 0; b <= a; b++ {
					JtJ[a][b] += J[i][a] * J[i][b]
				}
			}
		}
		improved := false
		for try := 0; try < 10; try++ {
			A := JtJ
			for k := 0; k < 4; k++ {
				A[k][k] = A[k][k]*(1+lambda) + 1e-12
			}
			dx, ok := solve4(A, g)
			if !ok {
				lambda *= 10
				continue
			}
			xn := x
			for k := 0; k < 4; k++ {
				xn[k] -= dx[k]
			}
			if resid(xn, rp) {
				if cn := dot(rp, rp); cn <= cost {
					small := math.Abs(dx[0]) < 1e-10 && math.Abs(dx[1]) < 1e-7 && math.Abs(dx[2]) < 1e-7 && math.Abs(dx[3]) < 1e-7
					x, cost = xn, cn
					copy(r, rp)
					lambda = math.Max(lambda/10, 1e-9)
					improved = true
					if small {
						return x, true
					}
					break
				}
			}
			lambda *= 10
		}
		if !improved {
			break
		}
	}
	return x, true
}

// solve4 solves A x = b for a symmetric positive definite 4x4 matrix given
// by its lower triangle, by Cholesky factorisation (Golub & Van Loan,
// Matrix Computations, 4th ed., Algorithm 4.2.1). It reports false when A is
// not positive definite or so ill-conditioned that a pivot falls below
// 1e-16 of the largest diagonal entry (the condition limit gonum's solvers
// also use).
func solve4(A [4][4]float64, b [4]float64) (x [4]float64, ok bool) {
	var L [4][4]float64
	dmax := 0.0
	for k := 0; k < 4; k++ {
		dmax = math.Max(dmax, math.Abs(A[k][k]))
	}
	for j := 0; j < 4; j++ {
		d := A[j][j]
		for k := 0; k < j; k++ {
			d -= L[j][k] * L[j][k]
		}
		if !(d > 1e-16*dmax) {
			return x, false
		}
		L[j][j] = math.Sqrt(d)
		for i := j + 1; i < 4; i++ {
			s := A[i][j]
			for k := 0; k < j; k++ {
				s -= L[i][k] * L[j][k]
			}
			L[i][j] = s / L[j][j]
		}
	}
	var y [4]float64
	for i := 0; i < 4; i++ {
		s := b[i]
		for k := 0; k < i; k++ {
			s -= L[i][k] * y[k]
		}
		y[i] = s / L[i][i]
	}
	for i := 3; i >= 0; i-- {
		s := y[i]
		for k := i + 1; k < 4; k++ {
			s -= L[k][i] * x[k]
		}
		x[i] = s / L[i][i]
	}
	return x, true
}

func dot(a, b []float64) float64 {
	s := 0.0
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

// levelScale returns the scale, mm per image px along the image's x axis,
// that the camera gives for plan offsets along r (the camera's right
// vector) at the height of the points ps, around their plan centre; false
// without a camera or heights, or when the projection fails.
func (p *Pinhole) levelScale(ps []*point, r [2]float64) (float64, bool) {
	if p == nil || len(ps) == 0 {
		return 0, false
	}
	var cx, cy, h float64
	for _, q := range ps {
		if !q.hasPlan || !q.hasH {
			return 0, false
		}
		cx += q.plan[0] / float64(len(ps))
		cy += q.plan[1] / float64(len(ps))
		h += q.height / float64(len(ps))
	}
	const d = 10.0 // mm either side
	u1, _, ok1 := p.Project(cx-d*r[0], cy-d*r[1], h)
	u2, _, ok2 := p.Project(cx+d*r[0], cy+d*r[1], h)
	if !ok1 || !ok2 || u2 == u1 {
		return 0, false
	}
	return 2 * d / math.Abs(u2-u1), true
}
