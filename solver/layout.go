package solver

import "slices"

// layout places the cells of a box in the arrays whose passes read
// neighbours (values, directions, face conductances) so that they hold
// the part and a thin shell around it rather than the whole box: a part
// that fills a third of its box costs about a third, holes and bores
// included.
//
// Each grid row (fixed y and z) keeps runs of cells: its own runs of part
// cells widened by one cell at each end, and the runs of part cells of
// the four rows beside it (y ± 1, z ± 1), overlapping runs merged. A
// stencil at a part cell then finds every neighbour kept, at the same
// offset from it all along a span (east and west at ±1, the others at the
// span's deltas). A coarse multigrid level keeps more (wide): the runs of
// the eight rows around, diagonals included, each widened by one cell, so
// that the interpolation finds the coarse cells it blends. Rows outside
// the box, and rows with nothing to keep, share one row of zeros at the
// start, which no pass writes.
type layout struct {
	n [3]int
	// The runs of row r (index (y+1) + (ny+2)·(z+1), the box widened by
	// one row on each side) are runs[first[r]:first[r+1]].
	first []int32
	runs  []run1d
	size  int // positions in all
}

// run1d is a run of cells x in [lo, hi) of one row, kept from position pos on.
type run1d struct{ lo, hi, pos int32 }

// row returns the index of row (y, z) in first.
func (l *layout) row(y, z int) int { return (y + 1) + (l.n[1]+2)*(z+1) }

// inRow returns the position of cell x of row r and whether it is kept.
func (l *layout) inRow(r, x int) (int, bool) {
	for _, rn := range l.runs[l.first[r]:l.first[r+1]] {
		if x >= int(rn.lo) && x < int(rn.hi) {
			return int(rn.pos) + x - int(rn.lo), true
		}
	}
	return 0, false
}

// neighbour returns the position of cell x of row r, which the layout
// keeps for the part cell beside it, or of the zero row when r keeps
// nothing.
func (l *layout) neighbour(r, x int) int {
	if p, ok := l.inRow(r, x); ok {
		return p
	}
	return 1 + x // the zero row keeps x = −1 … nx at positions 0 … nx+1
}

// newLayout builds the layout of a box of n cells whose part cells inPart
// tells (by index x + n[0]·(y + n[1]·z)); wide for a coarse level. It also
// returns the runs of part cells of each row, indexed like the layout's
// rows.
func newLayout(n [3]int, inPart func(c int) bool, wide bool) (*layout, [][]run1d) {
	nx, ny, nz := n[0], n[1], n[2]
	l := &layout{n: n}
	rows := (ny + 2) * (nz + 2)
	// The part's runs in each row.
	partRuns := make([][]run1d, rows)
	for z := range nz {
		for y := range ny {
			r, c := l.row(y, z), nx*(y+ny*z)
			for x := 0; x < nx; {
				if !inPart(c + x) {
					x++
					continue
				}
				lo := x
				for x < nx && inPart(c+x) {
					x++
				}
				partRuns[r] = append(partRuns[r], run1d{lo: int32(lo), hi: int32(x)})
			}
		}
	}
	l.first = make([]int32, rows+1)
	pos := int32(nx + 2) // after the zero row
	var near []run1d
	for z := -1; z <= nz; z++ {
		for y := -1; y <= ny; y++ {
			r := l.row(y, z)
			l.first[r] = int32(len(l.runs))
			if y < 0 || y >= ny || z < 0 || z >= nz {
				l.first[r+1] = int32(len(l.runs))
				continue
			}
			near = near[:0]
			for dz := -1; dz <= 1; dz++ {
				for dy := -1; dy <= 1; dy++ {
					own, beside := dy == 0 && dz == 0, dy == 0 || dz == 0
					if !own && !beside && !wide {
						continue
					}
					widen := int32(0)
					if own || wide {
						widen = 1
					}
					for _, pr := range partRuns[l.row(y+dy, z+dz)] {
						near = append(near, run1d{lo: pr.lo - widen, hi: pr.hi + widen})
					}
				}
			}
			slices.SortFunc(near, func(a, b run1d) int { return int(a.lo - b.lo) })
			for i, nr := range near {
				if i > 0 {
					if last := &l.runs[len(l.runs)-1]; nr.lo <= last.hi {
						last.hi = max(last.hi, nr.hi)
						continue
					}
				}
				l.runs = append(l.runs, nr)
			}
			for i := l.first[r]; i < int32(len(l.runs)); i++ {
				l.runs[i].pos = pos
				pos += l.runs[i].hi - l.runs[i].lo
			}
			l.first[r+1] = int32(len(l.runs))
		}
	}
	l.size = int(pos)
	return l, partRuns
}
