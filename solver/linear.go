package solver

import (
	"context"
	"math"
	"sort"
	"sync"
)

// span is a run of consecutive part cells in one grid row. Loops run over
// spans so that cells outside the part cost nothing. The same cells sit
// at three kinds of position:
//   - [lo, hi) in whole-box arrays padded by a plane at each end (the
//     solution, the conductivities, the grid's regions at lo − pad);
//   - from cp on in the arrays of a layout (values whose neighbours a pass
//     reads, face conductances): the neighbours of cell cp+i are at ±1
//     along x and at cp+i+dn, +ds, +du, +dd north (y+1), south, up (z+1)
//     and down;
//   - from at on among the part cells, in span order, in arrays that no
//     neighbour reads.
//
// x, y and z are the grid coordinates of cell lo.
type span struct {
	lo, hi         int
	cp             int
	dn, ds, du, dd int
	at             int
	x, y, z        int
}

// partIndex returns the index among the part cells of padded cell c, which
// must lie in one of spans (sorted as partitionMask makes them).
func partIndex(spans []span, c int) int {
	i := sort.Search(len(spans), func(i int) bool { return spans[i].hi > c })
	return spans[i].at + c - spans[i].lo
}

// stencil is the 7-point operator (A·x)_c = diag_c·x_c − Σ g·x_neighbour:
// diag over the part cells only (span.at), the conductances in the
// layout's arrays (span.cp): gx[c] couples c with its east neighbour,
// gy[c] with its north and gz[c] with the one above, and a coefficient is
// 0 where either cell lies outside the part. Operands of the product are
// in the layout too.
//
// The face conductances are float32, rounded once when they are set: the
// operator with the rounded values is exactly symmetric, and its diagonal
// sums them in float64, so the rounding changes the conductivities by a
// part in 10⁷ and nothing else. The multigrid's finest level shares these
// arrays instead of copying them, and every product reads 12 bytes per
// cell less.
type stencil struct {
	diag       []float64
	gx, gy, gz []float32
	// conductancesSet counts the times gx, gy and gz were set, so that
	// what depends on them alone is redone only when they change.
	conductancesSet int
	// vector tells the passes over this operator and its multigrid to use
	// the AVX2 kernels where the CPU has them.
	vector bool
}

// gather copies the part cells of the whole-box x into the layout array
// p, on spans.
func gather(spans []span, x, p []float64) {
	for _, sp := range spans {
		copy(p[sp.cp:sp.cp+sp.hi-sp.lo], x[sp.lo:sp.hi])
	}
}

// faceSum returns the sum of the six face conductances of cell c (a
// layout position) of span sp.
func faceSum(gx, gy, gz []float32, sp *span, c int) float64 {
	return float64(gx[c]) + float64(gx[c-1]) + float64(gy[c]) + float64(gy[c+sp.ds]) +
		float64(gz[c]) + float64(gz[c+sp.dd])
}

// stencilReach checks that every cell a stencil kernel reads for span sp
// lies in its array: the values x and their six neighbours, the
// conductances of the cells and of their lower neighbours. A layout
// mistake then panics in Go instead of reading stray memory.
func stencilReach[T float32 | float64](sp *span, x []T, gx, gy, gz []float32) {
	c, n := sp.cp, sp.hi-sp.lo
	_, _, _, _, _ = x[c-1:c+n+1], x[c+sp.dn:c+sp.dn+n], x[c+sp.ds:c+sp.ds+n], x[c+sp.du:c+sp.du+n], x[c+sp.dd:c+sp.dd+n]
	_, _, _ = gx[c-1:c+n], gy[c+sp.ds:c+sp.ds+n], gz[c+sp.dd:c+sp.dd+n]
	_, _ = gy[c:c+n], gz[c:c+n]
}

// linearSolver solves the symmetric positive definite system of one Newton
// pass. It is an interface so that the preconditioner can be exchanged.
type linearSolver interface {
	// solve improves x in place (warm start) until ‖b − A·x‖ ≤ tol·‖b‖ and
	// returns the number of iterations; b holds the part cells only
	// (span.at), x is a whole-box array.
	solve(ctx context.Context, a *stencil, b, x []float64, tol float64) (int, error)
	// moved returns the bytes moved to and from memory so far, by a model
	// of each pass (bytes per part cell).
	moved() float64
	// cycles returns what the multigrid cycles cost so far (zero without
	// multigrid).
	cycles() CycleCost
	// memory returns the bytes of the solver's own arrays.
	memory() int
}

// ctxCheckEvery is how many iterations pass between looks at the context:
// often enough that a cancel takes effect within milliseconds on large grids.
const ctxCheckEvery = 4

// workers runs one task on every slab at once: worker w works on slab w.
// The goroutines live for one Solve so that an iteration starts no
// goroutines and allocates nothing.
type workers struct {
	tasks []chan func(int)
	wg    sync.WaitGroup
}

