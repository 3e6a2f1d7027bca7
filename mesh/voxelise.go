package mesh

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
	"unsafe"
)

// MinCellsAcross is the fewest cells along the part's smallest extent that
// Voxelise accepts; fewer cannot carry a temperature profile through the part.
const MinCellsAcross = 4

// maxGroups is the most selectors a grid can hold: BoundaryFace.Group is a
// uint16 and one group is kept for the insulated faces.
const maxGroups = math.MaxUint16

// CellSizeFor returns the cell edge that puts cellsAcross cells along the
// smallest extent of s's bounding box. Voxelise rejects the result when
// cellsAcross is below MinCellsAcross.
func CellSizeFor(s Solid, cellsAcross int) float64 {
	return minExtent(s) / float64(cellsAcross)
}

func minExtent(s Solid) float64 {
	lo, hi := s.Bounds()
	return min(hi[0]-lo[0], hi[1]-lo[1], hi[2]-lo[2])
}

// CorrectedFaceArea returns the true surface area one voxel face of edge h
// stands for when the true outward normal there is the unit vector n. A
// surface element dA is represented by staircase faces of total area
// dA·(|nx|+|ny|+|nz|) (its projections onto the three axis planes), so each
// face stands for h²/(|nx|+|ny|+|nz|).
func CorrectedFaceArea(h float64, n [3]float64) float64 {
	return h * h / (math.Abs(n[0]) + math.Abs(n[1]) + math.Abs(n[2]))
}

// EstimateBytes returns a conservative estimate of the memory a grid of
// n[0]×n[1]×n[2] cells takes together with the solver's arrays, so that a
// spec can be refused before anything is allocated.
//
// Per cell: 1 byte of Region plus about ten float64 arrays of the solver
// over the full box: 81 bytes. Per boundary face: the BoundaryFace itself
// plus two float64 of solver data. A convex part has at most two boundary
// faces on each grid line, 2(NxNy+NyNz+NzNx) in all; the estimate allows
// four times that for parts with re-entrant surfaces, but never more than
// six faces per cell.
func EstimateBytes(n [3]int) int64 {
	if n[0] <= 0 || n[1] <= 0 || n[2] <= 0 {
		return 0
	}
	const bytesPerCell = 1 + 10*8
	const bytesPerFace = int64(unsafe.Sizeof(BoundaryFace{})) + 2*8
	nx, ny, nz := int64(n[0]), int64(n[1]), int64(n[2])
	cells := nx * ny * nz
	faces := min(4*2*(nx*ny+ny*nz+nz*nx), 6*cells)
	return cells*bytesPerCell + faces*bytesPerFace
}

// Voxelise builds the grid of s with cubic cells of edge cellSize (m).
//
// The grid box covers s's bounding box and is centred on it, so symmetric
// parts give symmetric grids. A cell belongs to the part when its centre
// does (region 1: one material). Every face between a part cell and a
// non-part cell or the grid's edge is a boundary face; it goes to the group
// of the last selector that selects it ("exposure[i]" for selectors[i]), or
// to the "insulated" group, always last. Each face carries the true normal
// there and the corrected area (CorrectedFaceArea); where the group's true
// area is known exactly, the group's face areas are then scaled so that
// their sum equals it (Group.Rescale). Faces are listed in cell order and,
// within a cell, in direction order.
//
// Errors name the bad argument: a solid that fails its Validate method or
// has an empty bounding box, a cell size that is not a positive length or
// leaves fewer than MinCellsAcross cells across the part, a selector that
// selects nothing or names an unknown direction, a selector whose surface
// gets no face at this cell size, or ctx's error (wrapped) when cancelled.
func Voxelise(ctx context.Context, s Solid, cellSize float64, selectors []Selector) (*Grid, error) {
	if err := checkInputs(s, cellSize, selectors); err != nil {
		return nil, err
	}
	g, err := newGrid(s, cellSize)
	if err != nil {
		return nil, err
	}
	v := newVoxeliser(s, g, selectors)
	g.Region = make([]uint8, g.CellCount())
	if err := forEachPlane(ctx, g.N[2], v.fillRegion); err != nil {
		return nil, err
	}
	// The face pass reads neighbouring planes, so it starts only once every
	// plane's region is filled.
	faces := make([][]BoundaryFace, g.N[2])
	if err := forEachPlane(ctx, g.N[2], func(k int) { faces[k] = v.findFaces(k) }); err != nil {
		return nil, err
	}
	g.Faces = slices.Concat(faces...) // plane order keeps the faces in cell order
	if err := v.makeGroups(); err != nil {
		return nil, err
	}
	return g, nil
}

