package mesh

import "fmt"

// Selector picks part of the surface for one exposure: every face (All) or
// the faces whose true outward normal lies within 45° of one of the listed
// directions (MinusX … PlusZ).
type Selector struct {
	All    bool
	Facing []int
}

// The surface is split into seven pieces by normal direction: the six 45°
// cones around the axis directions (indices MinusX … PlusZ) and the rest.
// Every selector selects whole pieces, so the pieces are what both the faces
// and the exact true areas are sorted by.
const (
	restPiece = 6
	numPieces = 7
)

// facingSet returns which directions the selector lists; an unknown
// direction selects nothing (Voxelise rejects it before getting here).
func (s Selector) facingSet() [6]bool {
	var set [6]bool
	for _, d := range s.Facing {
		if d >= MinusX && d <= PlusZ {
			set[d] = true
		}
	}
	return set
}

// selects reports whether the selector takes in surface piece p.
func (s Selector) selects(p int) bool {
	if s.All {
		return true
	}
	return p != restPiece && s.facingSet()[p]
}

// validate reports a selector that selects nothing or names an unknown
// direction; path is its name in messages.
func (s Selector) validate(path string) []error {
	var errs []error
	if !s.All && len(s.Facing) == 0 {
		errs = append(errs, fmt.Errorf("%s: selects no surface; set All or list Facing directions", path))
	}
	for i, d := range s.Facing {
		if d < MinusX || d > PlusZ {
			errs = append(errs, fmt.Errorf("%s.Facing[%d]: must be a direction %d…%d (-x … +z), got %d", path, i, MinusX, PlusZ, d))
		}
	}
	return errs
}

// classifyNormal returns the surface piece of a unit normal n: the first
// direction within 45° of n, or restPiece. A tolerance keeps normals at
// exactly 45° (a cylinder's side at x = y) in a cone on every platform.
func classifyNormal(n [3]float64) int {
	const tolerance = 1e-12
	for d := MinusX; d <= PlusZ; d++ {
		if dot(n, axisVector(d)) >= cos45-tolerance {
			return d
		}
	}
	return restPiece
}

// assignPieces returns, per surface piece, the index of the last selector
// that selects it, or len(selectors) (the insulated group) when none does.
func assignPieces(selectors []Selector) [numPieces]int {
	var groupOf [numPieces]int
	for p := range groupOf {
		groupOf[p] = len(selectors)
		for i, s := range selectors {
			if s.selects(p) {
				groupOf[p] = i
			}
		}
	}
	return groupOf
}

// pieceAreas returns the exact true area of each surface piece, or false
// when the solid cannot tell. A solid that only knows its total area still
// gives exact group areas when no selector looks at directions: then every
// piece goes to the same group, so the total is put on one piece.
func pieceAreas(s Solid, selectors []Selector) (areas [numPieces]float64, exact bool) {
	if fs, ok := s.(FacingAreaSolid); ok {
		facing, rest := fs.FacingAreas()
		copy(areas[:], facing[:])
		areas[restPiece] = rest
		return areas, true
	}
	for _, sel := range selectors {
		if !sel.All {
			return areas, false
		}
	}
	areas[restPiece] = s.Area()
	return areas, true
}

// SelectedArea returns the true area of the part of s's surface that sel
// selects, and whether that area is exact (false, with area 0, for a
// direction selection on a solid that does not implement FacingAreaSolid).
func SelectedArea(s Solid, sel Selector) (area float64, exact bool) {
	areas, exact := pieceAreas(s, []Selector{sel})
	if !exact {
		return 0, false
	}
	for p, a := range areas {
		if sel.selects(p) {
			area += a
		}
	}
	return area, true
}
