package solver

import "math"

// phaseBefore returns the exposure phase in force just before time t: the
// last one that started before t, or the first at t ≤ 0. A step that ends at
// t ran under this phase because steps land on every phase start.
func phaseBefore(e *Exposure, t float64) *ExposurePhase {
	i := 0
	for i+1 < len(e.Phases) && e.Phases[i+1].Start < t {
		i++
	}
	return &e.Phases[i]
}

// insulated reports whether a phase exchanges no heat.
func (ph *ExposurePhase) insulated() bool { return ph.H == 0 && ph.Emissivity == 0 }

// faceExchange solves the balance of one boundary face: conduction from the
// cell centre to the surface through half a cell (conductance gc, W/K)
// equals convection and radiation from the surface of area A. It returns
// the surface temperature ts, the heat flow into the cell qIn (W) and the
// linearised conductance gLin = −dqIn/dtCell (W/K) used by Newton passes.
// guess is where the search for a radiating surface's temperature starts
// (the last one found, say); any value outside the temperatures that
// drive the face starts it at tCell.
func faceExchange(gc, area float64, ph *ExposurePhase, tCell, guess float64) (ts, qIn, gLin float64) {
	if ph.insulated() {
		return tCell, 0, 0
	}
	hA := ph.H * area
	if ph.Emissivity == 0 {
		// Convection only: the half cell and the film are two conductances in series.
		ts = (gc*tCell + hA*ph.Fluid) / (gc + hA)
		return ts, gc * (ts - tCell), gc * hA / (gc + hA)
	}
	ts, _ = surfaceNewton(gc, area, ph, tCell, guess)
	surface := area * (ph.H + 4*ph.Emissivity*StefanBoltzmann*ts*ts*ts)
	return ts, gc * (ts - tCell), gc * surface / (gc + surface)
}

// surfaceNewton finds the surface temperature of a radiating face by Newton
// iteration kept inside the bracket of the temperatures that drive it,
// from guess when it lies inside, else from tCell. It returns the
// temperature and the iterations taken.
func surfaceNewton(gc, area float64, ph *ExposurePhase, tCell, guess float64) (float64, int) {
	es := ph.Emissivity * StefanBoltzmann
	tsur2 := ph.Surroundings * ph.Surroundings
	lo, hi := math.Min(tCell, ph.Surroundings), math.Max(tCell, ph.Surroundings)
	if ph.H > 0 {
		lo, hi = math.Min(lo, ph.Fluid), math.Max(hi, ph.Fluid)
	}
	balance := func(ts float64) (f, df float64) {
		t2 := ts * ts
		f = gc*(tCell-ts) - area*(ph.H*(ts-ph.Fluid)+es*(t2*t2-tsur2*tsur2))
		df = -gc - area*(ph.H+4*es*t2*ts)
		return f, df
	}
	ts := tCell
	if guess > lo && guess < hi {
		ts = guess
	}
	for it := 1; it <= 200; it++ {
		f, df := balance(ts)
		if f == 0 {
			return ts, it
		}
		if f > 0 { // the balance falls with ts, so the root lies above
			lo = ts
		} else {
			hi = ts
		}
		next := ts - f/df
		// Converged first: a step below the last digit leaves next on the
		// bracket's end, which is no reason to bisect.
		if math.Abs(next-ts) <= 1e-13*hi {
			return next, it
		}
		if !(next > lo && next < hi) {
			next = 0.5 * (lo + hi)
		}
		ts = next
	}
	return ts, 200
}

// SurfaceTemperature returns the temperature of the real surface at boundary
// face `face` of p.Grid when its cell is at tCell (K), under the exposure
// phase in force just before `time` (s). It solves
// k·(tCell − Ts)·Δx²/(Δx/2) = A·(h·(Ts − Tfluid) + εσ·(Ts⁴ − Tsur⁴)),
// the same balance the solver uses. It returns NaN for a face index out of range.
func SurfaceTemperature(p *Problem, face int, tCell, time float64) float64 {
	g := p.Grid
	if face < 0 || face >= len(g.Faces) {
		return math.NaN()
	}
	f := &g.Faces[face]
	m := &p.Materials[g.Region[f.Cell]-1]
	gc := halfCellConductance(m.Conductivity.At(tCell), g.CellSize)
	ts, _, _ := faceExchange(gc, f.Area, phaseBefore(&p.Exposures[f.Group], time), tCell, tCell)
	return ts
}

// halfCellConductance is the conductance from a cell centre to one of its
// faces: k·Δx²/(Δx/2), W/K.
func halfCellConductance(k, dx float64) float64 { return 2 * k * dx }
