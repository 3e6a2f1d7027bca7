package solver

import (
	"math"
	"time"
)

// Multigrid preconditioner on the masked voxel grid.
//
// Each coarser level halves every grid dimension that is longer than one
// cell; a coarse cell belongs to the part when any of its children does.
// Its coefficients are re-discretised from the children rather than formed
// as a Galerkin product, so the coarse operators stay 7-point:
//   - the cell's own terms (ρ·cp·V/Δt, convection, linearised radiation:
//     the diagonal minus the face conductances) add up over the children;
//   - a coarse face conductance is the sum of the child faces that cross it
//     divided by the coarsening factor along it, which is k·A/L of the
//     coarse face (on a thin wall as well as in the bulk).
//
// Interpolation is trilinear between cell centres (weights 3/4 and 1/4 per
// halved direction), renormalised over the coarse cells that lie in the
// part, so that a constant stays a constant at the surface; restriction is
// its transpose. On parts of several materials or with contact resistances
// the weights follow the conductances near interfaces (transfer.go). The
// smoother is a Chebyshev polynomial in D⁻¹A, the same before and after
// the coarse correction, and the coarsest level is solved exactly by a
// dense Cholesky factor: the cycle is a fixed symmetric positive definite
// operator, fit for conjugate gradients.
//
// The levels hold float32: the preconditioner only has to be a good
// approximate inverse, and half the bytes is half the memory traffic. The
// conjugate gradient iteration around it stays in float64.

const (
	// maxCoarseCells is the most cells the coarsest level, solved by
	// Cholesky, may have.
	maxCoarseCells = 16
	// smoothDegree is the degree of the Chebyshev smoother before and
	// after the coarse correction.
	smoothDegree = 4
	// smoothRange is λmax/λmin of the interval the smoother damps: the
	// upper part of the spectrum of D⁻¹A, which the coarse grid cannot see.
	smoothRange = 8.0
)

// mgLevel is one grid of the hierarchy: float32 coefficients of the
// 7-point operator in a layout of its own (the finest shares the
// solver's), and the part cells as spans in per-worker slabs.
type mgLevel struct {
	n      [3]int
	lay    *layout // where the arrays that neighbours read keep each cell
	factor [3]int  // coarsening factor towards the next level, 1 or 2
	slabs  [][]span
	planes [][][]span // each slab's spans by z-plane, for the wavefronts
	cells  int
	next   *mgLevel // coarser level; nil on the coarsest

	// inv is 1/diagonal: the smoother then needs no division. gx, gy, gz
	// are the finest level's stencil's own arrays (ownsConductances false).
	inv, gx, gy, gz  []float32
	ownsConductances bool
	// vector tells the passes to use the AVX2 kernels (the rest of each
	// span, and every span on other CPUs, takes the portable loop).
	vector bool
	// b is the right-hand side, x the solution and xNext the other half of
	// its ping-pong pair (the first, third … smoothing steps write it, the
	// others x, so a cycle leaves its result in x). d is the Chebyshev
	// direction, then the scaled residual handed to the coarser level;
	// during set-up it holds the cells' own terms (the diagonal without
	// the face conductances).
	b, x, xNext, d []float32
	// scale is 1 / (sum of the interpolation weights of the coarse cells
	// in the part), per cell; nil on the coarsest level.
	scale []float32
	// coarseRow (per slab of this level) and fineRow (per slab of the
	// next) are the blended rows of prolong and the gathered rows of
	// restrict, two cells longer than a row of the level they hold (and a
	// vector longer, coarseRow), their ends 0.
	coarseRow, fineRow [][]float32
	// prolongPlans (per slab, in the slab's order of spans) are what
	// prolong needs of the next level for each span.
	prolongPlans [][]prolongPlan
	// zSpans are the part spans of each z-plane (views of the slabs); sums
	// (three dense coarse planes) and sink (a coarse row nothing reads)
	// are restrict's, per slab of the next level.
	zSpans     [][]span
	sums, sink [][]float32
	// coarsenSums (per slab of the next level) are coarsen's float64 sums
	// over a coarse span: own terms and the three conductances.
	coarsenSums [][4][]float64
	// weighted makes prolongation and restriction follow the conductances
	// (transfer.go): side holds each part cell's side weights along x, y
	// and z, rowWeighted marks the grid rows (y + ny·z) where one differs
	// from the trilinear 1/4, rowSpans lists each row's spans.
	weighted    bool
	side        [3][]uint8
	rowWeighted []bool
	rowSpans    [][]span
	sidesTask   func(int)
	// inv, b and scale hold the part cells only (span.at): no neighbour
	// reads them. The others are in the level's layout (span.cp).

	// Chebyshev coefficients for this set-up: step s updates
	// d ← cd[s]·d + cr[s]·D⁻¹(b − A·x).
	cd, cr [smoothDegree]float32
	lmax   []partial
	// pre smooths from x = 0 and leaves the scaled residual in d; post
	// adds the coarse correction and smooths again: each one sweep of
	// memory (see wavefront).
	pre, post *wavefront

	prolongTask, restrictTask, coarsenTask, diagonalTask func(int)
}

