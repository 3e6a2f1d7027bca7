package estimate

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/solver"
)

// exposedAreas returns the true area of the surface each selector ends up
// covering: the surface splits into the six 45° facing cones and the rest,
// and each piece goes to the last selector that selects it, as the mesh
// assigns faces.
func exposedAreas(solid mesh.Solid, selectors []mesh.Selector) ([]float64, error) {
	for i, s := range selectors {
		if len(s.Bodies) > 0 || len(s.Solids) > 0 || s.Region != nil {
			return nil, fmt.Errorf("exposure[%d]: selects faces by body, STL solid or region; the area it covers is known only once the part is meshed (soak run reports it)", i)
		}
	}
	const rest = 6
	var pieces [rest + 1]float64
	pieces[rest] = solid.Area()
	for d := range rest {
		a, exact := mesh.SelectedArea(solid, mesh.Selector{Facing: []int{d}})
		if !exact {
			// Only a part without exact facing areas gets here; with
			// surfaces "all" everywhere, the whole area is still exact.
			for i, s := range selectors {
				if !s.All {
					return nil, fmt.Errorf("exposure[%d].facing: the true area this selects cannot be found for this part without a mesh", i)
				}
			}
			break
		}
		pieces[d] = a
		pieces[rest] -= a
	}
	pieces[rest] = math.Max(pieces[rest], 0) // rounding when the cones cover everything
	areas := make([]float64, len(selectors))
	for p, a := range pieces {
		owner := -1
		for i, s := range selectors {
			if s.All || (p != rest && slices.Contains(s.Facing, p)) {
				owner = i
			}
		}
		if owner >= 0 {
			areas[owner] += a
		}
	}
	return areas, nil
}

// exchange is the spec's exposure at the start folded into one convective
// coefficient and one fluid temperature over the exposed area.
type exchange struct {
	area        float64 // exposed true area, m²
	convection  float64 // Σ h·A, W/K
	radiation   float64 // Σ h_rad·A, W/K
	conductance float64 // convection + radiation, W/K
	fluid       float64 // Σ(h·A·Tf + h_rad·A·Tsur)/conductance, K
	// firstChange is the earliest schedule time of an exposure that covers
	// some face, s (+Inf when none changes).
	firstChange float64
	// severalTemps and severalH tell whether the exposures differ in
	// fluid or surroundings temperature, or in heat transfer coefficient.
	severalTemps, severalH bool
	// radiationMeans lists the mean temperatures h_rad was taken at.
	radiationMeans string
}

// combine folds the exposures, with areas[i] the true area exposure i
// covers, into one exchange. Unset temperatures default as the spec says:
// the fluid to the initial temperature, the surroundings to the fluid.
func combine(exposures []*soakv1.Exposure, areas []float64, initial float64) exchange {
	ex := exchange{firstChange: math.Inf(1)}
	var temps, hs []float64
	var means []string
	for i, e := range exposures {
		a := areas[i]
		if a == 0 {
			continue
		}
		fluid := initial
		if e.FluidC != nil {
			fluid = e.GetFluidC() + zeroCelsius
		}
		surroundings := fluid
		if e.SurroundingsC != nil {
			surroundings = e.GetSurroundingsC() + zeroCelsius
		}
		hr := 0.0
		if eps := e.GetEmissivity(); eps > 0 {
			tm := (initial + surroundings) / 2
			hr = RadiationCoefficient(eps, tm, surroundings)
			means = append(means, fmt.Sprintf("%.4g °C for exposure[%d]", tm-zeroCelsius, i))
			temps = append(temps, surroundings)
		}
		if e.GetHWM2K() > 0 {
			temps = append(temps, fluid)
		}
		hs = append(hs, e.GetHWM2K())
		ex.area += a
		ex.convection += e.GetHWM2K() * a
		ex.radiation += hr * a
		ex.fluid += (e.GetHWM2K()*fluid + hr*surroundings) * a
		if s := e.GetSchedule(); len(s) > 0 {
			ex.firstChange = math.Min(ex.firstChange, s[0].GetAtS())
		}
	}
	ex.conductance = ex.convection + ex.radiation
	if ex.conductance > 0 {
		ex.fluid /= ex.conductance
	}
	ex.severalTemps = distinct(temps) > 1
	ex.severalH = distinct(hs) > 1
	ex.radiationMeans = strings.Join(means, ", ")
	return ex
}

// RadiationCoefficient returns the heat transfer coefficient that carries
// the same radiative flux as a surface of the given emissivity at ts
// exchanging with surroundings at tsur (both K): εσ(ts²+tsur²)(ts+tsur),
// since εσ(ts⁴−tsur⁴) factors into that times (ts−tsur).
func RadiationCoefficient(emissivity, ts, tsur float64) float64 {
	return emissivity * solver.StefanBoltzmann * (ts*ts + tsur*tsur) * (ts + tsur)
}

// distinct returns how many different values v holds.
func distinct(v []float64) int { return len(slices.Compact(slices.Sorted(slices.Values(v)))) }
