package mesh

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"
	"unsafe"
)

func voxelise(t testing.TB, s Solid, cellsAcross int, selectors []Selector) *Grid {
	t.Helper()
	g, err := Voxelise(context.Background(), s, CellSizeFor(s, cellsAcross), selectors)
	if err != nil {
		t.Fatalf("Voxelise: %v", err)
	}
	return g
}

func partVolume(g *Grid) float64 {
	h := g.CellSize
	return float64(g.PartCells()) * h * h * h
}

// totals returns the grid's voxel area and corrected area before the
// per-group rescale, summed over all groups.
func totals(g *Grid) (voxel, corrected float64) {
	for _, gr := range g.Groups {
		voxel += gr.VoxelArea
		corrected += gr.ModelArea / gr.Rescale
	}
	return voxel, corrected
}

// testShapes have exact volume and area from the closed forms in
// solid_test.go; the box's edges are not whole numbers of cells at most
// refinements.
var testShapes = []struct {
	name         string
	solid        Solid
	volume, area float64
}{
	{"sphere", Sphere{Diameter: 0.12}, sphereVolume(0.12), sphereArea(0.12)},
	{"long cylinder along x", Cylinder{Diameter: 0.05, Length: 0.3, Axis: 0}, cylinderVolume(0.05, 0.3), cylinderArea(0.05, 0.3)},
	{"disc along z", Cylinder{Diameter: 0.16, Length: 0.07, Axis: 2}, cylinderVolume(0.16, 0.07), cylinderArea(0.16, 0.07)},
	{"box", Box{Size: [3]float64{0.1, 0.13, 0.08}}, 0.1 * 0.13 * 0.08, 2 * (0.1*0.13 + 0.13*0.08 + 0.08*0.1)},
}

func TestVolumeConverges(t *testing.T) {
	t.Parallel()
	for _, tt := range testShapes {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			errAt := map[int]float64{}
			for _, n := range []int{10, 20, 40, 80} {
				errAt[n] = math.Abs(partVolume(voxelise(t, tt.solid, n, nil))/tt.volume - 1)
				t.Logf("%d cells across: volume error %.4f", n, errAt[n])
			}
			if errAt[20] > 0.03 {
				t.Errorf("volume error %.4f at 20 cells across, want within 3%%", errAt[20])
			}
			if errAt[80] > 0.005 || errAt[80] >= errAt[20] {
				t.Errorf("volume error %.4f at 80 cells across, want below 0.5%% and below %.4f at 20", errAt[80], errAt[20])
			}
		})
	}
}

// Over a sphere |nx|, |ny| and |nz| each average 1/2 (by the hat-box
// theorem, Archimedes, On the Sphere and Cylinder I, every band of equal
// height along an axis has equal area, so each normal component is
// uniform on [-1, 1]); the staircase therefore has 3/2 of the true area.
func TestSphereVoxelAreaIsThreeHalves(t *testing.T) {
	t.Parallel()
	for _, n := range []int{40, 80} {
		voxel, _ := totals(voxelise(t, Sphere{Diameter: 1}, n, []Selector{{All: true}}))
		if ratio := voxel / sphereArea(1); !near(ratio, 1.5, 0.02) {
			t.Errorf("%d cells across: voxel area / true area = %.4f, want 1.5 within 2%%", n, ratio)
		}
	}
}

func TestCorrectedFaceArea(t *testing.T) {
	t.Parallel()
	const h = 0.01
	// A plane with unit normal n projects onto the plane normal to axis d
	// with factor |n_d| (area projection, elementary geometry); the
	// staircase of a plane area A has faces A·(|nx|+|ny|+|nz|) in all.
	tests := []struct {
		n    [3]float64
		want float64
	}{
		{[3]float64{0, 0, -1}, h * h},
		{[3]float64{math.Sqrt2 / 2, -math.Sqrt2 / 2, 0}, h * h / math.Sqrt2},
		{[3]float64{1 / math.Sqrt(3), 1 / math.Sqrt(3), 1 / math.Sqrt(3)}, h * h / math.Sqrt(3)},
		{[3]float64{0.6, 0, 0.8}, h * h / 1.4},
	}
	for _, tt := range tests {
		if got := CorrectedFaceArea(h, tt.n); !near(got, tt.want, 1e-12) {
			t.Errorf("CorrectedFaceArea(%g, %v) = %g, want %g", h, tt.n, got, tt.want)
		}
	}
}