// newLevel makes a level of n cells whose part cells part tells; a level
// built from a stencil (the finest) shares its conductances.
func newLevel(n [3]int, slabs [][]span, lay *layout, a *stencil, mem *arrays, vector bool) *mgLevel {
	l := &mgLevel{n: n, vector: vector, slabs: slabs, lay: lay}
	size := l.lay.size
	l.x, l.xNext, l.d = grow[float32](mem, size), grow[float32](mem, size), grow[float32](mem, size)
	l.cells = partCells(l.slabs)
	l.inv, l.b = grow[float32](mem, l.cells), grow[float32](mem, l.cells)
	if a != nil {
		l.gx, l.gy, l.gz = a.gx, a.gy, a.gz
	} else {
		l.gx, l.gy, l.gz = grow[float32](mem, size), grow[float32](mem, size), grow[float32](mem, size)
		l.ownsConductances = true
	}
	l.lmax = make([]partial, len(l.slabs))
	l.planes = planesOf(l.slabs)
	// Chebyshev steps alternate between x and xNext; smoothDegree is even,
	// so the last one writes x.
	pre := []stage{{kind: stageFromZero, dst: l.xNext}}
	post := []stage{{kind: stageProlong}}
	src, dst := l.x, l.xNext
	for s := range smoothDegree {
		step := stage{kind: stageSmooth, step: s, src: src, dst: dst}
		if s > 0 {
			pre = append(pre, step)
		}
		post = append(post, step)
		src, dst = dst, src
	}
	l.pre = newWavefront(l, append(pre, stage{kind: stageResidual, src: l.x}))
	l.post = newWavefront(l, post)
	l.checkReach()
	l.prolongTask = func(w int) { l.prolong(w, l.slabs[w]) }
	l.restrictTask = l.restrict
	l.coarsenTask = l.coarsen
	l.diagonalTask = l.diagonal
	return l
}

// multigrid is the V-cycle preconditioner: apply sets levels[0].x ≈ A⁻¹·levels[0].b.
type multigrid struct {
	ws     *workers
	levels []*mgLevel
	// coarsest-level Cholesky factor (lower triangle, row-major) over the
	// cells listed in coarseCells (layout positions, in span order)
	coarseCells []int
	chol, work  []float64
	moved       float64 // bytes moved so far, by the traffic model below
	// weighted: the transfers follow the conductances, so the side
	// weights and the interpolation's scale are found again whenever the
	// conductances change (sidesFor is the stencil's count they are for).
	weighted bool
	sidesFor int
	// passByPass runs every wavefront stage as a pass of its own over
	// the level, each moving its operands from memory: the in-run
	// reference `soak bench` holds the fused sweeps against. The result
	// is the same to the last bit.
	passByPass bool
	// cost is what the V-cycles so far took (set-up left out).
	cost CycleCost
}

// CycleCost is the wall time of multigrid V-cycles and their memory
// traffic by the two counts of the model below: Bytes as the cycles ran
// (each array once per fused sweep of a level), PassBytes as STREAM counts
// a kernel's traffic, each pass (smoothing step, residual, transfer)
// reading and writing its own operands whether or not an earlier pass
// left them in cache. The two are equal when the cycles run pass by pass.
type CycleCost struct {
	Seconds, Bytes, PassBytes float64
}

// since returns the cost from before to c.
func (c CycleCost) since(before CycleCost) CycleCost {
	return CycleCost{c.Seconds - before.Seconds, c.Bytes - before.Bytes, c.PassBytes - before.PassBytes}
}

