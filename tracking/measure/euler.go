package measure

import "math"

// Euler returns the elastic critical (buckling) load of a column,
// P = pi^2 E I / (K L)^2, in the units the inputs imply (E in Pa, I in m^4,
// L in m gives newtons; E in N/mm^2, I in mm^4, L in mm also gives newtons).
// K is the effective length factor. It returns NaN for non-positive inputs.
func Euler(E, I, K, L float64) float64 {
	if !(E > 0) || !(I > 0) || !(K > 0) || !(L > 0) {
		return math.NaN()
	}
	kl := K * L
	return math.Pi * math.Pi * E * I / (kl * kl)
}

// EffectiveLength returns K L, the length of one buckled half-wave.
func EffectiveLength(K, L float64) float64 { return K * L }

// LoadRatio returns how many times larger the Euler load is when the
// effective length changes from before to after: (before / after)^2.
func LoadRatio(before, after float64) float64 {
	if !(before > 0) || !(after > 0) {
		return math.NaN()
	}
	r := before / after
	return r * r
}

// KFromHalfWave returns the effective length factor implied by a buckled
// half-wavelength over a member of length L.
func KFromHalfWave(halfWave, L float64) float64 {
	if !(L > 0) || !(halfWave > 0) {
		return math.NaN()
	}
	return halfWave / L
}

// SecondMomentRect returns the least second moment of area of a b x h
// rectangle, min(b h^3, h b^3) / 12.
func SecondMomentRect(b, h float64) float64 {
	return math.Min(b*h*h*h, h*b*b*b) / 12
}

// SecondMomentCircle returns the second moment of area of a solid circle of
// diameter d, pi d^4 / 64.
func SecondMomentCircle(d float64) float64 { return math.Pi * d * d * d * d / 64 }

// End conditions of a column, for EndK.
const (
	EndsFixedFixed  = "fixed-fixed"
	EndsFixedPinned = "fixed-pinned"
	EndsFixedSway   = "fixed-sway" // both ends fixed in rotation, one free to translate
	EndsPinnedPin   = "pinned-pinned"
	EndsFixedFree   = "fixed-free"
	EndsPinnedSway  = "pinned-sway" // one end fixed in rotation free to translate, the other pinned
)

// EndK returns the theoretical and recommended design effective length
// factors for idealised end conditions (AISC 360-22 Commentary Table
// C-A-7.1); ok is false for an unknown name.
func EndK(ends string) (theoretical, recommended float64, ok bool) {
	switch ends {
	case EndsFixedFixed:
		return 0.5, 0.65, true
	case EndsFixedPinned:
		return 0.7, 0.80, true
	case EndsFixedSway:
		return 1.0, 1.2, true
	case EndsPinnedPin:
		return 1.0, 1.0, true
	case EndsFixedFree:
		return 2.0, 2.1, true
	case EndsPinnedSway:
		return 2.0, 2.0, true
	}
	return 0, 0, false
}