func TestCorrectedAreaBeforeRescale(t *testing.T) {
	t.Parallel()
	for _, tt := range testShapes {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			_, corrected := totals(voxelise(t, tt.solid, 40, []Selector{{All: true}}))
			if !near(corrected, tt.area, 0.01) {
				t.Errorf("corrected area %g, want %g within 1%% (off by %.4f)", corrected, tt.area, corrected/tt.area-1)
			}
		})
	}
}

func TestGroupAreasAfterRescale(t *testing.T) {
	t.Parallel()
	const d = 0.12
	cap45 := sphereCapArea(d, d/2*(1-math.Cos(math.Pi/4)))
	tests := []struct {
		name      string
		solid     Solid
		selectors []Selector
		want      []float64 // true area per group, insulated last
	}{
		{"sphere +x against the rest", Sphere{Diameter: d}, []Selector{{All: true}, {Facing: []int{PlusX}}},
			[]float64{sphereArea(d) - cap45, cap45, 0}},
		{"sphere -z only", Sphere{Diameter: d}, []Selector{{Facing: []int{MinusZ}}},
			[]float64{cap45, sphereArea(d) - cap45}},
		{"cylinder ends and a quarter of the side", Cylinder{Diameter: 0.05, Length: 0.3, Axis: 0}, []Selector{{Facing: []int{MinusX, PlusX}}, {Facing: []int{MinusZ}}},
			[]float64{2 * math.Pi * 0.025 * 0.025, math.Pi * 0.05 * 0.3 / 4, 3 * math.Pi * 0.05 * 0.3 / 4}},
		{"box top", Box{Size: [3]float64{0.1, 0.13, 0.08}}, []Selector{{Facing: []int{PlusZ}}},
			[]float64{0.1 * 0.13, 0.1*0.13 + 2*(0.13*0.08+0.08*0.1)}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			g := voxelise(t, tt.solid, 40, tt.selectors)
			if len(g.Groups) != len(tt.want) {
				t.Fatalf("%d groups, want %d", len(g.Groups), len(tt.want))
			}
			faceSum := make([]float64, len(g.Groups))
			for _, f := range g.Faces {
				faceSum[f.Group] += f.Area
			}
			for i, gr := range g.Groups {
				if !gr.TrueAreaExact || !near(gr.TrueArea, tt.want[i], 1e-12) {
					t.Errorf("%s: TrueArea %g (exact %v), want %g", gr.Name, gr.TrueArea, gr.TrueAreaExact, tt.want[i])
				}
				if !near(gr.ModelArea, tt.want[i], 1e-12) || !near(faceSum[i], tt.want[i], 1e-9) {
					t.Errorf("%s: ModelArea %g, face areas sum to %g, want %g", gr.Name, gr.ModelArea, faceSum[i], tt.want[i])
				}
				if math.Abs(gr.Rescale-1) > 0.03 {
					t.Errorf("%s: Rescale %.4f, want within 3%% of 1", gr.Name, gr.Rescale)
				}
			}
		})
	}
}

// With edges a whole number of cells long, the staircase is the box itself.
func TestBoxAlignedWithGridNeedsNoCorrection(t *testing.T) {
	t.Parallel()
	box := Box{Size: [3]float64{0.1, 0.14, 0.08}}
	g, err := Voxelise(context.Background(), box, 0.01, []Selector{{All: true}})
	if err != nil {
		t.Fatal(err)
	}
	if g.N != [3]int{10, 14, 8} || g.PartCells() != 10*14*8 {
		t.Fatalf("grid %v with %d part cells, want 10×14×8 all in the part", g.N, g.PartCells())
	}
	for _, f := range g.Faces {
		if f.Normal != axisVector(int(f.Dir)) || !near(f.Area, 1e-4, 1e-12) {
			t.Fatalf("face %+v: want the face's own normal and area h²", f)
		}
	}
	all := g.Groups[0]
	if !near(all.Rescale, 1, 1e-12) || !near(all.VoxelArea, box.Area(), 1e-12) {
		t.Errorf("Rescale %g, VoxelArea %g; want 1 and the box area %g", all.Rescale, all.VoxelArea, box.Area())
	}
}