func newWorkers(n int) *workers {
	ws := &workers{tasks: make([]chan func(int), n)}
	for w := 1; w < n; w++ {
		ch := make(chan func(int))
		ws.tasks[w] = ch
		go func() {
			for task := range ch {
				task(w)
				ws.wg.Done()
			}
		}()
	}
	return ws
}

func (ws *workers) count() int { return len(ws.tasks) }

// run calls task(w) for every worker and waits for all; worker 0 is the caller.
func (ws *workers) run(task func(int)) {
	ws.wg.Add(len(ws.tasks) - 1)
	for w := 1; w < len(ws.tasks); w++ {
		ws.tasks[w] <- task
	}
	task(0)
	ws.wg.Wait()
}

func (ws *workers) stop() {
	for _, ch := range ws.tasks[1:] {
		close(ch)
	}
}

// partial is one worker's share of a reduction, padded to its own cache line.
type partial struct {
	a, b, c float64
	_       [40]byte
}

// jacobiCG is conjugate gradients with the diagonal as preconditioner,
// parallel over z-slabs. The preconditioner is folded into the vector
// updates (z = r/diag is never stored) to save memory traffic. It is the
// plain reference the multigrid solver is measured against
// (Stepping.Preconditioner "jacobi"). p is in the layout (the product
// reads its neighbours); r, q and invDiag hold the part cells only.
type jacobiCG struct {
	ws      *workers
	slabs   [][]span
	r, p, q []float64
	invDiag []float64 // the Jacobi preconditioner, 1/diag
	sums    []partial

	// operands of the running solve, read by the tasks
	a     *stencil
	b, x  []float64
	alpha float64
	beta  float64
	cells int
	bytes float64 // moved so far

	loadTask, startTask, firstDirectionTask, productTask, updateTask, directionTask func(int)
}

// newJacobiCG makes the solver for the part cells of slabs; size is the
// length of the layout's arrays.
func newJacobiCG(ws *workers, slabs [][]span, size int, mem *arrays) *jacobiCG {
	cells := partCells(slabs)
	s := &jacobiCG{
		ws: ws, slabs: slabs, cells: cells,
		r: grow[float64](mem, cells), p: grow[float64](mem, size), q: grow[float64](mem, cells),
		invDiag: grow[float64](mem, cells),
		sums:    make([]partial, ws.count()),
	}
	s.loadTask = s.load
	s.startTask = s.start
	s.firstDirectionTask = s.firstDirection
	s.productTask = s.product
	s.updateTask = s.update
	s.directionTask = s.direction
	return s
}

// partCells counts the cells of slabs.
func partCells(slabs [][]span) int {
	n := 0
	for _, slab := range slabs {
		for _, sp := range slab {
			n += sp.hi - sp.lo
		}
	}
	return n
}

// reduce runs task on all slabs and returns the sums of the partials.
func (s *jacobiCG) reduce(task func(int)) (a, b, c float64) {
	s.ws.run(task)
	for i := range s.sums {
		a += s.sums[i].a
		b += s.sums[i].b
		c += s.sums[i].c
	}
	return a, b, c
}

func (s *jacobiCG) solve(ctx context.Context, a *stencil, b, x []float64, tol float64) (int, error) {
	s.a, s.b, s.x = a, b, x
	defer func() { s.a, s.b, s.x = nil, nil, nil }()

	cells := float64(s.cells)
	s.ws.run(s.loadTask)
	rz, bb, rr := s.reduce(s.startTask)
	s.ws.run(s.firstDirectionTask)
	s.bytes += (bytesStencil + 2*8 + 8 + 5*8 + 3*8) * cells
	limit := tol * tol * bb
	if rr <= limit {
		return 0, nil
	}
	// Jacobi-preconditioned CG on this operator needs about as many
	// iterations as cells along the part; the cap only stops a breakdown.
	maxIter := 1000 + 100*int(math.Cbrt(cells))
	for it := 1; it <= maxIter; it++ {
		// product 48, update 56, direction 32 bytes per cell
		s.bytes += (bytesStencil + 2*8 + 7*8 + 4*8) * cells
		if it%ctxCheckEvery == 0 {
			if err := ctx.Err(); err != nil {
				return it, err
			}
		}
		pq, _, _ := s.reduce(s.productTask)
		if !(pq > 0) {
			return it, ErrLinearSolve
		}
		s.alpha = rz / pq
		rzNew, rr, _ := s.reduce(s.updateTask)
		if rr <= limit {
			return it, nil
		}
		s.beta = rzNew / rz
		rz = rzNew
		s.ws.run(s.directionTask)
	}
	return maxIter, ErrLinearSolve
}

func (s *jacobiCG) moved() float64 { return s.bytes }

func (s *jacobiCG) cycles() CycleCost { return CycleCost{} }

func (s *jacobiCG) memory() int { return 8 * (len(s.r) + len(s.p) + len(s.q) + len(s.invDiag)) }

// bytesStencil is the stencil's float64 diag and float32 gx, gy, gz per cell.
const bytesStencil = 8 + 3*4

