package solver

import (
	"context"
	"math"
	"testing"
	"unsafe"

	"soakfarm/mesh"
)

// TestLayoutKeepsWhatPassesRead checks on the bracket (bore, slot, thin
// walls) that every cell a stencil reads from a part cell is kept (its six
// neighbours), and in a coarse level's wide layout what the interpolation
// reads too (the 3×3 rows around its row over its x ± 1).
func TestLayoutKeepsWhatPassesRead(t *testing.T) {
	t.Parallel()
	g := bracketGrid(19)
	n := g.N
	inPart := func(x, y, z int) bool {
		return x >= 0 && y >= 0 && z >= 0 && x < n[0] && y < n[1] && z < n[2] && g.Region[x+n[0]*(y+n[1]*z)] != 0
	}
	narrow, _ := newLayout(n, func(c int) bool { return g.Region[c] != 0 }, false)
	lay, _ := newLayout(n, func(c int) bool { return g.Region[c] != 0 }, true)
	seen := map[int]bool{}
	for z := range n[2] {
		for y := range n[1] {
			for x := range n[0] {
				if !inPart(x, y, z) {
					continue
				}
				for _, nb := range [6][3]int{{-1, 0, 0}, {1, 0, 0}, {0, -1, 0}, {0, 1, 0}, {0, 0, -1}, {0, 0, 1}} {
					xx, yy, zz := x+nb[0], y+nb[1], z+nb[2]
					if yy < 0 || zz < 0 || yy >= n[1] || zz >= n[2] {
						continue // outside the box: the zero row
					}
					if _, ok := keptAt(narrow, xx, yy, zz); !ok {
						t.Fatalf("neighbour (%d,%d,%d) of part cell (%d,%d,%d) is not kept", xx, yy, zz, x, y, z)
					}
				}
				pos, ok := keptAt(lay, x, y, z)
				if !ok || seen[pos] {
					t.Fatalf("part cell (%d,%d,%d): kept %v, position %d taken twice %v", x, y, z, ok, pos, seen[pos])
				}
				seen[pos] = true
				for dz := -1; dz <= 1; dz++ {
					for dy := -1; dy <= 1; dy++ {
						for dx := -1; dx <= 1; dx++ {
							yy, zz := y+dy, z+dz
							if yy < 0 || zz < 0 || yy >= n[1] || zz >= n[2] {
								continue // outside the box: the zero row
							}
							if _, ok := keptAt(lay, x+dx, yy, zz); !ok {
								t.Fatalf("cell (%d,%d,%d) beside part cell (%d,%d,%d) is not kept", x+dx, yy, zz, x, y, z)
							}
						}
					}
				}
			}
		}
	}
}

// TestMemoryFollowsThePart: a part that fills a fraction of its box costs
// about what a solid block of as many cells costs, per part cell, and
// every one stays under 150 bytes a cell. Thin walls cost more per cell
// (the shell of kept cells around the part, the surface faces, and the
// solution, which stays a whole-box array): the tube's walls are 8 cells
// thick here; at 5 cells it takes about 155 bytes.
func TestMemoryFollowsThePart(t *testing.T) {
	t.Parallel()
	const cell = 1e-3
	f := 60 * cell
	shapes := []struct {
		name string
		part testPart
	}{
		{"solid block", block3(60)},
		{"ball", testPart{n: [3]int{60, 60, 60}, cell: cell, inside: func(p [3]float64) bool {
			return math.Hypot(math.Hypot(p[0]-f/2, p[1]-f/2), p[2]-f/2) < f/2
		}}},
		{"tube, a third of its box", testPart{n: [3]int{60, 60, 60}, cell: cell, inside: func(p [3]float64) bool {
			r := math.Hypot(p[0]-f/2, p[1]-f/2)
			return r < f/2 && r > 0.36*f
		}}},
	}
	perCell := map[string]float64{}
	for _, s := range shapes {
		s.part.cell = cell
		s.part.origin = [3]float64{}
		p := problemFor(testGrid(s.part), constantMaterial(40, 1, 3.6e6), convection(100, 293), 1073, 3600)
		r := newRun(p)
		perCell[s.name] = float64(r.memory()) / float64(r.g.PartCells())
		// The estimate that specs are refused by must cover it.
		if est, used := mesh.EstimateBytes(r.g.N), int64(r.memory()+len(r.g.Region))+
			int64(len(r.g.Faces))*int64(unsafe.Sizeof(mesh.BoundaryFace{})); est < used {
			t.Errorf("%s: memory estimate %d bytes below the %d in use", s.name, est, used)
		}
		fill := float64(r.g.PartCells()) / float64(r.g.CellCount())
		r.ws.stop()
		t.Logf("%s: fills %.0f %% of its box, %.0f bytes per part cell", s.name, 100*fill, perCell[s.name])
		if perCell[s.name] >= 150 {
			t.Errorf("%s: %.0f bytes per part cell", s.name, perCell[s.name])
		}
	}
	for name, b := range perCell {
		if b > 1.3*perCell["solid block"] {
			t.Errorf("%s: %.0f bytes per part cell against %.0f for the solid block", name, b, perCell["solid block"])
		}
	}
}

