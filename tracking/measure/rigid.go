package measure

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// FitTwist fits a level's rigid in-plane motion to the sideways positions
// of its points. For each point, q is its plan coordinate along the camera's
// right vector, e its plan coordinate toward the camera (both mm, at rest),
// and u the observed sideways position after the motion (mm, in the same
// frame as q: q plus the observed image-horizontal displacement times the
// scale). The model is u = k (cos(theta) q + sin(theta) e + a), where a is
// the sway of the level centre and k a scale change (motion toward the
// camera, scale error). With three or more points whose (q, e) are not on
// one line, k, theta and a are solved exactly by linear least squares on
// (k cos, k sin, a); otherwise k is held at 1 and theta is found by
// Gauss-Newton on the non-linear model from the small-angle solution.
// theta is in radians, counter-clockwise from above positive.
func FitTwist(q, e, u []float64) (theta, sway float64, ok bool) {
	n := len(q)
	if n < 2 || len(e) != n || len(u) != n {
		return math.NaN(), math.NaN(), false
	}
	mq, me, mu := mean(q), mean(e), mean(u)
	var gqq, gqe, gee float64
	for i := 0; i < n; i++ {
		dq, de := q[i]-mq, e[i]-me
		gqq += dq * dq
		gqe += dq * de
		gee += de * de
	}
	if gee == 0 {
		return math.NaN(), math.NaN(), false
	}
	// Smallest eigenvalue of the centred 2x2 Gram matrix, relative to the largest.
	tr, det := gqq+gee, gqq*gee-gqe*gqe
	disc := math.Sqrt(math.Max(0, tr*tr/4-det))
	lmin, lmax := tr/2-disc, tr/2+disc
	if n >= 3 && lmax > 0 && lmin/lmax > 0.02 {
		A := mat.NewDense(n, 3, nil)
		b := mat.NewVecDense(n, nil)
		for i := 0; i < n; i++ {
			A.Set(i, 0, q[i])
			A.Set(i, 1, e[i])
			A.Set(i, 2, 1)
			b.SetVec(i, u[i])
		}
		var x mat.VecDense
		if err := x.SolveVec(A, b); err == nil {
			C, S, a := x.AtVec(0), x.AtVec(1), x.AtVec(2)
			if k := math.Hypot(C, S); k > 0.5 && k < 2 {
				return math.Atan2(S, C), a / k, true
			}
		}
	}
	// k = 1: minimise sum (du - cos(t) dq - sin(t) de)^2 over t, where d
	// marks centred values; the sway follows from the means.
	dq := make([]float64, n)
	de := make([]float64, n)
	du := make([]float64, n)
	var num float64
	for i := 0; i < n; i++ {
		dq[i], de[i], du[i] = q[i]-mq, e[i]-me, u[i]-mu
		num += de[i] * (du[i] - dq[i])
	}
	t := math.Asin(math.Max(-1, math.Min(1, num/gee))) // small-angle start
	for it := 0; it < 50; it++ {
		ct, st := math.Cos(t), math.Sin(t)
		var jr, jj float64
		for i := 0; i < n; i++ {
			r := du[i] - ct*dq[i] - st*de[i]
			j := st*dq[i] - ct*de[i]
			jr += j * r
			jj += j * j
		}
		if jj == 0 {
			break
		}
		step := -jr / jj
		t += step
		if math.Abs(step) < 1e-13 {
			break
		}
	}
	return t, mu - math.Cos(t)*mq - math.Sin(t)*me, true
}
