package stl

import (
	"math"
	"math/rand/v2"
	"testing"

	"soakfarm/internal/partgen"
)

func bodyOf(t testing.TB, name string) *Body {
	t.Helper()
	m := readPart(t, name, Options{Units: "mm"})
	if err := Check(m).Err(); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	b, err := NewBody(m)
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return b
}

// polygonArea is the area of a regular n-gon inscribed in a circle of
// radius r: n triangles of apex angle 2π/n, (n/2)·r²·sin(2π/n).
func polygonArea(r float64, n int) float64 {
	return float64(n) / 2 * r * r * math.Sin(2*math.Pi/float64(n))
}

// polygonPerimeter is n chords of 2·r·sin(π/n).
func polygonPerimeter(r float64, n int) float64 {
	return float64(n) * 2 * r * math.Sin(math.Pi/float64(n))
}

// circleDeficit bounds πr² minus the inscribed n-gon's area: with
// sin x ≥ x − x³/6, (n/2)·sin(2π/n) ≥ π − 2π³/(3n²).
func circleDeficit(r float64, n int) float64 {
	return r * r * 2 * math.Pi * math.Pi * math.Pi / (3 * float64(n*n))
}

func within(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.Abs(got-want) > tol {
		t.Errorf("%s = %.12g, want %.12g ± %.3g (off by %.3g)", what, got, want, tol, got-want)
	}
}

// Prisms: volume and area against the elementary formulas of the regular
// polygon (area (n/2)r²sin(2π/n), chord 2r·sin(π/n)), and against the
// round shapes they are inscribed in, with the bound above.
func TestPrismVolumeAndArea(t *testing.T) {
	t.Parallel()
	const mm = 1e-3
	t.Run("cylinder", func(t *testing.T) {
		t.Parallel()
		b := bodyOf(t, "cylinder.stl")
		r, h, n := partgen.CylinderRadius*mm, partgen.CylinderHeight*mm, partgen.CylinderSides
		// ASCII keeps float64 exactly: only rounding error remains.
		within(t, "volume", b.Volume(), h*polygonArea(r, n), 1e-12*h*r*r)
		within(t, "area", b.Area(), 2*polygonArea(r, n)+h*polygonPerimeter(r, n), 1e-12*h*r)
		within(t, "volume vs round cylinder", b.Volume(), math.Pi*r*r*h, h*circleDeficit(r, n))
	})
	t.Run("tube", func(t *testing.T) {
		t.Parallel()
		b := bodyOf(t, "tube.stl")
		ro, ri, l, n := partgen.TubeOuter*mm, partgen.TubeInner*mm, partgen.TubeLength*mm, partgen.TubeSides
		// Binary stores float32: relative rounding about 6e-8 per coordinate.
		within(t, "volume", b.Volume(), l*(polygonArea(ro, n)-polygonArea(ri, n)), 1e-6*b.Volume())
		within(t, "area", b.Area(), 2*(polygonArea(ro, n)-polygonArea(ri, n))+l*(polygonPerimeter(ro, n)+polygonPerimeter(ri, n)), 1e-6*b.Area())
		within(t, "volume vs round tube", b.Volume(), math.Pi*(ro*ro-ri*ri)*l, l*(circleDeficit(ro, n)+circleDeficit(ri, n)))
	})
	t.Run("bracket", func(t *testing.T) {
		t.Parallel()
		b := bodyOf(t, "bracket.stl")
		// Profile: 80·6 + 6·54 + 2·4·14 = 916 mm², perimeter 336 mm, depth 40 mm.
		within(t, "volume", b.Volume(), 916*40*mm*mm*mm, 1e-18)
		within(t, "area", b.Area(), (2*916+336*40)*mm*mm, 1e-15)
		groups := b.FaceGroups()
		if len(groups) != 2 || groups[1].Name != "mounting_face" {
			t.Fatalf("face groups %+v, want bracket and mounting_face", groups)
		}
		within(t, "mounting face area", groups[1].Area, 80*40*mm*mm, 1e-15)
	})
}

