package exact

import (
	"fmt"
	"math"
)

// BlockTheta returns θ = (T − T∞)/(Ti − T∞) at point at (metres from the
// centre, each |at[i]| ≤ half[i]) of a rectangular block with
// half-thicknesses half (m), thermal conductivity k (W/(m·K)) and
// diffusivity alpha (m²/s), at time t (s) after all its faces meet a fluid
// with heat transfer coefficient h (W/(m²·K), +Inf for faces held at T∞).
// It is the product of three plane walls, each with its own Biot and
// Fourier numbers.
func BlockTheta(half [3]float64, h, k, alpha, t float64, at [3]float64) (float64, error) {
	var c inputChecks
	for i, side := range half {
		c.positive(fmt.Sprintf("half[%d]", i), side)
		c.within(fmt.Sprintf("at[%d]", i), at[i], -side, side)
	}
	checkProductMaterial(&c, h, k, alpha, t)
	if err := c.err(); err != nil {
		return 0, err
	}
	theta := 1.0
	for i, side := range half {
		wall, err := Theta(PlaneWall, Biot(h, side, k), Fourier(alpha, t, side), math.Abs(at[i])/side)
		if err != nil {
			return 0, fmt.Errorf("plane wall of half[%d] = %g m: %w", i, side, err)
		}
		theta *= wall
	}
	return theta, nil
}

// ShortCylinderTheta returns θ at radius r (0 ≤ r ≤ radius) and axial
// position z (|z| ≤ halfLength, from the mid-plane) of a cylinder of the
// given radius and half-length whose whole surface meets the fluid; the
// other arguments are those of BlockTheta. It is the product of an
// infinite cylinder and a plane wall.
func ShortCylinderTheta(radius, halfLength, h, k, alpha, t, r, z float64) (float64, error) {
	var c inputChecks
	c.positive("radius", radius)
	c.positive("halfLength", halfLength)
	c.within("r", r, 0, radius)
	c.within("z", z, -halfLength, halfLength)
	checkProductMaterial(&c, h, k, alpha, t)
	if err := c.err(); err != nil {
		return 0, err
	}
	round, err := Theta(InfiniteCylinder, Biot(h, radius, k), Fourier(alpha, t, radius), r/radius)
	if err != nil {
		return 0, fmt.Errorf("infinite cylinder of radius %g m: %w", radius, err)
	}
	wall, err := Theta(PlaneWall, Biot(h, halfLength, k), Fourier(alpha, t, halfLength), math.Abs(z)/halfLength)
	if err != nil {
		return 0, fmt.Errorf("plane wall of halfLength %g m: %w", halfLength, err)
	}
	return round * wall, nil
}

// BlockEnergyFraction returns Q/Qmax of the block of BlockTheta. Because θ
// is a product, so is the fraction of the initial excess energy left:
// 1 − Q/Qmax = (1 − q1)(1 − q2)(1 − q3), with qi the plane walls' Q/Qmax.
func BlockEnergyFraction(half [3]float64, h, k, alpha, t float64) (float64, error) {
	var c inputChecks
	for i, side := range half {
		c.positive(fmt.Sprintf("half[%d]", i), side)
	}
	checkProductMaterial(&c, h, k, alpha, t)
	if err := c.err(); err != nil {
		return 0, err
	}
	left := 1.0
	for i, side := range half {
		q, err := EnergyFraction(PlaneWall, Biot(h, side, k), Fourier(alpha, t, side))
		if err != nil {
			return 0, fmt.Errorf("plane wall of half[%d] = %g m: %w", i, side, err)
		}
		left *= 1 - q
	}
	return 1 - left, nil
}

// ShortCylinderEnergyFraction returns Q/Qmax of the cylinder of
// ShortCylinderTheta: 1 − (1 − q_cylinder)(1 − q_wall).
func ShortCylinderEnergyFraction(radius, halfLength, h, k, alpha, t float64) (float64, error) {
	var c inputChecks
	c.positive("radius", radius)
	c.positive("halfLength", halfLength)
	checkProductMaterial(&c, h, k, alpha, t)
	if err := c.err(); err != nil {
		return 0, err
	}
	round, err := EnergyFraction(InfiniteCylinder, Biot(h, radius, k), Fourier(alpha, t, radius))
	if err != nil {
		return 0, fmt.Errorf("infinite cylinder of radius %g m: %w", radius, err)
	}
	wall, err := EnergyFraction(PlaneWall, Biot(h, halfLength, k), Fourier(alpha, t, halfLength))
	if err != nil {
		return 0, fmt.Errorf("plane wall of halfLength %g m: %w", halfLength, err)
	}
	return 1 - (1-round)*(1-wall), nil
}

func checkProductMaterial(c *inputChecks, h, k, alpha, t float64) {
	c.positiveOrInfinite("h", h)
	c.positive("k", k)
	c.positive("alpha", alpha)
	c.nonNegative("t", t)
}
