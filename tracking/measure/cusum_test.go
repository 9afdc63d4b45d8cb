package measure

import (
	"math"
	"testing"
)

// Montgomery & Runger, Applied Statistics and Probability for Engineers,
// 3rd ed. (Wiley, 2002), Example 16-6 / Table 16-8: target 99, k = 1,
// h = 10; S_H(i) = max(0, x_i - 100 + S_H(i-1)),
// S_L(i) = max(0, 98 - x_i + S_L(i-1)); no alarm (values in
// /work/shared/REFERENCES.md, verified by reproduction).
func TestCUSUMMontgomeryExample16_6(t *testing.T) {
	x := []float64{102.0, 94.8, 98.3, 98.4, 102.0, 98.5, 99.0, 97.7, 100.0, 98.1, 101.3, 98.7, 101.1, 98.4, 97.0, 96.7, 100.3, 101.4, 97.2, 101.0}
	wantH := []float64{2.0, 0, 0, 0, 2.0, 0.5, 0, 0, 0, 0, 1.3, 0, 1.1, 0, 0, 0, 0.3, 1.7, 0, 1.0}
	wantL := []float64{0, 3.2, 2.9, 2.5, 0, 0, 0, 0.3, 0, 0, 0, 0, 0, 0, 1.0, 2.3, 0, 0, 0.8, 0}
	hi, lo, alarm := CUSUM{Target: 99, K: 1, H: 10}.Run(x)
	for i := range x {
		if math.Abs(hi[i]-wantH[i]) > 1e-9 || math.Abs(lo[i]-wantL[i]) > 1e-9 {
			t.Errorf("i=%d: S_H %.4f S_L %.4f, want %.1f %.1f", i+1, hi[i], lo[i], wantH[i], wantL[i])
		}
	}
	if alarm != -1 {
		t.Errorf("alarm at %d, want none", alarm)
	}
	if a, _ := (CUSUM{Target: 99, K: 1, H: 10}).Upper(x, 0); a != -1 {
		t.Errorf("upper alarm at %d, want none", a)
	}
}

// A step of 3 units after sample 10 raises the upper CUSUM; the change
// point is the start of the run, not the alarm (hand-worked: from sample
// 10 on, S_H grows by 3 - 1 = 2 per sample and passes h = 5 at the third).
func TestCUSUMChangePoint(t *testing.T) {
	x := make([]float64, 20)
	for i := range x {
		if i >= 10 {
			x[i] = 3
		}
	}
	alarm, start := CUSUM{Target: 0, K: 1, H: 5}.Upper(x, 0)
	if start != 10 || alarm != 12 {
		t.Errorf("start %d alarm %d, want 10 and 12", start, alarm)
	}
	x[11] = math.NaN() // a lost sample leaves the sum unchanged
	alarm, start = CUSUM{Target: 0, K: 1, H: 5}.Upper(x, 0)
	if start != 10 || alarm != 13 {
		t.Errorf("with NaN: start %d alarm %d, want 10 and 13", start, alarm)
	}
}
