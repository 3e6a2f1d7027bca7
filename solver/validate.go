package solver

import (
	"errors"
	"fmt"
	"math"
)

// ErrInvalidProblem marks every input error of a Problem.
var ErrInvalidProblem = errors.New("invalid problem")

// Schemes the solver knows.
const (
	BackwardEuler = "backward-euler"
	BDF2          = "bdf2"
)

// Preconditioners of the linear solver.
const (
	Multigrid = "multigrid"
	Jacobi    = "jacobi"
)

// problemErrors collects every input problem so that they are reported at once.
type problemErrors []error

func (pe *problemErrors) add(format string, args ...any) {
	*pe = append(*pe, fmt.Errorf("%w: "+format, append([]any{ErrInvalidProblem}, args...)...))
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// Validate checks a problem and returns all its errors joined, each naming
// the field and the bad value, or nil.
func (p *Problem) Validate() error {
	if p == nil {
		return fmt.Errorf("%w: problem is nil", ErrInvalidProblem)
	}
	var errs problemErrors
	p.validateGrid(&errs)
	for i, m := range p.Materials {
		path := fmt.Sprintf("materials[%d]", i)
		if !(m.Density > 0) || !finite(m.Density) {
			errs.add("%s.density: must be positive, got %g", path, m.Density)
		}
		validateCurve(&errs, path+".conductivity", m.Conductivity)
		validateCurve(&errs, path+".specific_heat", m.SpecificHeat)
	}
	for i, e := range p.Exposures {
		validateExposure(&errs, fmt.Sprintf("exposures[%d]", i), e)
	}
	if !(p.Initial > 0) || !finite(p.Initial) {
		errs.add("initial: must be a positive absolute temperature in K, got %g", p.Initial)
	}
	if !(p.End > 0) || !finite(p.End) {
		errs.add("end: must be positive, got %g s", p.End)
	}
	for i, l := range p.Landings {
		if !(l >= 0) || !finite(l) { // landings after End are never reached and ignored
			errs.add("landings[%d]: must be a finite time ≥ 0, got %g s", i, l)
		}
	}
	for i, c := range p.Contacts {
		path := fmt.Sprintf("contacts[%d]", i)
		for _, r := range []uint8{c.RegionA, c.RegionB} {
			if r == 0 || int(r) > len(p.Materials) {
				errs.add("%s: region %d has no material (%d materials)", path, r, len(p.Materials))
			}
		}
		if c.RegionA == c.RegionB {
			errs.add("%s: regions must differ, got %d twice", path, c.RegionA)
		}
		if !(c.Conductance > 0) || !finite(c.Conductance) {
			errs.add("%s.conductance: must be positive, got %g W/(m²·K)", path, c.Conductance)
		}
	}
	p.Stepping.validate(&errs)
	if p.Threads < 0 {
		errs.add("threads: must not be negative, got %d", p.Threads)
	}
	return errors.Join(errs...)
}

func (p *Problem) validateGrid(errs *problemErrors) {
	g := p.Grid
	if g == nil {
		errs.add("grid: missing")
		return
	}
	if g.N[0] <= 0 || g.N[1] <= 0 || g.N[2] <= 0 {
		errs.add("grid.n: every count must be positive, got %v", g.N)
		return
	}
	if !(g.CellSize > 0) || !finite(g.CellSize) {
		errs.add("grid.cell_size: must be positive, got %g m", g.CellSize)
	}
	if len(g.Region) != g.CellCount() {
		errs.add("grid.region: has %d entries for %v = %d cells", len(g.Region), g.N, g.CellCount())
		return
	}
	parts := 0
	for c, r := range g.Region {
		if r == 0 {
			continue
		}
		parts++
		if int(r) > len(p.Materials) {
			errs.add("grid.region[%d]: region %d has no material (%d materials)", c, r, len(p.Materials))
			break
		}
	}
	if parts == 0 {
		errs.add("grid.region: no cell belongs to the part")
	}
	if len(p.Exposures) != len(g.Groups) {
		errs.add("exposures: %d given for %d surface groups", len(p.Exposures), len(g.Groups))
	}
	for i, f := range g.Faces {
		path := fmt.Sprintf("grid.faces[%d]", i)
		switch {
		case f.Cell < 0 || int(f.Cell) >= len(g.Region) || g.Region[f.Cell] == 0:
			errs.add("%s.cell: %d is not a part cell", path, f.Cell)
		case f.Dir > 5:
			errs.add("%s.dir: must be 0…5, got %d", path, f.Dir)
		case int(f.Group) >= len(g.Groups):
			errs.add("%s.group: %d but only %d groups", path, f.Group, len(g.Groups))
		case !(f.Area > 0) || !finite(f.Area):
			errs.add("%s.area: must be positive, got %g m²", path, f.Area)
		}
	}
}

func validateCurve(errs *problemErrors, path string, c Curve) {
	if len(c.T) == 0 || len(c.T) != len(c.V) {
		errs.add("%s: needs as many temperatures as values and at least one, got %d and %d", path, len(c.T), len(c.V))
		return
	}
	for i := range c.T {
		if !finite(c.T[i]) {
			errs.add("%s.t[%d]: must be finite, got %g", path, i, c.T[i])
		}
		if i > 0 && !(c.T[i] > c.T[i-1]) {
			errs.add("%s.t[%d]: temperatures must increase, got %g after %g", path, i, c.T[i], c.T[i-1])
		}
		if !(c.V[i] > 0) || !finite(c.V[i]) {
			errs.add("%s.v[%d]: must be positive, got %g", path, i, c.V[i])
		}
	}
}

func validateExposure(errs *problemErrors, path string, e Exposure) {
	if len(e.Phases) == 0 {
		errs.add("%s.phases: at least one phase needed", path)
		return
	}
	for i, ph := range e.Phases {
		pp := fmt.Sprintf("%s.phases[%d]", path, i)
		switch {
		case i == 0 && ph.Start != 0:
			errs.add("%s.start: the first phase must start at 0, got %g s", pp, ph.Start)
		case i > 0 && !(ph.Start > e.Phases[i-1].Start):
			errs.add("%s.start: phases must start in increasing order, got %g after %g s", pp, ph.Start, e.Phases[i-1].Start)
		}
		if !(ph.H >= 0) || !finite(ph.H) {
			errs.add("%s.h: must not be negative, got %g W/(m²·K)", pp, ph.H)
		}
		if !(ph.Emissivity >= 0 && ph.Emissivity <= 1) {
			errs.add("%s.emissivity: must be in [0, 1], got %g", pp, ph.Emissivity)
		}
		if ph.H > 0 && (!(ph.Fluid > 0) || !finite(ph.Fluid)) {
			errs.add("%s.fluid: must be a positive absolute temperature in K, got %g", pp, ph.Fluid)
		}
		if ph.Emissivity > 0 && (!(ph.Surroundings > 0) || !finite(ph.Surroundings)) {
			errs.add("%s.surroundings: must be a positive absolute temperature in K, got %g", pp, ph.Surroundings)
		}
	}
}

func (s Stepping) validate(errs *problemErrors) {
	switch s.Scheme {
	case "", BackwardEuler, BDF2:
	default:
		errs.add("stepping.scheme: must be %q or %q, got %q", BackwardEuler, BDF2, s.Scheme)
	}
	switch s.Preconditioner {
	case "", Multigrid, Jacobi:
	default:
		errs.add("stepping.preconditioner: must be %q or %q, got %q", Multigrid, Jacobi, s.Preconditioner)
	}
	check := func(name string, v float64, unit string) {
		if !(v >= 0) || !finite(v) {
			errs.add("stepping.%s: must not be negative (0 means default), got %g%s", name, v, unit)
		}
	}
	check("max_change", s.MaxChange, " K")
	check("first_step", s.FirstStep, " s")
	check("max_step", s.MaxStep, " s")
	check("tolerance", s.Tolerance, "")
	if s.Tolerance >= 1 {
		errs.add("stepping.tolerance: must be below 1, got %g", s.Tolerance)
	}
}
