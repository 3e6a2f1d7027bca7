package exact

import (
	"errors"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
)

// An invented steel-like part in an oil quench.
const (
	quenchH     = 800.0  // W/(m²·K)
	partK       = 40.0   // W/(m·K)
	partAlpha   = 1.1e-5 // m²/s
	quenchAfter = 120.0  // s
)

// A block far longer in two directions than the third is a plane wall
// (product solution, Incropera 6th ed., section 5.8, from memory); a short
// cylinder far longer than its radius is an infinite cylinder.
func TestProductSolidsReduceToOneDimension(t *testing.T) {
	t.Parallel()
	const thin, long = 0.03, 1e9
	wall, err := Theta(PlaneWall, Biot(quenchH, thin, partK), Fourier(partAlpha, quenchAfter, thin), 0.4)
	if err != nil {
		t.Fatal(err)
	}
	wallQ, err := EnergyFraction(PlaneWall, Biot(quenchH, thin, partK), Fourier(partAlpha, quenchAfter, thin))
	if err != nil {
		t.Fatal(err)
	}
	for axis := range 3 {
		half := [3]float64{long, long, long}
		half[axis] = thin
		at := [3]float64{2, -3, 5}
		at[axis] = 0.4 * thin
		theta, err := BlockTheta(half, quenchH, partK, partAlpha, quenchAfter, at)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(theta-wall) > 1e-12 {
			t.Errorf("thin axis %d: block θ = %.15g, plane wall %.15g", axis, theta, wall)
		}
		// The far faces of the long sides take in energy of order
		// √(αt)/long ≈ 4e-11 of the whole.
		q, err := BlockEnergyFraction(half, quenchH, partK, partAlpha, quenchAfter)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(q-wallQ) > 1e-9 {
			t.Errorf("thin axis %d: block Q/Qmax = %.15g, plane wall %.15g", axis, q, wallQ)
		}
	}

	round, err := Theta(InfiniteCylinder, Biot(quenchH, thin, partK), Fourier(partAlpha, quenchAfter, thin), 0.7)
	if err != nil {
		t.Fatal(err)
	}
	theta, err := ShortCylinderTheta(thin, long, quenchH, partK, partAlpha, quenchAfter, 0.7*thin, -4)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(theta-round) > 1e-12 {
		t.Errorf("long short cylinder θ = %.15g, infinite cylinder %.15g", theta, round)
	}
}

// θ of the block is even in each coordinate and does not care which axis
// is called which; the short cylinder is even in z.
func TestProductSolidsAreSymmetric(t *testing.T) {
	t.Parallel()
	half := [3]float64{0.02, 0.035, 0.05}
	at := [3]float64{0.011, -0.02, 0.047}
	base, err := BlockTheta(half, quenchH, partK, partAlpha, quenchAfter, at)
	if err != nil {
		t.Fatal(err)
	}
	for _, perm := range [][3]int{{0, 1, 2}, {1, 2, 0}, {2, 0, 1}, {1, 0, 2}} {
		for _, mirror := range [][3]float64{{1, 1, 1}, {-1, 1, 1}, {1, -1, -1}, {-1, -1, -1}} {
			var h2, a2 [3]float64
			for i, p := range perm {
				h2[i] = half[p]
				a2[i] = mirror[i] * at[p]
			}
			theta, err := BlockTheta(h2, quenchH, partK, partAlpha, quenchAfter, a2)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(theta-base) > 1e-14 {
				t.Errorf("axes %v mirrored %v: θ = %.16g, want %.16g", perm, mirror, theta, base)
			}
		}
	}
	up, errUp := ShortCylinderTheta(0.02, 0.04, quenchH, partK, partAlpha, quenchAfter, 0.013, 0.031)
	down, errDown := ShortCylinderTheta(0.02, 0.04, quenchH, partK, partAlpha, quenchAfter, 0.013, -0.031)
	if errUp != nil || errDown != nil || up != down {
		t.Errorf("short cylinder at z = ±0.031: θ = %v, %v (errors %v, %v)", up, down, errUp, errDown)
	}
}

// Q/Qmax of the product solids against 1 − the volume average of their θ,
// integrated numerically with gonum's Gauss–Legendre quadrature (one
// octant of the block, one half of the cylinder): an independent check of
// the product rule for the energy fraction.
func TestProductEnergyFractionMatchesVolumeIntegral(t *testing.T) {
	t.Parallel()
	const points = 16
	legendre := quad.Legendre{}
	var thetaErr error
	keep := func(theta float64, err error) float64 {
		if err != nil {
			thetaErr = err
		}
		return theta
	}

	half := [3]float64{0.02, 0.03, 0.045}
	average := quad.Fixed(func(x float64) float64 {
		return quad.Fixed(func(y float64) float64 {
			return quad.Fixed(func(z float64) float64 {
				return keep(BlockTheta(half, quenchH, partK, partAlpha, quenchAfter, [3]float64{x * half[0], y * half[1], z * half[2]}))
			}, 0, 1, points, legendre, 0)
		}, 0, 1, points, legendre, 0)
	}, 0, 1, points, legendre, 0)
	q, err := BlockEnergyFraction(half, quenchH, partK, partAlpha, quenchAfter)
	if err != nil || thetaErr != nil {
		t.Fatal(err, thetaErr)
	}
	if math.Abs(q-(1-average)) > 1e-9 {
		t.Errorf("block: Q/Qmax = %.12g, 1 − volume average = %.12g", q, 1-average)
	}

	const radius, halfLength = 0.025, 0.04
	average = quad.Fixed(func(rho float64) float64 {
		return 2 * rho * quad.Fixed(func(zeta float64) float64 {
			return keep(ShortCylinderTheta(radius, halfLength, quenchH, partK, partAlpha, quenchAfter, rho*radius, zeta*halfLength))
		}, 0, 1, points, legendre, 0)
	}, 0, 1, points, legendre, 0)
	q, err = ShortCylinderEnergyFraction(radius, halfLength, quenchH, partK, partAlpha, quenchAfter)
	if err != nil || thetaErr != nil {
		t.Fatal(err, thetaErr)
	}
	if math.Abs(q-(1-average)) > 1e-9 {
		t.Errorf("short cylinder: Q/Qmax = %.12g, 1 − volume average = %.12g", q, 1-average)
	}
}

func TestProductSolidsRejectBadInput(t *testing.T) {
	t.Parallel()
	_, err := BlockTheta([3]float64{0.02, -1, 0.03}, 0, partK, partAlpha, -5, [3]float64{0.021, 0, 0})
	if !errors.Is(err, ErrInvalidInput) {
		t.Fatalf("got %v, want ErrInvalidInput", err)
	}
	for _, f := range []string{"half[1]:", "at[0]:", "h:", "t:", "got 0.021"} {
		if !strings.Contains(err.Error(), f) {
			t.Errorf("error %q does not name %q", err, f)
		}
	}
	_, err = ShortCylinderTheta(0.02, 0.04, quenchH, 0, partAlpha, quenchAfter, 0.03, 0)
	for _, f := range []string{"k:", "r:", "got 0.03"} {
		if !errors.Is(err, ErrInvalidInput) || !strings.Contains(err.Error(), f) {
			t.Errorf("error %v does not name %q", err, f)
		}
	}
}
