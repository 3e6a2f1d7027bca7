package jobspec_test

import (
	"errors"
	"strings"
	"testing"

	"soakfarm/jobspec"
	soakv1 "soakfarm/proto/soak/v1"
)

const partsDir = "../testdata/parts"

func hubSpec(t *testing.T, name string) *soakv1.JobSpec {
	t.Helper()
	spec, err := jobspec.Load(partsDir + "/" + name)
	if err != nil {
		t.Fatal(err)
	}
	return spec
}

func TestPartSpecsClean(t *testing.T) {
	t.Parallel()
	for _, name := range []string{"hub-bodies.yaml", "hub-stl.yaml"} {
		spec := hubSpec(t, name)
		if err := jobspec.InlineFiles(spec, partsDir); err != nil {
			t.Fatal(err)
		}
		if err := jobspec.Validate(spec, jobspec.DefaultLimits()); err != nil {
			t.Errorf("%s: %v", name, err)
		}
		// The bounds are known from the bodies (the STL's from its data):
		// the hub is 120 × 120 × 50 mm, from z = 0 up.
		lo, hi, ok := jobspec.Bounds(spec.GetPart())
		want := [2][3]float64{{-0.06, -0.06, 0}, {0.06, 0.06, 0.05}}
		for d := range 3 {
			if !ok || !closeTo(lo[d], want[0][d]) || !closeTo(hi[d], want[1][d]) {
				t.Errorf("%s: bounds %v to %v (%v), want %v to %v", name, lo, hi, ok, want[0], want[1])
				break
			}
		}
	}
}

func closeTo(a, b float64) bool { return a-b < 1e-9 && b-a < 1e-9 }

func TestValidateBodies(t *testing.T) {
	t.Parallel()
	steel := func() *soakv1.Material {
		return &soakv1.Material{DensityKgM3: 7850, ConductivityWMk: new(45.0), SpecificHeatJKgk: new(480.0)}
	}
	cases := []struct {
		name     string
		edit     func(s *soakv1.JobSpec)
		field    string
		fragment string
	}{
		{"shape and bodies", func(s *soakv1.JobSpec) {
			s.Part.Shape = &soakv1.Part_Sphere{Sphere: &soakv1.Sphere{DiameterM: 0.1}}
		}, "part.bodies", "not both"},
		{"body without shape", func(s *soakv1.JobSpec) { s.Part.Bodies[1].Shape = nil }, "part.bodies[1]", "one shape"},
		{"duplicate body name", func(s *soakv1.JobSpec) { s.Part.Bodies[2].Name = "flange" }, "part.bodies[2].name", "already used by part.bodies[0].name"},
		{"first body subtracts", func(s *soakv1.JobSpec) { s.Part.Bodies[0].Subtract = true }, "part.bodies[0].subtract", "nothing to subtract from"},
		{"bad cylinder in a body", func(s *soakv1.JobSpec) { s.Part.Bodies[1].GetCylinder().LengthM = -1 }, "part.bodies[1].cylinder.length_m", "got -1"},
		{"two-number translation", func(s *soakv1.JobSpec) { s.Part.Bodies[0].Place.TranslateM = []float64{0, 1} }, "part.bodies[0].place.translate_m", "3 numbers"},
		{"unknown material", func(s *soakv1.JobSpec) { s.Part.Bodies[1].Material = "bronze" }, "part.bodies[1].material", `materials is empty`},
		{"material on a subtracting body", func(s *soakv1.JobSpec) {
			s.Materials = map[string]*soakv1.Material{"bronze": steel()}
			s.Part.Bodies[2].Material = "bronze"
		}, "part.bodies[2].material", "takes no material"},
		{"absolute STL path", func(s *soakv1.JobSpec) {
			s.Part.Bodies[1].Shape = &soakv1.Body_Stl{Stl: &soakv1.StlFile{File: "/etc/part.stl"}}
		}, "part.bodies[1].stl.file", "inside the spec's folder"},
		{"STL path climbing out", func(s *soakv1.JobSpec) {
			s.Part.Bodies[1].Shape = &soakv1.Body_Stl{Stl: &soakv1.StlFile{File: "../other/part.stl"}}
		}, "part.bodies[1].stl.file", `no ".."`},
		{"STL units", func(s *soakv1.JobSpec) {
			s.Part.Bodies[1].Shape = &soakv1.Body_Stl{Stl: &soakv1.StlFile{File: "hub.stl", Units: "cm"}}
		}, "part.bodies[1].stl.units", `got "cm"`},
		{"material named like the top level", func(s *soakv1.JobSpec) {
			s.Materials = map[string]*soakv1.Material{"material": steel()}
		}, "materials.material", "top-level material"},
		{"bad named material", func(s *soakv1.JobSpec) {
			m := steel()
			m.DensityKgM3 = -1
			s.Materials = map[string]*soakv1.Material{"bronze": m}
		}, "materials.bronze.density_kg_m3", "got -1"},
		{"contact with one material", func(s *soakv1.JobSpec) {
			s.Contacts = []*soakv1.Contact{{Materials: []string{"material"}, ConductanceWM2K: 3000}}
		}, "contacts[0].materials", "2 materials"},
		{"contact with an unknown material", func(s *soakv1.JobSpec) {
			s.Contacts = []*soakv1.Contact{{Materials: []string{"material", "tin"}, ConductanceWM2K: 3000}}
		}, "contacts[0].materials[1]", `got "tin"`},
		{"contact without conductance", func(s *soakv1.JobSpec) {
			s.Materials = map[string]*soakv1.Material{"bronze": steel()}
			s.Contacts = []*soakv1.Contact{{Materials: []string{"material", "bronze"}}}
		}, "contacts[0].conductance_w_m2k", "required"},
		{"exposure of an unknown body", func(s *soakv1.JobSpec) {
			s.Exposure[1] = &soakv1.Exposure{Bodies: []string{"nut"}, HWM2K: 5, FluidC: new(20.0)}
		},
			"exposure[1].bodies[0]", "no body of the part"},
		{"solids without STL", func(s *soakv1.JobSpec) {
			s.Exposure[1] = &soakv1.Exposure{Solids: []string{"top"}, HWM2K: 5, FluidC: new(20.0)}
		},
			"exposure[1].solids", "no STL body"},
		{"region upside down", func(s *soakv1.JobSpec) {
			s.Exposure[1] = &soakv1.Exposure{Region: &soakv1.Region{MinM: []float64{0, 0, 0.1}, MaxM: []float64{1, 1, 0}}, HWM2K: 5, FluidC: new(20.0)}
		}, "exposure[1].region.min_m[2]", "must not exceed max_m[2]"},
		{"probe outside the bodies' box", func(s *soakv1.JobSpec) { s.Probes[0].AtM = []float64{0, 0, -0.01} }, "probes[0].at_m", "box around the part's bodies"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			spec := hubSpec(t, "hub-bodies.yaml")
			tc.edit(spec)
			got := problems(t, spec, jobspec.DefaultLimits())
			if len(got) != 1 {
				t.Fatalf("want one problem at %s, got %d:\n%v", tc.field, len(got), &jobspec.ValidationError{Problems: got})
			}
			if got[0].Field != tc.field || !strings.Contains(got[0].String(), tc.fragment) {
				t.Errorf("got %q (field %q), want field %q with %q", got[0].String(), got[0].Field, tc.field, tc.fragment)
			}
		})
	}
}

