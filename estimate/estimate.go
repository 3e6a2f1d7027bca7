// Package estimate owns the hand estimates of a job: the numbers an
// engineer would work out on paper before trusting a 3-D result. From the
// true geometry and the spec it gives the characteristic length V/As (As the
// exposed area only), the Biot number, whether lumped capacitance holds,
// the time constant, and each milestone's time by lumped capacitance and by
// the one-term series for the sphere of equal volume and the plane wall of
// equal Lc. Radiation is folded into an equivalent heat transfer
// coefficient; where a method's assumptions fail the estimate says so in
// plain words instead of staying silent.
package estimate

import (
	"errors"
	"fmt"
	"math"

	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/solver"
)

// zeroCelsius is 0 °C in kelvin.
const zeroCelsius = 273.15

// LumpedBiotLimit is the Biot number below which lumped capacitance is
// taken to hold (common practice).
const LumpedBiotLimit = 0.1

// OneTermFourierLimit is the Fourier number above which the one-term series
// is taken to be close to the full series (common practice).
const OneTermFourierLimit = 0.2

// Names of the hand methods in HandAnswer.method.
const (
	MethodLumped = "lumped"
	MethodSphere = "sphere-one-term"
	MethodWall   = "wall-one-term"
)

// ErrNoExchange is returned when no face of the part exchanges heat, so that
// there is nothing to estimate.
var ErrNoExchange = errors.New("no face exchanges heat")

// Estimate is a job's hand estimate.
type Estimate struct {
	// Hand is the estimate as results and the CLI carry it.
	Hand *soakv1.HandEstimate
	// InitialK and FluidK are the initial temperature and the one
	// effective fluid temperature of the hand methods, K.
	InitialK, FluidK float64
}

// MaterialFromSpec converts a spec's material into solver properties: a
// constant, or the table with its temperatures in kelvin.
func MaterialFromSpec(m *soakv1.Material) solver.Material {
	return solver.Material{
		Density:      m.GetDensityKgM3(),
		Conductivity: curveFromSpec(m.ConductivityWMk, m.GetConductivityTable()),
		SpecificHeat: curveFromSpec(m.SpecificHeatJKgk, m.GetSpecificHeatTable()),
	}
}

func curveFromSpec(constant *float64, table []*soakv1.TablePoint) solver.Curve {
	if constant != nil {
		return solver.Constant(*constant)
	}
	var c solver.Curve
	for _, p := range table {
		c.T = append(c.T, p.GetTempC()+zeroCelsius)
		c.V = append(c.V, p.GetValue())
	}
	return c
}

// New estimates a job whose part is solid and whose material is mat (the
// job's own, so that a verification estimates what the solve computed).
//
// areas, when not nil, holds the true area each exposure entry covers (as
// a mesh finds it, for parts whose selected areas have no closed form);
// nil works them out from the solid.
func New(spec *soakv1.JobSpec, solid mesh.Solid, mat solver.Material, areas []float64) (*Estimate, error) {
	if areas == nil {
		selectors, err := mesh.SelectorsFromSpec(spec.GetExposure())
		if err != nil {
			return nil, err
		}
		if areas, err = exposedAreas(solid, selectors); err != nil {
			return nil, err
		}
	} else if len(areas) != len(spec.GetExposure()) {
		return nil, fmt.Errorf("estimate: %d exposed areas for %d exposure entries", len(areas), len(spec.GetExposure()))
	}
	initial := spec.GetInitialC() + zeroCelsius
	ex := combine(spec.GetExposure(), areas, initial)
	if !(ex.conductance > 0) {
		return nil, fmt.Errorf("exposure: %w: no exposure with h_w_m2k or emissivity above 0 at the start covers any face", ErrNoExchange)
	}
	propertyTemp := (initial + ex.fluid) / 2
	k := mat.Conductivity.At(propertyTemp)
	cp := mat.SpecificHeat.At(propertyTemp)
	volume := solid.Volume()
	heff := ex.conductance / ex.area
	lc := volume / ex.area
	radius := math.Cbrt(3 * volume / (4 * math.Pi))
	h := &soakv1.HandEstimate{
		VolumeM3:              volume,
		ExposedAreaM2:         ex.area,
		CharacteristicLengthM: lc,
		HConvectionWM2K:       ex.convection / ex.area,
		HRadiationWM2K:        ex.radiation / ex.area,
		HEffectiveWM2K:        heff,
		FluidC:                ex.fluid - zeroCelsius,
		InitialC:              spec.GetInitialC(),
		PropertyTempC:         propertyTemp - zeroCelsius,
		DensityKgM3:           mat.Density,
		ConductivityWMk:       k,
		SpecificHeatJKgk:      cp,
		DiffusivityM2S:        k / (mat.Density * cp),
		BiotNumber:            heff * lc / k,
		TimeConstantS:         mat.Density * cp * lc / heff,
		SphereRadiusM:         radius,
		SphereBiotNumber:      heff * radius / k,
		WallHalfThicknessM:    lc,
		WallBiotNumber:        heff * lc / k,
	}
	h.LumpedApplies = h.BiotNumber < LumpedBiotLimit
	e := &Estimate{Hand: h, InitialK: initial, FluidK: ex.fluid}
	h.Notes = notes(spec, solid, mat, ex, h)
	var err error
	if h.Milestones, err = e.milestones(spec, solid, ex.firstChange); err != nil {
		return nil, err
	}
	return e, nil
}

