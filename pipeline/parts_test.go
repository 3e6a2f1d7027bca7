package pipeline

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"soakfarm/jobspec"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/solver"
	"soakfarm/solver/exact"
)

const partsDir = "../testdata/parts"

// history builds and solves spec, landing on every time in at, and
// returns each probe's temperature (°C) at those times.
func history(t *testing.T, spec *soakv1.JobSpec, at []float64) (*Model, [][]float64) {
	t.Helper()
	m, err := Build(context.Background(), spec, Options{SpecDir: partsDir})
	if err != nil {
		t.Fatal(err)
	}
	m.Problem.Landings = append(m.Problem.Landings, at...)
	out := make([][]float64, len(at))
	next := 0
	_, err = solver.Solve(context.Background(), m.Problem, func(s *solver.State) bool {
		for next < len(at) && math.Abs(s.Time-at[next]) <= 1e-9*at[next] {
			out[next] = m.row(s).Probes
			next++
		}
		return false
	})
	if err != nil {
		t.Fatal(err)
	}
	if next != len(at) {
		t.Fatalf("landed on %d of %d times", next, len(at))
	}
	return m, out
}

// stlSpec cools one STL body of testdata/parts (mm) from 400 °C in a
// 20 °C fluid with h on its whole surface; k, ρ·cp = 4e6 J/m³K.
func stlSpec(file string, h, k, end float64, probe [3]float64) *soakv1.JobSpec {
	return &soakv1.JobSpec{
		Name:        "stl-" + file,
		Part:        &soakv1.Part{Bodies: []*soakv1.Body{{Name: "part", Shape: &soakv1.Body_Stl{Stl: &soakv1.StlFile{File: file, Units: "mm"}}}}},
		CellsAcross: proto.Uint32(20),
		Material:    &soakv1.Material{DensityKgM3: 8000, ConductivityWMk: proto.Float64(k), SpecificHeatJKgk: proto.Float64(500)},
		InitialC:    proto.Float64(400),
		Exposure:    []*soakv1.Exposure{{Surfaces: "all", HWM2K: h, FluidC: proto.Float64(20)}},
		EndS:        end,
		Probes:      []*soakv1.Probe{{Name: "centre", AtM: probe[:]}},
	}
}

// Finely tessellated sphere and cylinder read from STL cool as the exact
// series say (solver/exact: the sphere's series, and the short cylinder
// as the product of the infinite cylinder's and the plane wall's, the
// classical product solution). At 20 cells across the centre stays within
// 2 % of the initial difference; the voxel and polygon error both count.
func TestSTLRoundPartsCoolAsExact(t *testing.T) {
	t.Parallel()
	const k, rhoCp = 40.0, 8000 * 500.0
	alpha := k / rhoCp
	r, cr, ch := 0.05, 0.025, 0.08
	tests := []struct {
		file  string
		h     float64
		probe [3]float64
		theta func(t float64) (float64, error)
		end   float64
	}{
		{"sphere.stl", 800, [3]float64{0, 0, 0}, func(tm float64) (float64, error) {
			return exact.Theta(exact.Sphere, 800*r/k, alpha*tm/(r*r), 0)
		}, 400},
		{"cylinder.stl", 1600, [3]float64{0, 0, ch / 2}, func(tm float64) (float64, error) {
			return exact.ShortCylinderTheta(cr, ch/2, 1600, k, alpha, tm, 0, 0)
		}, 150},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			t.Parallel()
			times := []float64{tt.end / 4, tt.end / 2, tt.end}
			_, got := history(t, stlSpec(tt.file, tt.h, k, tt.end, tt.probe), times)
			for i, tm := range times {
				want, err := tt.theta(tm)
				if err != nil {
					t.Fatal(err)
				}
				theta := (got[i][0] - 20) / (400 - 20)
				t.Logf("t = %g s: θ centre %.4f, exact %.4f", tm, theta, want)
				if math.Abs(theta-want) > 0.02 {
					t.Errorf("t = %g s: centre θ %.4f, exact %.4f", tm, theta, want)
				}
			}
		})
	}
}