// newMultigrid builds the hierarchy over the finest level, whose part
// cells part tells (by grid index) and which shares the solver's spans,
// layout and conductances (a).
func newMultigrid(ws *workers, a *stencil, dims [3]int, part []bool, slabs [][]span, lay *layout, mem *arrays, weighted bool) *multigrid {
	vector := a.vector
	mg := &multigrid{ws: ws, weighted: weighted}
	threads := ws.count()
	l := newLevel(dims, slabs, lay, a, mem, vector)
	mg.levels = append(mg.levels, l)
	for l.cells > maxCoarseCells && (l.n[0] > 1 || l.n[1] > 1 || l.n[2] > 1) {
		var cn [3]int
		for a := range 3 {
			l.factor[a] = 1
			if l.n[a] > 1 {
				l.factor[a] = 2
			}
			cn[a] = (l.n[a] + l.factor[a] - 1) / l.factor[a]
		}
		coarse := make([]bool, cn[0]*cn[1]*cn[2])
		for k := range l.n[2] {
			for j := range l.n[1] {
				for i := range l.n[0] {
					if part[i+l.n[0]*(j+l.n[1]*k)] {
						coarse[i/l.factor[0]+cn[0]*(j/l.factor[1]+cn[1]*(k/l.factor[2]))] = true
					}
				}
			}
		}
		cslabs, clay := partitionMask(cn, func(c int) bool { return coarse[c] }, 0, threads, true)
		c := newLevel(cn, cslabs, clay, nil, mem, vector)
		l.next = c
		l.scale = grow[float32](mem, l.cells)
		for range l.slabs {
			l.coarseRow = append(l.coarseRow, make([]float32, cn[0]+2+8)) // 8 for prolongAVX's loads
		}
		l.zSpans = make([][]span, l.n[2])
		for _, planes := range l.planes {
			for _, p := range planes {
				l.zSpans[p[0].z] = p
			}
		}
		for range c.slabs {
			l.sink = append(l.sink, make([]float32, cn[0]))
			l.sums = append(l.sums, make([]float32, 3*cn[0]*cn[1]))
			l.fineRow = append(l.fineRow, make([]float32, l.n[0]+3))
			var sums [4][]float64
			for i := range sums {
				sums[i] = make([]float64, cn[0])
			}
			l.coarsenSums = append(l.coarsenSums, sums)
		}
		if weighted {
			l.weighted = true
			l.indexRows()
			for a := range l.side {
				l.side[a] = make([]uint8, l.cells)
			}
			l.rowWeighted = make([]bool, l.n[1]*l.n[2])
			l.sidesTask = l.setSides
		}
		l.planProlong()
		mg.interpolationScale(l)
		mg.levels = append(mg.levels, c)
		l, part = c, coarse
	}
	for _, slab := range l.slabs {
		for _, sp := range slab {
			for c := sp.cp; c < sp.cp+sp.hi-sp.lo; c++ {
				mg.coarseCells = append(mg.coarseCells, c)
			}
		}
	}
	m := len(mg.coarseCells)
	mg.chol, mg.work = make([]float64, m*m), make([]float64, m)
	return mg
}

// interpolationScale sets l.scale from the interpolation of a coarse field
// that is 1 in the part: the sum of the weights each fine cell receives.
// It leaves l.x and the next level's x at 0.
func (mg *multigrid) interpolationScale(l *mgLevel) {
	c := l.next
	for _, slab := range l.slabs {
		for _, sp := range slab {
			clear(l.x[sp.cp : sp.cp+sp.hi-sp.lo])
		}
	}
	for _, slab := range c.slabs {
		for _, sp := range slab {
			for i := sp.cp; i < sp.cp+sp.hi-sp.lo; i++ {
				c.x[i] = 1
			}
		}
	}
	for i := range l.scale {
		l.scale[i] = 1
	}
	mg.run(l, l.prolongTask)
	for _, slab := range l.slabs {
		for _, sp := range slab {
			for i, c := sp.at, sp.cp; i < sp.at+sp.hi-sp.lo; i, c = i+1, c+1 {
				l.scale[i], l.x[c] = 1/l.x[c], 0
			}
		}
	}
	clear(c.x)
}

// run calls task for every slab of l: on the workers when l has a slab per
// worker, in the calling goroutine when it is too small to share.
func (mg *multigrid) run(l *mgLevel, task func(int)) {
	if len(l.slabs) == mg.ws.count() && len(l.slabs) > 1 {
		mg.ws.run(task)
		return
	}
	for w := range l.slabs {
		task(w)
	}
}

