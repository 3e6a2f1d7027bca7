package solver

// restrict sets the coarse right-hand side b = Pᵀ·(scaled fine
// residual) on coarse slab w, going once through the fine planes that
// feed the slab's coarse planes. Each fine row is gathered along x into
// coarse cells (weights 1/4, 3/4, 3/4, 1/4), then added, with its weights
// along y and z, into the up to four coarse rows it feeds; dense coarse
// planes hold the sums until the last fine plane feeding them is done, and
// the coarse spans then take their cells from them. The fine residual is
// 0 outside the part, so only the part's spans are read.
func (l *mgLevel) restrict(w int) {
	c := l.next
	f := l.factor
	spans := c.slabs[w]
	if len(spans) == 0 {
		return
	}
	// The fine planes feeding coarse plane K, from interpolation's reach:
	// 2K−1 … 2K+2 when z is halved, K alone otherwise.
	firstFeeding := func(K int) int { return max(0, f[2]*K-f[2]/2) }
	lastFeeding := func(K int) int { return min(l.n[2]-1, f[2]*K+2*(f[2]-1)) }
	first, last := spans[0].z, spans[len(spans)-1].z
	ncx := c.n[0]
	planeSize := ncx * c.n[1]
	row, sink, acc := l.fineRow[w], l.sink[w], l.sums[w] // row[i+1] is fine cell i
	// spans[:flushed] have their b; next is the first coarse plane whose
	// sums are not yet taken.
	flushed, next := 0, first
	for k := firstFeeding(first); k <= lastFeeding(last); k++ {
		var zs [2]int
		var zw [2]float32
		zs[0], zs[1], zw[0], zw[1] = interpolation(k, f[2], c.n[2])
		plane := l.zSpans[k]
		for i := 0; i < len(plane); {
			j, y := i, plane[i].y
			for j < len(plane) && plane[j].y == y {
				sp := &plane[j]
				copy(row[sp.x+1:sp.x+1+sp.hi-sp.lo], l.d[sp.cp:sp.cp+sp.hi-sp.lo])
				j++
			}
			xmin, xmax := plane[i].x, plane[j-1].x+plane[j-1].hi-plane[j-1].lo
			// The four coarse rows the fine row feeds, with their weights;
			// a row it does not feed (a weight of 0, or a plane of another
			// slab) is the sink, which nothing reads.
			y0, y1, wy0, wy1 := interpolation(y, f[1], c.n[1])
			var weights [4]float32
			var rows [4]int
			for a := range 2 {
				for b, yb := range [2]struct {
					J int
					w float32
				}{{y0, wy0}, {y1, wy1}} {
					q, K := 2*a+b, zs[a]
					rows[q] = -1
					if wt := zw[a] * yb.w; wt != 0 && K >= first && K <= last {
						weights[q], rows[q] = wt, (K%3)*planeSize+yb.J*ncx
					}
				}
			}
			if f[0] == 2 {
				lo := max(0, (xmin-1)>>1)
				n := min(ncx, xmax>>1+1) - lo
				var dst [4][]float32
				for q, r := range rows {
					dst[q] = sink
					if r >= 0 {
						dst[q] = acc[r+lo : r+lo+n]
					}
				}
				gatherAdd(l.vector, row[2*lo:], &weights, &dst, n)
			} else {
				for q, r := range rows {
					if r >= 0 {
						axpy(l.vector, weights[q], row[xmin+1:xmax+1], acc[r+xmin:r+xmax])
					}
				}
			}
			clear(row[xmin+1 : xmax+1])
			i = j
		}
		// The coarse planes whose last feeding fine plane this was (every
		// one, a plane without part cells too, has its sums cleared).
		for ; next <= last && lastFeeding(next) <= k; next++ {
			sums := acc[(next%3)*planeSize : (next%3+1)*planeSize]
			for ; flushed < len(spans) && spans[flushed].z == next; flushed++ {
				sp := &spans[flushed]
				n := sp.hi - sp.lo
				copy(c.b[sp.at:sp.at+n], sums[sp.y*ncx+sp.x:sp.y*ncx+sp.x+n])
			}
			clear(sums)
		}
	}
	if l.weighted {
		for i := range spans {
			if l.drawsOnWeighted(&spans[i]) {
				l.restrictWeighted(&spans[i])
			}
		}
	}
}
