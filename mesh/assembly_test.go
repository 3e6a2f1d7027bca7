package mesh

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"soakfarm/internal/partgen"
	"soakfarm/mesh/stl"
)

// stlBody reads a part of testdata/parts (millimetres) as a checked body.
func stlBody(t testing.TB, name string, opt stl.Options) *stl.Body {
	t.Helper()
	f, err := os.Open(filepath.Join("../testdata/parts", name))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	opt.Units = "mm"
	m, err := stl.Read(f, opt)
	if err != nil {
		t.Fatal(err)
	}
	if err := stl.Check(m).Err(); err != nil {
		t.Fatal(err)
	}
	b, err := stl.NewBody(m)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func groupByName(t testing.TB, g *Grid, name string) Group {
	t.Helper()
	for _, gr := range g.Groups {
		if gr.Name == name {
			return gr
		}
	}
	t.Fatalf("no group %q", name)
	return Group{}
}

// Finely tessellated sphere and cylinder from STL against the exact
// volume and area of the round shapes they are inscribed in (closed forms,
// as in solid_test.go). The meshes' own shortfall is bounded by the
// inscribed polygon: for n sides the cross-section lacks
// 1 − sin(2π/n)/(2π/n) of its area, 0.04 % for the 128-sided cylinder; the
// level-4 icosphere's edges are under 4° of arc, a shortfall under 0.5 %.
func TestSTLRoundPartsAgainstExact(t *testing.T) {
	t.Parallel()
	const r, cr, ch = partgen.SphereRadius * 1e-3, partgen.CylinderRadius * 1e-3, partgen.CylinderHeight * 1e-3
	tests := []struct {
		file         string
		volume, area float64
		meshTol      float64
	}{
		{"sphere.stl", sphereVolume(2 * r), sphereArea(2 * r), 0.005},
		{"cylinder.stl", cylinderVolume(2*cr, ch), cylinderArea(2*cr, ch), 0.001},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			t.Parallel()
			body := stlBody(t, tt.file, stl.Options{})
			g := voxelise(t, body, 40, []Selector{{All: true}})
			if got := partVolume(g); !near(got, tt.volume, 0.01+tt.meshTol) {
				t.Errorf("voxel volume %.6g m³, exact %.6g: off by %.2f %%", got, tt.volume, 100*(got/tt.volume-1))
			}
			gr := groupByName(t, g, "exposure[0]")
			if !gr.TrueAreaExact || !near(gr.TrueArea, body.Area(), 1e-12) {
				t.Errorf("group true area %.6g (exact %v), want the triangles' %.6g", gr.TrueArea, gr.TrueAreaExact, body.Area())
			}
			if !near(gr.TrueArea, tt.area, tt.meshTol) {
				t.Errorf("triangle area %.6g m², exact %.6g: off by %.3f %%", gr.TrueArea, tt.area, 100*(gr.TrueArea/tt.area-1))
			}
			// The correction by the nearest triangle's normal alone, before
			// the rescale, already lands near the true area.
			if corrected := gr.ModelArea / gr.Rescale; !near(corrected, tt.area, 0.03) {
				t.Errorf("corrected face area %.6g m², exact %.6g: off by %.2f %%", corrected, tt.area, 100*(corrected/tt.area-1))
			}
			if g.Bodies[0].TrueVolume != body.Volume() {
				t.Errorf("body true volume %g, want the mesh's %g", g.Bodies[0].TrueVolume, body.Volume())
			}
		})
	}
}