// memory returns the bytes the hierarchy holds.
func (mg *multigrid) memory() int {
	bytes := 8 * (len(mg.chol) + len(mg.work) + len(mg.coarseCells))
	for _, l := range mg.levels {
		layoutArrays := 3 // x, xNext, d
		if l.ownsConductances {
			layoutArrays += 3
		}
		bytes += 4*(layoutArrays*len(l.x)+len(l.inv)+len(l.b)+len(l.scale)) + 3*len(l.side[0])
	}
	return bytes
}

// Bytes per part cell each pass reads and writes (float32 = 4 bytes): the
// model behind the bandwidth figures of `soak bench`. A wavefront reads
// each array once whatever its number of stages, since a plane's
// neighbours and a later stage's inputs are still in cache.
const (
	// pre: the stencil (inverse diagonal, three conductances), b and
	// scale in; d, x and x' out
	bytesPre = 4*4 + 4 + 4 + 3*4
	// post: scale, the stencil and b in; x and d read and written, x' out
	bytesPost     = 4 + 4*4 + 4 + 2*4 + 2*4 + 4
	bytesRestrict = 4                  // fine r read once (neighbours hit the cache)
	bytesFromFine = bytesStencil + 2*4 // stencil in, inverse diagonal and own terms out
	bytesCoarsen  = 4 * 4              // fine own terms and conductances, read once
	bytesDiagonal = 5 * 4              // own terms and conductances in, inverse diagonal out
)

// setup builds every level's operator from the fine stencil a.
func (mg *multigrid) setup(a *stencil, fromFine func(int)) {
	l := mg.levels[0]
	mg.run(l, fromFine)
	mg.moved += bytesFromFine * float64(l.cells)
	mg.setSmoother(l)
	for ; l.next != nil; l = l.next {
		c := l.next
		mg.run(c, l.coarsenTask)
		mg.run(c, c.diagonalTask)
		mg.moved += (bytesCoarsen + bytesDiagonal/8) * float64(l.cells)
		mg.setSmoother(c)
	}
	if mg.weighted && mg.sidesFor != a.conductancesSet {
		mg.sidesFor = a.conductancesSet
		for _, l := range mg.levels[:len(mg.levels)-1] {
			mg.run(l, l.sidesTask)
			mg.interpolationScale(l)
		}
	}
	mg.factorCoarsest()
}

// setSmoother sets the Chebyshev coefficients of l from the largest
// Gershgorin bound of D⁻¹A its slabs found.
func (mg *multigrid) setSmoother(l *mgLevel) {
	hi := 1.0
	for _, p := range l.lmax {
		hi = max(hi, p.a)
	}
	lo := hi / smoothRange
	theta, delta := (hi+lo)/2, (hi-lo)/2
	sigma := theta / delta
	rho := 1 / sigma
	l.cd[0], l.cr[0] = 0, float32(1/theta)
	for s := 1; s < smoothDegree; s++ {
		next := 1 / (2*sigma - rho)
		l.cd[s], l.cr[s] = float32(next*rho), float32(2*next/delta)
		rho = next
	}
}

// apply runs one V-cycle from levels[0].b into levels[0].x.
func (mg *multigrid) apply() {
	start, before := time.Now(), mg.moved
	mg.cycle(mg.levels[0])
	mg.cost.Seconds += time.Since(start).Seconds()
	mg.cost.Bytes += mg.moved - before
}

func (mg *multigrid) cycle(l *mgLevel) {
	if l.next == nil {
		mg.solveCoarsest(l)
		return
	}
	mg.runWavefront(l.pre, bytesPre)
	mg.run(l.next, l.restrictTask)
	mg.moved += bytesRestrict * float64(l.cells)
	mg.cost.PassBytes += bytesRestrict * float64(l.cells)
	mg.cycle(l.next)
	mg.runWavefront(l.post, bytesPost)
}

// runStage runs one wavefront stage on the spans of one plane of slab w.
func (l *mgLevel) runStage(w int, st *stage, spans []span) {
	switch st.kind {
	case stageFromZero:
		l.smoothFromZero(spans, st.dst)
	case stageSmooth:
		l.smooth(spans, st.step, st.src, st.dst)
	case stageResidual:
		l.residual(spans, st.src)
	case stageProlong:
		l.prolong(w, spans)
	}
}

