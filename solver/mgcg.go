package solver

import (
	"context"
	"fmt"
)

// maxMultigridIterations stops a breakdown; a healthy solve takes a few
// dozen at most.
const maxMultigridIterations = 500

// multigridCG is conjugate gradients preconditioned by one multigrid
// V-cycle per iteration, parallel over z-slabs. The preconditioner works in
// float32, so it is not exactly symmetric; β takes the Polak–Ribière form
// (flexible CG), which tolerates that. p is in the layout (the product
// reads its neighbours); r and q hold the part cells only.
type multigridCG struct {
	ws      *workers
	slabs   [][]span
	mg      *multigrid
	r, p, q []float64
	sums    []partial
	cells   int
	bytes   float64 // moved by the CG passes so far

	// operands of the running solve, read by the tasks
	a           *stencil
	b, x        []float64
	alpha, beta float64

	fromStencilTask, loadTask, startTask, productTask, updateTask, dotTask, directionTask func(int)
}

func newMultigridCG(ws *workers, slabs [][]span, lay *layout, a *stencil, dims [3]int, part func(c int) bool, mem *arrays, weighted bool) *multigridCG {
	mask := make([]bool, dims[0]*dims[1]*dims[2])
	for c := range mask {
		mask[c] = part(c)
	}
	cells := partCells(slabs)
	s := &multigridCG{
		ws: ws, slabs: slabs, mg: newMultigrid(ws, a, dims, mask, slabs, lay, mem, weighted), cells: cells,
		r: grow[float64](mem, cells), p: grow[float64](mem, lay.size), q: grow[float64](mem, cells),
		sums: make([]partial, ws.count()),
	}
	s.fromStencilTask = s.fromStencil
	s.loadTask = func(w int) { gather(s.slabs[w], s.x, s.p) }
	s.startTask = s.start
	s.productTask = s.product
	s.updateTask = s.update
	s.dotTask = s.dot
	s.directionTask = s.direction
	return s
}

func (s *multigridCG) moved() float64 { return s.bytes + s.mg.moved }

func (s *multigridCG) cycles() CycleCost { return s.mg.cost }

func (s *multigridCG) memory() int {
	return 8*(len(s.r)+len(s.p)+len(s.q)) + s.mg.memory()
}

// reduce runs task on all slabs and returns the sums of the partials.
func (s *multigridCG) reduce(task func(int)) (a, b float64) {
	s.ws.run(task)
	for i := range s.sums {
		a += s.sums[i].a
		b += s.sums[i].b
	}
	return a, b
}

// Bytes per part cell of the CG passes (float64 = 8, float32 = 4).
const (
	bytesStart     = bytesStencil + 5*8 + 4 // x in, p out and in, b, r; the preconditioner's b
	bytesProduct   = bytesStencil + 2*8     // p, q
	bytesUpdate    = 6*8 + 4                // x, r read and written, p, q; the preconditioner's b
	bytesDot       = 2*8 + 4                // r, q, z
	bytesDirection = 4 + 2*8                // z, p read and written
)

func (s *multigridCG) solve(ctx context.Context, a *stencil, b, x []float64, tol float64) (int, error) {
	s.a, s.b, s.x = a, b, x
	defer func() { s.a, s.b, s.x = nil, nil, nil }()
	cells := float64(s.cells)

	s.mg.setup(a, s.fromStencilTask)
	s.ws.run(s.loadTask)
	bb, rr := s.reduce(s.startTask)
	s.bytes += bytesStart * cells
	limit := tol * tol * bb
	if rr <= limit {
		return 0, nil
	}
	s.mg.apply()
	rz, _ := s.reduce(s.dotTask)
	s.beta = 0
	s.ws.run(s.directionTask)
	s.bytes += (bytesDot + bytesDirection) * cells
	for it := 1; it <= maxMultigridIterations; it++ {
		if it%ctxCheckEvery == 0 {
			if err := ctx.Err(); err != nil {
				return it, err
			}
		}
		pq, _ := s.reduce(s.productTask)
		if !(pq > 0) || !(rz > 0) {
			return it, fmt.Errorf("%w: multigrid CG broke down (p·Ap = %g, r·z = %g)", ErrLinearSolve, pq, rz)
		}
		s.alpha = rz / pq
		rr, _ := s.reduce(s.updateTask)
		s.bytes += (bytesProduct + bytesUpdate) * cells
		if rr <= limit {
			return it, nil
		}
		s.mg.apply()
		rzNew, zq := s.reduce(s.dotTask)
		// Polak–Ribière: β = z·(r_new − r_old)/rz_old with r_new − r_old = −α·q.
		s.beta = -s.alpha * zq / rz
		rz = rzNew
		s.ws.run(s.directionTask)
		s.bytes += (bytesDot + bytesDirection) * cells
	}
	return maxMultigridIterations, ErrLinearSolve
}

