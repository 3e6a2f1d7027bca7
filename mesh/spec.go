package mesh

import (
	"errors"
	"fmt"
	"slices"

	soakv1 "soakfarm/proto/soak/v1"
)

// axisNames spells each axis as the job spec does.
var axisNames = [3]string{"x", "y", "z"}

// SolidFromSpec builds the solid a job spec's part describes. Errors name
// the spec field (part.cylinder.length_m, …) and report every problem.
func SolidFromSpec(part *soakv1.Part) (Solid, error) {
	if part == nil {
		return nil, errors.New("part: missing; give a sphere, cylinder or box")
	}
	switch shape := part.GetShape().(type) {
	case *soakv1.Part_Sphere:
		d := shape.Sphere.GetDiameterM()
		if err := checkLength("part.sphere.diameter_m", d); err != nil {
			return nil, err
		}
		return Sphere{Diameter: d}, nil
	case *soakv1.Part_Cylinder:
		c := shape.Cylinder
		errs := []error{
			checkLength("part.cylinder.diameter_m", c.GetDiameterM()),
			checkLength("part.cylinder.length_m", c.GetLengthM()),
		}
		axis := 2 // the spec's default, z
		if name := c.GetAxis(); name != "" {
			axis = slices.Index(axisNames[:], name)
			if axis < 0 {
				errs = append(errs, fmt.Errorf("part.cylinder.axis: must be \"x\", \"y\" or \"z\", got %q", name))
			}
		}
		if err := errors.Join(errs...); err != nil {
			return nil, err
		}
		return Cylinder{Diameter: c.GetDiameterM(), Length: c.GetLengthM(), Axis: axis}, nil
	case *soakv1.Part_Box:
		size := shape.Box.GetSizeM()
		if len(size) != 3 {
			return nil, fmt.Errorf("part.box.size_m: must list 3 edge lengths (x, y, z), got %d", len(size))
		}
		errs := make([]error, 3)
		for d, v := range size {
			errs[d] = checkLength(fmt.Sprintf("part.box.size_m[%d]", d), v)
		}
		if err := errors.Join(errs...); err != nil {
			return nil, err
		}
		return Box{Size: [3]float64(size)}, nil
	default:
		return nil, errors.New("part: no shape given; give a sphere, cylinder or box")
	}
}

// SelectorsFromSpec turns a job spec's exposure list into selectors, in the
// same order (selector i is exposure i). Errors name the spec field.
func SelectorsFromSpec(exposures []*soakv1.Exposure) ([]Selector, error) {
	selectors := make([]Selector, len(exposures))
	var errs []error
	for i, e := range exposures {
		path := fmt.Sprintf("exposure[%d]", i)
		switch e.GetSurfaces() {
		case "all":
			selectors[i].All = true
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
			selectors[i].Facing = append(selectors[i].Facing, d)
		}
		switch {
		case selectors[i].All && len(e.GetFacing()) > 0:
			errs = append(errs, fmt.Errorf("%s: give either surfaces \"all\" or facing, not both", path))
		case e.GetSurfaces() == "" && len(e.GetFacing()) == 0:
			errs = append(errs, fmt.Errorf("%s: selects no surface; set surfaces \"all\" or list facing directions", path))
		}
	}
	if err := errors.Join(errs...); err != nil {
		return nil, err
	}
	return selectors, nil
}
