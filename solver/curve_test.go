package solver

import (
	"math"
	"testing"
)

// Integral against integrals worked by hand: a piecewise-linear curve's
// integral is the sum of trapezoids, and beyond its ends it is constant.
func TestCurveIntegral(t *testing.T) {
	t.Parallel()
	steel := Curve{T: []float64{300, 700, 1100}, V: []float64{460, 800, 650}}
	cases := []struct {
		name string
		c    Curve
		a, b float64
		want float64
	}{
		{"constant", Constant(900), 300, 400, 90000},
		{"constant, reversed", Constant(900), 400, 300, -90000},
		{"one segment", steel, 300, 700, 400 * (460 + 800) / 2},
		{"across a point", steel, 500, 900, 200*(630+800)/2 + 200*(800+725)/2},
		{"beyond both ends", steel, 200, 1200, 100*460 + 400*(460+800)/2 + 400*(800+650)/2 + 100*650},
	}
	for _, c := range cases {
		if got := c.c.Integral(c.a, c.b); math.Abs(got-c.want) > 1e-9*math.Abs(c.want) {
			t.Errorf("%s: ∫ from %g to %g = %g, want %g", c.name, c.a, c.b, got, c.want)
		}
	}
}