// notes spells out the assumptions the estimate made and what they leave
// out.
func notes(spec *soakv1.JobSpec, solid mesh.Solid, mat solver.Material, ex exchange, h *soakv1.HandEstimate) []string {
	var n []string
	if h.LumpedApplies {
		n = append(n, fmt.Sprintf("Lumped capacitance holds: Bi = %.3g < %g (common practice).", h.BiotNumber, LumpedBiotLimit))
	} else {
		n = append(n, fmt.Sprintf("Lumped capacitance does not apply: Bi = %.3g is not below %g (common practice); the part is not near-uniform in temperature.", h.BiotNumber, LumpedBiotLimit))
	}
	if ex.radiation > 0 {
		n = append(n, fmt.Sprintf("Radiation is turned into an equivalent heat transfer coefficient h_rad = εσ(Tm²+Tsur²)(Tm+Tsur) = %.3g W/m²K averaged over the exposed area, "+
			"with Tm the mean of the initial and surroundings temperatures (%s); it is larger when the part is hotter and smaller when cooler.",
			h.HRadiationWM2K, ex.radiationMeans))
	}
	if len(mat.Conductivity.T) > 1 || len(mat.SpecificHeat.T) > 1 {
		n = append(n, fmt.Sprintf("Properties vary with temperature; the hand methods use their values at the mean of the initial and fluid temperatures, %.4g °C.", h.PropertyTempC))
	}
	if ex.severalTemps {
		n = append(n, fmt.Sprintf("The exposures have different fluid or surroundings temperatures; the hand methods use one fluid temperature, %.4g °C, their mean weighted by h·A.", h.FluidC))
	}
	if insulated := solid.Area() - ex.area; insulated > 1e-9*solid.Area() {
		n = append(n, fmt.Sprintf("%.3g m² of the %.3g m² surface is insulated (no exposure covers it); Lc uses the exposed area only. The equivalent sphere and wall are exposed all over.", insulated, solid.Area()))
	}
	if ex.severalH {
		n = append(n, "The exposures have different heat transfer coefficients; the hand methods use their area-weighted mean.")
	}
	if !math.IsInf(ex.firstChange, 1) {
		n = append(n, fmt.Sprintf("The exposure changes at %g s (schedule); the hand methods use the exposure at the start and do not apply to times after the change.", ex.firstChange))
	}
	if len(spec.GetMilestones()) > 0 {
		n = append(n, fmt.Sprintf("One-term answers hold for Fo > %g (common practice). A probe at the part's centre is read at the centre of the sphere and wall, a probe on the surface at their surface.", OneTermFourierLimit))
	}
	return n
}
