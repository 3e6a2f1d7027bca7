package solver

import (
	"math"
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
// its transpose. The smoother is a Chebyshev polynomial in D⁻¹A, the same
// before and after the coarse correction, and the coarsest level is solved
// exactly by a dense Cholesky factor: the cycle is a fixed symmetric
// positive definite operator, fit for conjugate gradients.
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
	smoothDegree = 2
	// smoothRange is λmax/λmin of the interval the smoother damps: the
	// upper part of the spectrum of D⁻¹A, which the coarse grid cannot see.
	smoothRange = 8.0
)

// mgLevel is one grid of the hierarchy: a padded box laid out like the
// solver's own arrays, float32 coefficients of the 7-point operator, and the
// part cells as spans in per-worker slabs.
type mgLevel struct {
	n       [3]int
	nx, nxy int
	factor  [3]int // coarsening factor towards the next level, 1 or 2
	slabs   [][]span
	cells   int
	next    *mgLevel // coarser level; nil on the coarsest

	// inv is 1/diagonal: the smoother then needs no division. gx, gy, gz
	// are the finest level's stencil's own arrays (ownsConductances false).
	inv, gx, gy, gz  []float32
	ownsConductances bool
	// b is the right-hand side, x the solution and xNext the other half of
	// its ping-pong pair. d is the Chebyshev direction, then the scaled
	// residual handed to the coarser level; during set-up it holds the
	// cells' own terms (the diagonal without the face conductances).
	b, x, xNext, d []float32
	// scale is 1 / (sum of the interpolation weights of the coarse cells
	// in the part), per cell; nil on the coarsest level.
	scale []float32
	// inv, b and scale hold the part cells only (span.at): no neighbour
	// reads them. The others span the padded box.

	// Chebyshev coefficients for this set-up: step s updates
	// d ← cd[s]·d + cr[s]·D⁻¹(b − A·x).
	cd, cr [smoothDegree]float32
	// operands of the running task
	step     int
	fromZero bool
	lmax     []partial

	smoothTask, residualTask, prolongTask, restrictTask, coarsenTask, diagonalTask func(int)
}

// newLevel makes a level of n cells whose part cells part tells; a level
// built from a stencil (the finest) shares its conductances.
func newLevel(n [3]int, part []bool, threads int, a *stencil, mem *arrays) *mgLevel {
	nxy := n[0] * n[1]
	size := n[0]*n[1]*n[2] + 2*nxy
	l := &mgLevel{
		n: n, nx: n[0], nxy: nxy,
		slabs: partitionMask(n, func(c int) bool { return part[c] }, nxy, threads),
		x:     grow[float32](mem, size), xNext: grow[float32](mem, size), d: grow[float32](mem, size),
	}
	l.cells = partCells(l.slabs)
	l.inv, l.b = grow[float32](mem, l.cells), grow[float32](mem, l.cells)
	if a != nil {
		l.gx, l.gy, l.gz = a.gx, a.gy, a.gz
	} else {
		l.gx, l.gy, l.gz = grow[float32](mem, size), grow[float32](mem, size), grow[float32](mem, size)
		l.ownsConductances = true
	}
	l.lmax = make([]partial, len(l.slabs))
	l.smoothTask = l.smooth
	l.residualTask = l.residual
	l.prolongTask = l.prolong
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
	// cells listed in coarseCells (padded indices)
	coarseCells []int
	chol, work  []float64
	moved       float64 // bytes moved so far, by the traffic model below
}

