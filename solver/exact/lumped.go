package exact

import (
	"fmt"
	"math"
)

// stefanBoltzmann is σ in W/(m²·K⁴) (CODATA 2018, exact since the 2019 SI).
// It repeats solver.StefanBoltzmann because the solver's tests import this
// package.
const stefanBoltzmann = 5.670374419e-8

// LumpedConvection returns θ = (T − T∞)/(Ti − T∞) = exp(−t/τ) of an
// isothermal body (Bi below about 0.1) with time constant tau.
func LumpedConvection(t, tau float64) float64 { return math.Exp(-t / tau) }

// TimeConstant returns τ = ρ·cp·V/(h·A) in seconds.
func TimeConstant(rho, cp, volume, h, area float64) float64 {
	return rho * cp * volume / (h * area)
}

// LumpedRadiationTime returns the time an isothermal body of density rho,
// specific heat cp, volume and surface area, with surface emissivity,
// needs to go from tInitial to tTarget by radiation alone to surroundings
// at tSur (all temperatures in kelvin):
//
//	t = ρcV/(4εσA·Tsur³)·[ln|(Tsur+T)/(Tsur−T)| − ln|(Tsur+Ti)/(Tsur−Ti)|
//	                      + 2(arctan(T/Tsur) − arctan(Ti/Tsur))]
//
// tTarget must lie between tInitial and tSur (tSur itself is reached only
// after infinite time). tSur = 0 (deep space) is allowed.
func LumpedRadiationTime(rho, cp, volume, area, emissivity, tSur, tInitial, tTarget float64) (float64, error) {
	c := checkLumpedRadiation(rho, cp, volume, area, emissivity, tSur, tInitial)
	c.positive("tTarget", tTarget)
	if err := c.err(); err != nil {
		return 0, err
	}
	if !between(tTarget, tInitial, tSur) {
		return 0, fmt.Errorf("%w: tTarget: must lie between tInitial = %g K and tSur = %g K (tSur excluded), got %g",
			ErrInvalidInput, tInitial, tSur, tTarget)
	}
	return rho * cp * volume / (emissivity * stefanBoltzmann * area) *
		(radiationPotential(tTarget, tSur) - radiationPotential(tInitial, tSur)), nil
}

// LumpedRadiationTemperature returns the temperature in kelvin at time t of
// the body of LumpedRadiationTime, found by solving that closed form for
// the temperature (it is monotonic in it) with a bracketing root finder.
func LumpedRadiationTemperature(rho, cp, volume, area, emissivity, tSur, tInitial, t float64) (float64, error) {
	c := checkLumpedRadiation(rho, cp, volume, area, emissivity, tSur, tInitial)
	c.nonNegative("t", t)
	if err := c.err(); err != nil {
		return 0, err
	}
	if t == 0 || tInitial == tSur {
		return tInitial, nil
	}
	target := radiationPotential(tInitial, tSur) + t*emissivity*stefanBoltzmann*area/(rho*cp*volume)
	behind := func(temp float64) float64 { return radiationPotential(temp, tSur) - target }
	// Walk from tInitial towards tSur, halving the remaining gap, until the
	// body would have needed more than t to get there: that brackets the
	// answer. If even the last float64 before tSur is reached sooner, the
	// answer is tSur to double precision.
	near := tInitial
	for {
		far := tSur + (near-tSur)/2
		if far == near || far == tSur {
			return tSur, nil
		}
		if behind(far) >= 0 {
			temp, err := findRoot(behind, near, far)
			if err != nil {
				return 0, fmt.Errorf("temperature after %g s of radiation: %w", t, err)
			}
			return temp, nil
		}
		near = far
	}
}

func checkLumpedRadiation(rho, cp, volume, area, emissivity, tSur, tInitial float64) *inputChecks {
	var c inputChecks
	c.positive("rho", rho)
	c.positive("cp", cp)
	c.positive("volume", volume)
	c.positive("area", area)
	if !(emissivity > 0 && emissivity <= 1) {
		c.fail("emissivity", "must be in (0, 1]", emissivity)
	}
	c.nonNegative("tSur", tSur)
	c.positive("tInitial", tInitial)
	return &c
}

// between reports whether x lies between from (included) and to (excluded).
func between(x, from, to float64) bool {
	if x == from {
		return true
	}
	return (from < to && x > from && x < to) || (from > to && x < from && x > to)
}

// radiationPotential returns P(T) = −∫ dT/(T⁴ − Tsur⁴), normalised so that
// P → 0 as T → ∞ above Tsur; the time between two temperatures is
// ρcV/(εσA) times the difference of P. Far above Tsur (T > 2·Tsur,
// including Tsur = 0) it comes from the series
// Σ Tsur^(4j)/((4j+3)·T^(4j+3)), which the closed form would reach only
// through cancellation of terms of order Tsur/T.
func radiationPotential(temp, tSur float64) float64 {
	ratio := tSur / temp
	if ratio <= 0.5 {
		r4 := ratio * ratio * ratio * ratio
		sum, power := 0.0, 1.0
		for j := 0.0; j < 40; j++ {
			term := power / (4*j + 3)
			sum += term
			if term <= 0.25*epsilon*sum {
				break
			}
			power *= r4
		}
		return sum / (temp * temp * temp)
	}
	return (math.Log(math.Abs((tSur+temp)/(tSur-temp))) + 2*math.Atan(temp/tSur) - math.Pi) /
		(4 * tSur * tSur * tSur)
}
