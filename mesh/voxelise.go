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

	"soakfarm/mesh/stl"
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
// Per cell: 1 byte of Region plus the solver's arrays: 120 bytes, the
// solver's own measure on a solid block (109 to 112 bytes a cell with its
// face data set apart) rounded up; the solver's arrays follow the part,
// so sparse parts take less per box cell. (While voxelising an assembly of
// several bodies, 2 bytes per cell record the deciding body and 1 byte per
// cell of the body's box its inside test; both are freed before the
// solver runs.) Per boundary face: the BoundaryFace itself plus the
// solver's three float64 and two int32 of face data. A convex part has at most two boundary
// faces on each grid line, 2(NxNy+NyNz+NzNx) in all; the estimate allows
// four times that for parts with re-entrant surfaces, but never more than
// six faces per cell.
func EstimateBytes(n [3]int) int64 {
	if n[0] <= 0 || n[1] <= 0 || n[2] <= 0 {
		return 0
	}
	const bytesPerCell = 1 + 120
	const bytesPerFace = int64(unsafe.Sizeof(BoundaryFace{})) + 3*8 + 2*4
	nx, ny, nz := int64(n[0]), int64(n[1]), int64(n[2])
	cells := nx * ny * nz
	faces := min(4*2*(nx*ny+ny*nz+nz*nx), 6*cells)
	return cells*bytesPerCell + faces*bytesPerFace
}

