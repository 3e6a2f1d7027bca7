package stl

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
)

// maxExamples is how many locations a Finding lists.
const maxExamples = 5

// Degeneracy thresholds: a triangle is degenerate when its area is below
// degenerateArea times the squared bounding-box diagonal, or its height is
// below degenerateHeight times its longest edge (collinear corners).
const (
	degenerateArea   = 1e-12
	degenerateHeight = 1e-7
)

// Finding is one kind of defect: how many, and where.
type Finding struct {
	Count int
	// Examples are up to five locations in the file's own coordinates
	// and units (before rotation and translation), as the CAD user sees them.
	Examples [][3]float64
	// Triangles are the triangle numbers (0-based, file order) of the
	// examples, or -1 where a location is an edge.
	Triangles []int
}

func (f *Finding) add(p [3]float64, tri int) {
	f.Count++
	if len(f.Examples) < maxExamples {
		f.Examples = append(f.Examples, p)
		f.Triangles = append(f.Triangles, tri)
	}
}

// Report is the result of Check.
type Report struct {
	Units     string // unit of the example locations
	Triangles int
	Vertices  int
	// OpenEdges are edges used by one triangle only; Holes counts the
	// closed loops they form.
	OpenEdges Finding
	Holes     int
	// NonManifoldEdges are edges shared by more than two triangles.
	NonManifoldEdges Finding
	// FlippedTriangles run opposite to the majority of their connected
	// surface; InconsistentEdges are the edges both neighbours traverse
	// in the same direction.
	FlippedTriangles  Finding
	InconsistentEdges int
	// DegenerateTriangles have zero or near-zero area.
	DegenerateTriangles Finding
	// SignedVolume is the enclosed volume by the divergence theorem, m³;
	// negative for an inside-out surface.
	SignedVolume float64
	// RepairedHoles holes were closed with AddedTriangles triangles.
	RepairedHoles  int
	AddedTriangles int
}

// Err returns an error wrapping ErrNotSolid unless the mesh is closed,
// manifold, consistently oriented and encloses a positive volume.
// Degenerate triangles alone are no error: they bound nothing.
func (r Report) Err() error {
	var errs []error
	for _, p := range r.problems() {
		errs = append(errs, fmt.Errorf("%w: %s", ErrNotSolid, p))
	}
	return errors.Join(errs...)
}

func (r Report) problems() []string {
	var out []string
	if r.OpenEdges.Count > 0 {
		out = append(out, fmt.Sprintf("%d open edges (%d holes): the surface is not closed; near %s; close the gaps in the CAD model or export it again, or set repair_holes to fill small holes",
			r.OpenEdges.Count, r.Holes, r.where(r.OpenEdges)))
	}
	if r.NonManifoldEdges.Count > 0 {
		out = append(out, fmt.Sprintf("%d non-manifold edges (shared by more than two triangles) near %s; bodies touch along an edge: merge them into one solid or move them apart",
			r.NonManifoldEdges.Count, r.where(r.NonManifoldEdges)))
	}
	if r.FlippedTriangles.Count > 0 || r.InconsistentEdges > 0 {
		out = append(out, fmt.Sprintf("%d triangles face the opposite way to their neighbours (%d edges traversed the same way by both triangles), e.g. %s; flip those triangles or export again with consistent normals",
			r.FlippedTriangles.Count, r.InconsistentEdges, r.where(r.FlippedTriangles)))
	}
	switch {
	case r.SignedVolume < 0:
		out = append(out, fmt.Sprintf("signed volume is %.6g m³: the surface is inside-out (normals point inward); flip all normals", r.SignedVolume))
	case r.SignedVolume == 0 || math.IsNaN(r.SignedVolume):
		out = append(out, "enclosed volume is zero: the surface bounds no solid (a flat sheet or a doubled surface)")
	}
	return out
}

// Warnings lists findings that do not stop the mesh from bounding a solid.
func (r Report) Warnings() []string {
	var out []string
	if d := r.DegenerateTriangles; d.Count > 0 {
		out = append(out, fmt.Sprintf("%d degenerate triangles (zero or near-zero area), e.g. %s; harmless to the inside test but worth cleaning in the CAD export",
			d.Count, r.where(d)))
	}
	if r.RepairedHoles > 0 {
		out = append(out, fmt.Sprintf("repaired %d holes with %d added triangles", r.RepairedHoles, r.AddedTriangles))
	}
	return out
}

