package solver

// Transfers that follow the conductances. Where the part holds materials
// of very different conductivity (or contact resistances), trilinear
// interpolation carries a coarse correction across an interface as if the
// material were uniform, and the cycle loses much of its power: on a part
// with a 1000-fold jump multigrid needed several times the iterations of a
// uniform one, more the finer the grid. With weighted transfers each fine
// cell weighs, along each axis, its parent and the coarse cell beside it by
// the thermal resistance of the way to them (sideWeight); restriction is
// the exact transpose. In a uniform material the weights are the
// trilinear ones, and grid rows whose cells all keep them take the
// trilinear passes' vector kernels: only rows near an interface pay for
// the per-cell weights.

// sideWeight is the weight a fine cell gives, along one axis, to the coarse
// cell beside its parent, from the conductances of its two faces on that
// axis: gSib towards its sibling (same parent), gCross towards the other
// coarse cell. From the parent's centre (on the face between the
// siblings) to the fine cell's centre is half the cell, 1/(2·gSib) when the
// siblings share a material; from the parent's centre to the other coarse
// cell's centre it is twice the resistance across the two half cells on
// either side of the crossing face, 2/gCross. The weight is their ratio:
// 1/4 in a uniform material, towards 1/2 where the other side conducts far
// better, towards 0 where it conducts far worse. A cell whose sibling lies
// outside the part takes the uniform 1/4; one with no conducting face
// towards the other coarse cell takes 0.
func sideWeight(gSib, gCross float32) float32 {
	switch {
	case gCross <= 0:
		return 0
	case gSib <= 0:
		return 0.25
	}
	return min(0.5, gCross/(4*gSib))
}

// Side weights are stored per part cell and axis in a byte, as q/sideScale
// (1/4 exactly at 128): prolongation and restriction read the same bytes,
// so the cycle stays symmetric, and a part costs 3 bytes per cell more.
// Weights within 1/sideSnap of the trilinear 1/4 are taken as 1/4.
const (
	sideScale = 512
	sideSnap  = 64
)

// sideByte is the stored side weight of a cell with face conductances
// gSib and gCross along an axis. Nearly equal faces (the bulk of a
// material) give 1/4 without a division: gCross/(4·gSib) is within
// 1/sideSnap of 1/4 when the faces differ by less than 4·gSib/sideSnap.
func sideByte(gSib, gCross float32) uint8 {
	if d, tol := gCross-gSib, 4*gSib/sideSnap; gSib > 0 && d < tol && d > -tol {
		return sideScale / 4
	}
	s := sideWeight(gSib, gCross)
	if s > 0.25-1.0/sideSnap && s < 0.25+1.0/sideSnap {
		return sideScale / 4
	}
	return uint8(min(255, int(s*sideScale+0.5)))
}

// axisWeights returns, along an axis of n coarse cells halved by factor (1
// or 2), fine index i's parent and the coarse cell beside it with their
// weights, the side weight being q/sideScale: the trilinear 3/4 and 1/4 at
// q = 128. Without a coarse cell beside (an end of the box) the parent
// keeps 3/4, as in trilinear interpolation; the interpolation's scale
// makes the weights add up to 1.
func axisWeights(i, factor, n int, q uint8) (parent, side int, wp, ws float32) {
	if factor == 1 {
		return i, i, 1, 0
	}
	parent, side = i>>1, i>>1-1
	if i&1 == 1 {
		side = parent + 1
	}
	if side < 0 || side >= n {
		return parent, parent, 0.75, 0
	}
	s := float32(q) / sideScale
	return parent, side, 1 - s, s
}

// sideAlong is the stored side weight of fine index i along an axis of n
// coarse cells halved by factor, from the conductances of its faces
// towards i+1 (up) and i−1 (down): the sibling is up from an even index,
// down from an odd one. Without a coarse cell beside, the weight is never
// read; it is stored as the trilinear one.
func sideAlong(i, factor, n int, up, down float32) uint8 {
	switch {
	case factor == 1:
	case i&1 == 0 && i > 0:
		return sideByte(up, down)
	case i&1 == 1 && i/2+1 < n:
		return sideByte(down, up)
	}
	return sideScale / 4
}

// setSides finds the side weights of the part cells of slab w and which of
// its grid rows hold a weight other than the trilinear one.
func (l *mgLevel) setSides(w int) {
	f, cn := l.factor, l.next.n
	for i := range l.slabs[w] {
		sp := &l.slabs[w][i]
		row := sp.y + l.n[1]*sp.z
		l.rowWeighted[row] = false // each row's spans lie in one slab
	}
	for i := range l.slabs[w] {
		sp := &l.slabs[w][i]
		row := sp.y + l.n[1]*sp.z
		for k := range sp.hi - sp.lo {
			c, at, x := sp.cp+k, sp.at+k, sp.x+k
			qx := sideAlong(x, f[0], cn[0], l.gx[c], l.gx[c-1])
			qy := sideAlong(sp.y, f[1], cn[1], l.gy[c], l.gy[c+sp.ds])
			qz := sideAlong(sp.z, f[2], cn[2], l.gz[c], l.gz[c+sp.dd])
			l.side[0][at], l.side[1][at], l.side[2][at] = qx, qy, qz
			if qx != sideScale/4 || qy != sideScale/4 || qz != sideScale/4 {
				l.rowWeighted[row] = true
			}
		}
	}
}

