package jobspec_test

import (
	"errors"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"soakfarm/jobspec"
	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
)

const specDir = "../testdata/specs/"

// beadSpec loads the reference spec every rule case starts from: a glass
// bead quenched in air (sphere 20 mm, 40 cells across).
func beadSpec(t *testing.T) *soakv1.JobSpec {
	t.Helper()
	spec, err := jobspec.Load(specDir + "bead-tray-quench.yaml")
	if err != nil {
		t.Fatal(err)
	}
	return spec
}

// problems runs Validate and returns its problems, failing on any other
// kind of error.
func problems(t *testing.T, spec *soakv1.JobSpec, lim jobspec.Limits) []jobspec.Problem {
	t.Helper()
	err := jobspec.Validate(spec, lim)
	if err == nil {
		return nil
	}
	var verr *jobspec.ValidationError
	if !errors.As(err, &verr) {
		t.Fatalf("Validate returned %T %v, want *ValidationError", err, err)
	}
	if len(verr.Problems) == 0 {
		t.Fatal("ValidationError without problems")
	}
	return verr.Problems
}

func cylinder(d, l float64, axis string) *soakv1.Part {
	return &soakv1.Part{Shape: &soakv1.Part_Cylinder{Cylinder: &soakv1.Cylinder{DiameterM: d, LengthM: l, Axis: axis}}}
}

func box(sizes ...float64) *soakv1.Part {
	return &soakv1.Part{Shape: &soakv1.Part_Box{Box: &soakv1.Box{SizeM: sizes}}}
}

func points(tv ...float64) []*soakv1.TablePoint {
	var out []*soakv1.TablePoint
	for i := 0; i+1 < len(tv); i += 2 {
		out = append(out, &soakv1.TablePoint{TempC: tv[i], Value: tv[i+1]})
	}
	return out
}

func TestValidateExampleSpecsClean(t *testing.T) {
	t.Parallel()
	for _, name := range []string{
		"bead-tray-quench.yaml",
		"bead-tray-quench.json",
		"flange-furnace-heatup.yaml",
		"aluminium-block-air.yaml",
		"ceramic-carrier-kiln.json",
	} {
		t.Run(name, func(t *testing.T) {
			t.Parallel()
			spec, err := jobspec.Load(specDir + name)
			if err != nil {
				t.Fatal(err)
			}
			if err := jobspec.Validate(spec, jobspec.DefaultLimits()); err != nil {
				t.Errorf("want a clean spec, got:\n%v", err)
			}
		})
	}
}