func TestLaterSelectorOverridesEarlier(t *testing.T) {
	t.Parallel()
	box := Box{Size: [3]float64{0.1, 0.1, 0.1}}
	tests := []struct {
		name      string
		selectors []Selector
		groupOf   [6]string // group name expected for each face direction
	}{
		{"facing over facing", []Selector{{Facing: []int{PlusX, PlusY}}, {Facing: []int{PlusX}}},
			[6]string{"insulated", "exposure[1]", "insulated", "exposure[0]", "insulated", "insulated"}},
		{"all over facing", []Selector{{Facing: []int{PlusX}}, {All: true}},
			[6]string{"exposure[1]", "exposure[1]", "exposure[1]", "exposure[1]", "exposure[1]", "exposure[1]"}},
		{"facing over all", []Selector{{All: true}, {Facing: []int{MinusZ, PlusZ}}},
			[6]string{"exposure[0]", "exposure[0]", "exposure[0]", "exposure[0]", "exposure[1]", "exposure[1]"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			g := voxelise(t, box, 10, tt.selectors)
			wantNames := make([]string, 0, len(tt.selectors)+1)
			for i := range tt.selectors {
				wantNames = append(wantNames, fmt.Sprintf("exposure[%d]", i))
			}
			wantNames = append(wantNames, "insulated")
			faces := map[string]int{}
			for i, gr := range g.Groups {
				if gr.Name != wantNames[i] || gr.Exposure != i && !(gr.Name == "insulated" && gr.Exposure == -1) {
					t.Fatalf("group %d is %q exposure %d, want %q", i, gr.Name, gr.Exposure, wantNames[i])
				}
			}
			for _, f := range g.Faces {
				if got := g.Groups[f.Group].Name; got != tt.groupOf[f.Dir] {
					t.Fatalf("a %s face went to %s, want %s", DirectionNames[f.Dir], got, tt.groupOf[f.Dir])
				}
				faces[g.Groups[f.Group].Name]++
			}
			for _, gr := range g.Groups {
				// Each box face is 0.1 m square, 100 cell faces.
				want := 0
				for _, name := range tt.groupOf {
					if name == gr.Name {
						want++
					}
				}
				if faces[gr.Name] != 100*want || !near(gr.TrueArea, 0.01*float64(want), 1e-12) && want > 0 || want == 0 && gr.TrueArea != 0 {
					t.Errorf("%s: %d faces, true area %g; want %d faces, %g m²", gr.Name, faces[gr.Name], gr.TrueArea, 100*want, 0.01*float64(want))
				}
			}
		})
	}
}

func TestNoSelectorsLeavesAllInsulated(t *testing.T) {
	t.Parallel()
	g := voxelise(t, Sphere{Diameter: 0.05}, 20, nil)
	if len(g.Groups) != 1 {
		t.Fatalf("%d groups, want only insulated", len(g.Groups))
	}
	ins := g.Groups[0]
	if ins.Name != "insulated" || ins.Exposure != -1 || !near(ins.TrueArea, sphereArea(0.05), 1e-12) {
		t.Errorf("group %+v, want insulated with exposure -1 and the whole area %g", ins, sphereArea(0.05))
	}
	if int(math.Round(ins.VoxelArea/(g.CellSize*g.CellSize))) != len(g.Faces) {
		t.Errorf("VoxelArea %g does not count all %d faces", ins.VoxelArea, len(g.Faces))
	}
}

// Every listed face must separate a part cell from the outside, once; and
// on a convex part each grid line through it enters and leaves once, so
// the -x and +x face counts both equal the number of part-cell rows along x.
func TestBoundaryFacesAreExactlyTheExposedOnes(t *testing.T) {
	t.Parallel()
	g := voxelise(t, Cylinder{Diameter: 0.05, Length: 0.08, Axis: 1}, 16, []Selector{{All: true}})
	seen := map[[2]int]bool{}
	var perDir [6]int
	for _, f := range g.Faces {
		i, j, k := g.Coords(int(f.Cell))
		if !g.Inside(i, j, k) {
			t.Fatalf("face %+v belongs to a cell outside the part", f)
		}
		step := axisVector(int(f.Dir))
		if g.Inside(i+int(step[0]), j+int(step[1]), k+int(step[2])) {
			t.Fatalf("face %+v lies between two part cells", f)
		}
		key := [2]int{int(f.Cell), int(f.Dir)}
		if seen[key] {
			t.Fatalf("face %+v listed twice", f)
		}
		seen[key] = true
		perDir[f.Dir]++
	}
	for axis := range 3 {
		rows := 0
		for a := range g.N[(axis+1)%3] {
			for b := range g.N[(axis+2)%3] {
				for c := range g.N[axis] {
					var ijk [3]int
					ijk[axis], ijk[(axis+1)%3], ijk[(axis+2)%3] = c, a, b
					if g.Inside(ijk[0], ijk[1], ijk[2]) {
						rows++
						break
					}
				}
			}
		}
		if perDir[2*axis] != rows || perDir[2*axis+1] != rows {
			t.Errorf("axis %d: %d minus and %d plus faces, want %d each (rows of part cells)", axis, perDir[2*axis], perDir[2*axis+1], rows)
		}
	}
}

