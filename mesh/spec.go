package mesh

import (
	"errors"
	"fmt"
	"slices"

	"soakfarm/mesh/stl"
	soakv1 "soakfarm/proto/soak/v1"
)

// axisNames spells each axis as the job spec does.
var axisNames = [3]string{"x", "y", "z"}

// SolidFromSpec builds the solid a job spec's part describes when it is
// one shape. Errors name the spec field (part.cylinder.length_m, …) and
// report every problem. A part of bodies is built with AssemblyFromSpec.
func SolidFromSpec(part *soakv1.Part) (Solid, error) {
	if part == nil {
		return nil, errors.New("part: missing; give a sphere, cylinder or box")
	}
	if len(part.GetBodies()) > 0 {
		return nil, errors.New("part.bodies: a part of bodies is built with its STL files and materials (AssemblyFromSpec), not as one shape")
	}
	s, err := primitiveFromSpec("part", part.GetSphere(), part.GetCylinder(), part.GetBox())
	if s == nil && err == nil {
		return nil, errors.New("part: no shape given; give a sphere, cylinder or box")
	}
	return s, err
}

// primitiveFromSpec builds the one shape set among sphere, cylinder and
// box, centred on the origin; path prefixes the field names in errors. It
// returns nil and no error when none is set.
func primitiveFromSpec(path string, sphere *soakv1.Sphere, c *soakv1.Cylinder, box *soakv1.Box) (Solid, error) {
	switch {
	case sphere != nil:
		d := sphere.GetDiameterM()
		if err := checkLength(path+".sphere.diameter_m", d); err != nil {
			return nil, err
		}
		return Sphere{Diameter: d}, nil
	case c != nil:
		errs := []error{
			checkLength(path+".cylinder.diameter_m", c.GetDiameterM()),
			checkLength(path+".cylinder.length_m", c.GetLengthM()),
		}
		axis := 2 // the spec's default, z
		if name := c.GetAxis(); name != "" {
			axis = slices.Index(axisNames[:], name)
			if axis < 0 {
				errs = append(errs, fmt.Errorf("%s.cylinder.axis: must be \"x\", \"y\" or \"z\", got %q", path, name))
			}
		}
		if err := errors.Join(errs...); err != nil {
			return nil, err
		}
		return Cylinder{Diameter: c.GetDiameterM(), Length: c.GetLengthM(), Axis: axis}, nil
	case box != nil:
		size := box.GetSizeM()
		if len(size) != 3 {
			return nil, fmt.Errorf("%s.box.size_m: must list 3 edge lengths (x, y, z), got %d", path, len(size))
		}
		errs := make([]error, 3)
		for d, v := range size {
			errs[d] = checkLength(fmt.Sprintf("%s.box.size_m[%d]", path, d), v)
		}
		if err := errors.Join(errs...); err != nil {
			return nil, err
		}
		return Box{Size: [3]float64(size)}, nil
	}
	return nil, nil
}

// PlacementFromSpec returns a body's rotation (degrees about x, y, z) and
// translation (m); errors name path.place's fields.
func PlacementFromSpec(path string, p *soakv1.Placement) (rotateDeg, translate [3]float64, err error) {
	var errs []error
	read := func(field string, v []float64, out *[3]float64) {
		switch len(v) {
		case 0:
		case 3:
			*out = [3]float64(v)
		default:
			errs = append(errs, fmt.Errorf("%s.place.%s: must list 3 numbers (x, y, z), got %d", path, field, len(v)))
		}
	}
	read("rotate_deg", p.GetRotateDeg(), &rotateDeg)
	read("translate_m", p.GetTranslateM(), &translate)
	return rotateDeg, translate, errors.Join(errs...)
}

// STLLoader reads body i's STL file, placed by rotateDeg and translate (m)
// into the part's frame. The caller owns files and their checks.
type STLLoader func(i int, file *soakv1.StlFile, rotateDeg, translate [3]float64) (Solid, error)