// prolongWeighted is prolong on one span of a row that holds side weights
// other than the trilinear ones.
func (l *mgLevel) prolongWeighted(sp *span) {
	c := l.next
	f := l.factor
	cl, cx := c.lay, c.x
	// The coarse rows, as in prolong: each keeps the cells read here.
	// Without a row beside (an end of the box) the parents' row stands in;
	// its side weight is 0.
	y0, y1, _, _ := interpolation(sp.y, f[1], c.n[1])
	z0, z1, _, _ := interpolation(sp.z, f[2], c.n[2])
	lo := max(0, sp.x/f[0]-1)
	var base [2][2]int // coarse cell X of row (a, b) is at base + X
	for a, y := range [2]int{y0, y1} {
		for b, z := range [2]int{z0, z1} {
			base[a][b] = cl.neighbour(cl.row(y, z), lo) - lo
		}
	}
	for k := range sp.hi - sp.lo {
		cell, at := sp.cp+k, sp.at+k
		px, qx, wx0, wx1 := axisWeights(sp.x+k, f[0], c.n[0], l.side[0][at])
		_, _, wy0, wy1 := axisWeights(sp.y, f[1], c.n[1], l.side[1][at])
		_, _, wz0, wz1 := axisWeights(sp.z, f[2], c.n[2], l.side[2][at])
		wy, wz := [2]float32{wy0, wy1}, [2]float32{wz0, wz1}
		var v float32
		for a := range 2 {
			for b := range 2 {
				if w := wy[a] * wz[b]; w != 0 {
					row := base[a][b]
					v += w * (wx0*cx[row+px] + wx1*cx[row+qx])
				}
			}
		}
		l.x[cell] += l.scale[at] * v
	}
}

// weightTowards returns the weight fine index i gives to coarse index I
// along an axis: its parent's or its side's, else 0.
func weightTowards(I, i, factor, n int, q uint8) float32 {
	parent, side, wp, ws := axisWeights(i, factor, n, q)
	switch {
	case I == parent:
		return wp
	case I == side:
		return ws
	}
	return 0
}

// restrictWeighted is restrict on coarse span sp when a fine row it draws
// on holds side weights other than the trilinear ones: each coarse cell
// gathers the scaled fine residual of the cells whose interpolation uses
// it, with the weights they use it with.
func (l *mgLevel) restrictWeighted(sp *span) {
	c := l.next
	f := l.factor
	n := sp.hi - sp.lo
	out := c.b[sp.at : sp.at+n]
	clear(out)
	ys, _, ny := restriction(sp.y, f[1], l.n[1])
	zs, _, nz := restriction(sp.z, f[2], l.n[2])
	// The fine cells along x that reach coarse cells sp.x … sp.x+n−1.
	xlo, xhi := max(0, f[0]*sp.x-1), min(l.n[0], f[0]*(sp.x+n-1)+f[0]+1)
	for _, z := range zs[:nz] {
		for _, y := range ys[:ny] {
			spans := l.rowSpans[y+l.n[1]*z]
			for i := range spans {
				fs := &spans[i]
				from, to := max(xlo, fs.x), min(xhi, fs.x+fs.hi-fs.lo)
				for x := from; x < to; x++ {
					cell, at := fs.cp+x-fs.x, fs.at+x-fs.x
					v := l.d[cell]
					if v == 0 {
						continue
					}
					v *= weightTowards(sp.y, y, f[1], c.n[1], l.side[1][at]) * weightTowards(sp.z, z, f[2], c.n[2], l.side[2][at])
					if v == 0 {
						continue
					}
					px, qx, wx0, wx1 := axisWeights(x, f[0], c.n[0], l.side[0][at])
					if I := px - sp.x; I >= 0 && I < n {
						out[I] += wx0 * v
					}
					if I := qx - sp.x; wx1 != 0 && I >= 0 && I < n {
						out[I] += wx1 * v
					}
				}
			}
		}
	}
}

// drawsOnWeighted tells whether coarse span sp's restriction reads a fine
// row that holds side weights other than the trilinear ones.
func (l *mgLevel) drawsOnWeighted(sp *span) bool {
	ys, _, ny := restriction(sp.y, l.factor[1], l.n[1])
	zs, _, nz := restriction(sp.z, l.factor[2], l.n[2])
	for _, z := range zs[:nz] {
		for _, y := range ys[:ny] {
			if l.rowWeighted[y+l.n[1]*z] {
				return true
			}
		}
	}
	return false
}

// indexRows sets rowSpans: the part spans of each grid row (y + ny·z),
// views of the level's slabs, for restrictWeighted.
func (l *mgLevel) indexRows() {
	l.rowSpans = make([][]span, l.n[1]*l.n[2])
	for _, slab := range l.slabs {
		for i := 0; i < len(slab); {
			j := i
			for j < len(slab) && slab[j].y == slab[i].y && slab[j].z == slab[i].z {
				j++
			}
			l.rowSpans[slab[i].y+l.n[1]*slab[i].z] = slab[i:j:j]
			i = j
		}
	}
}