// The top-level material may be left out when every body names its own.
func TestTopMaterialOptionalWithNamedMaterials(t *testing.T) {
	t.Parallel()
	spec := hubSpec(t, "hub-bodies.yaml")
	spec.Materials = map[string]*soakv1.Material{"steel": spec.GetMaterial()}
	spec.Material = nil
	for _, b := range spec.GetPart().GetBodies() {
		if !b.GetSubtract() {
			b.Material = "steel"
		}
	}
	if err := jobspec.Validate(spec, jobspec.DefaultLimits()); err != nil {
		t.Error(err)
	}
	spec.Part.Bodies[1].Material = ""
	got := problems(t, spec, jobspec.DefaultLimits())
	if len(got) != 1 || got[0].Field != "material" {
		t.Errorf("a body without material and no top-level material: got %v", &jobspec.ValidationError{Problems: got})
	}
}

func TestParseMaterialsAndContacts(t *testing.T) {
	t.Parallel()
	spec, err := jobspec.Parse([]byte(`
materials:
  bronze: {density_kg_m3: 8800, conductivity_w_mk: 60, specific_heat_j_kgk: 380}
  steel: {density_kg_m3: 7850, conductivity_w_mk: 45, specific_heat_j_kgk: 480}
contacts:
  - {materials: [bronze, steel], conductance_w_m2k: 5000}
`), "yaml")
	if err != nil {
		t.Fatal(err)
	}
	if got := spec.GetMaterials()["bronze"].GetConductivityWMk(); got != 60 {
		t.Errorf("materials.bronze.conductivity_w_mk = %g, want 60", got)
	}
	if c := spec.GetContacts(); len(c) != 1 || c[0].GetConductanceWM2K() != 5000 || c[0].GetMaterials()[1] != "steel" {
		t.Errorf("contacts = %v", c)
	}
	for _, tc := range []struct{ yaml, field, fragment string }{
		{"materials: [a, b]\n", "materials", "mapping of names"},
		{"materials:\n  bronze: {density: 1}\n", "materials.bronze.density", "unknown key"},
		{"materials:\n  bronze: 5\n", "materials.bronze", "mapping of keys"},
		{"part:\n  bodies:\n    - {name: a, stl: {file: a.stl, data: abc}}\n", "part.bodies[0].stl.data", "give file instead"},
	} {
		_, err := jobspec.Parse([]byte(tc.yaml), "yaml")
		var ve *jobspec.ValidationError
		if !errors.As(err, &ve) || ve.Problems[0].Field != tc.field || !strings.Contains(ve.Problems[0].String(), tc.fragment) {
			t.Errorf("%q: got %v, want field %s with %q", tc.yaml, err, tc.field, tc.fragment)
		}
	}
}

func TestInlineFiles(t *testing.T) {
	t.Parallel()
	spec := hubSpec(t, "hub-stl.yaml")
	if err := jobspec.InlineFiles(spec, partsDir); err != nil {
		t.Fatal(err)
	}
	if n := len(spec.GetPart().GetBodies()[0].GetStl().GetData()); n == 0 {
		t.Fatal("no data read")
	}
	spec = hubSpec(t, "hub-stl.yaml")
	spec.Part.Bodies[0].GetStl().File = "../parts/hub.stl"
	if err := jobspec.InlineFiles(spec, partsDir); !errors.Is(err, jobspec.ErrSTLPath) || !strings.Contains(err.Error(), "part.bodies[0].stl.file") {
		t.Errorf("climbing path: got %v", err)
	}
}
