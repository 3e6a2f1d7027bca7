package mesh

import (
	"math"
	"math/rand/v2"
	"testing"
)

// Closed forms the tests check against. Sphere volume πD³/6 and area πD²,
// and the area 2πR·height of a spherical cap (the hat-box theorem):
// Archimedes, On the Sphere and Cylinder, book I. Cylinder and box
// formulas: elementary mensuration.
func sphereVolume(d float64) float64 { return math.Pi * d * d * d / 6 }
func sphereArea(d float64) float64   { return math.Pi * d * d }
func sphereCapArea(d, height float64) float64 {
	return 2 * math.Pi * d / 2 * height
}
func cylinderVolume(d, l float64) float64 { return math.Pi * d * d / 4 * l }
func cylinderArea(d, l float64) float64   { return math.Pi*d*l + 2*math.Pi*d*d/4 }

func near(got, want, relTol float64) bool {
	return math.Abs(got-want) <= relTol*math.Abs(want)
}

func nearVec(a, b [3]float64) bool {
	for d := range a {
		if math.Abs(a[d]-b[d]) > 1e-12 {
			return false
		}
	}
	return true
}

func TestSolidVolumeAndArea(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name         string
		solid        Solid
		volume, area float64
		lo, hi       [3]float64
	}{
		{"sphere", Sphere{Diameter: 0.2}, sphereVolume(0.2), sphereArea(0.2), [3]float64{-0.1, -0.1, -0.1}, [3]float64{0.1, 0.1, 0.1}},
		{"cylinder along y", Cylinder{Diameter: 0.1, Length: 0.5, Axis: 1}, cylinderVolume(0.1, 0.5), cylinderArea(0.1, 0.5), [3]float64{-0.05, -0.25, -0.05}, [3]float64{0.05, 0.25, 0.05}},
		{"box", Box{Size: [3]float64{0.1, 0.2, 0.3}}, 0.006, 2 * (0.02 + 0.06 + 0.03), [3]float64{-0.05, -0.1, -0.15}, [3]float64{0.05, 0.1, 0.15}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			if got := tt.solid.Volume(); !near(got, tt.volume, 1e-12) {
				t.Errorf("Volume() = %g, want %g", got, tt.volume)
			}
			if got := tt.solid.Area(); !near(got, tt.area, 1e-12) {
				t.Errorf("Area() = %g, want %g", got, tt.area)
			}
			lo, hi := tt.solid.Bounds()
			if !nearVec(lo, tt.lo) || !nearVec(hi, tt.hi) {
				t.Errorf("Bounds() = %v, %v, want %v, %v", lo, hi, tt.lo, tt.hi)
			}
			fs := tt.solid.(FacingAreaSolid)
			facing, rest := fs.FacingAreas()
			sum := rest
			for _, a := range facing {
				sum += a
			}
			if !near(sum, tt.area, 1e-12) {
				t.Errorf("FacingAreas sum to %g, want the whole area %g", sum, tt.area)
			}
		})
	}
}

func TestContains(t *testing.T) {
	t.Parallel()
	cyl := Cylinder{Diameter: 0.2, Length: 1, Axis: 0}
	box := Box{Size: [3]float64{0.2, 0.4, 0.6}}
	tests := []struct {
		name  string
		solid Solid
		p     [3]float64
		want  bool
	}{
		{"sphere centre", Sphere{Diameter: 1}, [3]float64{}, true},
		{"sphere inside diagonal", Sphere{Diameter: 1}, [3]float64{0.28, 0.28, 0.28}, true},
		{"sphere outside diagonal", Sphere{Diameter: 1}, [3]float64{0.29, 0.29, 0.29}, false},
		{"cylinder far along axis", cyl, [3]float64{0.49, 0.05, 0.05}, true},
		{"cylinder beyond end", cyl, [3]float64{0.51, 0, 0}, false},
		{"cylinder beyond side", cyl, [3]float64{0, 0.08, 0.08}, false},
		{"box near corner", box, [3]float64{0.099, -0.199, 0.299}, true},
		{"box beyond z", box, [3]float64{0, 0, -0.301}, false},
	}
	for _, tt := range tests {
		if got := tt.solid.Contains(tt.p); got != tt.want {
			t.Errorf("%s: Contains(%v) = %v, want %v", tt.name, tt.p, got, tt.want)
		}
	}
}