// hubBodies is partgen's standard hub as constructive solids, in metres:
// flange and hub cylinders, bore and bolt holes subtracted.
func hubBodies() *Assembly {
	h := partgen.StandardHub()
	mm := 1e-3
	cyl := func(radius, z0, z1 float64) Cylinder {
		return Cylinder{Diameter: 2 * radius * mm, Length: (z1 - z0) * mm, Axis: 2}
	}
	at := func(s Solid, x, y, z0, z1 float64) Solid {
		return Place(s, [3]float64{}, [3]float64{x * mm, y * mm, (z0 + z1) / 2 * mm})
	}
	a := &Assembly{Bodies: []Body{
		{Name: "flange", Solid: at(cyl(h.FlangeRadius, 0, h.FlangeThickness), 0, 0, 0, h.FlangeThickness), Region: 1},
		{Name: "hub", Solid: at(cyl(h.HubRadius, h.FlangeThickness, h.Height), 0, 0, h.FlangeThickness, h.Height), Region: 1},
		{Name: "bore", Solid: at(cyl(h.BoreRadius, 0, h.Height), 0, 0, 0, h.Height), Subtract: true},
	}}
	per := h.Segments / h.Bolts
	for b := range h.Bolts {
		angle := 2 * math.Pi * float64(b*per) / float64(h.Segments)
		x, y := h.BoltCircleRadius*math.Cos(angle), h.BoltCircleRadius*math.Sin(angle)
		a.Bodies = append(a.Bodies, Body{Name: "bolt-hole-" + string(rune('1'+b)), Solid: at(cyl(h.BoltHoleRadius, 0, h.FlangeThickness), x, y, 0, h.FlangeThickness), Subtract: true})
	}
	return a
}

// hubDesign returns the hub's volume and area with true circles, m³ and m².
func hubDesign() (volume, area float64) {
	h := partgen.StandardHub()
	mm3, mm2 := 1e-9, 1e-6
	disc := func(r float64) float64 { return math.Pi * r * r }
	side := func(r, l float64) float64 { return 2 * math.Pi * r * l }
	n := float64(h.Bolts)
	volume = (disc(h.FlangeRadius)*h.FlangeThickness + disc(h.HubRadius)*(h.Height-h.FlangeThickness) -
		disc(h.BoreRadius)*h.Height - n*disc(h.BoltHoleRadius)*h.FlangeThickness) * mm3
	ends := 2 * (disc(h.FlangeRadius) - disc(h.BoreRadius) - n*disc(h.BoltHoleRadius))
	area = (ends + side(h.FlangeRadius, h.FlangeThickness) + side(h.HubRadius, h.Height-h.FlangeThickness) +
		side(h.BoreRadius, h.Height) + n*side(h.BoltHoleRadius, h.FlangeThickness)) * mm2
	return volume, area
}

// The same flanged hub as constructive solids and as STL: the two grids
// hold nearly the same cells, both near the design volume, and the
// areas agree. The STL's circles are inscribed 96- and 24-gons, which
// lack up to 1.1 % of each hole's area (1 − sin(2π/24)/(2π/24)).
func TestHubBodiesMatchSTL(t *testing.T) {
	t.Parallel()
	csg := hubBodies()
	mesh := stlBody(t, "hub.stl", stl.Options{})
	const cell = 2e-3 // 6 cells through the flange, 100 across the part
	ctx := context.Background()
	gc, err := Voxelise(ctx, csg, cell, []Selector{{All: true}})
	if err != nil {
		t.Fatal(err)
	}
	gs, err := Voxelise(ctx, mesh, cell, []Selector{{All: true}})
	if err != nil {
		t.Fatal(err)
	}
	if gc.N != gs.N {
		t.Fatalf("grids differ: %v against %v", gc.N, gs.N)
	}
	differ := 0
	for c := range gc.Region {
		if gc.Region[c] != gs.Region[c] {
			differ++
		}
	}
	vol, area := hubDesign()
	vc, vs := partVolume(gc), partVolume(gs)
	t.Logf("volume: design %.5g, bodies %.5g, STL %.5g m³; %d of %d part cells differ", vol, vc, vs, differ, gc.PartCells())
	if float64(differ) > 0.01*float64(gc.PartCells()) {
		t.Errorf("%d cells differ between bodies and STL, over 1 %% of %d", differ, gc.PartCells())
	}
	for _, v := range []float64{vc, vs} {
		if !near(v, vol, 0.02) {
			t.Errorf("model volume %.5g m³, design %.5g: off by %.2f %%", v, vol, 100*(v/vol-1))
		}
	}
	ac, as := gc.Groups[0].TrueArea, gs.Groups[0].TrueArea
	t.Logf("area: design %.5g, bodies (corrected faces) %.5g, STL triangles %.5g m²", area, ac, as)
	if gc.Groups[0].TrueAreaExact || !gs.Groups[0].TrueAreaExact {
		t.Errorf("exactness: bodies %v (want false), STL %v (want true)", gc.Groups[0].TrueAreaExact, gs.Groups[0].TrueAreaExact)
	}
	if !near(as, area, 0.005) {
		t.Errorf("STL area %.5g m², design %.5g", as, area)
	}
	if !near(ac, area, 0.05) {
		t.Errorf("bodies' corrected area %.5g m², design %.5g: off by %.2f %%", ac, area, 100*(ac/area-1))
	}
	// Per-body volumes: the bore removed its cylinder's cells from flange
	// and hub alike; the flange body holds no cell the hub took.
	for _, b := range gc.Bodies {
		if b.Name == "bore" && !near(b.ModelVolume, b.TrueVolume, 0.08) {
			t.Errorf("bore removed %.4g m³, its own volume is %.4g", b.ModelVolume, b.TrueVolume)
		}
	}
}

