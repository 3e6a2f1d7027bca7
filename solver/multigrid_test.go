package solver

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"soakfarm/mesh"
)

// bracketGrid is an n³ box of 1 mm cells with a through bore along z, a
// slot that leaves walls one cell thick, and a second region (its own
// material) in the upper half: holes, thin walls and a material jump at
// once. Every surface face is exposed.
func bracketGrid(n int) *mesh.Grid {
	const cell = 1e-3
	f := float64(n) * cell
	g := testGrid(testPart{
		n: [3]int{n, n, n}, cell: cell,
		inside: func(p [3]float64) bool {
			if math.Hypot(p[0]-f/3, p[1]-f/2) < f/5 { // bore
				return false
			}
			// slot: walls of one cell at x = n−1, y = 0 and y = n−1
			return !(p[0] > 2*f/3 && p[0] < f-cell && p[1] > cell && p[1] < f-cell)
		},
	})
	for c, r := range g.Region {
		if _, _, k := g.Coords(c); r != 0 && k >= n/2 {
			g.Region[c] = 2
		}
	}
	return g
}

// linearStep takes one backward-Euler step of length dt from the initial
// state with the given preconditioner and returns the solution, the
// iterations and ‖b − A·x‖/‖b‖ recomputed in float64 from the assembled
// system, with λ, a lower bound of A's eigenvalues: the smallest of the
// cells' own terms (Gershgorin, A being symmetric with a diagonal that
// exceeds its row's conductances by them).
func linearStep(t *testing.T, p *Problem, dt float64, preconditioner string) (x []float64, iterations int, residual, bNorm, lambda float64) {
	t.Helper()
	p.Stepping.Preconditioner = preconditioner
	r := newRun(p)
	defer r.ws.stop()
	r.initialState()
	iterations, err := r.step(context.Background(), 0, dt, 0, backwardEulerCoefficients)
	if err != nil {
		t.Fatalf("%s: %v", preconditioner, err)
	}
	ax := make([]float64, len(r.b)) // part cells only, like b
	lambda = math.Inf(1)
	var rr, bb float64
	a := &r.st
	inLayout := make([]float64, len(r.st.gx)) // the solution in the layout
	for _, slab := range r.slabs {
		gather(slab, r.t, inLayout)
	}
	for _, slab := range r.slabs {
		a.product(slab, inLayout, ax)
		for _, sp := range slab {
			for i, c := sp.at, sp.cp; i < sp.at+sp.hi-sp.lo; i, c = i+1, c+1 {
				rr += (r.b[i] - ax[i]) * (r.b[i] - ax[i])
				bb += r.b[i] * r.b[i]
				lambda = min(lambda, a.diag[i]-faceSum(a.gx, a.gy, a.gz, &sp, c))
			}
		}
	}
	return append([]float64(nil), r.t...), iterations, math.Sqrt(rr), math.Sqrt(bb), lambda
}

// TestPreconditionersAgree solves the same steps with multigrid and with
// the plain Jacobi reference, on the bracket (bore, thin walls, two
// materials whose conductivities differ 1000-fold either way) at cell
// Fourier numbers 20 and 2000. Each solution must meet the tolerance by its
// true residual, and the two must differ by no more than the residuals
// allow: ‖x₁ − x₂‖ ≤ (‖r₁‖ + ‖r₂‖)/λmin.
func TestPreconditionersAgree(t *testing.T) {
	t.Parallel()
	const k, rhoCp, tol = 40.0, 3.6e6, 1e-8
	for _, ratio := range []float64{1e-3, 1e3} {
		for _, fourier := range []float64{20, 2000} {
			t.Run(fmt.Sprintf("k2/k1=%g/Fo=%g", ratio, fourier), func(t *testing.T) {
				t.Parallel()
				g := bracketGrid(24)
				p := problemFor(g, constantMaterial(k, 1, rhoCp), convection(100, 293), 1073, 3600)
				p.Materials = append(p.Materials, constantMaterial(k*ratio, 1, rhoCp))
				p.Exposures = []Exposure{convection(100, 293), convection(100, 293)}
				p.Stepping.Tolerance = tol
				dt := fourier * g.CellSize * g.CellSize * rhoCp / k
				var x [2][]float64
				var res [2]float64
				var lambda float64
				for i, pre := range []string{Multigrid, Jacobi} {
					var its int
					var bNorm float64
					x[i], its, res[i], bNorm, lambda = linearStep(t, p, dt, pre)
					// The recurrence's residual drifts from the true one by
					// rounding only; allow 10 %.
					if res[i] > 1.1*tol*bNorm {
						t.Errorf("%s: true residual %.3g of ‖b‖ after %d iterations, tolerance %g", pre, res[i]/bNorm, its, tol)
					}
					// With transfers that follow the conductances a
					// 1000-fold jump costs 7 to 9 iterations (a uniform
					// part 4 to 6); trilinear ones took up to 29.
					if pre == Multigrid && its > 12 {
						t.Errorf("multigrid took %d iterations", its)
					}
					t.Logf("%s: %d iterations", pre, its)
				}
				var diff float64
				for c := range x[0] {
					diff += (x[0][c] - x[1][c]) * (x[0][c] - x[1][c])
				}
				if bound := (res[0] + res[1]) / lambda; math.Sqrt(diff) > bound {
					t.Errorf("solutions differ by %.3g K (2-norm), residuals allow %.3g K", math.Sqrt(diff), bound)
				}
			})
		}
	}
}

