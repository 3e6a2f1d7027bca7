package exact

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
)

// Near the start the fluid has reached only a thin layer under the surface,
// of depth a few √Fo (semi-infinite solid, Incropera 6th ed., section 5.7,
// from memory), so deeper points are still at θ = 1. Reproducing that needs
// hundreds of series terms, which is what this checks.
func TestThetaStaysAtOneInTheInteriorNearTheStart(t *testing.T) {
	t.Parallel()
	cases := []struct {
		fo, deepest float64 // deepest ξ whose distance to the surface is ≥ 20√Fo
	}{
		{0, 1},
		{1e-3, 0.36},
		{1e-4, 0.8},
		{1e-6, 0.98},
	}
	for _, s := range allShapes {
		for _, bi := range []float64{0.1, 1, 10, math.Inf(1)} {
			for _, c := range cases {
				for _, xi := range []float64{0, 0.25, c.deepest} {
					theta, err := Theta(s, bi, c.fo, xi)
					if err != nil {
						t.Fatalf("%v, Bi = %g, Fo = %g: %v", s, bi, c.fo, err)
					}
					if math.Abs(theta-1) > 1e-10 {
						t.Errorf("%v, Bi = %g, Fo = %g, ξ = %g: θ = %.15g, want 1", s, bi, c.fo, xi, theta)
					}
				}
			}
		}
	}
}

// Two independent forms of the plane wall: its eigenfunction series and,
// at small Fo, two semi-infinite solids with surface convection, one from
// each face (Carslaw and Jaeger, Conduction of Heat in Solids, 2nd ed.,
// chapters 2 and 3, from memory). They agree wherever both hold.
func TestWallSeriesMatchesShortTimeForm(t *testing.T) {
	t.Parallel()
	for _, bi := range []float64{0.01, 1, 10, 1e3, math.Inf(1)} {
		for _, fo := range []float64{1e-5, 1e-4, 1e-3, 1e-2} {
			for _, xi := range []float64{0, 0.5, 0.9, 0.99, 1} {
				series, err := sumSeries(PlaneWall, bi, fo, func(l float64) float64 { return math.Cos(l * xi) })
				if err != nil {
					t.Fatal(err)
				}
				if short := wallShortTimeTheta(bi, fo, xi); math.Abs(series-short) > 1e-11 {
					t.Errorf("Bi = %g, Fo = %g, ξ = %g: series θ = %.15g, short-time θ = %.15g", bi, fo, xi, series, short)
				}
			}
			remaining, err := sumSeries(PlaneWall, bi, fo, PlaneWall.energyWeight)
			if err != nil {
				t.Fatal(err)
			}
			if short := wallShortTimeEnergy(bi, fo); math.Abs(1-remaining-short) > 1e-11 {
				t.Errorf("Bi = %g, Fo = %g: series Q/Qmax = %.15g, short-time = %.15g", bi, fo, 1-remaining, short)
			}
		}
	}
}

// Common practice: the one-term approximation is within 2 % of the series
// for Fo > 0.2 (Incropera 6th ed., section 5.6; Çengel and Ghajar 5th ed.,
// section 4-2, from memory). Checked at the centre and at mid-depth.
func TestOneTermAgreesWithSeriesAfterFoPointTwo(t *testing.T) {
	t.Parallel()
	for _, s := range allShapes {
		for _, bi := range []float64{0.1, 1, 10, 100, math.Inf(1)} {
			lambda1, c1, err := OneTerm(s, bi)
			if err != nil {
				t.Fatal(err)
			}
			for _, fo := range []float64{0.2, 0.5, 1, 2} {
				for _, xi := range []float64{0, 0.5} {
					theta, err := Theta(s, bi, fo, xi)
					if err != nil {
						t.Fatal(err)
					}
					oneTerm := c1 * math.Exp(-lambda1*lambda1*fo) * s.mode(lambda1*xi)
					if math.Abs(oneTerm-theta) > 0.02*theta {
						t.Errorf("%v, Bi = %g, Fo = %g, ξ = %g: series θ = %.6g, one-term %.6g", s, bi, fo, xi, theta, oneTerm)
					}
				}
			}
		}
	}
}