// A face stands for surface facing its own side, so its normal must have a
// positive component along the face direction; for a solid without
// FaceNormal (the opaque box) this needs the fallback near edges, where the
// nearest surface is often a neighbouring box face.
func TestFaceNormalsFaceTheirSide(t *testing.T) {
	t.Parallel()
	box := Box{Size: [3]float64{0.1, 0.13, 0.08}}
	for _, s := range []Solid{Sphere{Diameter: 0.1}, Cylinder{Diameter: 0.05, Length: 0.08, Axis: 1}, box, opaqueSolid{box}} {
		g := voxelise(t, s, 20, []Selector{{All: true}})
		for _, f := range g.Faces {
			if c := dot(f.Normal, axisVector(int(f.Dir))); !(c > 0) || !near(norm(f.Normal), 1, 1e-12) {
				t.Fatalf("%T: face %+v: normal is not a unit vector facing its side", s, f)
			}
		}
	}
}

func TestSphereGridIsSymmetric(t *testing.T) {
	t.Parallel()
	for _, n := range []int{17, 24} {
		g := voxelise(t, Sphere{Diameter: 1}, n, []Selector{{Facing: []int{PlusX}}, {Facing: []int{MinusX}}})
		if g.N != [3]int{n, n, n} {
			t.Fatalf("grid %v, want %d cells each way", g.N, n)
		}
		if even := n%2 == 0; even && g.Origin[0] != -g.CellSize*float64(n)/2 {
			t.Errorf("origin %v: want the centre on a cell corner", g.Origin)
		}
		for c, r := range g.Region {
			i, j, k := g.Coords(c)
			for _, mirror := range [][3]int{{n - 1 - i, j, k}, {i, n - 1 - j, k}, {i, j, n - 1 - k}, {j, k, i}} {
				if g.Region[g.Index(mirror[0], mirror[1], mirror[2])] != r {
					t.Fatalf("%d cells: cell (%d,%d,%d) and its mirror %v differ", n, i, j, k, mirror)
				}
			}
		}
		plus, minus := g.Groups[0], g.Groups[1]
		if plus.VoxelArea != minus.VoxelArea || !near(plus.ModelArea, minus.ModelArea, 1e-12) {
			t.Errorf("%d cells: +x group %+v and -x group %+v should mirror each other", n, plus, minus)
		}
	}
}

// Without FacingAreas a facing selection falls back to the corrected sum.
func TestGroupsOfSolidWithoutExactAreas(t *testing.T) {
	t.Parallel()
	g := voxelise(t, opaqueSolid{Sphere{Diameter: 1}}, 20, []Selector{{All: true}, {Facing: []int{PlusY}}})
	for _, gr := range g.Groups {
		if gr.TrueAreaExact || gr.Rescale != 1 || gr.TrueArea != gr.ModelArea {
			t.Errorf("%s: %+v; want inexact, Rescale 1, TrueArea = ModelArea", gr.Name, gr)
		}
	}
	g = voxelise(t, opaqueSolid{Sphere{Diameter: 1}}, 20, []Selector{{All: true}})
	if all := g.Groups[0]; !all.TrueAreaExact || !near(all.ModelArea, sphereArea(1), 1e-12) {
		t.Errorf("all-only selection: %+v; want exact area %g", all, sphereArea(1))
	}
}

