package exact

import (
	"fmt"
	"math"
)

// Eigenvalues returns the first n eigenvalues λ of shape s with Biot
// number bi (hL/k, L the half-thickness or the outer radius), in increasing
// order:
//
//	plane wall         λ tan λ = Bi          λn in ((n−1)π, (n−½)π)
//	infinite cylinder  λ J1(λ)/J0(λ) = Bi    λn in (j1,n−1, j0,n)
//	sphere             1 − λ cot λ = Bi      λn in ((n−1)π, nπ)
//
// where j0,n and j1,n are the n-th positive zeros of J0 and J1 (j1,0 = 0).
// bi = +Inf gives the limits (n−½)π, j0,n and nπ.
func Eigenvalues(s Shape, bi float64, n int) ([]float64, error) {
	var c inputChecks
	c.shape(s)
	c.positiveOrInfinite("bi", bi)
	if n < 1 {
		c.errs = append(c.errs, fmt.Errorf("%w: n: must be at least 1, got %d", ErrInvalidInput, n))
	}
	if err := c.err(); err != nil {
		return nil, err
	}
	roots := make([]float64, n)
	for i := range roots {
		var err error
		if roots[i], err = s.eigenvalue(bi, i+1); err != nil {
			return nil, err
		}
	}
	return roots, nil
}

// eigenvalue returns the n-th eigenvalue (n ≥ 1) of a valid shape, each in
// its own bracket so that no root is skipped or found twice. The functions
// handed to findRoot are the eigenvalue equations multiplied through so that
// they have no poles, and the sphere's is written without the cancellation
// of 1 − λ cot λ at small λ.
func (s Shape) eigenvalue(bi float64, n int) (float64, error) {
	var lo, hi float64
	var equation func(float64) float64
	switch s {
	case PlaneWall:
		lo, hi = float64(n-1)*math.Pi, (float64(n)-0.5)*math.Pi
		equation = func(l float64) float64 { return l*math.Sin(l) - bi*math.Cos(l) }
	case InfiniteCylinder:
		var err error
		if n > 1 {
			if lo, err = besselZero(1, n-1); err != nil {
				return 0, err
			}
		}
		if hi, err = besselZero(0, n); err != nil {
			return 0, err
		}
		equation = func(l float64) float64 { return l*math.J1(l) - bi*math.J0(l) }
	case Sphere:
		lo, hi = float64(n-1)*math.Pi, float64(n)*math.Pi
		equation = func(l float64) float64 {
			if l == 0 {
				return -bi
			}
			return (sinMinusXCos(l) - bi*math.Sin(l)) / l
		}
	default:
		return 0, fmt.Errorf("%w: shape: got %v", ErrInvalidInput, s)
	}
	if math.IsInf(bi, 1) {
		return hi, nil
	}
	root, err := findRoot(equation, lo, hi)
	if err != nil {
		return 0, fmt.Errorf("eigenvalue %d of the %v at Bi = %g: %w", n, s, bi, err)
	}
	return root, nil
}

// coefficient returns the series coefficient Cn that matches a uniform
// initial temperature, for eigenvalue λ.
func (s Shape) coefficient(l float64) float64 {
	switch s {
	case PlaneWall:
		return 4 * math.Sin(l) / (2*l + math.Sin(2*l))
	case InfiniteCylinder:
		j0, j1 := math.J0(l), math.J1(l)
		return 2 / l * j1 / (j0*j0 + j1*j1)
	case Sphere:
		return 4 * sinMinusXCos(l) / xMinusSin(2*l)
	}
	return math.NaN()
}

// mode returns the spatial eigenfunction at x = λ·ξ: cos x, J0(x) or
// sin x / x, each 1 at the centre.
func (s Shape) mode(x float64) float64 {
	switch s {
	case PlaneWall:
		return math.Cos(x)
	case InfiniteCylinder:
		return math.J0(x)
	case Sphere:
		if x == 0 {
			return 1
		}
		return math.Sin(x) / x
	}
	return math.NaN()
}

// energyWeight returns the volume average of the eigenfunction for
// eigenvalue λ, the factor each term carries in Q/Qmax.
func (s Shape) energyWeight(l float64) float64 {
	switch s {
	case PlaneWall:
		return math.Sin(l) / l
	case InfiniteCylinder:
		return 2 * math.J1(l) / l
	case Sphere:
		return 3 * sinMinusXCos(l) / (l * l * l)
	}
	return math.NaN()
}

// smallArgument is where sinMinusXCos and xMinusSin switch to their power
// series, which avoid the cancellation of the direct forms at small x.
const smallArgument = 0.5

// sinMinusXCos returns sin x − x cos x; for small x from its Taylor series
// Σ (−1)^(k+1) 2k x^(2k+1)/(2k+1)!.
func sinMinusXCos(x float64) float64 {
	if math.Abs(x) >= smallArgument {
		return math.Sin(x) - x*math.Cos(x)
	}
	return alternatingOddSeries(x, func(k float64) float64 { return 2 * k })
}

// xMinusSin returns x − sin x; for small x from its Taylor series
// Σ (−1)^(k+1) x^(2k+1)/(2k+1)!.
func xMinusSin(x float64) float64 {
	if math.Abs(x) >= smallArgument {
		return x - math.Sin(x)
	}
	return alternatingOddSeries(x, func(float64) float64 { return 1 })
}

// alternatingOddSeries sums Σ_{k≥1} (−1)^(k+1) weight(k) x^(2k+1)/(2k+1)!
// for |x| < 1, where the terms fall by x²/((2k+2)(2k+3)) or faster.
func alternatingOddSeries(x float64, weight func(k float64) float64) float64 {
	power := x * x * x / 6 // x^(2k+1)/(2k+1)! at k = 1
	sum := 0.0
	for k := 1.0; k < 30; k++ {
		term := weight(k) * power
		sum += term
		if math.Abs(term) <= 0.25*epsilon*math.Abs(sum) {
			break
		}
		power *= -x * x / ((2*k + 2) * (2*k + 3))
	}
	return sum
}