// checkInputs reports every problem with Voxelise's arguments.
func checkInputs(s Solid, cellSize float64, selectors []Selector) error {
	if s == nil {
		return errors.New("solid: missing")
	}
	var errs []error
	if err := checkLength("cell size", cellSize); err != nil {
		errs = append(errs, err)
	}
	errs = append(errs, checkSolid(s)...)
	if len(errs) == 0 {
		// A small tolerance lets CellSizeFor(s, MinCellsAcross) pass despite rounding.
		if across := minExtent(s) / cellSize; across < MinCellsAcross*(1-1e-9) {
			errs = append(errs, fmt.Errorf("cell size %g m gives %.3g cells across the part's smallest extent of %g m; need at least %d", cellSize, across, minExtent(s), MinCellsAcross))
		}
	}
	if len(selectors) >= maxGroups {
		errs = append(errs, fmt.Errorf("selectors: at most %d allowed, got %d", maxGroups-1, len(selectors)))
	}
	for i, sel := range selectors {
		errs = append(errs, sel.validate(fmt.Sprintf("selectors[%d]", i))...)
	}
	return errors.Join(errs...)
}

// checkSolid reports a solid that fails its own validation or whose
// bounding box is empty or unbounded. Bounds is only asked of a solid that
// validated, since a primitive with a bad field may not be able to answer.
func checkSolid(s Solid) []error {
	if v, ok := s.(interface{ Validate() error }); ok {
		if err := v.Validate(); err != nil {
			return []error{err}
		}
	}
	var errs []error
	lo, hi := s.Bounds()
	for d := range lo {
		if ext := hi[d] - lo[d]; !(ext > 0) || math.IsInf(ext, 0) {
			errs = append(errs, fmt.Errorf("solid bounds: extent along %s must be a positive length in m, got %g", axisNames[d], ext))
		}
	}
	return errs
}

// newGrid sizes the grid box and centres it on s's bounding box. It
// refuses a box with more cells than BoundaryFace.Cell can index.
func newGrid(s Solid, h float64) (*Grid, error) {
	lo, hi := s.Bounds()
	mid := boundsCentre(s)
	var counts [3]float64
	for d := range counts {
		// The tolerance keeps an extent that is a whole number of cells
		// from gaining an extra cell through rounding.
		counts[d] = max(1, math.Ceil((hi[d]-lo[d])/h-1e-9))
	}
	if total := counts[0] * counts[1] * counts[2]; total > math.MaxInt32 {
		return nil, fmt.Errorf("cell size %g m gives %g×%g×%g = %.4g cells, more than the %d a grid can index", h, counts[0], counts[1], counts[2], total, math.MaxInt32)
	}
	g := &Grid{CellSize: h}
	for d := range g.N {
		g.N[d] = int(counts[d])
		g.Origin[d] = mid[d] - h*counts[d]/2
	}
	return g, nil
}

// boundsCentre returns the centre of s's bounding box, where the grid's
// centre goes.
func boundsCentre(s Solid) [3]float64 {
	lo, hi := s.Bounds()
	return scale(add(lo, hi), 0.5)
}

// voxeliser holds what the plane workers share: read-only inputs and
// per-axis coordinates.
type voxeliser struct {
	solid     Solid
	grid      *Grid
	selectors []Selector
	groupOf   [numPieces]int
	normalAt  func(p [3]float64, dir int) [3]float64
	// centre[d][i] is the coordinate of cell centres with index i along d,
	// face[d][i] that of the face between cells i−1 and i.
	centre, face [3][]float64
}

func newVoxeliser(s Solid, g *Grid, selectors []Selector) *voxeliser {
	v := &voxeliser{solid: s, grid: g, selectors: selectors, groupOf: assignPieces(selectors)}
	if fs, ok := s.(FaceNormalSolid); ok {
		v.normalAt = fs.FaceNormal
	} else {
		v.normalAt = func(p [3]float64, dir int) [3]float64 {
			n := s.SurfaceNormal(p)
			// A face cannot stand for surface turned away from its side.
			if dot(n, axisVector(dir)) <= 0 {
				return axisVector(dir)
			}
			return n
		}
	}
	mid := boundsCentre(s)
	for d := range v.centre {
		n := g.N[d]
		v.centre[d] = make([]float64, n)
		v.face[d] = make([]float64, n+1)
		// Offsets from the middle in half-integer cell counts are exact, so
		// mirror-image cells get exactly mirrored coordinates (a sphere's
		// grid stays symmetric, which Origin + h·(i+½) would not guarantee).
		for i := range v.face[d] {
			v.face[d][i] = mid[d] + g.CellSize*(float64(i)-float64(n)/2)
			if i < n {
				v.centre[d][i] = mid[d] + g.CellSize*(float64(i)+0.5-float64(n)/2)
			}
		}
	}
	return v
}

