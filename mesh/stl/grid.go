package stl

import (
	"cmp"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
)

// ContainsGrid fills out with Contains for the centres of a box of cells:
// cell (i, j, k) has centre origin + cell·(i+½, j+½, k+½) and index
// i + n[0]·(j + n[1]·k), as in the voxeliser's grid. len(out) must be
// n[0]·n[1]·n[2] and cell positive; anything else is a programming error
// and panics.
//
// Each column of cells along x is decided by one ray: the signed count of
// surface crossings before a cell centre is its winding number. Crossings
// are found with a watertight point-in-triangle rule (ties broken by a
// fixed symbolic shift of the ray), so a ray through an edge or corner is
// counted once. A column whose crossings do not balance, as behind a hole,
// falls back to the generalized winding number cell by cell. Rows of
// columns run on all CPUs.
func (b *Body) ContainsGrid(origin [3]float64, cell float64, n [3]int, out []bool) {
	finite := !math.IsInf(origin[0]+origin[1]+origin[2]+cell, 0) && !math.IsNaN(origin[0]+origin[1]+origin[2]+cell)
	if n[0] < 0 || n[1] < 0 || n[2] < 0 || !(cell > 0) || !finite || len(out) != n[0]*n[1]*n[2] {
		panic(fmt.Sprintf("stl: ContainsGrid: need finite origin, cell > 0 and len(out) = n[0]·n[1]·n[2]; got origin %v, cell %v, n %v, len(out) %d",
			origin, cell, n, len(out)))
	}
	clear(out)
	if len(out) == 0 {
		return
	}
	rows := b.binRows(origin[2], cell, n[2])
	workers := min(runtime.GOMAXPROCS(0), n[2])
	var next atomic.Int64
	var wg sync.WaitGroup
	for range workers {
		wg.Go(func() {
			var cs []crossing
			for {
				k := int(next.Add(1) - 1)
				if k >= n[2] {
					return
				}
				cs = b.fillRow(origin, cell, n, k, rows[k], cs[:0], out)
			}
		})
	}
	wg.Wait()
}

// binRows lists, per row k of cell centres in z, the triangles whose z
// range contains that row's z.
func (b *Body) binRows(oz, cell float64, nz int) [][]int32 {
	span := func(t *triangle) (int, int) {
		zlo := min(t.v[0][2], t.v[1][2], t.v[2][2])
		zhi := max(t.v[0][2], t.v[1][2], t.v[2][2])
		return clampIndex(math.Ceil((zlo-oz)/cell-0.5), nz), clampIndex(math.Floor((zhi-oz)/cell-0.5), nz)
	}
	counts := make([]int32, nz)
	for i := range b.tris {
		klo, khi := span(&b.tris[i])
		for k := max(klo, 0); k <= min(khi, nz-1); k++ {
			counts[k]++
		}
	}
	rows := make([][]int32, nz)
	for k, c := range counts {
		rows[k] = make([]int32, 0, c)
	}
	for i := range b.tris {
		klo, khi := span(&b.tris[i])
		for k := max(klo, 0); k <= min(khi, nz-1); k++ {
			rows[k] = append(rows[k], int32(i))
		}
	}
	return rows
}

// clampIndex converts a cell position to an index without overflowing
// the conversion (NaN and huge values included): positions below the
// grid become −1 and above it n, so ranges beside the grid come out empty
// once cut to [0, n−1].
func clampIndex(v float64, n int) int {
	switch {
	case v >= 0 && v <= float64(n-1):
		return int(v)
	case v > float64(n-1):
		return n
	}
	return -1
}

// crossing is where a ray along +x meets the surface in column j; step is
// +1 entering the solid and −1 leaving it.
type crossing struct {
	j    int32
	step int8
	x    float64
}