// TestValidateRules breaks one rule per case on the bead spec and expects
// exactly one problem, at the given path, with the given message fragment.
func TestValidateRules(t *testing.T) {
	t.Parallel()
	nan, inf := math.NaN(), math.Inf(1)
	cases := []struct {
		name     string
		edit     func(s *soakv1.JobSpec)
		field    string
		fragment string
	}{
		// name
		{"name only spaces", func(s *soakv1.JobSpec) { s.Name = "   " }, "name", "only spaces"},
		{"name with line break", func(s *soakv1.JobSpec) { s.Name = "a\nb" }, "name", "control characters"},
		{"name too long", func(s *soakv1.JobSpec) { s.Name = strings.Repeat("n", 201) }, "name", "at most 200"},

		// part
		{"part missing", func(s *soakv1.JobSpec) { s.Part = nil }, "part", "required"},
		{"part without shape", func(s *soakv1.JobSpec) { s.Part = &soakv1.Part{} }, "part", "one shape"},
		{"sphere diameter zero", func(s *soakv1.JobSpec) { s.Part.GetSphere().DiameterM = 0 }, "part.sphere.diameter_m", "greater than 0, got 0"},
		{"sphere diameter negative", func(s *soakv1.JobSpec) { s.Part.GetSphere().DiameterM = -0.02 }, "part.sphere.diameter_m", "got -0.02"},
		{"cylinder diameter negative", func(s *soakv1.JobSpec) { s.Part = cylinder(-0.02, 0.05, "") }, "part.cylinder.diameter_m", "greater than 0"},
		{"cylinder length zero", func(s *soakv1.JobSpec) { s.Part = cylinder(0.02, 0, "z") }, "part.cylinder.length_m", "greater than 0"},
		{"cylinder axis unknown", func(s *soakv1.JobSpec) { s.Part = cylinder(0.02, 0.05, "w") }, "part.cylinder.axis", `must be "x", "y" or "z", got "w"`},
		{"box with two sizes", func(s *soakv1.JobSpec) { s.Part = box(0.02, 0.03) }, "part.box.size_m", "3 lengths"},
		{"box size zero", func(s *soakv1.JobSpec) { s.Part = box(0.02, 0, 0.03) }, "part.box.size_m[1]", "greater than 0"},

		// grid spacing
		{"both grid settings", func(s *soakv1.JobSpec) { s.CellSizeM = new(0.001) }, "cell_size_m", "only one of cells_across and cell_size_m"},
		{"no grid setting", func(s *soakv1.JobSpec) { s.CellsAcross = nil }, "cells_across", "set one of cells_across and cell_size_m"},
		{"cells_across too few", func(s *soakv1.JobSpec) { s.CellsAcross = new(uint32(3)) }, "cells_across", "from 4 to 2000, got 3"},
		{"cells_across too many", func(s *soakv1.JobSpec) { s.CellsAcross = new(uint32(2001)) }, "cells_across", "from 4 to 2000, got 2001"},
		{"cell size zero", func(s *soakv1.JobSpec) { s.CellsAcross, s.CellSizeM = nil, new(0.0) }, "cell_size_m", "greater than 0"},
		// 20 mm / 8 mm = 2.5 cells across
		{"cell size too coarse", func(s *soakv1.JobSpec) { s.CellsAcross, s.CellSizeM = nil, new(0.008) }, "cell_size_m", "leaves 2.5 cells across"},

		// material
		{"material missing", func(s *soakv1.JobSpec) { s.Material = nil }, "material", "required"},
		{"density missing", func(s *soakv1.JobSpec) { s.Material.DensityKgM3 = 0 }, "material.density_kg_m3", "required"},
		{"density negative", func(s *soakv1.JobSpec) { s.Material.DensityKgM3 = -1 }, "material.density_kg_m3", "greater than 0, got -1"},
		{"conductivity missing", func(s *soakv1.JobSpec) { s.Material.ConductivityWMk = nil }, "material.conductivity_w_mk", "set one of conductivity_w_mk and conductivity_table"},
		{"conductivity twice", func(s *soakv1.JobSpec) { s.Material.ConductivityTable = points(20, 1) }, "material.conductivity_table", "only one of"},
		{"conductivity zero", func(s *soakv1.JobSpec) { s.Material.ConductivityWMk = new(0.0) }, "material.conductivity_w_mk", "greater than 0"},
		{"conductivity table temps not increasing", func(s *soakv1.JobSpec) {
			s.Material.ConductivityWMk, s.Material.ConductivityTable = nil, points(20, 1.1, 300, 1.3, 300, 1.4)
		}, "material.conductivity_table[2].temp_c", "strictly increasing"},
		{"conductivity table value zero", func(s *soakv1.JobSpec) {
			s.Material.ConductivityWMk, s.Material.ConductivityTable = nil, points(20, 1.1, 300, 0)
		}, "material.conductivity_table[1].value", "greater than 0, got 0"},
		{"conductivity table below absolute zero", func(s *soakv1.JobSpec) {
			s.Material.ConductivityWMk, s.Material.ConductivityTable = nil, points(-280, 1.1, 300, 1.2)
		}, "material.conductivity_table[0].temp_c", "absolute zero"},
		{"specific heat missing", func(s *soakv1.JobSpec) { s.Material.SpecificHeatJKgk = nil }, "material.specific_heat_j_kgk", "set one of specific_heat_j_kgk and specific_heat_table"},
		{"specific heat twice", func(s *soakv1.JobSpec) { s.Material.SpecificHeatTable = points(20, 700) }, "material.specific_heat_table", "only one of"},
		{"specific heat negative", func(s *soakv1.JobSpec) { s.Material.SpecificHeatJKgk = new(-750.0) }, "material.specific_heat_j_kgk", "greater than 0"},
		{"specific heat table temps decreasing", func(s *soakv1.JobSpec) {
			s.Material.SpecificHeatJKgk, s.Material.SpecificHeatTable = nil, points(20, 700, 400, 900, 200, 950)
		}, "material.specific_heat_table[2].temp_c", "previous point's 400"},

		// starting temperature
		{"initial missing", func(s *soakv1.JobSpec) { s.InitialC = nil }, "initial_c", "required"},
		{"initial below absolute zero", func(s *soakv1.JobSpec) { s.InitialC = new(-273.15) }, "initial_c", "above absolute zero"},

		// exposure: which faces
		{"surfaces and facing", func(s *soakv1.JobSpec) { s.Exposure[0].Facing = []string{"+z"} }, "exposure[0].surfaces", "either surfaces or facing, solids, bodies and region, not both"},
		{"neither surfaces nor facing", func(s *soakv1.JobSpec) { s.Exposure[0].Surfaces = "" }, "exposure[0]", "set surfaces, or one or more of facing, solids, bodies and region"},
		{"surfaces not all", func(s *soakv1.JobSpec) { s.Exposure[0].Surfaces = "outside" }, "exposure[0].surfaces", `must be "all"`},
		{"facing unknown direction", func(s *soakv1.JobSpec) {
			s.Exposure[0].Surfaces, s.Exposure[0].Facing = "", []string{"+x", "x+"}
		}, "exposure[0].facing[1]", `got "x+"`},
		{"facing repeated", func(s *soakv1.JobSpec) {
			s.Exposure[0].Surfaces, s.Exposure[0].Facing = "", []string{"+x", "-z", "+x"}
		}, "exposure[0].facing[2]", "given twice"},

		// exposure: values
		{"h negative", func(s *soakv1.JobSpec) { s.Exposure[0].HWM2K = -5 }, "exposure[0].h_w_m2k", "0 or more, got -5"},
		{"fluid missing with convection", func(s *soakv1.JobSpec) { s.Exposure[0].FluidC = nil }, "exposure[0].fluid_c", "required when h_w_m2k > 0"},
		{"fluid below absolute zero", func(s *soakv1.JobSpec) { s.Exposure[0].FluidC = new(-300.0) }, "exposure[0].fluid_c", "absolute zero"},
		{"emissivity above one", func(s *soakv1.JobSpec) { s.Exposure[0].Emissivity = new(1.4) }, "exposure[0].emissivity", "must be in [0, 1], got 1.4"},
		{"emissivity negative", func(s *soakv1.JobSpec) { s.Exposure[0].Emissivity = new(-0.1) }, "exposure[0].emissivity", "must be in [0, 1]"},
		{"surroundings below absolute zero", func(s *soakv1.JobSpec) { s.Exposure[0].SurroundingsC = new(-274.0) }, "exposure[0].surroundings_c", "absolute zero"},
		{"surroundings missing with radiation only", func(s *soakv1.JobSpec) {
			s.Exposure[0].HWM2K, s.Exposure[0].FluidC, s.Exposure[0].SurroundingsC = 0, nil, nil
		}, "exposure[0].surroundings_c", "required when emissivity > 0"},
		{"exposure exchanging nothing", func(s *soakv1.JobSpec) { s.Exposure[0].HWM2K, s.Exposure[0].Emissivity = 0, nil }, "exposure[0]", "exchanges no heat"},
		{"exposure with zero emissivity and no convection", func(s *soakv1.JobSpec) { s.Exposure[0].HWM2K, s.Exposure[0].Emissivity = 0, new(0.0) }, "exposure[0]", "exchanges no heat"},

		// exposure: schedule
		{"schedule at time zero", func(s *soakv1.JobSpec) {
			s.Exposure[0].Schedule = []*soakv1.ExposureChange{{AtS: 0, HWM2K: new(10.0)}}
		}, "exposure[0].schedule[0].at_s", "greater than 0"},
		{"schedule out of order", func(s *soakv1.JobSpec) {
			s.Exposure[0].Schedule = []*soakv1.ExposureChange{{AtS: 300, HWM2K: new(10.0)}, {AtS: 300, HWM2K: new(5.0)}}
		}, "exposure[0].schedule[1].at_s", "later than the previous change, at 300 s"},
		{"schedule after end", func(s *soakv1.JobSpec) {
			s.Exposure[0].Schedule = []*soakv1.ExposureChange{{AtS: 600, HWM2K: new(10.0)}}
		}, "exposure[0].schedule[0].at_s", "before end_s, 600 s"},
		{"schedule changing nothing", func(s *soakv1.JobSpec) {
			s.Exposure[0].Schedule = []*soakv1.ExposureChange{{AtS: 60}}
		}, "exposure[0].schedule[0]", "changes nothing"},
		{"schedule h negative", func(s *soakv1.JobSpec) {
			s.Exposure[0].Schedule = []*soakv1.ExposureChange{{AtS: 60, HWM2K: new(-1.0)}}
		}, "exposure[0].schedule[0].h_w_m2k", "0 or more"},
		{"schedule emissivity above one", func(s *soakv1.JobSpec) {
			s.Exposure[0].Schedule = []*soakv1.ExposureChange{{AtS: 60, Emissivity: new(2.0)}}
		}, "exposure[0].schedule[0].emissivity", "must be in [0, 1], got 2"},
		{"schedule fluid below absolute zero", func(s *soakv1.JobSpec) {
			s.Exposure[0].Schedule = []*soakv1.ExposureChange{{AtS: 60, FluidC: new(-500.0)}}
		}, "exposure[0].schedule[0].fluid_c", "absolute zero"},
		{"schedule surroundings below absolute zero", func(s *soakv1.JobSpec) {
			s.Exposure[0].Schedule = []*soakv1.ExposureChange{{AtS: 60, SurroundingsC: new(-500.0)}}
		}, "exposure[0].schedule[0].surroundings_c", "absolute zero"},
		{"schedule starts convection without fluid", func(s *soakv1.JobSpec) {
			e := s.Exposure[0]
			e.HWM2K, e.FluidC = 0, nil
			e.Schedule = []*soakv1.ExposureChange{{AtS: 60, HWM2K: new(100.0)}, {AtS: 120, HWM2K: new(50.0)}}
		}, "exposure[0].schedule[0].fluid_c", "not set at this change or before"},

		// end time
		{"end missing", func(s *soakv1.JobSpec) { s.EndS = 0 }, "end_s", "required"},
		{"end negative", func(s *soakv1.JobSpec) { s.EndS = -10 }, "end_s", "greater than 0, got -10"},
		{"end infinite", func(s *soakv1.JobSpec) { s.EndS = inf }, "end_s", "finite number, got +Inf"},

		// probes
		{"probe without name", func(s *soakv1.JobSpec) { s.Probes[0].Name, s.Milestones = "", s.Milestones[1:] }, "probes[0].name", "required"},
		{"probe name repeated", func(s *soakv1.JobSpec) {
			s.Probes = append(s.Probes, &soakv1.Probe{Name: "core", AtM: []float64{0.001, 0, 0}})
		}, "probes[1].name", "already used by probes[0].name"},
		{"probe with two coordinates", func(s *soakv1.JobSpec) { s.Probes[0].AtM = []float64{0, 0} }, "probes[0].at_m", "3 coordinates"},
		{"probe coordinate NaN", func(s *soakv1.JobSpec) { s.Probes[0].AtM[1] = nan }, "probes[0].at_m[1]", "finite number, got NaN"},
		// Sphere radius 10 mm, half a cell 0.25 mm: 10.3 mm is out.
		{"probe beyond sphere on an axis", func(s *soakv1.JobSpec) { s.Probes[0].AtM = []float64{0, 0, 0.0103} }, "probes[0].at_m", "must lie in the part"},
		// (9, 9, 0) mm is inside the bounding box but 12.7 mm from the centre.
		{"probe in the bounding box corner of a sphere", func(s *soakv1.JobSpec) { s.Probes[0].AtM = []float64{0.009, 0.009, 0} }, "probes[0].at_m", "(0.009, 0.009, 0)"},
		// Cylinder along x, radius 10 mm: (0, 8, 8) mm is 11.3 mm off the axis.
		{"probe off a cylinder's round side", func(s *soakv1.JobSpec) {
			s.Part, s.Probes[0].AtM = cylinder(0.02, 0.06, "x"), []float64{0.025, 0.008, 0.008}
		}, "probes[0].at_m", "must lie in the part"},
		{"probe past a cylinder's end", func(s *soakv1.JobSpec) {
			s.Part, s.Probes[0].AtM = cylinder(0.02, 0.06, "x"), []float64{0.031, 0, 0}
		}, "probes[0].at_m", "must lie in the part"},
		{"probe outside a box", func(s *soakv1.JobSpec) {
			s.Part, s.Probes[0].AtM = box(0.02, 0.04, 0.06), []float64{0, 0.0206, 0}
		}, "probes[0].at_m", "must lie in the part"},

		// milestones
		{"milestone name repeated", func(s *soakv1.JobSpec) { s.Milestones[1].Name = "core-below-100" }, "milestones[1].name", "already used by milestones[0].name"},
		{"milestone without name", func(s *soakv1.JobSpec) { s.Milestones[1].Name = "" }, "milestones[1].name", "required"},
		{"milestone with both kinds", func(s *soakv1.JobSpec) { s.Milestones[0].EnergyFraction = new(0.5) }, "milestones[0]", "not both"},
		{"milestone with neither kind", func(s *soakv1.JobSpec) { s.Milestones[1].EnergyFraction = nil }, "milestones[1]", "set probe with reaches_c, or energy_fraction"},
		{"milestone probe without temperature", func(s *soakv1.JobSpec) { s.Milestones[0].ReachesC = nil }, "milestones[0].reaches_c", "required with probe"},
		{"milestone temperature without probe", func(s *soakv1.JobSpec) { s.Milestones[0].Probe = "" }, "milestones[0].probe", "required with reaches_c"},
		{"milestone probe unknown", func(s *soakv1.JobSpec) { s.Milestones[0].Probe = "centre" }, "milestones[0].probe", `no probe has this name, got "centre"`},
		{"milestone temperature below absolute zero", func(s *soakv1.JobSpec) { s.Milestones[0].ReachesC = new(-274.0) }, "milestones[0].reaches_c", "absolute zero"},
		{"energy fraction one", func(s *soakv1.JobSpec) { s.Milestones[1].EnergyFraction = new(1.0) }, "milestones[1].energy_fraction", "between 0 and 1"},
		{"energy fraction zero", func(s *soakv1.JobSpec) { s.Milestones[1].EnergyFraction = new(0.0) }, "milestones[1].energy_fraction", "between 0 and 1"},

		// time stepping
		{"scheme unknown", func(s *soakv1.JobSpec) { s.TimeStepping = &soakv1.TimeStepping{Scheme: "explicit"} }, "time_stepping.scheme", `got "explicit"`},
		{"max change zero", func(s *soakv1.JobSpec) { s.TimeStepping = &soakv1.TimeStepping{MaxChangeK: new(0.0)} }, "time_stepping.max_change_k", "greater than 0"},
		{"first step negative", func(s *soakv1.JobSpec) { s.TimeStepping = &soakv1.TimeStepping{FirstStepS: new(-1.0)} }, "time_stepping.first_step_s", "greater than 0"},
		{"max step zero", func(s *soakv1.JobSpec) { s.TimeStepping = &soakv1.TimeStepping{MaxStepS: new(0.0)} }, "time_stepping.max_step_s", "greater than 0"},
		{"first step above max step", func(s *soakv1.JobSpec) {
			s.TimeStepping = &soakv1.TimeStepping{FirstStepS: new(20.0), MaxStepS: new(10.0)}
		}, "time_stepping.first_step_s", "must not exceed max_step_s, 10 s"},
		// 600 s / 0.0001 s = 6e6 steps, over the default 1e6.
		{"too many steps", func(s *soakv1.JobSpec) { s.TimeStepping = &soakv1.TimeStepping{MaxStepS: new(1e-4)} }, "time_stepping.max_step_s", "6e+06 steps, over the limit of 1000000"},

		// snapshots
		{"snapshot after end", func(s *soakv1.JobSpec) { s.SnapshotsS = []float64{0, 700} }, "snapshots_s[1]", "[0, 600] s, got 700"},
		{"snapshot before start", func(s *soakv1.JobSpec) { s.SnapshotsS = []float64{-1} }, "snapshots_s[0]", "got -1"},

		// non-finite numbers anywhere, reported once and only as such
		{"NaN convection", func(s *soakv1.JobSpec) { s.Exposure[0].HWM2K = nan }, "exposure[0].h_w_m2k", "finite number"},
		{"NaN in a table", func(s *soakv1.JobSpec) {
			s.Material.ConductivityWMk, s.Material.ConductivityTable = nil, points(20, 1.1, nan, 1.2, 400, 1.3)
		}, "material.conductivity_table[1].temp_c", "finite number"},
		{"infinite cell size", func(s *soakv1.JobSpec) { s.CellsAcross, s.CellSizeM = nil, new(inf) }, "cell_size_m", "finite number"},
		{"infinite diameter", func(s *soakv1.JobSpec) { s.Part.GetSphere().DiameterM = -inf }, "part.sphere.diameter_m", "got -Inf"},
		{"NaN schedule time", func(s *soakv1.JobSpec) {
			s.Exposure[0].Schedule = []*soakv1.ExposureChange{{AtS: nan, HWM2K: new(10.0)}}
		}, "exposure[0].schedule[0].at_s", "finite number"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			spec := beadSpec(t)
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

// TestValidateAccepts covers values at the edges of the rules that must
// pass.
func TestValidateAccepts(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name string
		edit func(s *soakv1.JobSpec)
	}{
		{"no name", func(s *soakv1.JobSpec) { s.Name = "" }},
		{"cells_across at its minimum", func(s *soakv1.JobSpec) { s.CellsAcross = new(uint32(4)) }},
		{"cell size giving exactly 4 cells", func(s *soakv1.JobSpec) { s.CellsAcross, s.CellSizeM = nil, new(0.005) }},
		{"emissivity 0 with convection", func(s *soakv1.JobSpec) { s.Exposure[0].Emissivity = new(0.0) }},
		{"emissivity 1", func(s *soakv1.JobSpec) { s.Exposure[0].Emissivity = new(1.0) }},
		{"radiation only, surroundings from fluid", func(s *soakv1.JobSpec) {
			s.Exposure[0].HWM2K, s.Exposure[0].SurroundingsC = 0, nil
		}},
		{"convection only", func(s *soakv1.JobSpec) { s.Exposure[0].Emissivity = nil }},
		{"convection starting later with its fluid", func(s *soakv1.JobSpec) {
			e := s.Exposure[0]
			e.HWM2K, e.Emissivity, e.FluidC = 0, nil, nil
			e.Schedule = []*soakv1.ExposureChange{{AtS: 30, HWM2K: new(500.0), FluidC: new(20.0)}}
		}},
		{"no exposure at all", func(s *soakv1.JobSpec) { s.Exposure = nil }},
		{"facing all six sides", func(s *soakv1.JobSpec) {
			s.Exposure[0].Surfaces, s.Exposure[0].Facing = "", []string{"+x", "-x", "+y", "-y", "+z", "-z"}
		}},
		// Sphere radius 10 mm, half a cell 0.25 mm.
		{"probe within half a cell outside the sphere", func(s *soakv1.JobSpec) { s.Probes[0].AtM = []float64{0, 0.0102, 0} }},
		{"probe on a box corner", func(s *soakv1.JobSpec) {
			s.Part, s.Probes[0].AtM = box(0.02, 0.04, 0.06), []float64{-0.01, 0.02, -0.03}
		}},
		{"probe on a y cylinder's rim", func(s *soakv1.JobSpec) {
			s.Part, s.Probes[0].AtM = cylinder(0.02, 0.06, "y"), []float64{0.006, -0.03, 0.008}
		}},
		{"snapshots at both ends", func(s *soakv1.JobSpec) { s.SnapshotsS = []float64{0, 600} }},
		{"time stepping spelled out", func(s *soakv1.JobSpec) {
			s.TimeStepping = &soakv1.TimeStepping{Scheme: "backward-euler", MaxChangeK: new(2.0), FirstStepS: new(0.1), MaxStepS: new(10.0)}
		}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			spec := beadSpec(t)
			tc.edit(spec)
			if err := jobspec.Validate(spec, jobspec.DefaultLimits()); err != nil {
				t.Errorf("want no problem, got:\n%v", err)
			}
		})
	}
}

// TestValidateGridLimits checks the grid size against limits just below
// and at the estimate. The counts are worked by hand from the sizes.
func TestValidateGridLimits(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name  string
		part  *soakv1.Part
		cells int64 // of the grid box at 4 cells across
		grid  string
		dims  [3]int
	}{
		// 100 × 50 × 20 mm, 4 cells on the 20 mm side: 5 mm cells,
		// 20 × 10 × 4 = 800.
		{"box", box(0.1, 0.05, 0.02), 800, "20 × 10 × 4 = 800 cells", [3]int{20, 10, 4}},
		// D 40 mm, L 100 mm along x: 10 mm cells, 10 × 4 × 4 = 160.
		{"cylinder", cylinder(0.04, 0.1, "x"), 160, "10 × 4 × 4 = 160 cells", [3]int{10, 4, 4}},
		// D 20 mm: 5 mm cells, 4 × 4 × 4 = 64.
		{"sphere", nil, 64, "4 × 4 × 4 = 64 cells", [3]int{4, 4, 4}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			spec := beadSpec(t)
			spec.CellsAcross = new(uint32(4))
			spec.Probes, spec.Milestones = nil, spec.Milestones[1:]
			if tc.part != nil {
				spec.Part = tc.part
			}
			bytes := mesh.EstimateBytes(tc.dims)
			for _, lim := range []jobspec.Limits{
				{MaxCells: tc.cells},
				{MaxMemoryBytes: bytes},
			} {
				if err := jobspec.Validate(spec, lim); err != nil {
					t.Errorf("limit %+v at the estimate: %v", lim, err)
				}
			}
			overCells := problems(t, spec, jobspec.Limits{MaxCells: tc.cells - 1})
			if len(overCells) != 1 || overCells[0].Field != "cells_across" ||
				!strings.Contains(overCells[0].Message, tc.grid) || !strings.Contains(overCells[0].Message, "coarsen") {
				t.Errorf("cells over the limit: got %v", overCells)
			}
			overMemory := problems(t, spec, jobspec.Limits{MaxMemoryBytes: bytes - 1})
			if len(overMemory) != 1 || !strings.Contains(overMemory[0].Message, tc.grid) ||
				!strings.Contains(overMemory[0].Message, "--max-memory") {
				t.Errorf("memory over the limit: got %v", overMemory)
			}
		})
	}
}