// start sets r = b − A·x and p = r/diag; sums r·r/diag, b·b and r·r.
func (s *jacobiCG) start(w int) {
	b, r := s.b, s.r
	s.a.product(s.slabs[w], s.p, r) // r = A·x for now
	var rz, bb, rr float64
	for _, sp := range s.slabs[w] {
		for i := sp.at; i < sp.at+sp.hi-sp.lo; i++ {
			rc := b[i] - r[i]
			r[i] = rc
			s.invDiag[i] = 1 / s.a.diag[i]
			rz += rc * rc * s.invDiag[i]
			bb += b[i] * b[i]
			rr += rc * rc
		}
	}
	s.sums[w] = partial{a: rz, b: bb, c: rr}
}

// load copies x into p, the product's operand, on slab w.
func (s *jacobiCG) load(w int) { gather(s.slabs[w], s.x, s.p) }

// firstDirection sets p = r/diag on slab w.
func (s *jacobiCG) firstDirection(w int) {
	for _, sp := range s.slabs[w] {
		n := sp.hi - sp.lo
		r, p, inv := s.r[sp.at:sp.at+n], s.p[sp.cp:sp.cp+n], s.invDiag[sp.at:sp.at+n]
		for i := range r {
			p[i] = r[i] * inv[i]
		}
	}
}

// product sets q = A·p and sums p·q.
func (s *jacobiCG) product(w int) { s.sums[w] = partial{a: s.a.product(s.slabs[w], s.p, s.q)} }

// product sets q = A·p on the cells of spans (q holding the part cells
// only) and returns their sum of p·q.
func (a *stencil) product(spans []span, p, q []float64) float64 {
	var pq float64
	for _, sp := range spans {
		c, n := sp.cp, sp.hi-sp.lo
		dn, ds, du, dd := sp.dn, sp.ds, sp.du, sp.dd
		if a.vector {
			stencilReach(&sp, p, a.gx, a.gy, a.gz)
			_, _ = a.diag[sp.at:sp.at+n], q[sp.at:sp.at+n]
			pq += productAVX(n, dn, ds, du, dd, &p[c], &a.gx[c], &a.gy[c], &a.gz[c], &a.diag[sp.at], &q[sp.at])
			continue
		}
		// Equal-length windows let the compiler drop the bounds checks.
		pc, pw, pe, ps, pn, pd, pu := p[c:c+n], p[c-1:c-1+n], p[c+1:c+1+n], p[c+ds:c+ds+n], p[c+dn:c+dn+n],
			p[c+dd:c+dd+n], p[c+du:c+du+n]
		diag, gx, gxw, gy, gys, gz, gzd := a.diag[sp.at:sp.at+n], a.gx[c:c+n], a.gx[c-1:c-1+n], a.gy[c:c+n], a.gy[c+ds:c+ds+n],
			a.gz[c:c+n], a.gz[c+dd:c+dd+n]
		qc := q[sp.at : sp.at+n]
		pw, pe, ps, pn, pd, pu = pw[:len(pc)], pe[:len(pc)], ps[:len(pc)], pn[:len(pc)], pd[:len(pc)], pu[:len(pc)]
		diag, gx, gxw, gy, gys, gz, gzd, qc = diag[:len(pc)], gx[:len(pc)], gxw[:len(pc)], gy[:len(pc)], gys[:len(pc)], gz[:len(pc)], gzd[:len(pc)], qc[:len(pc)]
		for i := range pc {
			ap := diag[i]*pc[i] - float64(gx[i])*pe[i] - float64(gxw[i])*pw[i] -
				float64(gy[i])*pn[i] - float64(gys[i])*ps[i] -
				float64(gz[i])*pu[i] - float64(gzd[i])*pd[i]
			qc[i] = ap
			pq += pc[i] * ap
		}
	}
	return pq
}

// update steps x and r along p; sums r·r/diag and r·r.
func (s *jacobiCG) update(w int) {
	alpha := s.alpha
	var rz, rr float64
	for _, sp := range s.slabs[w] {
		// Equal-length reslices let the compiler drop the bounds checks.
		n := sp.hi - sp.lo
		x, r, p, q, inv := s.x[sp.lo:sp.hi], s.r[sp.at:sp.at+n:sp.at+n], s.p[sp.cp:sp.cp+n], s.q[sp.at:sp.at+n], s.invDiag[sp.at:sp.at+n]
		for i := range r {
			x[i] += alpha * p[i]
			rc := r[i] - alpha*q[i]
			r[i] = rc
			rz += rc * rc * inv[i]
			rr += rc * rc
		}
	}
	s.sums[w] = partial{a: rz, b: rr}
}

// direction sets p = r/diag + β·p.
func (s *jacobiCG) direction(w int) {
	beta := s.beta
	for _, sp := range s.slabs[w] {
		n := sp.hi - sp.lo
		r, p, inv := s.r[sp.at:sp.at+n], s.p[sp.cp:sp.cp+n], s.invDiag[sp.at:sp.at+n]
		for i := range r {
			p[i] = r[i]*inv[i] + beta*p[i]
		}
	}
}
