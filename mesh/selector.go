package mesh

import (
	"fmt"
	"slices"
	"strings"

	"soakfarm/mesh/stl"
)

// Selector picks part of the surface for one exposure: every face (All),
// or the faces that meet every criterion given: true outward normal within
// 45° of one of the Facing directions (MinusX … PlusZ), coming from one of
// the named Bodies (a subtracting body's faces are its cavity), lying on
// one of the named STL Solids (the solid blocks of STL bodies), or having
// their centre inside Region.
type Selector struct {
	All    bool
	Facing []int
	Bodies []string
	Solids []string
	Region *Region
}

// Region is an axis-aligned box, m.
type Region struct {
	Min, Max [3]float64
}

func (r *Region) contains(p [3]float64) bool {
	for d := range p {
		if p[d] < r.Min[d] || p[d] > r.Max[d] {
			return false
		}
	}
	return true
}

// matcher is a Selector resolved against an assembly's bodies: nil sets
// mean any.
type matcher struct {
	all    bool
	facing *[6]bool
	bodies []bool   // per body
	solids [][]bool // per body, per named surface
	region *Region
}

// resolve checks the names a selector uses against the bodies.
func (s Selector) resolve(bodies []Body, path string) (matcher, []error) {
	m := matcher{all: s.All, region: s.Region}
	var errs []error
	if len(s.Facing) > 0 {
		set := s.facingSet()
		m.facing = &set
	}
	if len(s.Bodies) > 0 {
		m.bodies = make([]bool, len(bodies))
		for i, name := range s.Bodies {
			found := false
			for b := range bodies {
				if bodies[b].Name == name {
					m.bodies[b], found = true, true
				}
			}
			if !found {
				errs = append(errs, fmt.Errorf("%s.Bodies[%d]: no body named %q; the bodies are %s", path, i, name, bodyNames(bodies)))
			}
		}
	}
	if len(s.Solids) > 0 {
		m.solids = make([][]bool, len(bodies))
		var known []string
		for b := range bodies {
			if sb, ok := bodies[b].Solid.(*stl.Body); ok {
				groups := sb.FaceGroups()
				m.solids[b] = make([]bool, len(groups))
				for k, fg := range groups {
					known = append(known, fg.Name)
					m.solids[b][k] = slices.Contains(s.Solids, fg.Name)
				}
			}
		}
		for i, name := range s.Solids {
			if !slices.Contains(known, name) {
				list := "none: no body is an STL mesh"
				if len(known) > 0 {
					list = quoteAll(known)
				}
				errs = append(errs, fmt.Errorf("%s.Solids[%d]: no STL solid named %q; the named solids are %s", path, i, name, list))
			}
		}
	}
	return m, errs
}

func bodyNames(bodies []Body) string {
	names := make([]string, len(bodies))
	for i, b := range bodies {
		names[i] = b.Name
	}
	return quoteAll(names)
}

func quoteAll(names []string) string {
	q := make([]string, len(names))
	for i, n := range names {
		q[i] = fmt.Sprintf("%q", n)
	}
	return strings.Join(q, ", ")
}

// matches reports whether a face of body b, named surface solid, surface
// piece and centre at is selected.
func (m *matcher) matches(b, solid, piece int, at [3]float64) bool {
	switch {
	case m.all:
		return true
	case m.facing != nil && (piece == restPiece || !m.facing[piece]):
		return false
	case m.bodies != nil && !m.bodies[b]:
		return false
	case m.solids != nil && (m.solids[b] == nil || solid >= len(m.solids[b]) || !m.solids[b][solid]):
		return false
	case m.region != nil && !m.region.contains(at):
		return false
	}
	return true
}

// byPiece reports whether the matcher decides by normal direction alone
// on a part of the one body given, so that the seven surface pieces sort
// faces and true areas alike.
func (m *matcher) byPiece() bool { return m.solids == nil && m.region == nil }

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

// validate reports a selector that selects nothing or names an unknown
// direction; path is its name in messages.
func (s Selector) validate(path string) []error {
	var errs []error
	others := len(s.Facing) > 0 || len(s.Bodies) > 0 || len(s.Solids) > 0 || s.Region != nil
	switch {
	case !s.All && !others:
		errs = append(errs, fmt.Errorf("%s: selects no surface; set All, or Facing, Bodies, Solids or Region", path))
	case s.All && others:
		errs = append(errs, fmt.Errorf("%s: All selects every face; leave Facing, Bodies, Solids and Region out", path))
	}
	if r := s.Region; r != nil {
		for d := range 3 {
			if !(r.Min[d] <= r.Max[d]) {
				errs = append(errs, fmt.Errorf("%s.Region: Min[%d] = %g must not exceed Max[%d] = %g", path, d, r.Min[d], d, r.Max[d]))
			}
		}
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

// assignPieces returns, per surface piece, the index of the last matcher
// that selects it, or len(matchers) (the insulated group) when none does.
// Only for matchers that decide by piece (see byPiece) on one body.
func assignPieces(matchers []matcher) [numPieces]int {
	var groupOf [numPieces]int
	for p := range groupOf {
		groupOf[p] = len(matchers)
		for i := range matchers {
			if matchers[i].matches(0, 0, p, [3]float64{}) {
				groupOf[p] = i
			}
		}
	}
	return groupOf
}

// pieceAreas returns the exact true area of each surface piece, or false
// when the solid cannot tell. A solid that only knows its total area still
// gives exact group areas when no matcher looks at directions: then every
// piece goes to the same group, so the total is put on one piece.
func pieceAreas(s Solid, matchers []matcher) (areas [numPieces]float64, exact bool) {
	if facing, rest, ok := facingAreas(s); ok {
		copy(areas[:], facing[:])
		areas[restPiece] = rest
		return areas, true
	}
	for _, m := range matchers {
		if m.facing != nil {
			return areas, false
		}
	}
	areas[restPiece] = s.Area()
	return areas, true
}

// SelectedArea returns the true area of the part of s's surface that sel
// selects, and whether that area is exact (false, with area 0, for a
// selection the solid cannot measure: by direction on a solid that does
// not implement FacingAreaSolid, by STL solid or by region).
func SelectedArea(s Solid, sel Selector) (area float64, exact bool) {
	bodies := bodiesOf(s)
	m, errs := sel.resolve(bodies, "selector")
	if len(bodies) != 1 || bodies[0].Subtract || len(errs) > 0 || !m.byPiece() {
		return 0, false
	}
	areas, exact := pieceAreas(bodies[0].Solid, []matcher{m})
	if !exact {
		return 0, false
	}
	for p, a := range areas {
		if m.matches(0, 0, p, [3]float64{}) {
			area += a
		}
	}
	return area, true
}
