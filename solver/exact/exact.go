package exact

import (
	"errors"
	"fmt"
	"math"
)

// ErrInvalidInput marks an argument outside the domain of a solution; the
// message names the argument and its value.
var ErrInvalidInput = errors.New("exact: invalid input")

// ErrNotConverged marks a series or an iteration that did not reach full
// double precision within its cap.
var ErrNotConverged = errors.New("exact: not converged")

// Biot returns the Biot number h·lc/k: the ratio of the conduction
// resistance inside a body of characteristic length lc to the convection
// resistance at its surface.
func Biot(h, lc, k float64) float64 { return h * lc / k }

// Fourier returns the Fourier number α·t/l², a dimensionless time.
func Fourier(alpha, t, l float64) float64 { return alpha * t / (l * l) }

// Shape is one of the three one-dimensional solids of the series solutions.
type Shape int

// The shapes of the series solutions. Their length scale L is the
// half-thickness of the wall and the outer radius of the cylinder and the
// sphere.
const (
	PlaneWall Shape = iota + 1
	InfiniteCylinder
	Sphere
)

func (s Shape) String() string {
	switch s {
	case PlaneWall:
		return "plane wall"
	case InfiniteCylinder:
		return "infinite cylinder"
	case Sphere:
		return "sphere"
	}
	return fmt.Sprintf("Shape(%d)", int(s))
}

// inputChecks gathers every problem with a call's arguments so that the
// caller sees them all at once.
type inputChecks struct{ errs []error }

func (c *inputChecks) fail(field, rule string, got float64) {
	c.errs = append(c.errs, fmt.Errorf("%w: %s: %s, got %g", ErrInvalidInput, field, rule, got))
}

func (c *inputChecks) shape(s Shape) {
	if s < PlaneWall || s > Sphere {
		c.errs = append(c.errs, fmt.Errorf("%w: shape: must be plane wall, infinite cylinder or sphere, got %v", ErrInvalidInput, s))
	}
}

// positive accepts 0 < v < ∞.
func (c *inputChecks) positive(field string, v float64) {
	if !(v > 0) || math.IsInf(v, 1) {
		c.fail(field, "must be positive and finite", v)
	}
}

// positiveOrInfinite accepts 0 < v ≤ ∞; an infinite Biot number or heat
// transfer coefficient stands for a surface held at the fluid temperature.
func (c *inputChecks) positiveOrInfinite(field string, v float64) {
	if !(v > 0) {
		c.fail(field, "must be positive (+Inf allowed)", v)
	}
}

// nonNegative accepts 0 ≤ v < ∞.
func (c *inputChecks) nonNegative(field string, v float64) {
	if !(v >= 0) || math.IsInf(v, 1) {
		c.fail(field, "must be non-negative and finite", v)
	}
}

// within accepts lo ≤ v ≤ hi.
func (c *inputChecks) within(field string, v, lo, hi float64) {
	if !(v >= lo && v <= hi) {
		c.fail(field, fmt.Sprintf("must be in [%g, %g]", lo, hi), v)
	}
}

func (c *inputChecks) err() error { return errors.Join(c.errs...) }