// String is the report as a CAD user reads it.
func (r Report) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%d triangles, %d vertices, volume %.6g m³", r.Triangles, r.Vertices, r.SignedVolume)
	for _, p := range r.problems() {
		b.WriteString("\nerror: " + p)
	}
	for _, w := range r.Warnings() {
		b.WriteString("\nwarning: " + w)
	}
	return b.String()
}

func (r Report) where(f Finding) string {
	parts := make([]string, len(f.Examples))
	for i, p := range f.Examples {
		s := fmt.Sprintf("(%.6g, %.6g, %.6g) %s", p[0], p[1], p[2], r.Units)
		if f.Triangles[i] >= 0 {
			s = fmt.Sprintf("triangle %d at %s", f.Triangles[i], s)
		}
		parts[i] = s
	}
	return strings.Join(parts, ", ")
}

// halfEdge is one triangle's directed use of an edge.
type halfEdge struct {
	from, to int32
	tri      int32
}

func (h halfEdge) key() uint64 {
	a, b := min(h.from, h.to), max(h.from, h.to)
	return uint64(a)<<32 | uint64(uint32(b))
}

// edgeGroups sorts all half-edges by their undirected edge and calls fn
// with the uses of each edge. Collapsed edges (one vertex twice) are skipped.
func (m *Mesh) edgeGroups(fn func(uses []halfEdge)) {
	hs := make([]halfEdge, 0, 3*len(m.Triangles))
	for t, c := range m.Triangles {
		for k := range 3 {
			if a, b := c[k], c[(k+1)%3]; a != b {
				hs = append(hs, halfEdge{a, b, int32(t)})
			}
		}
	}
	slices.SortFunc(hs, func(x, y halfEdge) int {
		return cmp.Or(cmp.Compare(x.key(), y.key()), cmp.Compare(x.tri, y.tri))
	})
	for i := 0; i < len(hs); {
		j := i + 1
		for j < len(hs) && hs[j].key() == hs[i].key() {
			j++
		}
		fn(hs[i:j])
		i = j
	}
}

// Check reports the mesh's defects.
func Check(m *Mesh) Report {
	r := Report{
		Units:          m.place.units,
		Triangles:      len(m.Triangles),
		Vertices:       len(m.Vertices),
		RepairedHoles:  m.RepairedHoles,
		AddedTriangles: m.AddedTriangles,
	}
	fileAt := func(p vec) vec { return m.place.toFile(p) }
	mid := func(a, b int32) vec { return fileAt(scale(add(m.Vertices[a], m.Vertices[b]), 0.5)) }

	// Neighbours across two-triangle edges, with whether the pair agrees.
	type link struct {
		other int32
		same  bool // both traverse the edge the same way: one is flipped
	}
	links := make([][]link, len(m.Triangles))
	var boundary []halfEdge
	m.edgeGroups(func(uses []halfEdge) {
		switch {
		case len(uses) == 1:
			boundary = append(boundary, uses[0])
			r.OpenEdges.add(mid(uses[0].from, uses[0].to), -1)
		case len(uses) > 2:
			r.NonManifoldEdges.add(mid(uses[0].from, uses[0].to), -1)
		default:
			a, b := uses[0], uses[1]
			same := a.from == b.from
			if same {
				r.InconsistentEdges++
			}
			links[a.tri] = append(links[a.tri], link{b.tri, same})
			links[b.tri] = append(links[b.tri], link{a.tri, same})
		}
	})
	r.Holes = len(boundaryLoops(boundary))

	// Two-colour each connected surface by orientation; the smaller
	// colour class is the flipped triangles.
	colour := make([]int8, len(m.Triangles)) // 0 unseen, 1 or 2
	var queue, members []int32
	for seed := range m.Triangles {
		if colour[seed] != 0 {
			continue
		}
		colour[seed] = 1
		queue = append(queue[:0], int32(seed))
		members = members[:0]
		count := [3]int{}
		for len(queue) > 0 {
			t := queue[len(queue)-1]
			queue = queue[:len(queue)-1]
			members = append(members, t)
			count[colour[t]]++
			for _, l := range links[t] {
				if colour[l.other] == 0 {
					colour[l.other] = colour[t]
					if l.same {
						colour[l.other] = 3 - colour[t]
					}
					queue = append(queue, l.other)
				}
			}
		}
		minority := int8(2)
		if count[1] < count[2] {
			minority = 1
		}
		slices.Sort(members)
		for _, t := range members {
			if colour[t] == minority {
				r.FlippedTriangles.add(fileAt(centroid(m.Triangle(int(t)))), int(t))
			}
		}
	}

	lo, hi := m.bounds()
	diag2 := dot(sub(hi, lo), sub(hi, lo))
	centre := scale(add(lo, hi), 0.5)
	for t := range m.Triangles {
		tri := m.Triangle(t)
		r.SignedVolume += signedVolume(tri, centre)
		area := norm(areaVector(tri))
		longest := max(dot(sub(tri[1], tri[0]), sub(tri[1], tri[0])),
			dot(sub(tri[2], tri[1]), sub(tri[2], tri[1])),
			dot(sub(tri[0], tri[2]), sub(tri[0], tri[2])))
		if area <= degenerateArea*diag2 || 2*area <= degenerateHeight*longest {
			r.DegenerateTriangles.add(fileAt(centroid(tri)), t)
		}
	}
	return r
}

