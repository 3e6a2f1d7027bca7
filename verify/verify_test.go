package verify

import (
	"bytes"
	"context"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/types/known/wrapperspb"

	"soakfarm/estimate"
	"soakfarm/jobspec"
	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/solver"
	"soakfarm/solver/exact"
)

const zeroCelsius = 273.15

func loadSpec(t *testing.T, name string) *soakv1.JobSpec {
	t.Helper()
	spec, err := jobspec.Load(filepath.Join("testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	if err := jobspec.Validate(spec, jobspec.DefaultLimits()); err != nil {
		t.Fatal(err)
	}
	return spec
}

// sphereJob is a convection-only sphere job solved here the way the
// pipeline does it, with its error against the exact series measured
// independently of the package under test.
type sphereJob struct {
	input Input
	// tempError is the largest |θ − θ exact| at the cell nearest the centre
	// and at the surface of the +x pole, from Fo = 0.05 on; energyError the
	// largest |Q/Qmax − exact|.
	tempError, energyError float64
	// coreTime is when the cell nearest the centre reached the spec's
	// first milestone temperature, s.
	coreTime float64
}

func solveSphereJob(t *testing.T, spec *soakv1.JobSpec) sphereJob {
	t.Helper()
	ctx := context.Background()
	d := spec.GetPart().GetSphere().GetDiameterM()
	solid := mesh.Sphere{Diameter: d}
	g, err := mesh.Voxelise(ctx, solid, mesh.CellSizeFor(solid, int(spec.GetCellsAcross())), []mesh.Selector{{All: true}})
	if err != nil {
		t.Fatal(err)
	}
	mat := estimate.MaterialFromSpec(spec.GetMaterial())
	e := spec.GetExposure()[0]
	initial, fluid := spec.GetInitialC()+zeroCelsius, e.GetFluidC()+zeroCelsius
	p := &solver.Problem{Grid: g, Materials: []solver.Material{mat}, Initial: initial, End: spec.GetEndS(), Threads: 1}
	for _, grp := range g.Groups {
		ph := solver.ExposurePhase{Fluid: initial, Surroundings: initial}
		if grp.Exposure == 0 {
			ph = solver.ExposurePhase{H: e.GetHWM2K(), Fluid: fluid, Surroundings: fluid}
		}
		p.Exposures = append(p.Exposures, solver.Exposure{Phases: []solver.ExposurePhase{ph}})
	}
	// With an even cell count the eight cells round the centre are alike.
	centre, pole, best := -1, -1, math.Inf(1)
	for c, r := range g.Region {
		i, j, k := g.Coords(c)
		x := g.Centre(i, j, k)
		if dist := math.Hypot(x[0], math.Hypot(x[1], x[2])); r != 0 && dist < best {
			centre, best = c, dist
		}
	}
	for f, face := range g.Faces {
		if face.Dir == mesh.PlusX && (pole < 0 || face.Normal[0] > g.Faces[pole].Normal[0]) {
			pole = f
		}
	}
	radius := d / 2
	k := mat.Conductivity.At(initial)
	rhoCp := mat.Density * mat.SpecificHeat.At(initial)
	bi, alpha := e.GetHWM2K()*radius/k, k/rhoCp
	qMax := rhoCp * float64(g.PartCells()) * math.Pow(g.CellSize, 3) * (fluid - initial)
	theta := func(temp float64) float64 { return (temp - fluid) / (initial - fluid) }
	target := theta(spec.GetMilestones()[0].GetReachesC() + zeroCelsius)

	job := sphereJob{coreTime: math.NaN()}
	prevTime, prevTheta := 0.0, 1.0
	out, err := solver.Solve(ctx, p, func(s *solver.State) bool {
		fo := alpha * s.Time / (radius * radius)
		core := theta(s.T[centre])
		if math.IsNaN(job.coreTime) && core <= target && s.Step > 0 {
			job.coreTime = prevTime + (s.Time-prevTime)*(prevTheta-target)/(prevTheta-core)
		}
		prevTime, prevTheta = s.Time, core
		if fo < 0.05 {
			return false
		}
		wantCore, err1 := exact.Theta(exact.Sphere, bi, fo, best/radius)
		wantSurface, err2 := exact.Theta(exact.Sphere, bi, fo, 1)
		wantEnergy, err3 := exact.EnergyFraction(exact.Sphere, bi, fo)
		if err1 != nil || err2 != nil || err3 != nil {
			t.Fatal(err1, err2, err3)
		}
		surface := theta(solver.SurfaceTemperature(p, pole, s.T[g.Faces[pole].Cell], s.Time))
		job.tempError = max(job.tempError, math.Abs(core-wantCore), math.Abs(surface-wantSurface))
		job.energyError = max(job.energyError, math.Abs(s.StoredEnergy/qMax-wantEnergy))
		return false
	})
	if err != nil {
		t.Fatal(err)
	}
	job.input = Input{
		Spec: spec, Solid: solid, CellSize: g.CellSize, Material: mat,
		Milestones:      []*soakv1.MilestoneResult{{Name: spec.GetMilestones()[0].GetName(), TimeS: wrapperspb.Double(job.coreTime)}},
		EnergyImbalance: out.EnergyImbalance, EndTime: out.EndTime, Threads: 1,
	}
	return job
}

// TestCrossCheckReproducesTheJobsError: on a sphere job the cross-check's
// sphere is the job's own part at the job's resolution, so its errors
// against the exact series (Incropera et al., 6th ed., §5.6, through
// package exact) must be those the job itself shows.
func TestCrossCheckReproducesTheJobsError(t *testing.T) {
	t.Parallel()
	job := solveSphereJob(t, loadSpec(t, "ball-quench.yaml"))
	v, err := Run(context.Background(), job.input)
	if err != nil {
		t.Fatal(err)
	}
	var sphere *soakv1.CrossCheck
	for _, cc := range v.GetCrossChecks() {
		if cc.GetShape() == "sphere" {
			sphere = cc
		}
	}
	if sphere == nil {
		t.Fatal("no sphere cross-check")
	}
	t.Logf("job errors: temperature %.5f, energy %.5f; cross-check %.5f, %.5f",
		job.tempError, job.energyError, sphere.GetTemperatureError().GetValue(), sphere.GetEnergyError().GetValue())
	if got, want := sphere.GetTemperatureError().GetValue(), job.tempError; math.Abs(got-want) > 0.1*want {
		t.Errorf("cross-check temperature error %.5f, the job's own %.5f", got, want)
	}
	if got, want := sphere.GetEnergyError().GetValue(), job.energyError; math.Abs(got-want) > 0.1*want {
		t.Errorf("cross-check energy error %.5f, the job's own %.5f", got, want)
	}
	if v.GetVerdict() != Checked {
		t.Errorf("a 20-cells-across sphere within the limits: verdict %q, reasons %q", v.GetVerdict(), v.GetReasons())
	}
	// Beside the 3-D time: the one-term sphere (Fo > 0.2 here) is within a
	// few per cent of the exact series, which the job matches within its
	// error (common practice for the one-term form).
	m := v.GetMilestones()[0]
	if m.SolvedTimeS == nil || math.Abs(m.GetSolvedTimeS()-job.coreTime) > 1e-9 {
		t.Fatalf("milestone %s: solved time %v, the job's %g", m.GetName(), m.SolvedTimeS, job.coreTime)
	}
	for _, a := range m.GetAnswers() {
		if a.GetMethod() == estimate.MethodSphere && math.Abs(a.GetTimeS()/m.GetSolvedTimeS()-1) > 0.03 {
			t.Errorf("one-term sphere time %.4g s against the 3-D %.4g s", a.GetTimeS(), m.GetSolvedTimeS())
		}
	}

	var text bytes.Buffer
	if err := WriteText(&text, v); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"3-D solve", "VERDICT: checked", "sphere ", "plane-wall", "job energy imbalance"} {
		if !strings.Contains(text.String(), want) {
			t.Errorf("text lacks %q:\n%s", want, text.String())
		}
	}
	dir := t.TempDir()
	if err := WritePlot(dir, v); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(filepath.Join(dir, PlotFile))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if img, err := png.Decode(f); err != nil || img.Bounds().Dx() < 300 {
		t.Errorf("%s: not a plot-sized PNG (%v)", PlotFile, err)
	}
}