// The flanged hub built from bodies and read from STL (the two specs
// partgen writes) give the same model, areas and heat-up. Tolerances:
// the STL's circles are inscribed polygons (the bolt holes 24-gons), and
// the bodies' surface area is the corrected faces' sum, within 3 % of the
// design in the mesh tests; the probe histories agree within 1 % of the
// 600 K heat-up.
func TestHubBodiesAndSTLAgree(t *testing.T) {
	t.Parallel()
	times := []float64{60, 150, 300, 600}
	var models [2]*Model
	var hist [2][][]float64
	for i, name := range []string{"hub-bodies.yaml", "hub-stl.yaml"} {
		spec, err := jobspec.Load(partsDir + "/" + name)
		if err != nil {
			t.Fatal(err)
		}
		models[i], hist[i] = history(t, spec, times)
	}
	bodies, stlModel := models[0], models[1]
	if !near(bodies.volume, stlModel.volume, 0.01) {
		t.Errorf("model volume: bodies %.5g, STL %.5g m³", bodies.volume, stlModel.volume)
	}
	if a, b := bodies.Solid.Area(), stlModel.Solid.Area(); !near(a, b, 0.03) {
		t.Errorf("area: bodies %.5g (corrected faces), STL %.5g m² (triangles)", a, b)
	}
	for i, tm := range times {
		for p := range hist[0][i] {
			d := hist[0][i][p] - hist[1][i][p]
			t.Logf("t = %g s, probe %d: bodies %.2f °C, STL %.2f °C", tm, p, hist[0][i][p], hist[1][i][p])
			if math.Abs(d) > 6 {
				t.Errorf("t = %g s, probe %d: bodies %.2f °C, STL %.2f °C", tm, p, hist[0][i][p], hist[1][i][p])
			}
		}
	}
	sum := &soakv1.Summary{}
	for _, g := range bodies.Grid.Groups {
		sum.SurfaceGroups = append(sum.SurfaceGroups, &soakv1.SurfaceGroupSummary{Name: g.Name})
	}
	bodies.AddGeometry(sum)
	if len(sum.GetBodies()) != 9 || sum.GetBodies()[0].GetMaterial() != "material" || !sum.GetBodies()[2].GetSubtract() {
		t.Errorf("summary bodies: %v", sum.GetBodies())
	}
	for _, g := range sum.GetSurfaceGroups() {
		if g.GetTrueAreaExact() {
			t.Errorf("group %s of a part of several bodies marked exact", g.GetName())
		}
	}
}

func near(got, want, rel float64) bool { return math.Abs(got-want) <= rel*math.Abs(want) }

// cubeSpec is a cube of edge l from two slabs: material "a" for x < 0 and
// "b" for x > 0, heated by fluid t1 at −x and cooled by fluid t2 at +x
// (coefficients h1, h2), insulated elsewhere, with contact conductance hc
// between the slabs (0 for none). Probes sit at the middle of each slab.
func cubeSpec(l, h1, h2, t1, t2, hc float64, a, b *soakv1.Material) *soakv1.JobSpec {
	slab := func(name, mat string, x float64) *soakv1.Body {
		return &soakv1.Body{Name: name, Material: mat,
			Shape: &soakv1.Body_Box{Box: &soakv1.Box{SizeM: []float64{l / 2, l, l}}},
			Place: &soakv1.Placement{TranslateM: []float64{x, 0, 0}}}
	}
	spec := &soakv1.JobSpec{
		Name:        "two-material-cube",
		Part:        &soakv1.Part{Bodies: []*soakv1.Body{slab("left", "a", -l/4), slab("right", "b", l/4)}},
		Materials:   map[string]*soakv1.Material{"a": a, "b": b},
		CellsAcross: proto.Uint32(16),
		InitialC:    proto.Float64(t2),
		Exposure: []*soakv1.Exposure{
			{Facing: []string{"-x"}, HWM2K: h1, FluidC: proto.Float64(t1)},
			{Facing: []string{"+x"}, HWM2K: h2, FluidC: proto.Float64(t2)},
		},
		EndS: 40000,
		Probes: []*soakv1.Probe{
			{Name: "a-middle", AtM: []float64{-l / 4, 0, 0}},
			{Name: "b-middle", AtM: []float64{l / 4, 0, 0}},
		},
		TimeStepping: &soakv1.TimeStepping{MaxStepS: proto.Float64(2000)},
	}
	if hc > 0 {
		spec.Contacts = []*soakv1.Contact{{Materials: []string{"a", "b"}, ConductanceWM2K: hc}}
	}
	return spec
}

func material(rho, k, cp float64) *soakv1.Material {
	return &soakv1.Material{DensityKgM3: rho, ConductivityWMk: proto.Float64(k), SpecificHeatJKgk: proto.Float64(cp)}
}

