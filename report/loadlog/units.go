package loadlog

import (
	"fmt"
	"strings"
)

// StandardGravity is g_n in m/s^2 (3rd CGPM, 1901; ISO 80000-3).
const StandardGravity = 9.80665

// NewtonsPerPoundForce is 1 lbf in newtons: 0.45359237 kg x g_n, exact by the
// 1959 definition of the international pound.
const NewtonsPerPoundForce = 4.4482216152605

// Load units accepted by Options.Unit and recognised in headers.
const (
	UnitGram     = "g"
	UnitKilogram = "kg"
	UnitNewton   = "N"
	UnitPound    = "lbf"
)

// Time units accepted by Options.TimeUnit.
const (
	TimeSeconds      = "s"
	TimeMilliseconds = "ms"
	TimeMicroseconds = "us"
	TimeIndex        = "index"
)

// GramsPer returns how many grams (of mass, under standard gravity) one unit
// of load is.
func GramsPer(unit string) (float64, error) {
	switch unit {
	case UnitGram:
		return 1, nil
	case UnitKilogram:
		return 1000, nil
	case UnitNewton:
		return 1000 / StandardGravity, nil
	case UnitPound:
		return NewtonsPerPoundForce * 1000 / StandardGravity, nil
	}
	return 0, fmt.Errorf("unknown load unit %q (want g, kg, N or lbf)", unit)
}

// NormalizeUnit maps the spellings of a load unit to g, kg, N or lbf; ok is
// false when s names no load unit.
func NormalizeUnit(s string) (unit string, ok bool) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "g", "gram", "grams", "gramme", "grammes", "gf":
		return UnitGram, true
	case "kg", "kilogram", "kilograms", "kgf", "kilo", "kilos":
		return UnitKilogram, true
	case "n", "newton", "newtons":
		return UnitNewton, true
	case "lbf", "lb", "lbs", "pound", "pounds":
		return UnitPound, true
	}
	return "", false
}

// NormalizeTimeUnit maps the spellings of a time unit to s, ms or index; ok
// is false when s names no time unit.
func NormalizeTimeUnit(s string) (unit string, ok bool) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "s", "sec", "secs", "second", "seconds":
		return TimeSeconds, true
	case "ms", "msec", "millis", "millisecond", "milliseconds":
		return TimeMilliseconds, true
	case "us", "µs", "usec", "micros", "microsecond", "microseconds":
		return TimeMicroseconds, true
	case "index", "sample", "samples", "idx", "n", "no", "count":
		return TimeIndex, true
	}
	return "", false
}
