package measure

import (
	"math"
	"math/rand"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestSolve4AgainstGonum checks the 4x4 Cholesky solve of the pose fit
// against gonum's general LU solver (gonum.org/v1/gonum/mat, a reference
// library) on random symmetric positive definite systems, well and badly
// conditioned, and that a singular matrix is refused.
func TestSolve4AgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewSource(7))
	for trial := 0; trial < 200; trial++ {
		// A = J^T J + d I for a random 10x4 J, scaled per column like the
		// pose fit's (radians vs millimetres).
		scale := [4]float64{1e3, 1, 1, 1e-2 * float64(1+trial%5)}
		J := mat.NewDense(10, 4, nil)
		for i := 0; i < 10; i++ {
			for k := 0; k < 4; k++ {
				J.Set(i, k, rng.NormFloat64()*scale[k])
			}
		}
		var A mat.Dense
		A.Mul(J.T(), J)
		var a [4][4]float64
		var b [4]float64
		for i := 0; i < 4; i++ {
			b[i] = rng.NormFloat64()
			for k := 0; k < 4; k++ {
				a[i][k] = A.At(i, k)
			}
		}
		x, ok := solve4(a, b)
		if !ok {
			t.Fatalf("trial %d: refused a positive definite matrix", trial)
		}
		var want mat.VecDense
		if err := want.SolveVec(&A, mat.NewVecDense(4, b[:])); err != nil {
			t.Fatalf("trial %d: gonum: %v", trial, err)
		}
		for k := 0; k < 4; k++ {
			if d := math.Abs(x[k] - want.AtVec(k)); d > 1e-9*math.Max(1, math.Abs(want.AtVec(k))) {
				t.Errorf("trial %d: x[%d] = %.12g, gonum %.12g", trial, k, x[k], want.AtVec(k))
			}
		}
	}
	var sing [4][4]float64 // rank 1: every row the same
	for i := 0; i < 4; i++ {
		for k := 0; k < 4; k++ {
			sing[i][k] = 1
		}
	}
	if _, ok := solve4(sing, [4]float64{1, 2, 3, 4}); ok {
		t.Error("a singular matrix was solved")
	}
}
