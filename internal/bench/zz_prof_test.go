package bench

import (
	"context"
	"testing"

	"soakfarm/mesh"
	"soakfarm/solver"
)

func TestZZPart(t *testing.T) {
	ctx := context.Background()
	across := 100
	d := float64(across) * cellSize
	part := &mesh.Assembly{Bodies: []mesh.Body{
		{Name: "ball", Solid: mesh.Sphere{Diameter: d}, Region: 1},
		{Name: "bore", Solid: mesh.Cylinder{Diameter: 0.3 * d, Length: 1.2 * d, Axis: 2}, Subtract: true},
	}}
	g, _ := mesh.Voxelise(ctx, part, cellSize, []mesh.Selector{{All: true}})
	air := solver.ExposurePhase{H: filmCoeff, Fluid: fluidTemp, Emissivity: partEmissiv, Surroundings: fluidTemp}
	p := problem(g, air, partEnd, solver.Multigrid)
	p.Stepping.Scheme, p.Stepping.MaxChange, p.Stepping.MaxStep = solver.BDF2, partMaxChange, partEnd/partSteps
	m, err := solver.MeasureRun(ctx, p)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("%+v per step %.3f s", m, m.Seconds/float64(m.Steps))
}
