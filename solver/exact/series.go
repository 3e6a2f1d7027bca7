package exact

import (
	"fmt"
	"math"
)

const (
	// negligibleExponent ends a series: once λn²·Fo exceeds it, the term is
	// below 2·e⁻⁴⁵ ≈ 6e-20 (|Cn| ≤ 2 and the spatial and energy factors are
	// at most 1 in magnitude), and the later terms fall faster than
	// geometrically.
	negligibleExponent = 45
	// maxSeriesTerms caps a series; it reaches Fo ≈ 1e-8.
	maxSeriesTerms = 20000
	// wallShortTimeFo is the Fourier number below which the plane wall uses
	// two independent semi-infinite solids, one per face, instead of its
	// series. What that neglects is of order erfc(1/√Fo), below 1e-4000
	// here, so the two forms agree to rounding; the short-time form needs
	// no terms at all, which the product solutions with a very long side
	// rely on.
	wallShortTimeFo = 1e-4
)

// Theta returns the dimensionless temperature θ = (T − T∞)/(Ti − T∞) of
// shape s, initially at the uniform temperature Ti, after its surface meets
// a fluid at T∞ with Biot number bi = hL/k (+Inf for a surface held at T∞),
// at Fourier number fo = αt/L² and position xi = x/L or r/ro in [0, 1]. L is
// the half-thickness of the wall and the outer radius of the cylinder and
// the sphere. fo = 0 is the initial state, θ = 1.
//
// The series is Σ Cn exp(−λn²·Fo)·f(λn·xi) with f = cos, J0 or sin x/x,
// summed until its terms are negligible; it returns ErrNotConverged if that
// takes more than 20000 terms (Fo below about 1e-8 for the cylinder and the
// sphere; the wall has a short-time form without that limit).
func Theta(s Shape, bi, fo, xi float64) (float64, error) {
	var c inputChecks
	c.shape(s)
	c.positiveOrInfinite("bi", bi)
	c.nonNegative("fo", fo)
	c.within("xi", xi, 0, 1)
	if err := c.err(); err != nil {
		return 0, err
	}
	switch {
	case fo == 0:
		return 1, nil
	case s == PlaneWall && fo < wallShortTimeFo:
		return wallShortTimeTheta(bi, fo, xi), nil
	}
	return sumSeries(s, bi, fo, func(l float64) float64 { return s.mode(l * xi) })
}

// EnergyFraction returns Q/Qmax for shape s at Biot number bi and Fourier
// number fo: the heat that has left (or entered) the solid since the start
// as a fraction of the most it can exchange, ρcV(Ti − T∞). It is
// 1 − Σ Cn exp(−λn²·Fo)·wn with wn the volume average of the n-th
// eigenfunction: sin λ/λ, 2J1(λ)/λ or 3(sin λ − λ cos λ)/λ³.
func EnergyFraction(s Shape, bi, fo float64) (float64, error) {
	var c inputChecks
	c.shape(s)
	c.positiveOrInfinite("bi", bi)
	c.nonNegative("fo", fo)
	if err := c.err(); err != nil {
		return 0, err
	}
	switch {
	case fo == 0:
		return 0, nil
	case s == PlaneWall && fo < wallShortTimeFo:
		return wallShortTimeEnergy(bi, fo), nil
	}
	remaining, err := sumSeries(s, bi, fo, s.energyWeight)
	if err != nil {
		return 0, err
	}
	return 1 - remaining, nil
}

// OneTerm returns the first eigenvalue λ1 and coefficient C1 of shape s at
// Biot number bi, which give θ ≈ C1 exp(−λ1²·Fo)·f(λ1·xi) once Fo > 0.2.
func OneTerm(s Shape, bi float64) (lambda1, c1 float64, err error) {
	var c inputChecks
	c.shape(s)
	c.positiveOrInfinite("bi", bi)
	if err := c.err(); err != nil {
		return 0, 0, err
	}
	lambda1, err = s.eigenvalue(bi, 1)
	if err != nil {
		return 0, 0, err
	}
	return lambda1, s.coefficient(lambda1), nil
}

// sumSeries returns Σ Cn exp(−λn²·fo)·factor(λn) for fo > 0.
func sumSeries(s Shape, bi, fo float64, factor func(lambda float64) float64) (float64, error) {
	sum := 0.0
	for n := 1; n <= maxSeriesTerms; n++ {
		l, err := s.eigenvalue(bi, n)
		if err != nil {
			return 0, err
		}
		sum += s.coefficient(l) * math.Exp(-l*l*fo) * factor(l)
		if l*l*fo > negligibleExponent {
			return sum, nil
		}
	}
	return 0, fmt.Errorf("%w: series for the %v at Bi = %g, Fo = %g needs more than %d terms",
		ErrNotConverged, s, bi, fo, maxSeriesTerms)
}