func centroid(t [3]vec) vec { return scale(add(add(t[0], t[1]), t[2]), 1.0/3) }

func (m *Mesh) bounds() (lo, hi vec) {
	lo, hi = m.Vertices[0], m.Vertices[0]
	for _, v := range m.Vertices {
		for k := range 3 {
			lo[k], hi[k] = min(lo[k], v[k]), max(hi[k], v[k])
		}
	}
	return lo, hi
}

// boundaryLoops chains open half-edges head to tail into closed loops of
// vertices; chains that do not close (at non-manifold vertices) are dropped.
func boundaryLoops(boundary []halfEdge) [][]halfEdge {
	out := make(map[int32][]int, len(boundary))
	for i, h := range boundary {
		out[h.from] = append(out[h.from], i)
	}
	used := make([]bool, len(boundary))
	var loops [][]halfEdge
	for start := range boundary {
		if used[start] {
			continue
		}
		var loop []halfEdge
		cur := start
		for {
			used[cur] = true
			loop = append(loop, boundary[cur])
			if boundary[cur].to == boundary[start].from {
				loops = append(loops, loop)
				break
			}
			next := -1
			for _, i := range out[boundary[cur].to] {
				if !used[i] {
					next = i
					break
				}
			}
			if next < 0 {
				break
			}
			cur = next
		}
	}
	return loops
}

// repairHoles closes every boundary loop of at most maxEdges edges with a
// fan about the loop's centroid, oriented to match the surrounding surface.
func (m *Mesh) repairHoles(maxEdges int) {
	var boundary []halfEdge
	m.edgeGroups(func(uses []halfEdge) {
		if len(uses) == 1 {
			boundary = append(boundary, uses[0])
		}
	})
	for _, loop := range boundaryLoops(boundary) {
		if len(loop) > maxEdges || len(loop) < 3 {
			continue
		}
		solid := m.Solid[loop[0].tri]
		added := len(m.Triangles)
		if len(loop) == 3 {
			// The reversed loop is the one missing triangle.
			m.Triangles = append(m.Triangles, [3]int32{loop[2].from, loop[1].from, loop[0].from})
		} else {
			var c vec
			for _, h := range loop {
				c = add(c, m.Vertices[h.from])
			}
			centre := int32(len(m.Vertices))
			m.Vertices = append(m.Vertices, scale(c, 1/float64(len(loop))))
			for _, h := range loop {
				m.Triangles = append(m.Triangles, [3]int32{h.to, h.from, centre})
			}
		}
		for range len(m.Triangles) - added {
			m.Solid = append(m.Solid, solid)
		}
		m.AddedTriangles += len(m.Triangles) - added
		m.RepairedHoles++
	}
}