// Voxelise builds the grid of s with cubic cells of edge cellSize (m).
//
// The grid box covers s's bounding box and is centred on it, so symmetric
// parts give symmetric grids. A cell belongs to the part when its centre
// does: for a plain solid, region 1 (one material); for an *Assembly, the
// bodies are applied in order (see Assembly) and each cell takes the region
// of the union body that added it last. Every face between a part cell and
// a non-part cell or the grid's edge is a boundary face. It belongs to the
// body whose surface it stands for (the subtracting body whose cavity it
// faces, else the body that added its cell) and, on an STL body, to the
// named solid block nearest it; it goes to the group of the last selector
// that selects it ("exposure[i]" for selectors[i]), or to the "insulated"
// group, always last. Each face carries the true normal there and the
// corrected area (CorrectedFaceArea). Where the group's true area is known
// exactly, the group's face areas are then scaled so that their sum equals
// it (Group.Rescale): for one body without subtraction, from the closed
// forms by direction (FacingAreaSolid) or, for an STL body, from the
// triangles' own areas and normals, each triangle sorted as a face at its
// centroid would be. Faces are listed in cell order and, within a cell, in
// direction order.
//
// Errors name the bad argument: a solid that fails its Validate method or
// has an empty bounding box, a cell size that is not a positive length or
// leaves fewer than MinCellsAcross cells across the part, a selector that
// selects nothing, names an unknown direction, body or STL solid, a
// selector whose surface gets no face at this cell size, or ctx's error
// (wrapped) when cancelled.
func Voxelise(ctx context.Context, s Solid, cellSize float64, selectors []Selector) (*Grid, error) {
	if err := checkInputs(s, cellSize, selectors); err != nil {
		return nil, err
	}
	bodies := bodiesOf(s)
	matchers := make([]matcher, len(selectors))
	var errs []error
	for i, sel := range selectors {
		m, e := sel.resolve(bodies, fmt.Sprintf("selectors[%d]", i))
		matchers[i], errs = m, append(errs, e...)
	}
	if err := errors.Join(errs...); err != nil {
		return nil, err
	}
	g, err := newGrid(s, cellSize)
	if err != nil {
		return nil, err
	}
	v := newVoxeliser(s, bodies, g, matchers)
	g.Region = make([]uint8, g.CellCount())
	if len(bodies) > 1 {
		v.owner = make([]uint16, g.CellCount())
	}
	for b := range bodies {
		if err := v.fillBody(ctx, b); err != nil {
			return nil, err
		}
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
	v.bodyVolumes()
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

// gridFiller is a solid that answers Contains for a whole box of cell
// centres at once, faster than cell by cell (an STL body).
type gridFiller interface {
	ContainsGrid(origin [3]float64, cell float64, n [3]int, out []bool)
}

// voxeliser holds what the plane workers share: read-only inputs and
// per-axis coordinates.
type voxeliser struct {
	bodies   []Body
	grid     *Grid
	matchers []matcher
	// byPiece: one union body and matchers that sort by normal direction
	// only, so groupOf decides every face.
	byPiece bool
	groupOf [numPieces]int
	// owner holds, per cell, 1 + the index of the body that decided it
	// last: the union body that added a part cell, the subtracting body
	// that removed a cell; 0 for none. Nil for a single body.
	owner []uint16
	// centre[d][i] is the coordinate of cell centres with index i along d,
	// face[d][i] that of the face between cells i−1 and i.
	centre, face [3][]float64
}

func newVoxeliser(s Solid, bodies []Body, g *Grid, matchers []matcher) *voxeliser {
	v := &voxeliser{bodies: bodies, grid: g, matchers: matchers}
	v.byPiece = len(bodies) == 1
	for i := range matchers {
		v.byPiece = v.byPiece && matchers[i].byPiece()
	}
	if v.byPiece {
		v.groupOf = assignPieces(matchers)
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

// cellRange returns the index range [lo, hi) along each axis of the cells
// whose centres can lie in body b's bounding box.
func (v *voxeliser) cellRange(b int) (lo, hi [3]int) {
	blo, bhi := v.bodies[b].Solid.Bounds()
	g := v.grid
	for d := range 3 {
		// One cell of margin: the exact test decides.
		lo[d] = clampCell(math.Floor((blo[d]-g.Origin[d])/g.CellSize-0.5)-1, g.N[d])
		hi[d] = clampCell(math.Ceil((bhi[d]-g.Origin[d])/g.CellSize-0.5)+2, g.N[d])
	}
	return lo, hi
}

// clampCell converts a cell position to an index in [0, n] without
// overflowing the conversion.
func clampCell(x float64, n int) int {
	switch {
	case !(x > 0):
		return 0
	case x >= float64(n):
		return n
	}
	return int(x)
}

// fillBody applies body b to the cells of its bounding box: a union body
// gives the cells whose centre it contains its region, a subtracting body
// empties them.
func (v *voxeliser) fillBody(ctx context.Context, b int) error {
	body := &v.bodies[b]
	g := v.grid
	lo, hi := v.cellRange(b)
	n := [3]int{hi[0] - lo[0], hi[1] - lo[1], hi[2] - lo[2]}
	if n[0] <= 0 || n[1] <= 0 || n[2] <= 0 {
		return nil
	}
	apply := func(c int) {
		switch {
		case !body.Subtract:
			g.Region[c] = body.Region
		case g.Region[c] != 0:
			g.Region[c] = 0
		default:
			return // nothing to remove: the cell keeps its last decider
		}
		if v.owner != nil {
			v.owner[c] = uint16(b + 1)
		}
	}
	if gf, ok := body.Solid.(gridFiller); ok {
		inside := make([]bool, n[0]*n[1]*n[2])
		origin := [3]float64{v.face[0][lo[0]], v.face[1][lo[1]], v.face[2][lo[2]]}
		gf.ContainsGrid(origin, g.CellSize, n, inside)
		if err := ctx.Err(); err != nil {
			return fmt.Errorf("voxelising: %w", err)
		}
		return forEachPlane(ctx, n[2], func(k int) {
			for j := range n[1] {
				row := g.Index(lo[0], lo[1]+j, lo[2]+k)
				in := inside[n[0]*(j+n[1]*k):][:n[0]]
				for i, ok := range in {
					if ok {
						apply(row + i)
					}
				}
			}
		})
	}
	return forEachPlane(ctx, n[2], func(k int) {
		z := v.centre[2][lo[2]+k]
		for j := lo[1]; j < hi[1]; j++ {
			row := g.Index(0, j, lo[2]+k)
			for i := lo[0]; i < hi[0]; i++ {
				if body.Solid.Contains([3]float64{v.centre[0][i], v.centre[1][j], z}) {
					apply(row + i)
				}
			}
		}
	})
}

// findFaces returns the boundary faces of the part cells in plane k, in
// cell order and, within a cell, in direction order, with their normal,
// corrected (not yet rescaled) area, body, named surface and group.
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
				nb := -1
				if at := cell[axis] + step; at >= 0 && at < g.N[axis] {
					nb = c + step*stride[axis]
					if g.Region[nb] != 0 {
						continue
					}
				}
				p := [3]float64{v.centre[0][i], v.centre[1][j], v.centre[2][k]}
				p[axis] = v.face[axis][cell[axis]+dir%2]
				b := v.faceBody(c, nb)
				n, solid := v.surface(b, p, dir)
				piece := classifyNormal(n)
				faces = append(faces, BoundaryFace{
					Cell:   int32(c),
					Dir:    uint8(dir),
					Body:   uint16(b),
					Solid:  uint16(solid),
					Group:  uint16(v.group(b, solid, piece, p)),
					Area:   CorrectedFaceArea(g.CellSize, n),
					Normal: n,
				})
			}
		}
	}
	return faces
}