// rows are the seven equal-length views of a level's arrays that one span
// of the 7-point stencil reads: the cells and their six neighbours'
// values, the cells' diagonal and conductances and the lower neighbours'
// conductances. Equal lengths let the compiler drop the bounds checks.
type rows struct {
	x, xw, xe, xs, xn, xd, xu      []float32
	inv, gx, gxw, gy, gys, gz, gzd []float32
}

func win(v []float32, at, n int) []float32 { return v[at : at+n : at+n] }

// rows returns the views of span sp with x as the values.
func (l *mgLevel) rows(sp span, x []float32) rows {
	c, n := sp.cp, sp.hi-sp.lo
	return rows{
		x: win(x, c, n), xw: win(x, c-1, n), xe: win(x, c+1, n), xs: win(x, c+sp.ds, n), xn: win(x, c+sp.dn, n),
		xd: win(x, c+sp.dd, n), xu: win(x, c+sp.du, n),
		inv: win(l.inv, sp.at, n), gx: win(l.gx, c, n), gxw: win(l.gx, c-1, n), gy: win(l.gy, c, n),
		gys: win(l.gy, c+sp.ds, n), gz: win(l.gz, c, n), gzd: win(l.gz, c+sp.dd, n),
	}
}

// checkReach panics unless every cell a stencil pass reads or writes for
// each span lies in the level's arrays: the span-list kernels take the
// arrays' first elements and trust the spans, so a layout mistake shows
// here, once, instead of as stray reads. scale, made later, has the
// length of inv.
func (l *mgLevel) checkReach() {
	for _, slab := range l.slabs {
		for i := range slab {
			sp := &slab[i]
			for _, v := range [][]float32{l.x, l.xNext, l.d} {
				stencilReach(sp, v, l.gx, l.gy, l.gz)
			}
			n := sp.hi - sp.lo
			_, _ = l.inv[sp.at:sp.at+n], l.b[sp.at:sp.at+n]
		}
	}
}

// smoothFromZero runs the first Chebyshev step from x = 0 on spans:
// d = cr·D⁻¹b, dst = d.
func (l *mgLevel) smoothFromZero(spans []span, dst []float32) {
	cr := l.cr[0]
	if l.vector {
		if len(spans) > 0 {
			fromZeroSpansAVX(&spans[0], len(spans), &l.b[0], &l.inv[0], &l.d[0], &dst[0], cr)
		}
		return
	}
	for _, sp := range spans {
		n := sp.hi - sp.lo
		b := win(l.b, sp.at, n)
		inv, d, next := win(l.inv, sp.at, n)[:len(b)], win(l.d, sp.cp, n)[:len(b)], win(dst, sp.cp, n)[:len(b)]
		for i := range b {
			v := cr * b[i] * inv[i]
			d[i], next[i] = v, v
		}
	}
}

// smooth runs Chebyshev step `step` on spans: d ← cd·d + cr·D⁻¹(b − A·x),
// dst = x + d, with x = src.
func (l *mgLevel) smooth(spans []span, step int, src, dst []float32) {
	cd, cr := l.cd[step], l.cr[step]
	if l.vector {
		if len(spans) > 0 {
			chebyshevSpansAVX(&spans[0], len(spans), &src[0], &l.gx[0], &l.gy[0], &l.gz[0], &l.inv[0], &l.b[0], &l.d[0], &dst[0], cr, cd)
		}
		return
	}
	for _, sp := range spans {
		n := sp.hi - sp.lo
		b := win(l.b, sp.at, n)
		d, next := win(l.d, sp.cp, n)[:len(b)], win(dst, sp.cp, n)[:len(b)]
		a := l.rows(sp, src)
		// Reslicing to len(b) proves every index in range.
		x, xw, xe, xs, xn, xd, xu := a.x[:n], a.xw[:n], a.xe[:n], a.xs[:n], a.xn[:n], a.xd[:n], a.xu[:n]
		inv, gx, gxw, gy, gys, gz, gzd := a.inv[:n], a.gx[:n], a.gxw[:n], a.gy[:n], a.gys[:n], a.gz[:n], a.gzd[:n]
		for i := range b {
			// D⁻¹(b − A·x) = D⁻¹(b + Σ g·x_nb) − x
			in := b[i] + gx[i]*xe[i] + gxw[i]*xw[i] + gy[i]*xn[i] + gys[i]*xs[i] + gz[i]*xu[i] + gzd[i]*xd[i]
			v := cr*(in*inv[i]-x[i]) + cd*d[i]
			d[i], next[i] = v, x[i]+v
		}
	}
}