// At small Bi the solid is almost isothermal and follows lumped
// capacitance, θ = exp(−t/τ) with t/τ = hAt/(ρcV) = m·Bi·Fo since V/A = L/m
// (Incropera 6th ed., section 5.2, from memory).
func TestSmallBiotMatchesLumpedCapacitance(t *testing.T) {
	t.Parallel()
	const bi = 1e-3
	for m, s := range allShapes {
		shapeFactor := float64(m + 1) // 1, 2, 3
		for _, decay := range []float64{0.5, 1, 2} {
			fo := decay / (shapeFactor * bi)
			lumped := LumpedConvection(fo, 1/(shapeFactor*bi))
			for _, xi := range []float64{0, 1} {
				theta, err := Theta(s, bi, fo, xi)
				if err != nil {
					t.Fatal(err)
				}
				if math.Abs(theta/lumped-1) > 0.003 {
					t.Errorf("%v, Bi = %g, Fo = %g, ξ = %g: series θ = %.6g, lumped %.6g", s, bi, fo, xi, theta, lumped)
				}
			}
		}
	}
}

// Q/Qmax = 1 − m∫₀¹ θ ξ^(m−1) dξ (m = 1, 2, 3), the volume average of θ,
// integrated numerically with gonum's Gauss–Legendre quadrature: an
// independent check of the energy series.
func TestEnergyFractionMatchesVolumeIntegral(t *testing.T) {
	t.Parallel()
	for m, s := range allShapes {
		dims := float64(m + 1)
		for _, bi := range []float64{0.1, 1, 10, math.Inf(1)} {
			for _, fo := range []float64{0.01, 0.1, 0.5} {
				q, err := EnergyFraction(s, bi, fo)
				if err != nil {
					t.Fatal(err)
				}
				var thetaErr error
				average := dims * quad.Fixed(func(xi float64) float64 {
					theta, err := Theta(s, bi, fo, xi)
					if err != nil {
						thetaErr = err
					}
					return theta * math.Pow(xi, dims-1)
				}, 0, 1, 60, quad.Legendre{}, 0)
				if thetaErr != nil {
					t.Fatal(thetaErr)
				}
				if math.Abs(q-(1-average)) > 1e-9 {
					t.Errorf("%v, Bi = %g, Fo = %g: Q/Qmax = %.12g, 1 − volume average = %.12g", s, bi, fo, q, 1-average)
				}
			}
		}
	}
}

func TestSeriesRejectsBadInputAtOnce(t *testing.T) {
	t.Parallel()
	calls := map[string]func() error{
		"Theta": func() error { _, err := Theta(Shape(9), -1, -2, 1.5); return err },
		"EnergyFraction": func() error {
			_, err := EnergyFraction(Shape(0), math.NaN(), math.Inf(1))
			return err
		},
	}
	for name, call := range calls {
		err := call()
		if !errors.Is(err, ErrInvalidInput) {
			t.Fatalf("%s: got %v, want ErrInvalidInput", name, err)
		}
		fields := []string{"shape:", "bi:", "fo:"}
		if name == "Theta" {
			fields = append(fields, "xi:", "got 1.5")
		}
		for _, f := range fields {
			if !strings.Contains(err.Error(), f) {
				t.Errorf("%s: error %q does not name %q", name, err, f)
			}
		}
	}
}

// Below Fo ≈ 1e-8 the sphere's series would need more terms than the cap.
func TestSeriesReportsNonConvergence(t *testing.T) {
	t.Parallel()
	_, err := Theta(Sphere, 1, 1e-10, 0.5)
	if !errors.Is(err, ErrNotConverged) {
		t.Fatalf("got %v, want ErrNotConverged", err)
	}
	if !strings.Contains(err.Error(), fmt.Sprint(1e-10)) {
		t.Errorf("error %q does not name the Fourier number", err)
	}
}