// fromStencil sets the finest level's inverse diagonal and each cell's own
// terms (the diagonal less its face conductances, taken in float64 before
// rounding: at large steps they are a small difference of large numbers)
// on slab w; the level shares the stencil's conductances.
func (s *multigridCG) fromStencil(w int) {
	a, l := s.a, s.mg.levels[0]
	hi := 0.0
	for _, sp := range s.slabs[w] {
		c, n := sp.cp, sp.hi-sp.lo
		// Equal-length views let the compiler drop the bounds checks.
		diag := a.diag[sp.at : sp.at+n]
		inv, own := l.inv[sp.at:sp.at+n], l.d[c:c+n]
		gx, gxw, gy, gys, gz, gzd := a.gx[c:c+n], a.gx[c-1:c-1+n], a.gy[c:c+n], a.gy[c+sp.ds:c+sp.ds+n],
			a.gz[c:c+n], a.gz[c+sp.dd:c+sp.dd+n]
		inv, own, gx, gxw, gy, gys, gz, gzd = inv[:n], own[:n], gx[:n], gxw[:n], gy[:n], gys[:n], gz[:n], gzd[:n]
		for i := range diag {
			g := float64(gx[i]) + float64(gxw[i]) + float64(gy[i]) + float64(gys[i]) + float64(gz[i]) + float64(gzd[i])
			r := 1 / diag[i]
			inv[i] = float32(r)
			own[i] = float32(diag[i] - g)
			if b := 1 + g*r; b > hi { // plain compare: max would also order NaNs
				hi = b
			}
		}
	}
	l.lmax[w] = partial{a: hi}
}

// start sets r = b − A·x and hands r to the preconditioner; sums b·b and r·r.
func (s *multigridCG) start(w int) {
	b, r, pb := s.b, s.r, s.mg.levels[0].b
	s.a.product(s.slabs[w], s.p, r) // r = A·x for now (p holds x)
	var bb, rr float64
	for _, sp := range s.slabs[w] {
		for i := sp.at; i < sp.at+sp.hi-sp.lo; i++ {
			rc := b[i] - r[i]
			r[i], pb[i] = rc, float32(rc)
			bb += b[i] * b[i]
			rr += rc * rc
		}
	}
	s.sums[w] = partial{a: bb, b: rr}
}

func (s *multigridCG) product(w int) { s.sums[w] = partial{a: s.a.product(s.slabs[w], s.p, s.q)} }

// update steps x and r along p and hands r to the preconditioner; sums r·r.
func (s *multigridCG) update(w int) {
	alpha, pb := s.alpha, s.mg.levels[0].b
	var rr float64
	for _, sp := range s.slabs[w] {
		n := sp.hi - sp.lo
		x, r, p, q, rb := s.x[sp.lo:sp.hi], s.r[sp.at:sp.at+n], s.p[sp.cp:sp.cp+n], s.q[sp.at:sp.at+n], pb[sp.at:sp.at+n]
		x, p, q, rb = x[:len(r)], p[:len(r)], q[:len(r)], rb[:len(r)]
		if s.a.vector {
			rr += updateAVX(n, alpha, &x[0], &p[0], &r[0], &q[0], &rb[0])
			continue
		}
		for i := range r {
			x[i] += alpha * p[i]
			rc := r[i] - alpha*q[i]
			r[i], rb[i] = rc, float32(rc)
			rr += rc * rc
		}
	}
	s.sums[w] = partial{a: rr}
}

// dot sums r·z and z·q, z being the preconditioner's output.
func (s *multigridCG) dot(w int) {
	z := s.mg.levels[0].x
	var rz, zq float64
	for _, sp := range s.slabs[w] {
		n := sp.hi - sp.lo
		r, q, zs := s.r[sp.at:sp.at+n], s.q[sp.at:sp.at+n], z[sp.cp:sp.cp+n]
		q, zs = q[:len(r)], zs[:len(r)]
		if s.a.vector {
			a, b := dotAVX(n, &r[0], &zs[0], &q[0])
			rz, zq = rz+a, zq+b
			continue
		}
		for i := range r {
			zi := float64(zs[i])
			rz += r[i] * zi
			zq += zi * q[i]
		}
	}
	s.sums[w] = partial{a: rz, b: zq}
}

// direction sets p = z + β·p.
func (s *multigridCG) direction(w int) {
	beta, z := s.beta, s.mg.levels[0].x
	for _, sp := range s.slabs[w] {
		n := sp.hi - sp.lo
		p, zs := s.p[sp.cp:sp.cp+n], z[sp.cp:sp.cp+n]
		zs = zs[:len(p)]
		if s.a.vector {
			directionAVX(len(p), beta, &zs[0], &p[0])
			continue
		}
		for i := range p {
			p[i] = float64(zs[i]) + beta*p[i]
		}
	}
}