// The hub's volume and area against its design: the flange disc and the
// hub cylinder minus the bore and bolt holes, all as inscribed regular
// polygons (exact for our mesh up to float32 storage), and against the
// round design within the polygon deficit bound.
func TestHubVolumeAndArea(t *testing.T) {
	t.Parallel()
	const mm = 1e-3
	h := partgen.StandardHub()
	b := bodyOf(t, "hub.stl")
	n, m := h.Segments, h.HoleSegments
	rb, rh, rf := h.BoreRadius*mm, h.HubRadius*mm, h.FlangeRadius*mm
	ro, tf, top := h.BoltHoleRadius*mm, h.FlangeThickness*mm, h.Height*mm
	bolts := float64(h.Bolts)

	flange := polygonArea(rf, n) - polygonArea(rb, n) - bolts*polygonArea(ro, m)
	hubRing := polygonArea(rh, n) - polygonArea(rb, n)
	volume := tf*flange + (top-tf)*hubRing
	within(t, "volume", b.Volume(), volume, 1e-6*volume)

	area := flange + (flange - hubRing) + hubRing + // bottom, flange top, hub top
		top*polygonPerimeter(rb, n) + (top-tf)*polygonPerimeter(rh, n) + tf*polygonPerimeter(rf, n) +
		bolts*tf*polygonPerimeter(ro, m)
	within(t, "area", b.Area(), area, 1e-6*area)

	round := tf*math.Pi*(rf*rf-rb*rb-bolts*ro*ro) + (top-tf)*math.Pi*(rh*rh-rb*rb)
	bound := tf*(circleDeficit(rf, n)+circleDeficit(rb, n)+bolts*circleDeficit(ro, m)) +
		(top-tf)*(circleDeficit(rh, n)+circleDeficit(rb, n))
	within(t, "volume vs round design", b.Volume(), round, bound)
}

// The icosphere is a convex polyhedron inscribed in the sphere. A convex
// body holds the ball of radius rIn (its least face-plane distance from
// the centre) and lies in the ball of radius rOut (its farthest corner);
// volume and surface area are monotone under inclusion of convex bodies
// (from memory: Cauchy's surface area formula, e.g. Schneider, Convex
// Bodies, 2nd ed., 2014), so 4π·rIn² ≤ A ≤ 4π·rOut² and likewise for V.
func TestSphereVolumeAndArea(t *testing.T) {
	t.Parallel()
	m := readPart(t, "sphere.stl", Options{Units: "mm"})
	b, err := NewBody(m)
	if err != nil {
		t.Fatal(err)
	}
	rIn, rOut := math.Inf(1), 0.0
	for _, v := range m.Vertices {
		rOut = max(rOut, norm(v))
	}
	for tri := range m.Triangles {
		c := m.Triangle(tri)
		n := areaVector(c)
		n = scale(n, 1/norm(n))
		rIn = min(rIn, dot(n, c[0]))
		// Convexity, which the bound needs: no corner in front of a face.
		for _, v := range m.Vertices {
			if d := dot(n, sub(v, c[0])); d > 1e-9*rOut {
				t.Fatalf("corner %v lies %g m in front of triangle %d: not convex", v, d, tri)
			}
		}
	}
	r := partgen.SphereRadius * 1e-3
	if rOut > r*(1+1e-6) || rIn < 0.99*r {
		t.Fatalf("rIn %g, rOut %g: not inscribed in the sphere of radius %g", rIn, rOut, r)
	}
	vol, area := b.Volume(), b.Area()
	if lo, hi := 4*math.Pi*rIn*rIn*rIn/3, 4*math.Pi*rOut*rOut*rOut/3; vol < lo || vol > hi {
		t.Errorf("volume %g outside [%g, %g]", vol, lo, hi)
	}
	if lo, hi := 4*math.Pi*rIn*rIn, 4*math.Pi*rOut*rOut; area < lo || area > hi {
		t.Errorf("area %g outside [%g, %g]", area, lo, hi)
	}
}