// keptAt returns the position of cell (x, y, z) in l and whether l keeps it.
func keptAt(l *layout, x, y, z int) (int, bool) {
	if y < -1 || y > l.n[1] || z < -1 || z > l.n[2] {
		return 0, false
	}
	return l.inRow(l.row(y, z), x)
}

// TestOddShapesSolve takes a step on boxes one cell thin, a rod, a
// scattering of separate cells and a hollow frame, with multigrid and with
// the Jacobi reference, with and without the vector kernels, on two
// threads and on one: every solve
// meets its tolerance by its true residual and the solutions agree as the
// residuals allow. These are the shapes where a layout or a wavefront
// mistake would show: rows and planes with nothing in them, neighbours
// outside the box on every side.
func TestOddShapesSolve(t *testing.T) {
	t.Parallel()
	const cell = 1e-3
	shapes := []struct {
		name   string
		n      [3]int
		inside func(i, j, k int) bool
	}{
		{"plate one cell thick", [3]int{30, 20, 1}, func(i, j, k int) bool { return true }},
		{"rod along x", [3]int{60, 1, 1}, func(i, j, k int) bool { return true }},
		{"rod along z", [3]int{1, 1, 60}, func(i, j, k int) bool { return true }},
		{"separate cells", [3]int{17, 13, 11}, func(i, j, k int) bool { return (i*7+j*3+k*5)%11 == 0 }},
		{"two blocks with empty planes between", [3]int{21, 21, 50}, func(i, j, k int) bool { return k < 20 || k >= 30 }},
		{"hollow frame", [3]int{24, 24, 24}, func(i, j, k int) bool {
			edge := func(a int) bool { return a < 2 || a > 21 }
			return (edge(i) && edge(j)) || (edge(j) && edge(k)) || (edge(i) && edge(k))
		}},
	}
	for _, s := range shapes {
		t.Run(s.name, func(t *testing.T) {
			t.Parallel()
			g := testGrid(testPart{n: s.n, cell: cell, inside: func(p [3]float64) bool {
				return s.inside(int(p[0]/cell), int(p[1]/cell), int(p[2]/cell))
			}})
			if g.PartCells() == 0 {
				t.Fatal("no part cells")
			}
			dt := 200 * cell * cell * 3.6e6 / 40
			var first []float64
			type path struct {
				pre     string
				vector  bool
				threads int
			}
			var paths []path
			for _, pre := range []string{Multigrid, Jacobi} {
				for _, vector := range []bool{true, false} {
					// two slabs where the part is large enough
					paths = append(paths, path{pre, vector, 2})
				}
			}
			paths = append(paths, path{Multigrid, true, 1})
			for _, pp := range paths {
				if pp.vector && !haveVector() {
					continue
				}
				p := problemFor(g, constantMaterial(40, 1, 3.6e6), convection(100, 293), 1073, 3600)
				p.Stepping.Preconditioner, p.Stepping.Tolerance = pp.pre, 1e-10
				p.Threads = pp.threads
				r := newRunOn(p, pp.vector)
				r.initialState()
				_, err := r.step(context.Background(), 0, dt, 0, backwardEulerCoefficients)
				r.ws.stop()
				if err != nil {
					t.Fatalf("%+v: %v", pp, err)
				}
				if first == nil {
					first = append([]float64(nil), r.t...)
					continue
				}
				for c := range first {
					// 1073 K, relative residual 1e-10: micro-kelvins.
					if d := math.Abs(r.t[c] - first[c]); d > 1e-4 {
						t.Fatalf("%+v: cell %d differs by %g K from the first path", pp, c, d)
					}
				}
			}
		})
	}
}