// residual sets d = scale·(b − A·x) on spans, with x = src: the residual
// as restriction takes it.
func (l *mgLevel) residual(spans []span, src []float32) {
	if l.vector {
		if len(spans) > 0 {
			residualSpansAVX(&spans[0], len(spans), &src[0], &l.gx[0], &l.gy[0], &l.gz[0], &l.inv[0], &l.b[0], &l.scale[0], &l.d[0])
		}
		return
	}
	for _, sp := range spans {
		n := sp.hi - sp.lo
		b := win(l.b, sp.at, n)
		d, scale := win(l.d, sp.cp, n)[:len(b)], win(l.scale, sp.at, n)[:len(b)]
		a := l.rows(sp, src)
		// Reslicing to len(b) proves every index in range.
		x, xw, xe, xs, xn, xd, xu := a.x[:n], a.xw[:n], a.xe[:n], a.xs[:n], a.xn[:n], a.xd[:n], a.xu[:n]
		inv, gx, gxw, gy, gys, gz, gzd := a.inv[:n], a.gx[:n], a.gxw[:n], a.gy[:n], a.gys[:n], a.gz[:n], a.gzd[:n]
		for i := range b {
			r := b[i] - x[i]/inv[i] + gx[i]*xe[i] + gxw[i]*xw[i] +
				gy[i]*xn[i] + gys[i]*xs[i] + gz[i]*xu[i] + gzd[i]*xd[i]
			d[i] = scale[i] * r
		}
	}
}

// interpolation gives, along one axis, the two coarse cells a fine cell at
// index i interpolates from and their trilinear weights: its parent with
// 3/4 and the parent's neighbour on the child's side with 1/4 when the
// axis is halved and that neighbour exists.
func interpolation(i, factor, coarseN int) (i0, i1 int, w0, w1 float32) {
	return axisWeights(i, factor, coarseN, sideScale/4)
}

// prolong adds scale·P·(coarse x) to x on spans of the fine slab w. For
// each fine span it first blends the up to four coarse rows it draws on
// (weights along y and z, where its plan says) into one row, zero at both
// ends, then interpolates along x: 3/4 of the parent and 1/4 of the
// parent's neighbour on the child's side, which the zero ends drop at the
// box's ends.
func (l *mgLevel) prolong(w int, spans []span) {
	c := l.next
	f := l.factor
	x, scale, cx := l.x, l.scale, c.x
	row := l.coarseRow[w] // row[I+1] is coarse cell I; row[0] and the end stay 0
	// spans is a run of slab w's spans, sliced from it, so its capacity
	// tells where it starts; the plans follow the slab's order.
	plans := l.prolongPlans[w][cap(l.slabs[w])-cap(spans):]
	for i, sp := range spans {
		if l.weighted && l.rowWeighted[sp.y+l.n[1]*sp.z] {
			l.prolongWeighted(&spans[i])
			continue
		}
		pl := &plans[i]
		lo, m := int(pl.lo), int(pl.m)
		blend4(l.vector, &pl.w, &[4][]float32{cx[pl.at[0] : int(pl.at[0])+m], cx[pl.at[1] : int(pl.at[1])+m],
			cx[pl.at[2] : int(pl.at[2])+m], cx[pl.at[3] : int(pl.at[3])+m]}, row[lo+1:lo+1+m])
		first, last := sp.x, sp.x+sp.hi-sp.lo-1
		xs, sc := x[sp.cp:sp.cp+sp.hi-sp.lo], scale[sp.at:sp.at+sp.hi-sp.lo]
		sc = sc[:len(xs)]
		if f[0] == 1 {
			r := row[first+1 : last+2]
			r = r[:len(xs)]
			for i := range xs {
				xs[i] += sc[i] * r[i]
			}
			continue
		}
		// A child at even ii takes its parent's lower neighbour, at odd
		// ii the upper one; go by pairs of children of one parent.
		i := 0
		if first&1 == 1 {
			I := first >> 1
			xs[0] += sc[0] * (0.75*row[I+1] + 0.25*row[I+2])
			i = 1
		}
		if m := (len(xs) - i) &^ 7; l.vector && m > 0 {
			I := (first + i) >> 1
			_, _ = row[I:I+m/2+8], sc[i:i+m]
			prolongAVX(m/2, &row[I], &sc[i], &xs[i])
			i += m
		}
		for ; i+1 < len(xs); i += 2 {
			I := (first + i) >> 1
			t := row[I : I+3 : I+3]
			xs[i] += sc[i] * (0.75*t[1] + 0.25*t[0])
			xs[i+1] += sc[i+1] * (0.75*t[1] + 0.25*t[2])
		}
		if i < len(xs) {
			I := (first + i) >> 1
			xs[i] += sc[i] * (0.75*row[I+1] + 0.25*row[I])
		}
	}
}

