package jobspec

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"soakfarm/mesh"
	"soakfarm/mesh/stl"
	soakv1 "soakfarm/proto/soak/v1"
)

// TopMaterial is the name by which contacts refer to the spec's top-level
// material; no entry of materials may take it.
const TopMaterial = "material"

// ErrSTLPath marks an STL file name that is not a plain path inside the
// spec's folder.
var ErrSTLPath = errors.New("STL file must be a path inside the spec's folder")

// CheckSTLPath refuses an STL file name that is absolute or climbs out of
// the spec's folder, so that a spec cannot make a worker read other files.
func CheckSTLPath(name string) error {
	switch {
	case name == "":
		return fmt.Errorf("%w: no file name given", ErrSTLPath)
	case filepath.IsAbs(name) || strings.HasPrefix(name, "/") || strings.HasPrefix(name, `\`):
		return fmt.Errorf("%w: %q is absolute; give it relative to the spec's folder", ErrSTLPath, name)
	case !filepath.IsLocal(name):
		return fmt.Errorf("%w: %q leaves the folder (\"..\")", ErrSTLPath, name)
	}
	return nil
}

// InlineFiles reads the STL files a spec names, relative to dir (the spec
// file's folder), into the spec's data fields, so that the spec carries
// its part wherever it runs: the farm client calls it before submitting.
// Bodies whose data is already set are left alone. Errors name the field.
func InlineFiles(spec *soakv1.JobSpec, dir string) error {
	var errs []error
	for i, b := range spec.GetPart().GetBodies() {
		f := b.GetStl()
		if f == nil || len(f.GetData()) > 0 {
			continue
		}
		path := fmt.Sprintf("part.bodies[%d].stl.file", i)
		if err := CheckSTLPath(f.GetFile()); err != nil {
			errs = append(errs, fmt.Errorf("%s: %w", path, err))
			continue
		}
		data, err := os.ReadFile(filepath.Join(dir, f.GetFile()))
		if err != nil {
			errs = append(errs, fmt.Errorf("%s: %w", path, err))
			continue
		}
		f.Data = data
	}
	return errors.Join(errs...)
}

// needsTopMaterial reports whether some cell of the part takes the
// top-level material: a one-shape part, or a body that adds cells without
// naming a material.
func needsTopMaterial(p *soakv1.Part) bool {
	for _, b := range p.GetBodies() {
		if !b.GetSubtract() && b.GetMaterial() == "" {
			return true
		}
	}
	return len(p.GetBodies()) == 0
}

// bodies checks a part built from bodies.
func (c *checker) bodies(spec *soakv1.JobSpec) {
	names := map[string]string{}
	for i, b := range spec.GetPart().GetBodies() {
		path := fmt.Sprintf("part.bodies[%d]", i)
		c.label(path+".name", b.GetName(), names)
		if f := b.GetStl(); f != nil {
			c.stlFile(path+".stl", f)
		} else if !c.shape(path, b.GetSphere(), b.GetCylinder(), b.GetBox()) {
			c.add(path, "", "required: one shape, sphere, cylinder, box or stl")
		}
		for field, v := range map[string][]float64{"translate_m": b.GetPlace().GetTranslateM(), "rotate_deg": b.GetPlace().GetRotateDeg()} {
			if len(v) != 0 && len(v) != 3 {
				c.add(path+".place."+field, strconv.Itoa(len(v))+" numbers", "must hold 3 numbers (x, y, z)")
			}
		}
		switch mat := b.GetMaterial(); {
		case b.GetSubtract() && i == 0:
			c.add(path+".subtract", "true", "the first body must add to the part; there is nothing to subtract from yet")
		case b.GetSubtract() && mat != "":
			c.add(path+".material", strconv.Quote(mat), "a subtracting body removes cells and takes no material")
		case mat != "":
			if _, ok := spec.GetMaterials()[mat]; !ok {
				c.add(path+".material", strconv.Quote(mat), "no entry of materials has this name"+known(spec))
			}
		}
	}
}

// known lists the names of the spec's materials for a message.
func known(spec *soakv1.JobSpec) string {
	var names []string
	for n := range spec.GetMaterials() {
		names = append(names, strconv.Quote(n))
	}
	if len(names) == 0 {
		return " (materials is empty)"
	}
	slices.Sort(names)
	return " (materials has " + strings.Join(names, ", ") + ")"
}

// stlFile checks an STL body's file settings.
func (c *checker) stlFile(path string, f *soakv1.StlFile) {
	if len(f.GetData()) == 0 {
		if err := CheckSTLPath(f.GetFile()); f.GetFile() == "" {
			c.add(path+".file", "", "required: the STL file, relative to the spec's folder")
		} else if err != nil {
			c.add(path+".file", strconv.Quote(f.GetFile()), "must be a path inside the spec's folder (not absolute, no \"..\")")
		}
	}
	if _, ok := stl.UnitScale(f.GetUnits()); !ok {
		c.add(path+".units", strconv.Quote(f.GetUnits()), `must be "m", "mm" or "in"`)
	}
}

// materials checks the named materials and the contacts between them.
func (c *checker) materials(spec *soakv1.JobSpec) {
	names := make([]string, 0, len(spec.GetMaterials()))
	for n := range spec.GetMaterials() {
		names = append(names, n)
	}
	slices.Sort(names)
	for _, n := range names {
		path := "materials." + n
		switch {
		case strings.TrimSpace(n) == "":
			c.add("materials", strconv.Quote(n), "a material name must not be empty")
		case n == TopMaterial:
			c.add(path, "", fmt.Sprintf("%q names the top-level material; choose another name", TopMaterial))
		default:
			c.text(path, n)
		}
		c.material(path, spec.GetMaterials()[n])
	}
	for i, ct := range spec.GetContacts() {
		path := fmt.Sprintf("contacts[%d]", i)
		pair := ct.GetMaterials()
		if len(pair) != 2 {
			c.add(path+".materials", strconv.Itoa(len(pair))+" names", "must name 2 materials")
		}
		for j, n := range pair {
			if _, ok := spec.GetMaterials()[n]; !ok && n != TopMaterial {
				c.add(fmt.Sprintf("%s.materials[%d]", path, j), strconv.Quote(n), fmt.Sprintf("must be %q or an entry of materials%s", TopMaterial, known(spec)))
			}
		}
		if len(pair) == 2 && pair[0] == pair[1] {
			c.add(path+".materials", strconv.Quote(pair[0])+" twice", "must name 2 different materials")
		}
		if ct.GetConductanceWM2K() == 0 {
			c.add(path+".conductance_w_m2k", "", "required: the contact conductance, W/m²K")
		} else {
			c.positive(path+".conductance_w_m2k", ct.GetConductanceWM2K())
		}
	}
}

// selection checks what an exposure selects by body, STL solid and
// region against the part. STL solid names are checked when the part is
// meshed, since only the files know them.
func (c *checker) selection(path string, e *soakv1.Exposure, part *soakv1.Part) {
	hasSTL := false
	var bodyNames []string
	for _, b := range part.GetBodies() {
		bodyNames = append(bodyNames, b.GetName())
		hasSTL = hasSTL || b.GetStl() != nil
	}
	for j, n := range e.GetBodies() {
		switch {
		case len(bodyNames) == 0:
			c.add(fmt.Sprintf("%s.bodies[%d]", path, j), strconv.Quote(n), "the part is one shape; bodies select faces of a part built from bodies")
		case !slices.Contains(bodyNames, n):
			c.add(fmt.Sprintf("%s.bodies[%d]", path, j), strconv.Quote(n), "no body of the part has this name")
		}
	}
	if len(e.GetSolids()) > 0 && !hasSTL {
		c.add(path+".solids", strconv.Quote(e.GetSolids()[0]), "the part has no STL body whose solid blocks could be named")
	}
	if r := e.GetRegion(); r != nil {
		lo, hi := r.GetMinM(), r.GetMaxM()
		if len(lo) != 3 || len(hi) != 3 {
			c.add(path+".region", fmt.Sprintf("%d and %d numbers", len(lo), len(hi)), "min_m and max_m must each hold 3 coordinates (x, y, z), m")
			return
		}
		for d := range 3 {
			if finite(lo[d]) && finite(hi[d]) && lo[d] > hi[d] {
				c.add(fmt.Sprintf("%s.region.min_m[%d]", path, d), num(lo[d]), fmt.Sprintf("must not exceed max_m[%d], %s", d, num(hi[d])))
			}
		}
	}
}

// stlBounds loads an STL body carried in the spec for its bounding box;
// a body whose data the spec does not carry has unknown bounds.
func stlBounds(_ int, f *soakv1.StlFile, rotateDeg, translate [3]float64) (mesh.Solid, error) {
	if len(f.GetData()) == 0 {
		return nil, errors.New("file data not carried")
	}
	opt, err := mesh.STLOptions(f, rotateDeg, translate)
	if err != nil {
		return nil, err
	}
	m, err := stl.Read(bytes.NewReader(f.GetData()), opt)
	if err != nil {
		return nil, err
	}
	return stl.NewBody(m)
}