func TestSurfaceNormal(t *testing.T) {
	t.Parallel()
	r2 := math.Sqrt2 / 2
	cyl := Cylinder{Diameter: 1, Length: 2, Axis: 2}
	box := Box{Size: [3]float64{2, 2, 4}}
	tests := []struct {
		name  string
		solid Solid
		p     [3]float64
		want  [3]float64
	}{
		{"sphere", Sphere{Diameter: 1}, [3]float64{0.3, 0, -0.4}, [3]float64{0.6, 0, -0.8}},
		{"cylinder side from inside", cyl, [3]float64{0.3, 0.3, 0.2}, [3]float64{r2, r2, 0}},
		{"cylinder end from inside", cyl, [3]float64{0.1, 0, -0.95}, [3]float64{0, 0, -1}},
		{"cylinder end from outside", cyl, [3]float64{0.1, 0.1, 1.2}, [3]float64{0, 0, 1}},
		{"cylinder beyond rim", cyl, [3]float64{0.6, 0, 1.1}, [3]float64{r2, 0, r2}},
		{"box face from inside", box, [3]float64{0.5, -0.9, 0}, [3]float64{0, -1, 0}},
		{"box face from outside", box, [3]float64{0.5, 0.5, 2.1}, [3]float64{0, 0, 1}},
		{"box beyond edge", box, [3]float64{-1.1, 0, 2.1}, [3]float64{-r2, 0, r2}},
	}
	for _, tt := range tests {
		if got := tt.solid.SurfaceNormal(tt.p); !nearVec(got, tt.want) {
			t.Errorf("%s: SurfaceNormal(%v) = %v, want %v", tt.name, tt.p, got, tt.want)
		}
	}
}

// A +x voxel face next to a cylinder's end lies nearer the flat end than
// the curved side; it still stands for the curved side.
func TestCylinderFaceNormalNearRim(t *testing.T) {
	t.Parallel()
	cyl := Cylinder{Diameter: 1, Length: 2, Axis: 2}
	p := [3]float64{0.48, 0, 0.99}
	if got := cyl.SurfaceNormal(p); !nearVec(got, [3]float64{0, 0, 1}) {
		t.Fatalf("premise: nearest surface normal %v, want the end's +z", got)
	}
	if got := cyl.FaceNormal(p, PlusX); !nearVec(got, [3]float64{1, 0, 0}) {
		t.Errorf("FaceNormal(+x) = %v, want the side's +x", got)
	}
	if got := cyl.FaceNormal(p, PlusZ); !nearVec(got, [3]float64{0, 0, 1}) {
		t.Errorf("FaceNormal(+z) = %v, want the end's +z", got)
	}
}

// classifyNormal must agree with the angle between the normal and each axis
// direction, computed independently with math.Acos.
func TestClassifyNormalMatchesAngles(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(1, 2))
	for range 20000 {
		n := unit([3]float64{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()})
		want := restPiece
		for d := MinusX; d <= PlusZ; d++ {
			sign := float64(2*(d%2) - 1)
			if math.Acos(sign*n[d/2])*180/math.Pi <= 45 {
				want = d
			}
		}
		if got := classifyNormal(n); got != want {
			t.Fatalf("classifyNormal(%v) = %d, want %d", n, got, want)
		}
	}
}

func TestSelectedArea(t *testing.T) {
	t.Parallel()
	const d = 0.3
	cap45 := sphereCapArea(d, d/2*(1-math.Cos(math.Pi/4)))
	cyl := Cylinder{Diameter: 0.1, Length: 0.4, Axis: 0}
	box := Box{Size: [3]float64{0.1, 0.2, 0.3}}
	tests := []struct {
		name  string
		solid Solid
		sel   Selector
		want  float64
	}{
		{"sphere +x cap", Sphere{Diameter: d}, Selector{Facing: []int{PlusX}}, cap45},
		{"sphere three caps, one listed twice", Sphere{Diameter: d}, Selector{Facing: []int{PlusX, MinusZ, PlusY, PlusX}}, 3 * cap45},
		{"sphere all", Sphere{Diameter: d}, Selector{All: true}, sphereArea(d)},
		{"cylinder ends", cyl, Selector{Facing: []int{PlusX, MinusX}}, 2 * math.Pi * 0.05 * 0.05},
		// A quarter of the curved side has its normal within 45° of +y.
		{"cylinder +y quarter", cyl, Selector{Facing: []int{PlusY}}, math.Pi * 0.1 * 0.4 / 4},
		{"box -z face", box, Selector{Facing: []int{MinusZ}}, 0.1 * 0.2},
	}
	for _, tt := range tests {
		got, exact := SelectedArea(tt.solid, tt.sel)
		if !exact || !near(got, tt.want, 1e-12) {
			t.Errorf("%s: SelectedArea = %g (exact %v), want %g", tt.name, got, exact, tt.want)
		}
	}
}

// opaqueSolid hides everything of a solid but the Solid interface.
type opaqueSolid struct{ Solid }

func TestSelectedAreaWithoutFacingAreas(t *testing.T) {
	t.Parallel()
	s := opaqueSolid{Sphere{Diameter: 1}}
	if _, exact := SelectedArea(s, Selector{Facing: []int{PlusX}}); exact {
		t.Errorf("facing selection on a solid without FacingAreas reported exact")
	}
	if got, exact := SelectedArea(s, Selector{All: true}); !exact || !near(got, sphereArea(1), 1e-12) {
		t.Errorf("all: got %g (exact %v), want %g", got, exact, sphereArea(1))
	}
}
