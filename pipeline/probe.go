package pipeline

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"soakfarm/mesh"
)

// probeReader reads one probe from the cell field. The reading is a fixed
// linear combination of cell temperatures and surface temperatures of
// nearby boundary faces, worked out once at set-up:
//   - a probe whose eight surrounding cell centres all lie in the part is
//     interpolated trilinearly (so a probe at the centre of an even cell
//     count reads the mean of the cells around it, not one of them);
//   - nearer the surface, a linear field is fitted by weighted least
//     squares to the part cells around it and to the surface temperatures
//     of their boundary faces, and read at the probe; on a face this gives
//     the surface temperature of the boundary balance, at an edge or corner
//     the value extrapolated to that point.
type probeReader struct {
	name      string
	placement string // interior, surface, edge or corner
	cells     []int32
	cellW     []float64
	faces     []int
	faceW     []float64
}

// read returns the probe temperature in kelvin; surface(face) gives a
// boundary face's surface temperature.
func (r *probeReader) read(T []float64, surface func(face int) float64) float64 {
	v := 0.0
	for i, c := range r.cells {
		v += r.cellW[i] * T[c]
	}
	for i, f := range r.faces {
		v += r.faceW[i] * surface(f)
	}
	return v
}

// faceIndex maps a part cell to its boundary faces.
type faceIndex map[int32][]int

func newFaceIndex(g *mesh.Grid) faceIndex {
	idx := make(faceIndex)
	for f, face := range g.Faces {
		idx[face.Cell] = append(idx[face.Cell], f)
	}
	return idx
}

// faceCentre returns the centre of boundary face f.
func faceCentre(g *mesh.Grid, f mesh.BoundaryFace) [3]float64 {
	i, j, k := g.Coords(int(f.Cell))
	c := g.Centre(i, j, k)
	axis := int(f.Dir) / 2
	if f.Dir%2 == 1 {
		c[axis] += g.CellSize / 2
	} else {
		c[axis] -= g.CellSize / 2
	}
	return c
}

// newProbeReader prepares the reading of a probe at p (m). It fails when p
// lies farther than half a cell outside the part.
func newProbeReader(g *mesh.Grid, faces faceIndex, name string, p [3]float64) (*probeReader, error) {
	h := g.CellSize
	var lo [3]int
	var frac [3]float64
	for a := 0; a < 3; a++ {
		u := (p[a]-g.Origin[a])/h - 0.5
		lo[a] = int(math.Floor(u))
		frac[a] = u - float64(lo[a])
	}
	// Is any part cell within half a cell of p (cell reaches h/2 from its
	// centre, the allowance another h/2)?
	near := false
	var stencil []int32
	all := true
	for c := 0; c < 8; c++ {
		i, j, k := lo[0]+c&1, lo[1]+(c>>1)&1, lo[2]+(c>>2)&1
		if g.Inside(i, j, k) {
			stencil = append(stencil, int32(g.Index(i, j, k)))
			near = true
		} else {
			all = false
		}
	}
	if !near {
		return nil, fmt.Errorf("probe %q at %v m lies more than half a cell (%g m) outside the part", name, p, h/2)
	}
	if all {
		r := &probeReader{name: name, placement: "interior"}
		for c := 0; c < 8; c++ {
			w := 1.0
			for a := 0; a < 3; a++ {
				if (c>>a)&1 == 1 {
					w *= frac[a]
				} else {
					w *= 1 - frac[a]
				}
			}
			i, j, k := lo[0]+c&1, lo[1]+(c>>1)&1, lo[2]+(c>>2)&1
			r.cells = append(r.cells, int32(g.Index(i, j, k)))
			r.cellW = append(r.cellW, w)
		}
		return r, nil
	}
	for _, c := range stencil {
		i, j, k := g.Coords(int(c))
		ctr := g.Centre(i, j, k)
		if math.Max(math.Abs(p[0]-ctr[0]), math.Max(math.Abs(p[1]-ctr[1]), math.Abs(p[2]-ctr[2]))) <= h*(1+1e-9) {
			return fitReader(g, faces, name, p, stencil)
		}
	}
	return nil, fmt.Errorf("probe %q at %v m lies more than half a cell (%g m) outside the part", name, p, h/2)
}

// fitReader builds the least-squares reading near the surface.
func fitReader(g *mesh.Grid, faces faceIndex, name string, p [3]float64, stencil []int32) (*probeReader, error) {
	h := g.CellSize
	type datum struct {
		at   [3]float64
		cell int32
		face int // -1 for a cell datum
	}
	var data []datum
	onPlane := map[int]bool{} // axes whose boundary plane p lies on
	for _, c := range stencil {
		i, j, k := g.Coords(int(c))
		data = append(data, datum{at: g.Centre(i, j, k), cell: c, face: -1})
		for _, f := range faces[c] {
			fc := faceCentre(g, g.Faces[f])
			data = append(data, datum{at: fc, face: f})
			axis := int(g.Faces[f].Dir) / 2
			if math.Abs(p[axis]-fc[axis]) <= 0.25*h && inPatch(p, fc, axis, h) {
				onPlane[axis] = true
			}
		}
	}
	// Weighted least squares for T = a + b·(x − p)/h; the weights favour
	// the data nearest the probe, a small ridge keeps the gradient defined
	// when the data are coplanar.
	n := len(data)
	ata := mat.NewDense(4, 4, nil)
	rows := make([][4]float64, n)
	wts := make([]float64, n)
	for d, dt := range data {
		dist := math.Sqrt(sq(dt.at[0]-p[0])+sq(dt.at[1]-p[1])+sq(dt.at[2]-p[2])) / h
		w := 1 / sq(0.05+dist)
		row := [4]float64{1, (dt.at[0] - p[0]) / h, (dt.at[1] - p[1]) / h, (dt.at[2] - p[2]) / h}
		rows[d], wts[d] = row, w
		for a := 0; a < 4; a++ {
			for b := 0; b < 4; b++ {
				ata.Set(a, b, ata.At(a, b)+w*row[a]*row[b])
			}
		}
	}
	for a := 1; a < 4; a++ {
		ata.Set(a, a, ata.At(a, a)+1e-6)
	}
	var inv mat.Dense
	if err := inv.Inverse(ata); err != nil {
		return nil, fmt.Errorf("probe %q: cannot fit the surface field: %w", name, err)
	}
	r := &probeReader{name: name}
	switch len(onPlane) {
	case 0:
		r.placement = "interior"
	case 1:
		r.placement = "surface"
	case 2:
		r.placement = "edge"
	default:
		r.placement = "corner"
	}
	for d, dt := range data {
		w := 0.0
		for b := 0; b < 4; b++ {
			w += inv.At(0, b) * rows[d][b]
		}
		w *= wts[d]
		if dt.face < 0 {
			r.cells = append(r.cells, dt.cell)
			r.cellW = append(r.cellW, w)
		} else {
			r.faces = append(r.faces, dt.face)
			r.faceW = append(r.faceW, w)
		}
	}
	return r, nil
}

// inPatch reports whether p projects onto the face of centre fc (normal
// along axis) or its half-cell margin.
func inPatch(p, fc [3]float64, axis int, h float64) bool {
	for a := 0; a < 3; a++ {
		if a != axis && math.Abs(p[a]-fc[a]) > h*(1+1e-9) {
			return false
		}
	}
	return true
}

func sq(x float64) float64 { return x * x }