// TestFlags runs cheap verifications whose verdict must name the cause.
func TestFlags(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name        string
		spec        string
		cellsAcross int
		imbalance   float64
		milestone   float64 // a 3-D time for the first milestone, 0 for none
		verdict     string
		reasonHas   string
	}{
		{"six cells across", "ball-quench.yaml", 6, 0, 0, NotTrustworthy, "grid too coarse (6 cells across"},
		{"energy does not balance", "small-bead.yaml", 16, 0.05, 0, NotTrustworthy, "energy does not balance"},
		{"energy barely off", "small-bead.yaml", 16, 0.003, 0, CheckWithCare, "energy does not balance"},
		{"far from lumped", "small-bead.yaml", 16, 0, 40, CheckWithCare, "differs by"},
		{"small bead", "small-bead.yaml", 16, 0, 0, Checked, "within limits"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			spec := loadSpec(t, tc.spec)
			solid, err := mesh.SolidFromSpec(spec.GetPart())
			if err != nil {
				t.Fatal(err)
			}
			in := Input{
				Spec: spec, Solid: solid, CellSize: mesh.CellSizeFor(solid, tc.cellsAcross),
				Material: estimate.MaterialFromSpec(spec.GetMaterial()), EnergyImbalance: tc.imbalance, EndTime: spec.GetEndS(), Threads: 1,
			}
			if tc.milestone > 0 {
				in.Milestones = []*soakv1.MilestoneResult{{Name: spec.GetMilestones()[0].GetName(), TimeS: wrapperspb.Double(tc.milestone)}}
			}
			v, err := Run(context.Background(), in)
			if err != nil {
				t.Fatal(err)
			}
			if v.GetVerdict() != tc.verdict || len(v.GetReasons()) == 0 || !strings.Contains(v.GetReasons()[0], tc.reasonHas) {
				t.Errorf("verdict %q, reasons %q; want %q first naming %q", v.GetVerdict(), v.GetReasons(), tc.verdict, tc.reasonHas)
			}
		})
	}
}

func TestRunRejectsBadInput(t *testing.T) {
	t.Parallel()
	spec := loadSpec(t, "small-bead.yaml")
	solid, _ := mesh.SolidFromSpec(spec.GetPart())
	for _, in := range []Input{{Solid: solid, CellSize: 1e-3}, {Spec: spec, CellSize: 1e-3}, {Spec: spec, Solid: solid}} {
		if _, err := Run(context.Background(), in); err == nil {
			t.Errorf("Run(%+v) gave no error", in)
		}
	}
}
