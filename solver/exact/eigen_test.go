package exact

import (
	"errors"
	"math"
	"strings"
	"testing"
)

var allShapes = []Shape{PlaneWall, InfiniteCylinder, Sphere}

// Source: Incropera, DeWitt, Bergman and Lavine, Fundamentals of Heat and
// Mass Transfer, 6th ed., Table 5.1 (the same numbers are in Çengel and
// Ghajar, Heat and Mass Transfer, 5th ed., Table 4-2), from memory. The
// table prints four decimals; the tolerance is one unit of the last digit,
// since a few recalled entries (cylinder at Bi = 2 and ∞, wall at Bi = 5)
// sit one unit off the correctly rounded value.
func TestOneTermMatchesTextbookTable(t *testing.T) {
	t.Parallel()
	inf := math.Inf(1)
	rows := []struct {
		bi                   float64
		wallL, wallC         float64
		cylinderL, cylinderC float64
		sphereL, sphereC     float64
	}{
		{0.01, 0.0998, 1.0017, 0.1412, 1.0025, 0.1730, 1.0030},
		{0.1, 0.3111, 1.0161, 0.4417, 1.0246, 0.5423, 1.0298},
		{0.5, 0.6533, 1.0701, 0.9408, 1.1143, 1.1656, 1.1441},
		{1, 0.8603, 1.1191, 1.2558, 1.2071, 1.5708, 1.2732},
		{2, 1.0769, 1.1785, 1.5995, 1.3384, 2.0288, 1.4793},
		{5, 1.3138, 1.2403, 1.9898, 1.5029, 2.5704, 1.7870},
		{10, 1.4289, 1.2620, 2.1795, 1.5677, 2.8363, 1.9249},
		{50, 1.5400, 1.2727, 2.3572, 1.6002, 3.0788, 1.9962},
		{100, 1.5552, 1.2731, 2.3809, 1.6015, 3.1102, 1.9990},
		// The recalled cylinder C1 at Bi = ∞, 1.6021, is further off than
		// rounding allows, so it is left out here; TestEigenvaluesAtInfiniteBiot
		// checks it against the closed form 2/(j0,1·J1(j0,1)).
		{inf, 1.5708, 1.2732, 2.4048, math.NaN(), 3.1416, 2.0000},
	}
	const tol = 1e-4 + 1e-12
	for _, row := range rows {
		for _, c := range []struct {
			shape         Shape
			lambda, coeff float64
		}{
			{PlaneWall, row.wallL, row.wallC},
			{InfiniteCylinder, row.cylinderL, row.cylinderC},
			{Sphere, row.sphereL, row.sphereC},
		} {
			lambda, coeff, err := OneTerm(c.shape, row.bi)
			if err != nil {
				t.Fatalf("%v, Bi = %g: %v", c.shape, row.bi, err)
			}
			if math.Abs(lambda-c.lambda) > tol || math.Abs(coeff-c.coeff) > tol && !math.IsNaN(c.coeff) {
				t.Errorf("%v, Bi = %g: λ1, C1 = %.6f, %.6f; table %.4f, %.4f",
					c.shape, row.bi, lambda, coeff, c.lambda, c.coeff)
			}
		}
	}
}

// The eigenvalue equations (Incropera 6th ed., sections 5.5 and 5.6, from
// memory) evaluated in their textbook form, independently of the pole-free
// form the solver iterates on.
func TestEigenvaluesSatisfyTheirEquations(t *testing.T) {
	t.Parallel()
	equation := map[Shape]func(l float64) float64{
		PlaneWall:        func(l float64) float64 { return l * math.Tan(l) },
		InfiniteCylinder: func(l float64) float64 { return l * math.J1(l) / math.J0(l) },
		Sphere:           func(l float64) float64 { return 1 - l/math.Tan(l) },
	}
	const roots = 50
	for _, s := range allShapes {
		for _, bi := range []float64{1e-3, 1e-2, 0.1, 1, 10, 100, 1e3} {
			lambdas, err := Eigenvalues(s, bi, roots)
			if err != nil {
				t.Fatalf("%v, Bi = %g: %v", s, bi, err)
			}
			if len(lambdas) != roots {
				t.Fatalf("%v, Bi = %g: got %d roots, want %d", s, bi, len(lambdas), roots)
			}
			for i, l := range lambdas {
				// Absolute residual for Bi ≤ 1, relative above: at small Bi
				// and large λ one unit in the last place of λ already moves
				// 1 − λ cot λ by about λ·1e-16.
				if r := math.Abs(equation[s](l)-bi) / math.Max(1, bi); !(r <= 1e-10) {
					t.Errorf("%v, Bi = %g, root %d = %.16g: residual %.3g", s, bi, i+1, l, r)
				}
				// The root lies within 1e-13 relative: the equation changes
				// sign across it.
				below, above := equation[s](l*(1-1e-13))-bi, equation[s](l*(1+1e-13))-bi
				if (below > 0) == (above > 0) {
					t.Errorf("%v, Bi = %g, root %d = %.16g: no sign change within 1e-13 (%.3g, %.3g)", s, bi, i+1, l, below, above)
				}
				lo, hi := bracket(t, s, i+1)
				if !(l > lo && l < hi) {
					t.Errorf("%v, Bi = %g: root %d = %.16g outside its bracket (%.16g, %.16g)", s, bi, i+1, l, lo, hi)
				}
				if i > 0 && !(l > lambdas[i-1]) {
					t.Errorf("%v, Bi = %g: root %d = %.16g not above root %d = %.16g", s, bi, i+1, l, i, lambdas[i-1])
				}
			}
		}
	}
}