// TestValidateMemoryMessage checks the estimate and limit in the message
// for a grid far over the default limit.
func TestValidateMemoryMessage(t *testing.T) {
	t.Parallel()
	spec := beadSpec(t)
	spec.CellsAcross = new(uint32(1000))
	// 1000³ cells × 121 B plus 8·3e6 faces × 64 B = 1.22536e11 B = 114.12 GiB
	// (worked by hand from mesh.EstimateBytes's stated sizes).
	got := problems(t, spec, jobspec.Limits{MaxMemoryBytes: 4 << 30})
	want := "cells_across: cells_across 1000 makes a grid of 1000 × 1000 × 1000 = 1000 M cells needing about 114.5 GiB, over the 4.0 GiB memory limit; " +
		"coarsen the grid (fewer cells_across or a larger cell_size_m) or raise the limit with the --max-memory flag of soak run"
	if len(got) != 1 || got[0].String() != want {
		t.Errorf("got %v\nwant %s", got, want)
	}
}

// TestValidateManyProblems checks that one spec with many mistakes gets all
// of them reported, in spec order.
func TestValidateManyProblems(t *testing.T) {
	t.Parallel()
	spec, err := jobspec.Load(specDir + "bad-many-problems.yaml")
	if err != nil {
		t.Fatal(err)
	}
	got := problems(t, spec, jobspec.DefaultLimits())
	want := []string{
		"part.cylinder.length_m",
		"part.cylinder.axis",
		"cells_across",
		"material.conductivity_table[1].temp_c",
		"material.specific_heat_j_kgk",
		"initial_c",
		"exposure[0].fluid_c",
		"exposure[1].facing[1]",
		"exposure[1]",
		"probes[0].at_m",
		"milestones[0].probe",
		"milestones[1].name",
		"milestones[1].energy_fraction",
		"time_stepping.scheme",
		"time_stepping.max_step_s",
		"snapshots_s[0]",
	}
	var fields []string
	for _, p := range got {
		fields = append(fields, p.Field)
	}
	if strings.Join(fields, "\n") != strings.Join(want, "\n") {
		t.Errorf("fields:\n%s\nwant:\n%s", strings.Join(fields, "\n"), strings.Join(want, "\n"))
	}
	err = jobspec.Validate(spec, jobspec.DefaultLimits())
	if lines := strings.Split(err.Error(), "\n"); len(lines) != len(want) {
		t.Errorf("Error() has %d lines, want one per problem (%d)", len(lines), len(want))
	}
}