// A subtracted body's cavity faces belong to it and face into the cavity:
// a box with a round bore along z; the bore's faces carry normals pointing
// to the axis, and their corrected area is near the bore's side area
// π·d·L (closed form); the bore's ends are open, so it has no end faces.
func TestCavityFacesBelongToSubtractedBody(t *testing.T) {
	t.Parallel()
	const d, l = 0.04, 0.1
	a := &Assembly{Bodies: []Body{
		{Name: "block", Solid: Box{Size: [3]float64{0.1, 0.1, l}}, Region: 1},
		{Name: "bore", Solid: Cylinder{Diameter: d, Length: l, Axis: 2}, Subtract: true},
	}}
	g, err := Voxelise(context.Background(), a, 0.1/50, []Selector{{All: true}, {Bodies: []string{"bore"}}})
	if err != nil {
		t.Fatal(err)
	}
	bore := groupByName(t, g, "exposure[1]")
	if want := math.Pi * d * l; !near(bore.ModelArea, want, 0.03) {
		t.Errorf("bore group area %.5g m², side area %.5g", bore.ModelArea, want)
	}
	for _, f := range g.Faces {
		if f.Group != 1 {
			continue
		}
		if g.Bodies[f.Body].Name != "bore" {
			t.Fatalf("face in the bore group from body %q", g.Bodies[f.Body].Name)
		}
		i, j, _ := g.Coords(int(f.Cell))
		c := g.Centre(i, j, 0)
		if dot(f.Normal, [3]float64{c[0], c[1], 0}) >= 0 {
			t.Fatalf("bore face at cell %v has normal %v, not towards the axis", c, f.Normal)
		}
		if f.Normal[2] != 0 {
			t.Fatalf("bore face with normal %v: the open bore has no end faces", f.Normal)
		}
	}
	wantVolume := 0.1*0.1*l - cylinderVolume(d, l)
	if got := partVolume(g); !near(got, wantVolume, 0.01) {
		t.Errorf("volume %.5g, want %.5g", got, wantVolume)
	}
}