// bracket is the interval that holds exactly one root of each equation
// (the branches of tan, J1/J0 and cot between their zeros and poles).
func bracket(t *testing.T, s Shape, n int) (lo, hi float64) {
	t.Helper()
	switch s {
	case PlaneWall:
		return float64(n-1) * math.Pi, (float64(n) - 0.5) * math.Pi
	case Sphere:
		return float64(n-1) * math.Pi, float64(n) * math.Pi
	}
	if n > 1 {
		z, err := besselZero(1, n-1)
		if err != nil {
			t.Fatal(err)
		}
		lo = z
	}
	hi, err := besselZero(0, n)
	if err != nil {
		t.Fatal(err)
	}
	return lo, hi
}

// Source: Abramowitz and Stegun, Handbook of Mathematical Functions,
// Table 9.5, from memory (first zeros of J0 and J1); the later zeros are
// checked by the value of the function, from Go's math.J0 and math.J1.
func TestBesselZeros(t *testing.T) {
	t.Parallel()
	known := []struct {
		order, s int
		zero     float64
	}{
		{0, 1, 2.404825557695773},
		{0, 2, 5.520078110286311},
		{0, 3, 8.653727912911013},
		{1, 1, 3.831705970207512},
		{1, 2, 7.015586669815619},
		{1, 3, 10.17346813506272},
	}
	for _, k := range known {
		z, err := besselZero(k.order, k.s)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(z-k.zero) > 1e-14*k.zero {
			t.Errorf("zero %d of J%d = %.16g, want %.16g", k.s, k.order, z, k.zero)
		}
	}
	for _, order := range []int{0, 1} {
		bessel := map[int]func(float64) float64{0: math.J0, 1: math.J1}[order]
		previous := 0.0
		for s := 1; s <= 2000; s += 37 {
			z, err := besselZero(order, s)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(bessel(z)) > 1e-14 || !(z > previous) {
				t.Errorf("zero %d of J%d = %.16g: J = %.3g, previous zero %.16g", s, order, z, bessel(z), previous)
			}
			previous = z
		}
	}
}

// At Bi → ∞ the roots are the poles of tan and cot and the zeros of J0
// (zeros from Abramowitz and Stegun Table 9.5, from memory), and the
// coefficients reduce to 4(−1)^(n+1)/((2n−1)π), 2/(λn·J1(λn)) and
// 2(−1)^(n+1) (Carslaw and Jaeger, Conduction of Heat in Solids, 2nd ed.,
// chapters 3, 7 and 9, surface held at the fluid temperature, from memory).
func TestEigenvaluesAtInfiniteBiot(t *testing.T) {
	t.Parallel()
	for _, s := range allShapes {
		lambdas, err := Eigenvalues(s, math.Inf(1), 5)
		if err != nil {
			t.Fatal(err)
		}
		near, err := Eigenvalues(s, 1e12, 5)
		if err != nil {
			t.Fatal(err)
		}
		for i, l := range lambdas {
			var want, wantC float64
			sign := float64(1 - 2*(i%2)) // (−1)^(n+1)
			switch s {
			case PlaneWall:
				want = (float64(i) + 0.5) * math.Pi
				wantC = 4 * sign / ((2*float64(i) + 1) * math.Pi)
			case InfiniteCylinder:
				want = []float64{2.404825557695773, 5.520078110286311, 8.653727912911013, 11.79153443901428, 14.93091770848779}[i]
				wantC = 2 / (want * math.J1(want))
			case Sphere:
				want = float64(i+1) * math.Pi
				wantC = 2 * sign
			}
			if c := s.coefficient(l); math.Abs(c-wantC) > 1e-13 {
				t.Errorf("%v root %d: C = %.16g, want %.16g", s, i+1, c, wantC)
			}
			if math.Abs(l-want) > 1e-13*want || math.Abs(near[i]-want) > 1e-10*want {
				t.Errorf("%v root %d: Bi = ∞ gives %.16g, Bi = 1e12 gives %.16g, want %.16g", s, i+1, l, near[i], want)
			}
		}
	}
}

func TestEigenvaluesRejectBadInput(t *testing.T) {
	t.Parallel()
	_, err := Eigenvalues(Shape(7), -2, 0)
	if !errors.Is(err, ErrInvalidInput) {
		t.Fatalf("got %v, want ErrInvalidInput", err)
	}
	for _, field := range []string{"shape", "bi", "got -2", "n:"} {
		if !strings.Contains(err.Error(), field) {
			t.Errorf("error %q does not name %q", err, field)
		}
	}
}