func TestValidateBadSpecFiles(t *testing.T) {
	t.Parallel()
	cases := []struct {
		file string
		want []string // one line per problem
	}{
		{"bad-emissivity-above-one.yaml", []string{"exposure[1].emissivity: must be in [0, 1], got 1.4"}},
		{"bad-probe-outside-part.yaml", []string{"probes[1].at_m: must lie in the part (centred on the origin) or within half a cell, 0.005 m, of it, got (0.05, 0.1, 0.05)"}},
		// 2 m / 0.1 mm = 20000, 20 mm / 0.1 mm = 200: 8e8 cells × 121 B plus
		// 8·(20000·200·2 + 200·200) faces × 64 B = 1.00916e11 B = 93.99 GiB.
		{"bad-grid-too-fine.yaml", []string{
			"cell_size_m: cell_size_m 0.0001 makes a grid of 20000 × 200 × 200 = 800 M cells, over the limit of 64 M cells; coarsen the grid (fewer cells_across or a larger cell_size_m)",
			"cell_size_m: cell_size_m 0.0001 makes a grid of 20000 × 200 × 200 = 800 M cells needing about 94.9 GiB, over the 4.0 GiB memory limit; coarsen the grid (fewer cells_across or a larger cell_size_m) or raise the limit with the --max-memory flag of soak run",
		}},
	}
	for _, tc := range cases {
		t.Run(tc.file, func(t *testing.T) {
			t.Parallel()
			spec, err := jobspec.Load(specDir + tc.file)
			if err != nil {
				t.Fatal(err)
			}
			err = jobspec.Validate(spec, jobspec.DefaultLimits())
			if err == nil || err.Error() != strings.Join(tc.want, "\n") {
				t.Errorf("got:\n%v\nwant:\n%s", err, strings.Join(tc.want, "\n"))
			}
		})
	}
}

