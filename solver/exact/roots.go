package exact

import (
	"fmt"
	"math"
)

// maxRootIterations caps Brent's method; it needs a few dozen steps even in
// the worst case for a bracket of double-precision numbers.
const maxRootIterations = 300

// findRoot returns the root of f inside [a, b], where f(a) and f(b) differ
// in sign, to about two units in the last place. It is Brent's method:
// inverse quadratic interpolation or secant steps, replaced by bisection
// whenever they would leave the bracket or shrink it too slowly, so it
// converges fast near a simple root and can never escape.
func findRoot(f func(float64) float64, a, b float64) (float64, error) {
	fa, fb := f(a), f(b)
	switch {
	case fa == 0:
		return a, nil
	case fb == 0:
		return b, nil
	case math.IsNaN(fa) || math.IsNaN(fb) || (fa > 0) == (fb > 0):
		return 0, fmt.Errorf("%w: no sign change on [%g, %g] (f = %g, %g)", ErrNotConverged, a, b, fa, fb)
	}
	c, fc := b, fb
	var d, e float64
	for range maxRootIterations {
		if (fb > 0) == (fc > 0) {
			c, fc = a, fa
			d = b - a
			e = d
		}
		if math.Abs(fc) < math.Abs(fb) {
			a, b, c = b, c, b
			fa, fb, fc = fb, fc, fb
		}
		tol := 2 * epsilon * math.Abs(b)
		half := 0.5 * (c - b)
		if math.Abs(half) <= tol || fb == 0 {
			return b, nil
		}
		if math.Abs(e) >= tol && math.Abs(fa) > math.Abs(fb) {
			s := fb / fa
			var p, q float64
			if a == c {
				p = 2 * half * s
				q = 1 - s
			} else {
				q = fa / fc
				r := fb / fc
				p = s * (2*half*q*(q-r) - (b-a)*(r-1))
				q = (q - 1) * (r - 1) * (s - 1)
			}
			if p > 0 {
				q = -q
			}
			p = math.Abs(p)
			if 2*p < math.Min(3*half*q-math.Abs(tol*q), math.Abs(e*q)) {
				e = d
				d = p / q
			} else {
				d = half
				e = d
			}
		} else {
			d = half
			e = d
		}
		a, fa = b, fb
		if math.Abs(d) > tol {
			b += d
		} else {
			b += math.Copysign(tol, half)
		}
		fb = f(b)
	}
	return b, fmt.Errorf("%w: root in [%g, %g] after %d iterations", ErrNotConverged, a, c, maxRootIterations)
}

// epsilon is the spacing of float64 numbers just above 1.
const epsilon = 0x1p-52

// besselZero returns the s-th positive zero of J0 (order 0) or J1
// (order 1). McMahon's asymptotic expansion puts the guess within 0.01 of
// the zero even for s = 1, and consecutive zeros are about π apart, so a
// bracket of ±0.3 around the guess holds exactly one zero.
func besselZero(order, s int) (float64, error) {
	nu := float64(order)
	mu := 4 * nu * nu
	beta := (float64(s) + nu/2 - 0.25) * math.Pi
	b8 := 8 * beta
	guess := beta - (mu-1)/b8 -
		4*(mu-1)*(7*mu-31)/(3*b8*b8*b8) -
		32*(mu-1)*(83*mu*mu-982*mu+3779)/(15*b8*b8*b8*b8*b8)
	bessel := math.J0
	if order == 1 {
		bessel = math.J1
	}
	z, err := findRoot(bessel, guess-0.3, guess+0.3)
	if err != nil {
		return 0, fmt.Errorf("zero %d of J%d: %w", s, order, err)
	}
	return z, nil
}