// AssemblyFromSpec builds a part of bodies. region maps a body's material
// name ("" for the top-level material) to its region (1 or more) and
// reports false for an unknown name; loadSTL reads STL bodies. Errors name
// the spec fields (part.bodies[2].cylinder.length_m) and report every
// problem.
func AssemblyFromSpec(part *soakv1.Part, region func(material string) (uint8, bool), loadSTL STLLoader) (*Assembly, error) {
	a := &Assembly{}
	var errs []error
	for i, b := range part.GetBodies() {
		path := fmt.Sprintf("part.bodies[%d]", i)
		rot, shift, err := PlacementFromSpec(path, b.GetPlace())
		if err != nil {
			errs = append(errs, err)
			continue
		}
		body := Body{Name: b.GetName(), Subtract: b.GetSubtract()}
		if !body.Subtract {
			r, ok := region(b.GetMaterial())
			if !ok {
				errs = append(errs, fmt.Errorf("%s.material: no material named %q in materials", path, b.GetMaterial()))
			}
			body.Region = r
		}
		if file := b.GetStl(); file != nil {
			body.Solid, err = loadSTL(i, file, rot, shift)
			if err != nil {
				errs = append(errs, fmt.Errorf("%s.stl: %w", path, err))
				continue
			}
		} else {
			s, err := primitiveFromSpec(path, b.GetSphere(), b.GetCylinder(), b.GetBox())
			switch {
			case err != nil:
				errs = append(errs, err)
				continue
			case s == nil:
				errs = append(errs, fmt.Errorf("%s: no shape given; give a sphere, cylinder, box or stl", path))
				continue
			}
			body.Solid = Place(s, rot, shift)
		}
		a.Bodies = append(a.Bodies, body)
	}
	if err := errors.Join(errs...); err != nil {
		return nil, err
	}
	if err := a.Validate(); err != nil {
		return nil, fmt.Errorf("part: %w", err)
	}
	return a, nil
}

// SelectorsFromSpec turns a job spec's exposure list into selectors, in the
// same order (selector i is exposure i). Errors name the spec field. Body
// and STL solid names are checked against the part by Voxelise.
func SelectorsFromSpec(exposures []*soakv1.Exposure) ([]Selector, error) {
	selectors := make([]Selector, len(exposures))
	var errs []error
	for i, e := range exposures {
		path := fmt.Sprintf("exposure[%d]", i)
		sel := &selectors[i]
		switch e.GetSurfaces() {
		case "all":
			sel.All = true
		case "":
		default:
			errs = append(errs, fmt.Errorf("%s.surfaces: must be \"all\" or left out, got %q", path, e.GetSurfaces()))
		}
		for j, name := range e.GetFacing() {
			d := slices.Index(DirectionNames[:], name)
			if d < 0 {
				errs = append(errs, fmt.Errorf("%s.facing[%d]: must be one of -x, +x, -y, +y, -z, +z, got %q", path, j, name))
				continue
			}
			sel.Facing = append(sel.Facing, d)
		}
		sel.Bodies = e.GetBodies()
		sel.Solids = e.GetSolids()
		if r := e.GetRegion(); r != nil {
			lo, hi := r.GetMinM(), r.GetMaxM()
			if len(lo) != 3 || len(hi) != 3 {
				errs = append(errs, fmt.Errorf("%s.region: min_m and max_m must each list 3 coordinates (x, y, z), got %d and %d", path, len(lo), len(hi)))
			} else {
				sel.Region = &Region{Min: [3]float64(lo), Max: [3]float64(hi)}
				for d := range 3 {
					if !(lo[d] <= hi[d]) {
						errs = append(errs, fmt.Errorf("%s.region.min_m[%d]: must not exceed max_m[%d] = %g, got %g", path, d, d, hi[d], lo[d]))
					}
				}
			}
		}
		others := len(e.GetFacing()) > 0 || len(sel.Bodies) > 0 || len(sel.Solids) > 0 || e.GetRegion() != nil
		switch {
		case sel.All && others:
			errs = append(errs, fmt.Errorf("%s: give either surfaces \"all\" or facing, solids, bodies and region, not both", path))
		case e.GetSurfaces() == "" && !others:
			errs = append(errs, fmt.Errorf("%s: selects no surface; set surfaces \"all\" or list facing directions, solids, bodies or a region", path))
		}
	}
	if err := errors.Join(errs...); err != nil {
		return nil, err
	}
	return selectors, nil
}

// STLOptions returns how to read an STL body of the spec: its units,
// repair setting and placement (the translation given in m, as the spec
// does, converted to the file's units, in which stl.Options moves).
func STLOptions(f *soakv1.StlFile, rotateDeg, translateM [3]float64) (stl.Options, error) {
	unit, ok := stl.UnitScale(f.GetUnits())
	if !ok {
		return stl.Options{}, fmt.Errorf("units: must be \"m\", \"mm\" or \"in\", got %q", f.GetUnits())
	}
	opt := stl.Options{Units: f.GetUnits(), RotateDeg: rotateDeg, RepairHoles: int(f.GetRepairHoles())}
	for d := range translateM {
		opt.Translate[d] = translateM[d] / unit
	}
	return opt, nil
}