func newMultigrid(ws *workers, a *stencil, dims [3]int, part []bool, mem *arrays) *multigrid {
	mg := &multigrid{ws: ws}
	threads := ws.count()
	l := newLevel(dims, part, threads, a, mem)
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
		c := newLevel(cn, coarse, threads, nil, mem)
		l.next = c
		l.scale = grow[float32](mem, l.cells)
		mg.interpolationScale(l)
		mg.levels = append(mg.levels, c)
		l, part = c, coarse
	}
	for _, slab := range l.slabs {
		for _, sp := range slab {
			for c := sp.lo; c < sp.hi; c++ {
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
func (mg *multigrid) interpolationScale(l *mgLevel) {
	c := l.next
	for _, slab := range c.slabs {
		for _, sp := range slab {
			for i := sp.lo; i < sp.hi; i++ {
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
			for i, c := sp.at, sp.lo; c < sp.hi; i, c = i+1, c+1 {
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
		boxArrays := 3 // x, xNext, d
		if l.ownsConductances {
			boxArrays += 3
		}
		bytes += 4 * (boxArrays*len(l.x) + len(l.inv) + len(l.b) + len(l.scale))
	}
	return bytes
}

// Bytes per part cell each pass reads and writes (float32 = 4 bytes): the
// model behind the bandwidth figures of `soak bench`.
const (
	bytesSmooth     = 4*4 + 4 + 4 + 2*4 + 4 // stencil, x, b, d read and written, x'
	bytesSmoothZero = 4 + 4 + 4 + 4         // b, inv, d, x'
	bytesResidual   = 4*4 + 4 + 4 + 4 + 4   // stencil, x, b, scale, r
	bytesRestrict   = 4                     // fine r read once (neighbours hit the cache)
	bytesProlong    = 4 + 2*4               // scale, x read and written
	bytesFromFine   = bytesStencil + 2*4    // stencil in, inverse diagonal and own terms out
	bytesCoarsen    = 4 * 4                 // fine own terms and conductances, read once
	bytesDiagonal   = 5 * 4                 // own terms and conductances in, inverse diagonal out
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
func (mg *multigrid) apply() { mg.cycle(mg.levels[0]) }

func (mg *multigrid) cycle(l *mgLevel) {
	if l.next == nil {
		mg.solveCoarsest(l)
		return
	}
	cells := float64(l.cells)
	mg.smooth(l, true)
	mg.run(l, l.residualTask)
	mg.run(l.next, l.restrictTask)
	mg.moved += (bytesResidual + bytesRestrict) * cells
	mg.cycle(l.next)
	mg.run(l, l.prolongTask)
	mg.moved += bytesProlong * cells
	mg.smooth(l, false)
}

// smooth runs the Chebyshev steps on l, from x = 0 when fromZero.
func (mg *multigrid) smooth(l *mgLevel, fromZero bool) {
	for s := range smoothDegree {
		l.step, l.fromZero = s, fromZero && s == 0
		mg.run(l, l.smoothTask)
		l.x, l.xNext = l.xNext, l.x
		if l.fromZero {
			mg.moved += bytesSmoothZero * float64(l.cells)
		} else {
			mg.moved += bytesSmooth * float64(l.cells)
		}
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

func (l *mgLevel) rows(sp span) rows {
	lo, n, nx, nxy := sp.lo, sp.hi-sp.lo, l.nx, l.nxy
	x := l.x
	return rows{
		x: win(x, lo, n), xw: win(x, lo-1, n), xe: win(x, lo+1, n), xs: win(x, lo-nx, n), xn: win(x, lo+nx, n),
		xd: win(x, lo-nxy, n), xu: win(x, lo+nxy, n),
		inv: win(l.inv, sp.at, n), gx: win(l.gx, lo, n), gxw: win(l.gx, lo-1, n), gy: win(l.gy, lo, n),
		gys: win(l.gy, lo-nx, n), gz: win(l.gz, lo, n), gzd: win(l.gz, lo-nxy, n),
	}
}

// smooth runs Chebyshev step l.step on slab w: d ← cd·d + cr·D⁻¹(b − A·x),
// x' = x + d.
func (l *mgLevel) smooth(w int) {
	cd, cr := l.cd[l.step], l.cr[l.step]
	for _, sp := range l.slabs[w] {
		n := sp.hi - sp.lo
		b := win(l.b, sp.at, n)
		d, next := win(l.d, sp.lo, n)[:len(b)], win(l.xNext, sp.lo, n)[:len(b)]
		if l.fromZero {
			inv := win(l.inv, sp.at, n)[:len(b)]
			for i := range b {
				v := cr * b[i] * inv[i]
				d[i], next[i] = v, v
			}
			continue
		}
		a := l.rows(sp)
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

// residual sets d = scale·(b − A·x) on slab w: the residual as restriction
// takes it.
func (l *mgLevel) residual(w int) {
	for _, sp := range l.slabs[w] {
		n := sp.hi - sp.lo
		b := win(l.b, sp.at, n)
		d, scale := win(l.d, sp.lo, n)[:len(b)], win(l.scale, sp.at, n)[:len(b)]
		a := l.rows(sp)
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
// index i interpolates from and their weights: its parent with 3/4 and the
// parent's neighbour on the child's side with 1/4 when the axis is halved
// and that neighbour exists.
func interpolation(i, factor, coarseN int) (i0, i1 int, w0, w1 float32) {
	if factor == 1 {
		return i, i, 1, 0
	}
	i0 = i / 2
	i1 = i0 - 1
	if i%2 == 1 {
		i1 = i0 + 1
	}
	if i1 < 0 || i1 >= coarseN {
		return i0, i0, 0.75, 0
	}
	return i0, i1, 0.75, 0.25
}

// prolong adds scale·P·(coarse x) to x on the fine slab w.
func (l *mgLevel) prolong(w int) {
	c := l.next
	f := l.factor
	x, scale, cx := l.x, l.scale, c.x
	for _, sp := range l.slabs[w] {
		y0, y1, wy0, wy1 := interpolation(sp.y, f[1], c.n[1])
		z0, z1, wz0, wz1 := interpolation(sp.z, f[2], c.n[2])
		base := c.nxy // padding
		r00, r01 := base+c.nx*(y0+c.n[1]*z0), base+c.nx*(y0+c.n[1]*z1)
		r10, r11 := base+c.nx*(y1+c.n[1]*z0), base+c.nx*(y1+c.n[1]*z1)
		w00, w01, w10, w11 := wy0*wz0, wy0*wz1, wy1*wz0, wy1*wz1
		for i, at := sp.lo, sp.at; i < sp.hi; i, at = i+1, at+1 {
			x0, x1, wx0, wx1 := interpolation(i-sp.rowStart, f[0], c.n[0])
			v := w00*(wx0*cx[r00+x0]+wx1*cx[r00+x1]) + w01*(wx0*cx[r01+x0]+wx1*cx[r01+x1]) +
				w10*(wx0*cx[r10+x0]+wx1*cx[r10+x1]) + w11*(wx0*cx[r11+x0]+wx1*cx[r11+x1])
			x[i] += scale[at] * v
		}
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

// restrict sets the coarse right-hand side b = Pᵀ·(scaled fine residual)
// on coarse slab w.
func (l *mgLevel) restrict(w int) {
	c := l.next
	f := l.factor
	d := l.d
	for _, sp := range c.slabs[w] {
		// The up to 16 fine rows that feed this coarse row, with their
		// weights along y and z.
		ys, wys, ny := restriction(sp.y, f[1], l.n[1])
		zs, wzs, nz := restriction(sp.z, f[2], l.n[2])
		var rowAt [16]int
		var rowWeight [16]float32
		m := 0
		for a := range nz {
			for b := range ny {
				rowAt[m], rowWeight[m] = l.nxy+l.nx*(ys[b]+l.n[1]*zs[a]), wzs[a]*wys[b]
				m++
			}
		}
		for I := sp.lo; I < sp.hi; I++ {
			ci := I - sp.rowStart
			var sum float32
			if x0 := 2*ci - 1; f[0] == 2 && x0 >= 0 && x0+3 < l.n[0] {
				// away from the box's ends: all four taps
				for r := range m {
					t := d[rowAt[r]+x0 : rowAt[r]+x0+4 : rowAt[r]+x0+4]
					sum += rowWeight[r] * (0.25*(t[0]+t[3]) + 0.75*(t[1]+t[2]))
				}
			} else {
				xs, wxs, nxs := restriction(ci, f[0], l.n[0])
				for r := range m {
					var s float32
					for e := range nxs {
						s += wxs[e] * d[rowAt[r]+xs[e]]
					}
					sum += rowWeight[r] * s
				}
			}
			c.b[sp.at+I-sp.lo] = sum
		}
	}
}

// coarsen sets the next level's conductances and own terms (in its d) on
// coarse slab w from this level's.
func (l *mgLevel) coarsen(w int) {
	c := l.next
	f := l.factor
	own := l.d
	for _, sp := range c.slabs[w] {
		J, K := sp.y, sp.z
		for I := sp.lo; I < sp.hi; I++ {
			ci := I - sp.rowStart
			var sum, sx, sy, sz float64
			for k := f[2] * K; k < min(f[2]*K+f[2], l.n[2]); k++ {
				for j := f[1] * J; j < min(f[1]*J+f[1], l.n[1]); j++ {
					row := l.nxy + l.nx*(j+l.n[1]*k)
					for i := f[0] * ci; i < min(f[0]*ci+f[0], l.n[0]); i++ {
						sum += float64(own[row+i])
						if i == f[0]*ci+f[0]-1 {
							sx += float64(l.gx[row+i])
						}
						if j == f[1]*J+f[1]-1 {
							sy += float64(l.gy[row+i])
						}
						if k == f[2]*K+f[2]-1 {
							sz += float64(l.gz[row+i])
						}
					}
				}
			}
			c.d[I] = float32(sum)
			// A fine conductance across the box's end is 0, so the
			// coarse one there comes out 0 as it must.
			c.gx[I], c.gy[I], c.gz[I] = float32(sx/float64(f[0])), float32(sy/float64(f[1])), float32(sz/float64(f[2]))
		}
	}
}

// diagonal sets inv = 1/(own terms + face conductances) on slab w and finds
// the slab's Gershgorin bound of D⁻¹A, 1 + Σg/diag.
func (l *mgLevel) diagonal(w int) {
	nx, nxy := l.nx, l.nxy
	hi := 0.0
	for _, sp := range l.slabs[w] {
		for i, c := sp.at, sp.lo; c < sp.hi; i, c = i+1, c+1 {
			g := float64(l.gx[c]) + float64(l.gx[c-1]) + float64(l.gy[c]) + float64(l.gy[c-nx]) +
				float64(l.gz[c]) + float64(l.gz[c-nxy])
			diag := float64(l.d[c]) + g
			l.inv[i] = float32(1 / diag)
			hi = max(hi, 1+g/diag)
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
	pos := func(c int) int { // row of padded cell c, or -1 outside the part
		for i, v := range cells {
			if v == c {
				return i
			}
		}
		return -1
	}
	for i, c := range cells {
		a[i*m+i] = 1 / float64(l.inv[i]) // coarseCells lists the cells in span order
		for _, nb := range [3]struct {
			off int
			g   []float32
		}{{1, l.gx}, {l.nx, l.gy}, {l.nxy, l.gz}} {
			if g := float64(nb.g[c]); g != 0 {
				if j := pos(c + nb.off); j >= 0 {
					a[max(i, j)*m+min(i, j)] = -g
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