// A quarter turn places a primitive exactly: a z cylinder turned 90° about
// y is an x cylinder, cell for cell and face for face.
func TestQuarterTurnIsExact(t *testing.T) {
	t.Parallel()
	turned := Place(Cylinder{Diameter: 0.05, Length: 0.2, Axis: 2}, [3]float64{0, 90, 0}, [3]float64{})
	plain := Cylinder{Diameter: 0.05, Length: 0.2, Axis: 0}
	sel := []Selector{{Facing: []int{PlusX}}, {Facing: []int{PlusY, MinusZ}}}
	a, b := voxelise(t, turned, 20, sel), voxelise(t, plain, 20, sel)
	if a.N != b.N || len(a.Faces) != len(b.Faces) {
		t.Fatalf("turned: %v with %d faces; plain: %v with %d", a.N, len(a.Faces), b.N, len(b.Faces))
	}
	for i := range a.Groups {
		ga, gb := a.Groups[i], b.Groups[i]
		if !ga.TrueAreaExact || !near(ga.TrueArea, gb.TrueArea, 1e-9) || !near(ga.ModelArea, gb.ModelArea, 1e-9) {
			t.Errorf("group %d: turned %+v, plain %+v", i, ga, gb)
		}
	}
}

// Selection by STL solid name and by region on the ribbed bracket: the
// "mounting_face" block is the flat side at y = 0, 80 × 40 mm (partgen's
// design); the region x ≥ 70 mm takes the faces at the end of the long leg.
func TestSelectBySolidAndRegion(t *testing.T) {
	t.Parallel()
	body := stlBody(t, "bracket.stl", stl.Options{})
	region := &Region{Min: [3]float64{0.07, -1, -1}, Max: [3]float64{1, 1, 1}}
	g := voxelise(t, body, 12, []Selector{{All: true}, {Solids: []string{"mounting_face"}}, {Region: region, Facing: []int{PlusX}}})
	mount := groupByName(t, g, "exposure[1]")
	if want := 0.080 * partgen.BracketDepth * 1e-3; !mount.TrueAreaExact || !near(mount.TrueArea, want, 1e-9) {
		t.Errorf("mounting face true area %.6g (exact %v), want %.6g", mount.TrueArea, mount.TrueAreaExact, want)
	}
	if !near(mount.VoxelArea, mount.TrueArea, 0.05) {
		t.Errorf("mounting face voxel area %.6g, true %.6g", mount.VoxelArea, mount.TrueArea)
	}
	end := groupByName(t, g, "exposure[2]")
	if want := 0.006 * partgen.BracketDepth * 1e-3; !near(end.TrueArea, want, 1e-9) {
		t.Errorf("end of the long leg: true area %.6g, want %.6g", end.TrueArea, want)
	}
	for _, f := range g.Faces {
		if f.Group == 1 && f.Dir != MinusY {
			t.Fatalf("mounting face group holds a face on side %s", DirectionNames[f.Dir])
		}
	}
}

func TestAssemblyInputErrors(t *testing.T) {
	t.Parallel()
	box := Box{Size: [3]float64{0.1, 0.1, 0.1}}
	tests := []struct {
		name string
		a    *Assembly
		sel  []Selector
		want string
	}{
		{"starts by subtracting", &Assembly{Bodies: []Body{{Name: "a", Solid: box, Subtract: true}, {Name: "b", Solid: box, Region: 1}}}, nil, "bodies[0].subtract"},
		{"duplicate names", &Assembly{Bodies: []Body{{Name: "a", Solid: box, Region: 1}, {Name: "a", Solid: box, Region: 1}}}, nil, `bodies[1].name: "a" already names bodies[0]`},
		{"no region", &Assembly{Bodies: []Body{{Name: "a", Solid: box}}}, nil, "bodies[0].region"},
		{"unknown body", &Assembly{Bodies: []Body{{Name: "a", Solid: box, Region: 1}}}, []Selector{{Bodies: []string{"b"}}}, `no body named "b"; the bodies are "a"`},
		{"solid name without STL", &Assembly{Bodies: []Body{{Name: "a", Solid: box, Region: 1}}}, []Selector{{Solids: []string{"top"}}}, `no STL solid named "top"`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			_, err := Voxelise(context.Background(), tt.a, 0.01, tt.sel)
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("error %v, want one mentioning %q", err, tt.want)
			}
		})
	}
}