// faceBody returns the body whose surface the face between part cell c
// and non-part cell nb (−1 beyond the grid) stands for: the subtracting
// body that emptied nb, else the body that added c.
func (v *voxeliser) faceBody(c, nb int) int {
	if v.owner == nil {
		return 0
	}
	if nb >= 0 {
		if o := v.owner[nb]; o != 0 && v.bodies[o-1].Subtract {
			return int(o - 1)
		}
	}
	return int(v.owner[c] - 1)
}

// surface returns the part's outward normal at the face at p on side dir
// of its cell, standing for body b's surface, and the named surface of b
// there (0 for a body without names). A subtracting body's surface faces
// the other way: its outward normal points into the part.
func (v *voxeliser) surface(b int, p [3]float64, dir int) (n [3]float64, solid int) {
	body := &v.bodies[b]
	if sb, ok := body.Solid.(*stl.Body); ok {
		n, solid = sb.SurfaceAt(p)
		if body.Subtract {
			n = scale(n, -1)
		}
		if dot(n, axisVector(dir)) <= 0 {
			n = axisVector(dir)
		}
		return n, solid
	}
	fs, ok := body.Solid.(FaceNormalSolid)
	switch {
	case ok && body.Subtract:
		// The cavity wall seen from the body's inside: the body's own face
		// on the opposite side (dir^1 flips −x and +x, …).
		return scale(fs.FaceNormal(p, dir^1), -1), 0
	case ok:
		return fs.FaceNormal(p, dir), 0
	case body.Subtract:
		return scale(nearestFaceNormal(body.Solid, p, dir^1), -1), 0
	}
	return nearestFaceNormal(body.Solid, p, dir), 0
}

// group returns the index of the last matcher that selects a face of
// body b, named surface solid and surface piece at point at, or the
// insulated group's.
func (v *voxeliser) group(b, solid, piece int, at [3]float64) int {
	if v.byPiece {
		return v.groupOf[piece]
	}
	for i := len(v.matchers) - 1; i >= 0; i-- {
		if v.matchers[i].matches(b, solid, piece, at) {
			return i
		}
	}
	return len(v.matchers)
}

// trueAreas returns each group's true area, or false when it is not
// known exactly: see Voxelise.
func (v *voxeliser) trueAreas(groups int) ([]float64, bool) {
	areas := make([]float64, groups)
	if len(v.bodies) != 1 {
		return nil, false
	}
	if v.byPiece {
		pieces, exact := pieceAreas(v.bodies[0].Solid, v.matchers)
		if !exact {
			return nil, false
		}
		for p, a := range pieces {
			areas[v.groupOf[p]] += a
		}
		return areas, true
	}
	sb, ok := v.bodies[0].Solid.(*stl.Body)
	if !ok {
		return nil, false
	}
	sb.EachTriangle(func(t [3][3]float64, n [3]float64, solid int, a float64) {
		centroid := scale(add(add(t[0], t[1]), t[2]), 1.0/3)
		areas[v.group(0, solid, classifyNormal(n), centroid)] += a
	})
	return areas, true
}

// makeGroups fills the grid's groups from its faces and rescales the face
// areas of each group whose true area is exact.
func (v *voxeliser) makeGroups() error {
	g := v.grid
	groups := make([]Group, len(v.matchers)+1)
	for i := range v.matchers {
		groups[i] = Group{Name: fmt.Sprintf("exposure[%d]", i), Exposure: i}
	}
	groups[len(v.matchers)] = Group{Name: "insulated", Exposure: -1}

	faceCount := make([]int, len(groups))
	for _, f := range g.Faces {
		faceCount[f.Group]++
		groups[f.Group].ModelArea += f.Area
	}
	areas, exact := v.trueAreas(len(groups))
	var errs []error
	for i := range groups {
		gr := &groups[i]
		gr.VoxelArea = float64(faceCount[i]) * g.CellSize * g.CellSize
		gr.TrueAreaExact = exact
		gr.Rescale = 1
		if !exact {
			gr.TrueArea = gr.ModelArea
			continue
		}
		gr.TrueArea = areas[i]
		switch {
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

// bodyVolumes fills the grid's per-body volumes from the cells each body
// decided last.
func (v *voxeliser) bodyVolumes() {
	g := v.grid
	cells := make([]int, len(v.bodies))
	if v.owner == nil {
		cells[0] = g.PartCells()
	} else {
		for _, o := range v.owner {
			if o != 0 {
				cells[o-1]++
			}
		}
	}
	h3 := g.CellSize * g.CellSize * g.CellSize
	g.Bodies = make([]BodyVolume, len(v.bodies))
	for i, b := range v.bodies {
		g.Bodies[i] = BodyVolume{Name: b.Name, Subtract: b.Subtract, Region: b.Region,
			TrueVolume: b.Solid.Volume(), ModelVolume: float64(cells[i]) * h3}
	}
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