func TestValidateNil(t *testing.T) {
	t.Parallel()
	if got := problems(t, nil, jobspec.DefaultLimits()); len(got) != 1 {
		t.Errorf("got %v, want one problem", got)
	}
}

func TestCellSize(t *testing.T) {
	t.Parallel()
	spec := beadSpec(t)
	// 20 mm over 40 cells.
	if h := jobspec.CellSize(spec); math.Abs(h-0.0005) > 1e-15 {
		t.Errorf("CellSize = %g, want 0.0005", h)
	}
	spec.Part = cylinder(0.04, 0.01, "y") // smallest extent: the 10 mm length
	if h := jobspec.CellSize(spec); math.Abs(h-0.00025) > 1e-15 {
		t.Errorf("CellSize = %g, want 0.00025", h)
	}
	if ext, ok := jobspec.Extents(spec.Part); !ok || ext != [3]float64{0.04, 0.01, 0.04} {
		t.Errorf("Extents = %v, %v", ext, ok)
	}
	spec.Part = nil
	if h := jobspec.CellSize(spec); h != 0 {
		t.Errorf("CellSize without a part = %g, want 0", h)
	}
}

// refine: true solves again at half the cell size, so the grid limits
// apply to eight times the cells (2³ for halving each edge).
func TestRefineCountsTheFineGrid(t *testing.T) {
	t.Parallel()
	spec, err := jobspec.Load(filepath.Join("..", "testdata", "specs", "bead-tray-quench.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	lim := jobspec.Limits{MaxCells: 40 * 40 * 40 * 2} // the 40³ box passes, 80³ does not
	if err := jobspec.Validate(spec, lim); err != nil {
		t.Fatalf("without refine: %v", err)
	}
	spec.Refine = true
	err = jobspec.Validate(spec, lim)
	if err == nil || !strings.Contains(err.Error(), "80 × 80 × 80") {
		t.Fatalf("with refine: got %v, want the 80³ grid refused", err)
	}
}

// A probe's name heads a column of probes.csv, so it may not carry the
// CSV separator or quote (RFC 4180).
func TestProbeNameFitsTheCSVHeader(t *testing.T) {
	t.Parallel()
	spec, err := jobspec.Load(filepath.Join("..", "testdata", "specs", "bead-tray-quench.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{"core,left", `core "A"`} {
		spec.Probes[0].Name = name
		spec.Milestones[0].Probe = name
		err := jobspec.Validate(spec, jobspec.DefaultLimits())
		if err == nil || !strings.Contains(err.Error(), "probes[0].name") || !strings.Contains(err.Error(), "probes.csv") {
			t.Errorf("probe named %q: got %v, want a problem at probes[0].name", name, err)
		}
	}
}