// fillRow decides the n[0]·n[1] cells of row k.
func (b *Body) fillRow(origin [3]float64, cell float64, n [3]int, k int, tris []int32, cs []crossing, out []bool) []crossing {
	z := origin[2] + cell*(float64(k)+0.5)
	for _, ti := range tris {
		t := &b.tris[ti]
		// The columns this triangle can meet: its y range on the plane z.
		ylo, yhi := math.Inf(1), math.Inf(-1)
		for e := range 3 {
			p, q := t.v[e], t.v[(e+1)%3]
			switch {
			case (p[2]-z)*(q[2]-z) > 0:
			case p[2] == q[2]: // edge in the plane
				ylo, yhi = min(ylo, p[1], q[1]), max(yhi, p[1], q[1])
			default:
				y := p[1] + (q[1]-p[1])*(z-p[2])/(q[2]-p[2])
				ylo, yhi = min(ylo, y), max(yhi, y)
			}
		}
		if ylo > yhi {
			continue
		}
		// One column of margin on each side: the exact test below decides.
		jlo := clampIndex(math.Ceil((ylo-origin[1])/cell-0.5)-1, n[1])
		jhi := clampIndex(math.Floor((yhi-origin[1])/cell-0.5)+1, n[1])
		for j := max(jlo, 0); j <= min(jhi, n[1]-1); j++ {
			y := origin[1] + cell*(float64(j)+0.5)
			if x, step, ok := rayCrossing(t.v, y, z); ok {
				cs = append(cs, crossing{int32(j), step, x})
			}
		}
	}
	slices.SortFunc(cs, func(a, c crossing) int { return cmp.Or(cmp.Compare(a.j, c.j), cmp.Compare(a.x, c.x)) })
	for j := range n[1] {
		var col []crossing
		for len(cs) > 0 && cs[0].j < int32(j) {
			cs = cs[1:]
		}
		end := 0
		for end < len(cs) && cs[end].j == int32(j) {
			end++
		}
		col, cs = cs[:end], cs[end:]
		if len(col) == 0 {
			continue
		}
		base := n[0] * (j + n[1]*k)
		if !b.fillColumn(col, origin[0], cell, out[base:base+n[0]]) {
			y := origin[1] + cell*(float64(j)+0.5)
			for i := range n[0] {
				out[base+i] = b.Contains(vec{origin[0] + cell*(float64(i)+0.5), y, z})
			}
		}
	}
	return cs[:0]
}

// fillColumn sweeps one column's sorted crossings; it reports false when
// they do not balance (a hole or a defect on the ray), leaving the column
// to the winding number.
func (b *Body) fillColumn(col []crossing, ox, cell float64, out []bool) bool {
	w, total := 0, 0
	for _, c := range col {
		total += int(c.step)
		if total < 0 {
			return false
		}
	}
	if total != 0 {
		return false
	}
	next := 0
	for i := range out {
		x := ox + cell*(float64(i)+0.5)
		for next < len(col) && col[next].x < x {
			w += int(col[next].step)
			next++
		}
		out[i] = w > 0
	}
	return true
}

// rayCrossing intersects the ray {(x, y, z): x real} with triangle t. Edge
// functions are evaluated with each edge's corners in a fixed order, and a
// zero counts as positive in that order: this is the same as shifting the
// ray by an infinitesimal (−ε², ε) in (y, z), so a ray through a shared
// edge or corner meets exactly one of the triangles there.
func rayCrossing(t [3]vec, y, z float64) (x float64, step int8, ok bool) {
	var e [3]float64
	for i := range 3 {
		e[i] = edgeSide(t[(i+1)%3], t[(i+2)%3], y, z) // opposite corner i
	}
	var s [3]int
	for i := range 3 {
		s[i] = sign(e[i])
	}
	if s[0] != s[1] || s[1] != s[2] {
		return 0, 0, false
	}
	sum := e[0] + e[1] + e[2]
	if sum == 0 {
		return 0, 0, false
	}
	x = (e[0]*t[0][0] + e[1]*t[1][0] + e[2]*t[2][0]) / sum
	x = min(max(x, min(t[0][0], t[1][0], t[2][0])), max(t[0][0], t[1][0], t[2][0]))
	// Counter-clockwise in (y, z) means the normal has +x: the ray leaves.
	if s[0] > 0 {
		return x, -1, true
	}
	return x, 1, true
}

// edgeSide is the (y, z) cross product (q−p)×(r−p) for the ray point r,
// computed with p, q in a fixed order so both triangles of an edge get the
// same number, with zero treated as positive in that order.
func edgeSide(p, q vec, y, z float64) float64 {
	flip := p[1] > q[1] || (p[1] == q[1] && (p[2] > q[2] || (p[2] == q[2] && p[0] > q[0])))
	if flip {
		p, q = q, p
	}
	v := (q[1]-p[1])*(z-p[2]) - (q[2]-p[2])*(y-p[1])
	if v == 0 {
		v = math.SmallestNonzeroFloat64
	}
	if flip {
		return -v
	}
	return v
}

func sign(v float64) int {
	if v > 0 {
		return 1
	}
	return -1
}