// fillRegion marks the part cells of plane k.
func (v *voxeliser) fillRegion(k int) {
	g := v.grid
	for j := 0; j < g.N[1]; j++ {
		row := g.Index(0, j, k)
		for i := 0; i < g.N[0]; i++ {
			if v.solid.Contains([3]float64{v.centre[0][i], v.centre[1][j], v.centre[2][k]}) {
				g.Region[row+i] = 1
			}
		}
	}
}

// findFaces returns the boundary faces of the part cells in plane k, in
// cell order and, within a cell, in direction order, with their normal,
// corrected (not yet rescaled) area and group.
func (v *voxeliser) findFaces(k int) []BoundaryFace {
	g := v.grid
	stride := [3]int{1, g.N[0], g.N[0] * g.N[1]}
	var faces []BoundaryFace
	for j := 0; j < g.N[1]; j++ {
		row := g.Index(0, j, k)
		for i := 0; i < g.N[0]; i++ {
			c := row + i
			if g.Region[c] == 0 {
				continue
			}
			cell := [3]int{i, j, k}
			for dir := MinusX; dir <= PlusZ; dir++ {
				axis, step := dir/2, 2*(dir%2)-1
				if at := cell[axis] + step; at >= 0 && at < g.N[axis] && g.Region[c+step*stride[axis]] != 0 {
					continue
				}
				p := [3]float64{v.centre[0][i], v.centre[1][j], v.centre[2][k]}
				p[axis] = v.face[axis][cell[axis]+dir%2]
				n := v.normalAt(p, dir)
				faces = append(faces, BoundaryFace{
					Cell:   int32(c),
					Dir:    uint8(dir),
					Group:  uint16(v.groupOf[classifyNormal(n)]),
					Area:   CorrectedFaceArea(g.CellSize, n),
					Normal: n,
				})
			}
		}
	}
	return faces
}

// makeGroups fills the grid's groups from its faces and rescales the face
// areas of each group whose true area is exact.
func (v *voxeliser) makeGroups() error {
	g := v.grid
	groups := make([]Group, len(v.selectors)+1)
	for i := range v.selectors {
		groups[i] = Group{Name: fmt.Sprintf("exposure[%d]", i), Exposure: i}
	}
	groups[len(v.selectors)] = Group{Name: "insulated", Exposure: -1}

	faceCount := make([]int, len(groups))
	for _, f := range g.Faces {
		faceCount[f.Group]++
		groups[f.Group].ModelArea += f.Area
	}
	areas, exact := pieceAreas(v.solid, v.selectors)
	if exact {
		for p, a := range areas {
			groups[v.groupOf[p]].TrueArea += a
		}
	}
	var errs []error
	for i := range groups {
		gr := &groups[i]
		gr.VoxelArea = float64(faceCount[i]) * g.CellSize * g.CellSize
		gr.TrueAreaExact = exact
		gr.Rescale = 1
		switch {
		case !exact:
			gr.TrueArea = gr.ModelArea
		case gr.ModelArea > 0 && gr.TrueArea > 0:
			gr.Rescale = gr.TrueArea / gr.ModelArea
			gr.ModelArea = gr.TrueArea
		case gr.TrueArea > 0 && gr.Exposure >= 0:
			errs = append(errs, fmt.Errorf("selectors[%d]: covers %.3g m² of the surface but no boundary face at cell size %g m; use smaller cells", i, gr.TrueArea, g.CellSize))
		}
	}
	if err := errors.Join(errs...); err != nil {
		return err
	}
	for i := range g.Faces {
		g.Faces[i].Area *= groups[g.Faces[i].Group].Rescale
	}
	g.Groups = groups
	return nil
}

// forEachPlane calls work for every z-plane 0 … nz−1 on GOMAXPROCS
// goroutines, handing out one plane at a time so that uneven planes (a
// sphere's middle holds more part cells than its poles) balance and
// cancellation is noticed within a plane. It returns ctx's error if ctx was
// cancelled meanwhile.
func forEachPlane(ctx context.Context, nz int, work func(k int)) error {
	var next atomic.Int64
	var wg sync.WaitGroup
	for range min(runtime.GOMAXPROCS(0), nz) {
		wg.Go(func() {
			for ctx.Err() == nil {
				k := int(next.Add(1)) - 1
				if k >= nz {
					return
				}
				work(k)
			}
		})
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return fmt.Errorf("voxelising: %w", err)
	}
	return nil
}
