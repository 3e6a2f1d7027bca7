package pipeline

import (
	"bytes"
	"fmt"
	"math"
	"os"
	"path/filepath"

	"soakfarm/estimate"
	"soakfarm/jobspec"
	"soakfarm/mesh"
	"soakfarm/mesh/stl"
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

func finiteOr(v, fallback float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return fallback
	}
	return v
}

// topMaterial is how summaries and messages name the top-level material.
const topMaterial = "material"

// partSetup is a spec's part turned into what the mesh and solver take.
type partSetup struct {
	solid mesh.Solid
	// materials[r-1] is region r's material, named names[r-1] ("material"
	// for the top-level one, else its key in the spec's materials).
	materials []solver.Material
	names     []string
	contacts  []solver.Contact
}

// setupPart builds the part's solid, its regions' materials and their
// contacts. STL files are read from specDir unless the spec carries their
// bytes.
func setupPart(spec *soakv1.JobSpec, specDir string) (*partSetup, error) {
	ps := &partSetup{}
	if len(spec.GetPart().GetBodies()) == 0 {
		solid, err := mesh.SolidFromSpec(spec.GetPart())
		if err != nil {
			return nil, err
		}
		ps.solid = solid
		ps.materials = []solver.Material{estimate.MaterialFromSpec(spec.GetMaterial())}
		ps.names = []string{topMaterial}
		return ps, nil
	}
	regionOf := map[string]uint8{}
	region := func(name string) (uint8, bool) {
		if r, ok := regionOf[name]; ok {
			return r, true
		}
		mat := spec.GetMaterial()
		label := topMaterial
		if name != "" {
			var ok bool
			if mat, ok = spec.GetMaterials()[name]; !ok {
				return 0, false
			}
			label = name
		}
		if len(ps.materials) == math.MaxUint8 {
			return 0, false
		}
		ps.materials = append(ps.materials, estimate.MaterialFromSpec(mat))
		ps.names = append(ps.names, label)
		regionOf[name] = uint8(len(ps.materials))
		return regionOf[name], true
	}
	load := func(i int, f *soakv1.StlFile, rot, shift [3]float64) (mesh.Solid, error) {
		return loadSTL(f, specDir, rot, shift)
	}
	asm, err := mesh.AssemblyFromSpec(spec.GetPart(), region, load)
	if err != nil {
		return nil, err
	}
	ps.solid = asm
	for _, c := range spec.GetContacts() {
		names := c.GetMaterials()
		if len(names) != 2 {
			continue // refused by jobspec validation
		}
		key := func(n string) string {
			if n == topMaterial {
				return ""
			}
			return n
		}
		a, okA := regionOf[key(names[0])]
		b, okB := regionOf[key(names[1])]
		if okA && okB && a != b { // a material no body uses touches nothing
			ps.contacts = append(ps.contacts, solver.Contact{RegionA: a, RegionB: b, Conductance: c.GetConductanceWM2K()})
		}
	}
	return ps, nil
}

// loadSTL reads, checks and places one STL body. The bytes come from the
// spec when it carries them (the farm client fills them in), else from
// file under specDir; a path that is absolute or climbs out of specDir is
// refused, so a spec cannot make a worker read arbitrary files.
func loadSTL(f *soakv1.StlFile, specDir string, rotateDeg, translateM [3]float64) (*stl.Body, error) {
	data := f.GetData()
	if len(data) == 0 {
		path, err := stlPath(f.GetFile(), specDir)
		if err != nil {
			return nil, err
		}
		if data, err = os.ReadFile(path); err != nil {
			return nil, fmt.Errorf("file: %w", err)
		}
	}
	opt, err := mesh.STLOptions(f, rotateDeg, translateM)
	if err != nil {
		return nil, err
	}
	m, err := stl.Read(bytes.NewReader(data), opt)
	if err != nil {
		return nil, fmt.Errorf("file %q: %w", f.GetFile(), err)
	}
	rep := stl.Check(m)
	if err := rep.Err(); err != nil {
		return nil, fmt.Errorf("file %q: the mesh does not bound a solid:\n%s", f.GetFile(), rep)
	}
	body, err := stl.NewBody(m)
	if err != nil {
		return nil, fmt.Errorf("file %q: %w", f.GetFile(), err)
	}
	return body, nil
}

// stlPath resolves a spec's STL file name against the spec's folder.
func stlPath(name, specDir string) (string, error) {
	if err := jobspec.CheckSTLPath(name); err != nil {
		return "", fmt.Errorf("file: %w", err)
	}
	if specDir == "" {
		return "", fmt.Errorf("file: %q cannot be read: the spec carries no file data and no spec folder is known", name)
	}
	return filepath.Join(specDir, name), nil
}

// assembledPart is a part of several bodies with the area its grid found:
// the surface groups' true (or, without an exact one, corrected) areas.
type assembledPart struct {
	*mesh.Assembly
	area float64
}

// Area implements mesh.Solid.
func (a assembledPart) Area() float64 { return a.area }

// partVolumes returns, per region, the model volume of its cells, m³.
func partVolumes(g *mesh.Grid, regions int) []float64 {
	v := make([]float64, regions)
	h3 := g.CellSize * g.CellSize * g.CellSize
	for _, r := range g.Region {
		if r != 0 {
			v[r-1] += h3
		}
	}
	return v
}

// AddGeometry fills the summary's per-body volumes and marks which
// surface groups' true areas are exact. The surface groups must already be
// listed in grid order (as summary does).
func (m *Model) AddGeometry(s *soakv1.Summary) {
	for i, grp := range m.Grid.Groups {
		if i < len(s.GetSurfaceGroups()) {
			s.SurfaceGroups[i].TrueAreaExact = grp.TrueAreaExact
		}
	}
	if _, ok := m.Solid.(assembledPart); !ok {
		return
	}
	for _, b := range m.Grid.Bodies {
		bs := &soakv1.BodySummary{Name: b.Name, Subtract: b.Subtract, TrueVolumeM3: b.TrueVolume, ModelVolumeM3: b.ModelVolume}
		if !b.Subtract {
			bs.Material = m.regionNames[b.Region-1]
		}
		s.Bodies = append(s.Bodies, bs)
	}
}

// Part builds spec's part and returns its solid and the material of its
// first region: what hand estimates need, without a mesh.
func Part(spec *soakv1.JobSpec, specDir string) (mesh.Solid, solver.Material, error) {
	ps, err := setupPart(spec, specDir)
	if err != nil {
		return nil, solver.Material{}, err
	}
	return ps.solid, ps.materials[0], nil
}
