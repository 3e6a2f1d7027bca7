package pipeline

import (
	"math"

	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/solver"
)

// ZeroCelsius is 0 deg C in kelvin.
const ZeroCelsius = 273.15

func kelvin(c float64) float64  { return c + ZeroCelsius }
func celsius(k float64) float64 { return k - ZeroCelsius }

// exposures gives each surface group of g its exposure history.
func exposures(spec *soakv1.JobSpec, g *mesh.Grid) []solver.Exposure {
	out := make([]solver.Exposure, len(g.Groups))
	for gi, grp := range g.Groups {
		if grp.Exposure < 0 {
			out[gi] = solver.Exposure{Phases: []solver.ExposurePhase{{Fluid: kelvin(spec.GetInitialC()), Surroundings: kelvin(spec.GetInitialC())}}}
			continue
		}
		out[gi] = exposureHistory(spec.GetExposure()[grp.Exposure], spec.GetInitialC())
	}
	return out
}

// exposureHistory expands an exposure entry and its schedule into phases.
func exposureHistory(e *soakv1.Exposure, initialC float64) solver.Exposure {
	ph := solver.ExposurePhase{H: e.GetHWM2K(), Emissivity: e.GetEmissivity()}
	fluid := initialC
	if e.FluidC != nil {
		fluid = e.GetFluidC()
	}
	surr := fluid
	if e.SurroundingsC != nil {
		surr = e.GetSurroundingsC()
	} else if e.FluidC == nil {
		surr = initialC
	}
	ph.Fluid, ph.Surroundings = kelvin(fluid), kelvin(surr)
	if e.FluidC == nil {
		// Radiation only: no fluid temperature is needed; keep it at the
		// surroundings so nothing reads a meaningless value.
		ph.Fluid = ph.Surroundings
	}
	hist := solver.Exposure{Phases: []solver.ExposurePhase{ph}}
	for _, ch := range e.GetSchedule() {
		ph.Start = ch.GetAtS()
		if ch.HWM2K != nil {
			ph.H = ch.GetHWM2K()
		}
		if ch.FluidC != nil {
			ph.Fluid = kelvin(ch.GetFluidC())
			if ch.SurroundingsC == nil && e.SurroundingsC == nil {
				ph.Surroundings = ph.Fluid
			}
		}
		if ch.Emissivity != nil {
			ph.Emissivity = ch.GetEmissivity()
		}
		if ch.SurroundingsC != nil {
			ph.Surroundings = kelvin(ch.GetSurroundingsC())
		}
		hist.Phases = append(hist.Phases, ph)
	}
	return hist
}

// equilibrium returns the temperature (K) the part tends to under its
// final exposure. With one fluid and surroundings temperature it is that
// temperature; with several it is their mean weighted by each face's
// conductance (convection h·A, radiation linearised as 4εσT̄³A at the mean
// of the initial and surroundings temperatures), which is the steady state
// of a part whose conduction resistance is small. ok is false when no face
// exchanges heat.
func equilibrium(g *mesh.Grid, ex []solver.Exposure, initial float64) (teq float64, ok bool) {
	var sumW, sumWT float64
	for _, f := range g.Faces {
		phases := ex[f.Group].Phases
		ph := phases[len(phases)-1]
		wc := ph.H * f.Area
		tm := (initial + ph.Surroundings) / 2
		wr := 4 * ph.Emissivity * solver.StefanBoltzmann * tm * tm * tm * f.Area
		sumW += wc + wr
		sumWT += wc*ph.Fluid + wr*ph.Surroundings
	}
	if sumW == 0 {
		return initial, false
	}
	return sumWT / sumW, true
}

// curveIntegral returns ∫ c dT from a to b (exact for the piecewise-linear curve).
func curveIntegral(c solver.Curve, a, b float64) float64 {
	if a > b {
		return -curveIntegral(c, b, a)
	}
	// Break points inside (a, b) plus the ends; the curve is linear between.
	pts := []float64{a}
	for _, t := range c.T {
		if t > a && t < b {
			pts = append(pts, t)
		}
	}
	pts = append(pts, b)
	sum := 0.0
	for i := 1; i < len(pts); i++ {
		sum += (pts[i] - pts[i-1]) * (c.At(pts[i]) + c.At(pts[i-1])) / 2
	}
	return sum
}

func finiteOr(v, fallback float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return fallback
	}
	return v
}