func TestVoxeliseRejectsBadInputs(t *testing.T) {
	t.Parallel()
	sphere := Sphere{Diameter: 0.1}
	tests := []struct {
		name      string
		solid     Solid
		cellSize  float64
		selectors []Selector
		want      []string
	}{
		{"no solid", nil, 0.01, nil, []string{"solid: missing"}},
		{"zero diameter", Sphere{}, 0.01, nil, []string{"Sphere.Diameter", "got 0"}},
		{"negative length and bad axis", Cylinder{Diameter: 0.1, Length: -0.2, Axis: 3}, 0.01, nil, []string{"Cylinder.Length", "got -0.2", "Cylinder.Axis", "got 3"}},
		{"flat box", Box{Size: [3]float64{0.1, 0, 0.1}}, 0.01, nil, []string{"Box.Size[1]", "got 0"}},
		{"infinite box", Box{Size: [3]float64{0.1, math.Inf(1), 0.1}}, 0.01, nil, []string{"Box.Size[1]", "got +Inf"}},
		{"zero cell size", sphere, 0, nil, []string{"cell size", "got 0"}},
		{"negative cell size", sphere, -0.01, nil, []string{"cell size", "got -0.01"}},
		{"NaN cell size", sphere, math.NaN(), nil, []string{"cell size", "got NaN"}},
		{"too many cells", sphere, 1e-5, nil, []string{"cell size 1e-05 m", "more than the 2147483647"}},
		{"too few cells", sphere, CellSizeFor(sphere, 3), nil, []string{"3 cells across", "need at least 4"}},
		{"empty selector", sphere, 0.01, []Selector{{All: true}, {}}, []string{"selectors[1]: selects no surface"}},
		{"unknown direction", sphere, 0.01, []Selector{{Facing: []int{PlusX, 6}}}, []string{"selectors[0].Facing[1]", "got 6"}},
		{"selector with no faces", Sphere{Diameter: 1}, CellSizeFor(Sphere{Diameter: 1}, 4),
			[]Selector{{All: true}, {Facing: []int{MinusX, PlusX, MinusY, PlusY, MinusZ, PlusZ}}}, []string{"selectors[0]: covers", "no boundary face"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			t.Parallel()
			g, err := Voxelise(context.Background(), tt.solid, tt.cellSize, tt.selectors)
			if err == nil {
				t.Fatalf("no error; grid %v", g.N)
			}
			for _, w := range tt.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not mention %q", err, w)
				}
			}
		})
	}
}

func TestCellSizeFor(t *testing.T) {
	t.Parallel()
	cyl := Cylinder{Diameter: 0.04, Length: 0.5, Axis: 0}
	if got := CellSizeFor(cyl, 20); !near(got, 0.002, 1e-12) {
		t.Errorf("CellSizeFor = %g, want 0.002 (diameter / 20)", got)
	}
	g := voxelise(t, cyl, 20, nil)
	if g.N != [3]int{250, 20, 20} {
		t.Errorf("grid %v, want 250×20×20", g.N)
	}
}

func TestVoxeliseHonoursCancel(t *testing.T) {
	t.Parallel()
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	_, err := Voxelise(ctx, Sphere{Diameter: 1}, 0.05, nil)
	if !errors.Is(err, context.Canceled) {
		t.Errorf("error %v, want context.Canceled", err)
	}
}

// The estimate must cover what a grid actually holds plus ten float64
// arrays over the box, for a compact part and for a long thin one.
func TestEstimateBytesCoversGrid(t *testing.T) {
	t.Parallel()
	for _, s := range []Solid{Sphere{Diameter: 1}, Cylinder{Diameter: 0.01, Length: 1, Axis: 2}} {
		g := voxelise(t, s, 12, []Selector{{All: true}})
		used := int64(len(g.Region)) + int64(len(g.Faces))*int64(unsafe.Sizeof(BoundaryFace{})) + 10*8*int64(g.CellCount())
		if est := EstimateBytes(g.N); est < used {
			t.Errorf("%T grid %v: estimate %d bytes below %d in use", s, g.N, est, used)
		}
	}
	if EstimateBytes([3]int{0, 5, 5}) != 0 {
		t.Errorf("an empty grid should need no memory")
	}
	base := [3]int{50, 60, 70}
	for d := range base {
		more := base
		more[d]++
		if EstimateBytes(more) <= EstimateBytes(base) {
			t.Errorf("estimate for %v is not above that for %v", more, base)
		}
	}
}

// BenchmarkSphereContains128Reference is the bare cost of testing every
// cell centre of a 128³ box against a sphere on one goroutine, the
// reference that BenchmarkVoxeliseSphere128 is read against.
func BenchmarkSphereContains128Reference(b *testing.B) {
	s := Sphere{Diameter: 0.2}
	h := CellSizeFor(s, 128)
	inside := 0
	for b.Loop() {
		for k := range 128 {
			for j := range 128 {
				for i := range 128 {
					if s.Contains([3]float64{h * (float64(i) - 63.5), h * (float64(j) - 63.5), h * (float64(k) - 63.5)}) {
						inside++
					}
				}
			}
		}
	}
	if inside == 0 {
		b.Fatal("no cell centre inside the sphere")
	}
}

func BenchmarkVoxeliseSphere128(b *testing.B) {
	s := Sphere{Diameter: 0.2}
	h := CellSizeFor(s, 128)
	selectors := []Selector{{All: true}, {Facing: []int{PlusZ}}}
	for b.Loop() {
		if _, err := Voxelise(context.Background(), s, h, selectors); err != nil {
			b.Fatal(err)
		}
	}
}