// TestMultigridIterationsFlat: multigrid's iterations per step must not
// grow with the grid (Jacobi's grow about with the cells along the part).
func TestMultigridIterationsFlat(t *testing.T) {
	t.Parallel()
	const k, rhoCp, cell = 40.0, 3.6e6, 1e-3
	sizes := []int{12, 24, 48}
	if testing.Short() {
		sizes = sizes[:2]
	}
	for _, fourier := range []float64{20, 2000} {
		lo, hi := math.MaxInt, 0
		for _, n := range sizes {
			tp := block3(n)
			tp.cell = cell
			p := problemFor(testGrid(tp), constantMaterial(k, 1, rhoCp), convection(100, 293), 1073, 3600)
			_, its, _, _, _ := linearStep(t, p, fourier*cell*cell*rhoCp/k, Multigrid)
			lo, hi = min(lo, its), max(hi, its)
		}
		if hi-lo > 2 {
			t.Errorf("Fo = %g: iterations range from %d to %d over %v³ cells", fourier, lo, hi, sizes)
		}
	}
}

// TestJumpIterationsFlat: on the bracket with a second material 1000 times
// as conductive (or as resistive), multigrid's iterations per step stay
// within 2 from 24³ to 48³ and at 12 or fewer: the transfers follow the
// conductances (with trilinear ones they grew from 29 to 37 at Fo 2000).
func TestJumpIterationsFlat(t *testing.T) {
	t.Parallel()
	const k, rhoCp = 40.0, 3.6e6
	for _, ratio := range []float64{1e-3, 1e3} {
		lo, hi := math.MaxInt, 0
		for _, n := range []int{24, 48} {
			p := bracketProblem(n)
			p.Materials[1] = constantMaterial(k*ratio, 1, rhoCp)
			_, its, _, _, _ := linearStep(t, p, 2000*1e-6*rhoCp/k, Multigrid)
			lo, hi = min(lo, its), max(hi, its)
		}
		if hi-lo > 2 || hi > 12 {
			t.Errorf("k2/k1 = %g: iterations from %d to %d over 24³ and 48³", ratio, lo, hi)
		}
	}
}

// TestSolveAllocatesNothing: a linear solve, set-up included, must not
// allocate: the work is passes over arrays made once per run.
func TestSolveAllocatesNothing(t *testing.T) {
	const k, rhoCp = 40.0, 3.6e6
	for _, pre := range []string{Multigrid, Jacobi} {
		tp := block3(32) // enough cells for two workers
		tp.cell = 1e-3
		p := problemFor(testGrid(tp), constantMaterial(k, 1, rhoCp), convection(100, 293), 1073, 3600)
		p.Stepping.Preconditioner = pre
		p.Threads = 2
		r := newRun(p)
		r.initialState()
		dt := 20 * tp.cell * tp.cell * rhoCp / k
		if _, err := r.step(context.Background(), 0, dt, 0, backwardEulerCoefficients); err != nil {
			t.Fatal(err)
		}
		allocs := testing.AllocsPerRun(3, func() {
			r.initialState()
			if _, err := r.lin.solve(context.Background(), &r.st, r.b, r.t, 1e-8); err != nil {
				t.Fatal(err)
			}
		})
		r.ws.stop()
		if allocs != 0 {
			t.Errorf("%s: %g allocations per solve", pre, allocs)
		}
	}
}