// Winding number: 1 inside a closed outward surface, 0 outside, ½ on the
// surface (Jacobson et al. 2013, §3).
func TestWindingNumber(t *testing.T) {
	t.Parallel()
	const tol = 0.01 // far-field dipole error, about 0.5 % at the accurate ratio
	sphere := bodyOf(t, "sphere.stl")
	r := partgen.SphereRadius * 1e-3
	rng := rand.New(rand.NewPCG(1, 2))
	dir := func() vec {
		for {
			v := vec{2*rng.Float64() - 1, 2*rng.Float64() - 1, 2*rng.Float64() - 1}
			if n := norm(v); n > 0.1 && n < 1 {
				return scale(v, 1/n)
			}
		}
	}
	for range 200 {
		in := scale(dir(), r*0.98*rng.Float64())
		out := scale(dir(), r*(1.01+rng.Float64()))
		if w := sphere.WindingNumber(in); math.Abs(w-1) > tol || !sphere.Contains(in) {
			t.Fatalf("inside %v: winding %g, Contains %v", in, w, sphere.Contains(in))
		}
		if w := sphere.WindingNumber(out); math.Abs(w) > tol || sphere.Contains(out) {
			t.Fatalf("outside %v: winding %g, Contains %v", out, w, sphere.Contains(out))
		}
	}
	// On the surface. The winding number jumps from 0 to 1 across it, so
	// only points exactly in a facet's plane give ½: the cylinder's flat
	// cap, whose corners all share one z.
	cyl := bodyOf(t, "cylinder.stl")
	capZ := cyl.tris[0].v[0][2]
	for _, tri := range cyl.tris {
		if tri.v[0][2] == capZ && tri.v[1][2] == capZ && tri.v[2][2] == capZ {
			p := centroid(tri.v)
			p[2] = capZ
			if w := cyl.WindingNumber(p); math.Abs(w-0.5) > tol {
				t.Fatalf("on the surface at %v: winding %g, want 0.5", p, w)
			}
		}
	}
	// The hub's bore and bolt holes lie inside its bounding box but
	// outside the part.
	hub := bodyOf(t, "hub.stl")
	h := partgen.StandardHub()
	for _, p := range []vec{
		{0, 0, 0.02},        // bore
		{0.045, 0, 0.006},   // bolt hole
		{0.045, 0, 0.03},    // above the flange, beside the hub
		{0.0225, 0, 0.03},   // hub wall
		{0.055, 0.01, 0.01}, // flange rim
	} {
		want := designHubContains(h, p)
		if w := hub.WindingNumber(p); math.Abs(w-b2f(want)) > tol || hub.Contains(p) != want {
			t.Errorf("hub at %v: winding %g, want %v", p, w, want)
		}
	}
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// designHubContains is the round hub design's membership.
func designHubContains(h partgen.Hub, p vec) bool {
	const mm = 1e-3
	r := math.Hypot(p[0], p[1])
	z := p[2]
	inHole := false
	for k := range h.Bolts {
		a := 2 * math.Pi * float64(k) / float64(h.Bolts)
		d := math.Hypot(p[0]-h.BoltCircleRadius*mm*math.Cos(a), p[1]-h.BoltCircleRadius*mm*math.Sin(a))
		inHole = inHole || d < h.BoltHoleRadius*mm
	}
	flange := r > h.BoreRadius*mm && r < h.FlangeRadius*mm && z > 0 && z < h.FlangeThickness*mm && !inHole
	hub := r > h.BoreRadius*mm && r < h.HubRadius*mm && z > 0 && z < h.Height*mm
	return flange || hub
}

// nearHubSurface reports whether p is within margin of a design surface.
func nearHubSurface(h partgen.Hub, p vec, margin float64) bool {
	const mm = 1e-3
	r := math.Hypot(p[0], p[1])
	for _, s := range []float64{h.BoreRadius, h.HubRadius, h.FlangeRadius} {
		if math.Abs(r-s*mm) < margin {
			return true
		}
	}
	for _, s := range []float64{0, h.FlangeThickness, h.Height} {
		if math.Abs(p[2]-s*mm) < margin {
			return true
		}
	}
	for k := range h.Bolts {
		a := 2 * math.Pi * float64(k) / float64(h.Bolts)
		d := math.Hypot(p[0]-h.BoltCircleRadius*mm*math.Cos(a), p[1]-h.BoltCircleRadius*mm*math.Sin(a))
		if math.Abs(d-h.BoltHoleRadius*mm) < margin {
			return true
		}
	}
	return false
}

// ContainsGrid and Contains (two different methods: ray crossings and
// winding numbers) must both agree with the round design's membership
// wherever a cell centre is farther from the design surface than the
// polygon's sagitta r(1 − cos(π/n)) (< 0.05 mm here) plus a margin.
func TestContainsGridMatchesDesign(t *testing.T) {
	t.Parallel()
	h := partgen.StandardHub()
	hub := bodyOf(t, "hub.stl")
	const margin = 0.2e-3
	// Cells of 1.25 mm over the whole bounding box and a cell beyond.
	cell := 1.25e-3
	origin := [3]float64{-0.0625, -0.0625, -0.00125}
	n := [3]int{100, 100, 42}
	if testing.Short() {
		cell, n = 2.5e-3, [3]int{50, 50, 21}
	}
	out := make([]bool, n[0]*n[1]*n[2])
	hub.ContainsGrid(origin, cell, n, out)
	var checked, inside, gridWrong, pointWrong int
	for k := range n[2] {
		for j := range n[1] {
			for i := range n[0] {
				p := vec{origin[0] + cell*(float64(i)+0.5), origin[1] + cell*(float64(j)+0.5), origin[2] + cell*(float64(k)+0.5)}
				idx := i + n[0]*(j+n[1]*k)
				if out[idx] {
					inside++
				}
				if nearHubSurface(h, p, margin) {
					continue
				}
				checked++
				want := designHubContains(h, p)
				if out[idx] != want {
					gridWrong++
				}
				if (i+j+k)%29 == 0 && hub.Contains(p) != want { // a sample: Contains is the slow path
					pointWrong++
				}
			}
		}
	}
	if gridWrong > 0 || pointWrong > 0 {
		t.Fatalf("of %d cells checked, ContainsGrid wrong in %d, Contains wrong in %d", checked, gridWrong, pointWrong)
	}
	// The cell count times the cell volume approaches the part's volume.
	if v := float64(inside) * cell * cell * cell; math.Abs(v-hub.Volume()) > 0.05*hub.Volume() {
		t.Errorf("voxel volume %g, mesh volume %g", v, hub.Volume())
	}
}

// A mesh with a hole still has a clear inside: columns through the hole
// do not balance and fall back to the winding number.
func TestContainsGridThroughHole(t *testing.T) {
	t.Parallel()
	m := readPart(t, "broken_open_edge.stl", Options{Units: "mm"})
	b, err := NewBody(m)
	if err != nil {
		t.Fatal(err)
	}
	n := [3]int{10, 10, 12}
	out := make([]bool, 10*10*12)
	b.ContainsGrid([3]float64{0, 0, -1e-3}, 1e-3, n, out)
	for idx, in := range out {
		k := idx / 100
		if want := k >= 1 && k <= 10; in != want {
			t.Fatalf("cell %d (layer %d): inside %v, want %v", idx, k, in, want)
		}
	}
}

// Rays through shared edges and corners: a grid aligned with the cube's
// corners sends rays exactly along its edges, faces and the top face's
// diagonal; each must count one entry and one exit.
func TestContainsGridOnEdges(t *testing.T) {
	t.Parallel()
	b := bodyOf(t, "broken_degenerate_triangle.stl") // the cube with a sliver: still closed
	// Centres at multiples of 2.5 mm: rays along the y = 0, y = 10 faces,
	// the top face's diagonal and the sliver's edge.
	n := [3]int{8, 7, 7}
	out := make([]bool, n[0]*n[1]*n[2])
	b.ContainsGrid([3]float64{-5e-3, -1.25e-3, -1.25e-3}, 2.5e-3, n, out)
	for idx, in := range out {
		i, j, k := idx%n[0], idx/n[0]%n[1], idx/(n[0]*n[1])
		x, y, z := -3.75+2.5*float64(i), 2.5*float64(j), 2.5*float64(k)
		strict := x > 0 && x < 10 && y > 0 && y < 10 && z > 0 && z < 10
		outside := x < 0 || x > 10 || y < 0 || y > 10 || z < 0 || z > 10
		if (strict && !in) || (outside && in) {
			t.Fatalf("cell (%g, %g, %g) mm: inside %v", x, y, z, in)
		}
	}
}

// Surface normals are those of the nearest facet: on the sphere within the
// facets' angle of the radial direction, on the cylinder exactly axial
// above the cap.
func TestSurfaceNormal(t *testing.T) {
	t.Parallel()
	sphere := bodyOf(t, "sphere.stl")
	rng := rand.New(rand.NewPCG(3, 4))
	r := partgen.SphereRadius * 1e-3
	for range 100 {
		u := vec{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}
		u = scale(u, 1/norm(u))
		nrm := sphere.SurfaceNormal(scale(u, r*(0.9+0.2*rng.Float64())))
		// Level-4 icosphere edges subtend under 0.07 rad; a facet's normal
		// is within that of the radius through any of its points.
		if dot(nrm, u) < math.Cos(0.07) || math.Abs(norm(nrm)-1) > 1e-12 {
			t.Fatalf("normal %v at direction %v", nrm, u)
		}
	}
	cyl := bodyOf(t, "cylinder.stl")
	if nrm := cyl.SurfaceNormal(vec{0.003, 0.002, 0.081}); nrm != (vec{0, 0, 1}) {
		t.Fatalf("cap normal %v", nrm)
	}
	if nrm, g := cyl.SurfaceAt(vec{0, -0.026, 0.04}); math.Abs(nrm[1]+1) > 1e-3 || g != 0 {
		t.Fatalf("side normal %v, group %d", nrm, g)
	}
}

// FacingAreas of the bracket, by hand from its profile (mm): faces normal
// to −y: the mounting face 80·40; +y: leg top 6·40, rib tops 2·4·40 and
// flange top (80−6−2·4)·40; −x: leg back 60·40 and the ribs' left sides
// 2·14·40; +x: flange end 6·40, leg face 54·40 and the ribs' right sides
// 2·14·40; ±z: the profile, 916 each; nothing else.
func TestFacingAreas(t *testing.T) {
	t.Parallel()
	const mm2 = 1e-6
	b := bodyOf(t, "bracket.stl")
	facing, rest := b.FacingAreas()
	want := [6]float64{(60 + 2*14) * 40, (6 + 54 + 2*14) * 40, 80 * 40, (6 + 2*4 + 80 - 6 - 2*4) * 40, 916, 916}
	for d := range 6 {
		within(t, "facing area "+[]string{"-x", "+x", "-y", "+y", "-z", "+z"}[d], facing[d], want[d]*mm2, 1e-15)
	}
	within(t, "rest", rest, 0, 0)
}

// The voxeliser's Solid interface (package mesh), restated here because
// mesh will import this package: *Body must satisfy it structurally.
var _ interface {
	Contains(p [3]float64) bool
	Bounds() (lo, hi [3]float64)
	SurfaceNormal(p [3]float64) [3]float64
	Volume() float64
	Area() float64
	FacingAreas() (facing [6]float64, rest float64)
} = (*Body)(nil)
