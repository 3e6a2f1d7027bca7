// Package mesh turns a part's geometry into a grid of cubic cells: which
// cells belong to the part, which cell faces lie on its surface, which
// exposure group each such face belongs to, and how much true surface
// area each face stands for.
package mesh

// Face directions of a cell, in the order the solver's 7-point stencil uses.
const (
	MinusX = iota
	PlusX
	MinusY
	PlusY
	MinusZ
	PlusZ
)

// DirectionNames spells each face direction as the job spec does.
var DirectionNames = [6]string{"-x", "+x", "-y", "+y", "-z", "+z"}

// Grid is a box of N[0]×N[1]×N[2] cubic cells of edge CellSize. Cell (i, j, k)
// has index i + N[0]*(j + N[1]*k) and centre
// Origin + CellSize*(i+0.5, j+0.5, k+0.5).
type Grid struct {
	N        [3]int
	CellSize float64    // m
	Origin   [3]float64 // low corner of cell (0, 0, 0), m

	// Region holds, per cell, 0 for a cell outside the part and r+1 for a
	// cell of the part's region r (each region has its own material).
	Region []uint8

	// Faces lists every cell face between a part cell and the outside
	// (another grid cell outside the part or the grid's own boundary).
	Faces []BoundaryFace

	// Groups are the surface groups the faces belong to; see BoundaryFace.Group.
	Groups []Group

	// Bodies lists the part's bodies (one, "part", for a plain solid) with
	// their volumes; see BoundaryFace.Body.
	Bodies []BodyVolume
}

// BodyVolume is one body's own volume against the cells it has in the grid.
type BodyVolume struct {
	Name     string
	Subtract bool
	Region   uint8
	// TrueVolume is the body's own volume as given (its Volume), m³,
	// whatever other bodies overlap or cut from it.
	TrueVolume float64
	// ModelVolume is the volume of the cells the body decided last: the
	// part cells it added, or for a subtracting body the cells it removed, m³.
	ModelVolume float64
}

// BoundaryFace is one exposed cell face.
type BoundaryFace struct {
	Cell  int32  // index of the part cell that owns the face
	Dir   uint8  // MinusX … PlusZ: the side of the cell the face is on
	Group uint16 // index into Grid.Groups
	Body  uint16 // index into Grid.Bodies: the body whose surface the face stands for
	// Solid is the index of the named solid block (see stl.Body.FaceGroups)
	// of an STL body nearest the face; 0 for other bodies.
	Solid uint16

	// Area is the true surface area this face stands for, m². A voxel face
	// has area CellSize², but on a curved or sloping surface the staircase
	// overstates the real area; Area carries the corrected value so that
	// boundary heat flow is right.
	Area float64
	// Normal is the true outward unit normal of the surface at this face.
	Normal [3]float64
}

// Group is a set of boundary faces that share one exposure.
type Group struct {
	Name      string  // "exposure[0]", … or "insulated"
	Exposure  int     // index into the spec's exposure list, -1 when insulated
	TrueArea  float64 // area of the real geometry, m²
	VoxelArea float64 // area of the staircase faces, m²
	ModelArea float64 // sum of the faces' corrected Area, m²

	// TrueAreaExact tells whether TrueArea comes from the geometry itself;
	// when false the solid could not say and TrueArea is ModelArea.
	TrueAreaExact bool
	// Rescale is the factor applied to the faces' corrected areas so that
	// ModelArea equals the exact TrueArea (1 when TrueArea is not exact or
	// the group has no faces).
	// It stays within a few per cent of 1 unless the cells are too coarse
	// for the group's surface.
	Rescale float64
}

// Index returns the cell index of (i, j, k).
func (g *Grid) Index(i, j, k int) int { return i + g.N[0]*(j+g.N[1]*k) }

// Coords returns (i, j, k) of a cell index.
func (g *Grid) Coords(c int) (i, j, k int) {
	i = c % g.N[0]
	c /= g.N[0]
	return i, c % g.N[1], c / g.N[1]
}

// Centre returns the centre of cell (i, j, k), m.
func (g *Grid) Centre(i, j, k int) [3]float64 {
	h := g.CellSize
	return [3]float64{
		g.Origin[0] + h*(float64(i)+0.5),
		g.Origin[1] + h*(float64(j)+0.5),
		g.Origin[2] + h*(float64(k)+0.5),
	}
}

// Inside reports whether cell (i, j, k) exists and belongs to the part.
func (g *Grid) Inside(i, j, k int) bool {
	if i < 0 || j < 0 || k < 0 || i >= g.N[0] || j >= g.N[1] || k >= g.N[2] {
		return false
	}
	return g.Region[g.Index(i, j, k)] != 0
}

// CellCount returns the number of cells of the box, part or not.
func (g *Grid) CellCount() int { return g.N[0] * g.N[1] * g.N[2] }

// PartCells returns the number of cells that belong to the part.
func (g *Grid) PartCells() int {
	n := 0
	for _, r := range g.Region {
		if r != 0 {
			n++
		}
	}
	return n
}