// TestPassByPassIsTheSameCycle: the V-cycle run pass by pass (the bench's
// reference for the fused sweeps) must give the fused cycle's result to
// the last bit, on the bracket and on a part whose slabs hold empty
// planes, on two threads and on one.
func TestPassByPassIsTheSameCycle(t *testing.T) {
	t.Parallel()
	const cell = 1e-3
	gaps := testGrid(testPart{n: [3]int{21, 21, 50}, cell: cell, inside: func(p [3]float64) bool {
		k := int(p[2] / cell)
		return k < 20 || k >= 30
	}})
	for _, tc := range []struct {
		name    string
		g       *mesh.Grid
		threads int
	}{
		{"bracket", bracketGrid(24), 2},
		{"bracket on one thread", bracketGrid(24), 1},
		{"blocks with empty planes between", gaps, 2},
	} {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			p := problemFor(tc.g, constantMaterial(40, 1, 3.6e6), convection(100, 293), 1073, 3600)
			p.Stepping.Preconditioner, p.Threads = Multigrid, tc.threads
			if len(tc.g.Groups) > 1 { // the bracket's second material, 1000 times as conductive
				p.Materials = append(p.Materials, constantMaterial(40e3, 1, 3.6e6))
				p.Exposures = []Exposure{convection(100, 293), convection(100, 293)}
			}
			r := newRun(p)
			defer r.ws.stop()
			r.initialState()
			if _, err := r.step(context.Background(), 0, 200*cell*cell*3.6e6/40, 0, backwardEulerCoefficients); err != nil {
				t.Fatal(err)
			}
			mg := r.lin.(*multigridCG).mg
			fine := mg.levels[0]
			for i := range fine.b {
				fine.b[i] = float32(math.Sin(float64(i)))
			}
			mg.apply()
			fused := append([]float32(nil), fine.x...)
			mg.passByPass = true
			mg.apply()
			for c := range fused {
				if fine.x[c] != fused[c] {
					t.Fatalf("layout position %d: %g pass by pass, %g fused", c, fine.x[c], fused[c])
				}
			}
			if fused[fine.slabs[0][0].cp] == 0 {
				t.Fatal("the cycle left the first cell at 0")
			}
		})
	}
}

// TestRestrictionIsTransposeOfProlongation: on every level, for random
// coarse u and fine v, ⟨S·P·u, v⟩ = ⟨u, Pᵀ·(S·v)⟩, S being the
// interpolation's scale: the V-cycle stays symmetric. Checked with the
// trilinear transfers (one material on the bracket) and with the weighted
// ones (a second material 1000 times as conductive).
func TestRestrictionIsTransposeOfProlongation(t *testing.T) {
	t.Parallel()
	for _, second := range []float64{40, 40e3} {
		p := bracketProblem(21)
		p.Materials[1] = constantMaterial(second, 1, 3.6e6)
		r := newRun(p)
		r.initialState()
		if _, err := r.step(context.Background(), 0, 1, 0, backwardEulerCoefficients); err != nil {
			t.Fatal(err)
		}
		mg := r.lin.(*multigridCG).mg
		rng := rand.New(rand.NewPCG(3, 4))
		for li, l := range mg.levels[:len(mg.levels)-1] {
			if l.weighted != (second != 40) {
				t.Fatalf("level %d weighted %v with conductivities 40 and %g", li, l.weighted, second)
			}
			c := l.next
			u := make([]float32, len(c.x))
			for _, sp := range concatSlabs(c.slabs) {
				for k := sp.cp; k < sp.cp+sp.hi-sp.lo; k++ {
					u[k] = float32(rng.Float64() - 0.5)
				}
			}
			copy(c.x, u)
			clear(l.x)
			mg.run(l, l.prolongTask)
			clear(l.d)
			var lhs, rhs float64
			for _, sp := range concatSlabs(l.slabs) {
				for k := range sp.hi - sp.lo {
					v := float32(rng.Float64() - 0.5)
					lhs += float64(l.x[sp.cp+k]) * float64(v)
					l.d[sp.cp+k] = l.scale[sp.at+k] * v
				}
			}
			mg.run(c, l.restrictTask)
			for _, sp := range concatSlabs(c.slabs) {
				for k := range sp.hi - sp.lo {
					rhs += float64(u[sp.cp+k]) * float64(c.b[sp.at+k])
				}
			}
			if math.Abs(lhs-rhs) > 1e-5*math.Abs(lhs) {
				t.Errorf("second material k = %g, level %d: ⟨S·P·u, v⟩ = %.7g, ⟨u, Pᵀ·S·v⟩ = %.7g", second, li, lhs, rhs)
			}
		}
		r.ws.stop()
	}
}