// A cube of two materials, one half each, reaches the steady state of the
// 1-D composite wall: thermal resistances in series (convection 1/h at
// each face, conduction (l/2)/k in each layer, contact 1/hc between them;
// the series-resistance result of steady conduction through a composite
// wall with contact resistance, as in any heat-transfer text, e.g.
// Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., §3.1,
// from memory). The temperature in each layer is linear, so the probes at
// the layers' middles read the exact values; the finite-volume scheme
// (harmonic face conductances, contact resistance in series) is exact for
// this profile, which leaves only the distance from the steady state.
func TestTwoMaterialCubeMatchesCompositeWall(t *testing.T) {
	t.Parallel()
	const l, h1, h2, t1, t2 = 0.04, 500.0, 300.0, 300.0, 20.0
	steel, ceramic := material(7800, 50, 500), material(2000, 5, 800)
	for _, hc := range []float64{0, 4000} {
		t.Run(fmt.Sprintf("contact %g", hc), func(t *testing.T) {
			t.Parallel()
			rContact := 0.0
			if hc > 0 {
				rContact = 1 / hc
			}
			ka, kb := 50.0, 5.0
			rTotal := 1/h1 + l/2/ka + rContact + l/2/kb + 1/h2
			q := (t1 - t2) / rTotal // W/m²
			wantA := t1 - q*(1/h1+l/4/ka)
			wantB := t2 + q*(1/h2+l/4/kb)
			end := 40000.0
			_, got := history(t, cubeSpec(l, h1, h2, t1, t2, hc, steel, ceramic), []float64{end})
			t.Logf("layer middles: a %.4f °C (exact %.4f), b %.4f °C (exact %.4f)", got[0][0], wantA, got[0][1], wantB)
			if math.Abs(got[0][0]-wantA) > 0.05 || math.Abs(got[0][1]-wantB) > 0.05 {
				t.Errorf("layer middles a %.4f, b %.4f °C; exact %.4f, %.4f", got[0][0], got[0][1], wantA, wantB)
			}
		})
	}
}

// Every broken STL file of testdata/parts stops the build with the body's
// field path and words a CAD user can act on; a small hole closes when
// repair_holes allows it.
func TestBrokenSTLRefused(t *testing.T) {
	t.Parallel()
	tests := []struct {
		file   string
		repair uint32
		want   string // "" when the build must succeed
	}{
		{"broken_open_edge.stl", 0, "open edges"},
		{"broken_open_edge.stl", 3, ""},
		{"broken_nonmanifold_edge.stl", 0, "non-manifold edges"},
		{"broken_flipped_triangle.stl", 0, "face the opposite way"},
		{"broken_inside_out.stl", 0, "inside-out"},
		{"broken_truncated.stl", 0, "not a valid STL file"},
		{"broken_garbage.stl", 0, "not a valid STL file"},
		{"broken_no_endsolid.stl", 0, "not a valid STL file"},
		{"../parts/hub.stl", 0, `leaves the folder`},
		{"/tmp/hub.stl", 0, "is absolute"},
	}
	for _, tt := range tests {
		t.Run(fmt.Sprintf("%s repair %d", tt.file, tt.repair), func(t *testing.T) {
			t.Parallel()
			spec := stlSpec(tt.file, 50, 40, 10, [3]float64{0.005, 0.005, 0.005})
			spec.Part.Bodies[0].GetStl().RepairHoles = tt.repair
			spec.CellsAcross = proto.Uint32(4)
			_, err := Build(context.Background(), spec, Options{SpecDir: partsDir})
			switch {
			case tt.want == "" && err != nil:
				t.Errorf("build failed: %v", err)
			case tt.want != "" && (err == nil || !strings.Contains(err.Error(), "part.bodies[0].stl") || !strings.Contains(err.Error(), tt.want)):
				t.Errorf("error %v; want part.bodies[0].stl and %q", err, tt.want)
			}
		})
	}
	spec := stlSpec("sphere.stl", 50, 40, 10, [3]float64{})
	if _, err := Build(context.Background(), spec, Options{}); err == nil || !strings.Contains(err.Error(), "no spec folder") {
		t.Errorf("no spec folder and no data: got %v", err)
	}
}

// Faces by STL solid name reach the solver's groups with the triangles'
// own area: the bracket's mounting face, 80 × 40 mm in partgen's design.
func TestSTLSolidNamesReachExposure(t *testing.T) {
	t.Parallel()
	spec := stlSpec("bracket.stl", 50, 40, 10, [3]float64{0.003, 0.003, 0.02})
	spec.CellsAcross = proto.Uint32(6)
	spec.Exposure = append(spec.Exposure, &soakv1.Exposure{Solids: []string{"mounting_face"}, HWM2K: 2000, FluidC: proto.Float64(20)})
	m, err := Build(context.Background(), spec, Options{SpecDir: partsDir})
	if err != nil {
		t.Fatal(err)
	}
	g := m.Grid.Groups[1]
	if !g.TrueAreaExact || !near(g.TrueArea, 0.08*0.04, 1e-9) || !near(g.ModelArea, g.TrueArea, 1e-9) {
		t.Errorf("mounting face group %+v, want exact 3.2e-3 m²", g)
	}
	spec.Exposure[1].Solids = []string{"flange"}
	if _, err := Build(context.Background(), spec, Options{SpecDir: partsDir}); err == nil || !strings.Contains(err.Error(), `no STL solid named "flange"`) {
		t.Errorf("unknown solid name: got %v", err)
	}
}