// prolongPlan is what prolong needs of the next level for one fine span:
// where the four coarse rows it blends hold coarse cell lo, their weights
// along y and z, and how many coarse cells (m) from lo on it blends.
type prolongPlan struct {
	at    [4]int32
	lo, m int32
	w     [4]float32
}

// planProlong sets prolongPlans from the two levels' layouts. The coarse
// rows keep every cell read: the parents' row holds the parents and one
// cell beyond, the rows around it as much. A weight of 0 comes with its
// row equal to the parents' (the interpolation's single-parent case), so
// every row is a kept one.
func (l *mgLevel) planProlong() {
	c, f := l.next, l.factor
	cl := c.lay
	l.prolongPlans = make([][]prolongPlan, len(l.slabs))
	for w, slab := range l.slabs {
		plans := make([]prolongPlan, len(slab))
		for i, sp := range slab {
			y0, y1, wy0, wy1 := interpolation(sp.y, f[1], c.n[1])
			z0, z1, wz0, wz1 := interpolation(sp.z, f[2], c.n[2])
			first, last := sp.x, sp.x+sp.hi-sp.lo-1
			lo, hi := max(0, first/f[0]-1), min(c.n[0], last/f[0]+2)
			plans[i] = prolongPlan{
				at: [4]int32{int32(cl.neighbour(cl.row(y0, z0), lo)), int32(cl.neighbour(cl.row(y0, z1), lo)),
					int32(cl.neighbour(cl.row(y1, z0), lo)), int32(cl.neighbour(cl.row(y1, z1), lo))},
				lo: int32(lo), m: int32(hi - lo),
				w: [4]float32{wy0 * wz0, wy0 * wz1, wy1 * wz0, wy1 * wz1},
			}
		}
		l.prolongPlans[w] = plans
	}
}

// restriction lists, along one axis, the fine cells whose interpolation
// uses coarse cell I and the weights they use it with: the transpose of
// interpolation.
func restriction(I, factor, fineN int) (idx [4]int, wt [4]float32, n int) {
	if factor == 1 {
		return [4]int{I}, [4]float32{1}, 1
	}
	for _, o := range [4]struct {
		i int
		w float32
	}{{2*I - 1, 0.25}, {2 * I, 0.75}, {2*I + 1, 0.75}, {2*I + 2, 0.25}} {
		if o.i >= 0 && o.i < fineN {
			idx[n], wt[n] = o.i, o.w
			n++
		}
	}
	return idx, wt, n
}

// coarsen sets the next level's conductances and own terms (in its d) on
// coarse slab w from this level's.
func (l *mgLevel) coarsen(w int) {
	c := l.next
	f := l.factor
	own := l.d
	sums := l.coarsenSums[w]
	shift := f[0] >> 1 // 0 or 1
	for _, sp := range c.slabs[w] {
		J, K, n := sp.y, sp.z, sp.hi-sp.lo
		sum, sx, sy, sz := sums[0][:n], sums[1][:n], sums[2][:n], sums[3][:n]
		clear(sum)
		clear(sx)
		clear(sy)
		clear(sz)
		// The children of the span's cells, row by row; the layout keeps
		// every child of a coarse part cell (it keeps the rows around each
		// part cell), and those outside the part hold 0.
		for k := f[2] * K; k < min(f[2]*K+f[2], l.n[2]); k++ {
			for j := f[1] * J; j < min(f[1]*J+f[1], l.n[1]); j++ {
				r := l.lay.row(j, k)
				lastY, lastZ := j == f[1]*J+f[1]-1, k == f[2]*K+f[2]-1
				lo, hi := f[0]*sp.x, min(f[0]*(sp.x+n), l.n[0]) // the children along x
				for _, rn := range l.lay.runs[l.lay.first[r]:l.lay.first[r+1]] {
					from, to := max(lo, int(rn.lo)), min(hi, int(rn.hi))
					if from >= to {
						continue
					}
					// Views indexed by the child's x less from.
					at := int(rn.pos) - int(rn.lo) + from
					o, gx := own[at:at+to-from], l.gx[at:at+to-from]
					// sum and sx take every child and the last child along
					// x of each parent (odd i when x is halved). The factor
					// is 1 or 2: a shift, not a division.
					for k, i := 0, from; i < to; k, i = k+1, i+1 {
						I := i>>shift - sp.x
						sum[I] += float64(o[k])
						if i&(f[0]-1) == f[0]-1 {
							sx[I] += float64(gx[k])
						}
					}
					if lastY {
						gy := l.gy[at : at+to-from]
						for k, i := 0, from; i < to; k, i = k+1, i+1 {
							sy[i>>shift-sp.x] += float64(gy[k])
						}
					}
					if lastZ {
						gz := l.gz[at : at+to-from]
						for k, i := 0, from; i < to; k, i = k+1, i+1 {
							sz[i>>shift-sp.x] += float64(gz[k])
						}
					}
				}
			}
		}
		for I := range n {
			at := sp.cp + I
			c.d[at] = float32(sum[I])
			// A fine conductance across the box's end is 0, so the
			// coarse one there comes out 0 as it must.
			c.gx[at], c.gy[at], c.gz[at] = float32(sx[I]/float64(f[0])), float32(sy[I]/float64(f[1])), float32(sz[I]/float64(f[2]))
		}
	}
}

// diagonal sets inv = 1/(own terms + face conductances) on slab w and finds
// the slab's Gershgorin bound of D⁻¹A, 1 + Σg/diag.
func (l *mgLevel) diagonal(w int) {
	hi := 0.0
	for _, sp := range l.slabs[w] {
		for i, c := sp.at, sp.cp; i < sp.at+sp.hi-sp.lo; i, c = i+1, c+1 {
			g := faceSum(l.gx, l.gy, l.gz, &sp, c)
			inv := 1 / (float64(l.d[c]) + g)
			l.inv[i] = float32(inv)
			hi = max(hi, 1+g*inv)
		}
	}
	l.lmax[w] = partial{a: hi}
}

// factorCoarsest assembles the coarsest operator densely and factors it.
func (mg *multigrid) factorCoarsest() {
	l := mg.levels[len(mg.levels)-1]
	cells := mg.coarseCells
	m := len(cells)
	a := mg.chol
	clear(a)
	pos := func(c int) int { // row of the cell at position c, or -1 outside the part
		for i, v := range cells {
			if v == c {
				return i
			}
		}
		return -1
	}
	i := 0 // coarseCells lists the cells in span order
	for _, slab := range l.slabs {
		for _, sp := range slab {
			for c := sp.cp; c < sp.cp+sp.hi-sp.lo; c, i = c+1, i+1 {
				a[i*m+i] = 1 / float64(l.inv[i])
				for _, nb := range [3]struct {
					off int
					g   []float32
				}{{1, l.gx}, {sp.dn, l.gy}, {sp.du, l.gz}} {
					if g := float64(nb.g[c]); g != 0 {
						if j := pos(c + nb.off); j >= 0 {
							a[max(i, j)*m+min(i, j)] = -g
						}
					}
				}
			}
		}
	}
	for j := range m {
		s := a[j*m+j]
		for k := range j {
			s -= a[j*m+k] * a[j*m+k]
		}
		s = math.Sqrt(s)
		a[j*m+j] = s
		for i := j + 1; i < m; i++ {
			v := a[i*m+j]
			for k := range j {
				v -= a[i*m+k] * a[j*m+k]
			}
			a[i*m+j] = v / s
		}
	}
}

// solveCoarsest sets x = A⁻¹·b on the coarsest level by the Cholesky factor.
func (mg *multigrid) solveCoarsest(l *mgLevel) {
	a, y, cells := mg.chol, mg.work, mg.coarseCells
	m := len(cells)
	for i := range m {
		v := float64(l.b[i]) // b lists the cells in coarseCells' order
		for k := range i {
			v -= a[i*m+k] * y[k]
		}
		y[i] = v / a[i*m+i]
	}
	for i := m - 1; i >= 0; i-- {
		v := y[i]
		for k := i + 1; k < m; k++ {
			v -= a[k*m+i] * y[k]
		}
		y[i] = v / a[i*m+i]
	}
	for i, c := range cells {
		l.x[c] = float32(y[i])
	}
}
