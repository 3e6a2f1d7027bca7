package stl

import (
	"fmt"
	"math"
)

// leafSize is the most triangles a BVH leaf holds.
const leafSize = 8

// Far-field ratios: a cluster farther from the query point than this many
// cluster radii counts as one dipole (Barill et al. 2018, "Fast winding
// numbers for soups and clouds", use 2). The dipole's relative error falls
// roughly as 1/ratio (measured on our icosphere: about 4 % at 2, 1 % at 6),
// so Contains takes the fast ratio and repeats with the accurate one only
// when the result is near the ½ threshold.
const (
	fastRatio     = 2
	accurateRatio = 8
)

// FaceGroup is the surface of one named solid block of the file.
type FaceGroup struct {
	Name      string
	Area      float64 // m²
	Triangles int
}

// Body is a solid bounded by a triangle mesh. Its methods are safe for
// concurrent use.
type Body struct {
	tris   []triangle // in BVH leaf order
	nodes  []bvhNode
	lo, hi vec
	volume float64
	area   float64
	groups []FaceGroup
}

type triangle struct {
	v      [3]vec
	normal vec // outward unit normal
	group  uint16
}

// bvhNode is a node of the bounding volume hierarchy. An inner node's
// children are nodes[first] and nodes[first+1]; a leaf holds
// tris[first : first+count].
type bvhNode struct {
	lo, hi     vec
	centre     vec     // area-weighted centroid of the node's triangles
	areaNormal vec     // sum of the triangles' area vectors
	area       float64 // sum of the triangles' areas
	radius     float64 // no corner lies farther from centre
	first      int32
	count      int32 // 0 for an inner node
}

// NewBody builds the inside test and surface queries for a mesh. The mesh
// need not pass Check: the winding number tolerates small defects. It must
// enclose a positive volume.
func NewBody(m *Mesh) (*Body, error) {
	b := &Body{groups: make([]FaceGroup, len(m.SolidNames))}
	for i, n := range m.SolidNames {
		b.groups[i].Name = n
	}
	for t, c := range m.Triangles {
		if c[0] == c[1] || c[1] == c[2] || c[2] == c[0] {
			continue // collapsed by welding: bounds nothing
		}
		v := m.Triangle(t)
		av := areaVector(v)
		a := norm(av)
		tri := triangle{v: v, group: m.Solid[t]}
		if a > 0 {
			tri.normal = scale(av, 1/a)
		}
		b.tris = append(b.tris, tri)
		b.area += a
		b.groups[tri.group].Area += a
		b.groups[tri.group].Triangles++
	}
	if len(b.tris) == 0 {
		return nil, fmt.Errorf("%w: no triangle with three distinct corners", ErrNotSolid)
	}
	b.lo, b.hi = m.bounds()
	centre := scale(add(b.lo, b.hi), 0.5)
	for _, t := range b.tris {
		b.volume += signedVolume(t.v, centre)
	}
	if !(b.volume > 0) {
		return nil, fmt.Errorf("%w: signed volume is %.6g m³, not positive (inside-out or no enclosed volume)", ErrNotSolid, b.volume)
	}
	b.build()
	return b, nil
}

// Bounds returns the axis-aligned bounding box, m.
func (b *Body) Bounds() (lo, hi [3]float64) { return b.lo, b.hi }

// Volume returns the enclosed volume by the divergence theorem, m³.
func (b *Body) Volume() float64 { return b.volume }

// Area returns the sum of the triangle areas, m².
func (b *Body) Area() float64 { return b.area }

// FacingAreas splits the surface by outward normal: facing[d] is the area
// of the triangles whose normal lies within 45° of direction d (−x, +x,
// −y, +y, −z, +z, the voxel grid's order) and rest the area of the others.
// For a mesh the split is exact: each triangle has one normal.
func (b *Body) FacingAreas() (facing [6]float64, rest float64) {
	cos45 := math.Sqrt(0.5)
	for _, t := range b.tris {
		a := norm(areaVector(t.v))
		placed := false
		for k := range 3 {
			if c := t.normal[k]; math.Abs(c) >= cos45 {
				d := 2 * k
				if c > 0 {
					d++
				}
				facing[d] += a
				placed = true
				break
			}
		}
		if !placed {
			rest += a
		}
	}
	return facing, rest
}

// EachTriangle calls fn for every triangle that bounds the body (collapsed
// ones left out) with its corners, outward unit normal, face group (see
// FaceGroups) and area.
func (b *Body) EachTriangle(fn func(corners [3][3]float64, normal [3]float64, group int, area float64)) {
	for _, t := range b.tris {
		fn(t.v, t.normal, int(t.group), norm(areaVector(t.v)))
	}
}

// FaceGroups returns the named surfaces, indexed as SurfaceAt's group.
func (b *Body) FaceGroups() []FaceGroup { return append([]FaceGroup(nil), b.groups...) }

// Contains reports whether p lies inside: generalized winding number ≥ ½.
func (b *Body) Contains(p [3]float64) bool {
	for k := range 3 {
		if p[k] < b.lo[k] || p[k] > b.hi[k] {
			return false
		}
	}
	w := b.winding(p, fastRatio)
	if math.Abs(w-0.5) < 0.25 {
		w = b.winding(p, accurateRatio)
	}
	return w >= 0.5
}

// WindingNumber returns the generalized winding number at p (Jacobson,
// Kavan and Sorkine-Hornung 2013, "Robust inside-outside segmentation using
// generalized winding numbers"): the solid angle the surface subtends at p
// over 4π. It is 1 inside a closed outward-oriented surface, 0 outside and
// ½ on the surface, and degrades gracefully across small holes. Clusters
// far from p count as one dipole (Barill et al. 2018), which leaves an
// error of the order of 0.5 %.
func (b *Body) WindingNumber(p [3]float64) float64 { return b.winding(p, accurateRatio) }

func (b *Body) winding(p vec, ratio float64) float64 {
	var sum float64
	stack := make([]int32, 1, 64)
	for len(stack) > 0 {
		nd := &b.nodes[stack[len(stack)-1]]
		stack = stack[:len(stack)-1]
		d := sub(nd.centre, p)
		d2 := dot(d, d)
		if d2 > ratio*ratio*nd.radius*nd.radius {
			sum += dot(nd.areaNormal, d) / (d2 * math.Sqrt(d2))
			continue
		}
		if nd.count == 0 {
			stack = append(stack, nd.first, nd.first+1)
			continue
		}
		for _, t := range b.tris[nd.first : nd.first+nd.count] {
			sum += solidAngle(t.v, p)
		}
	}
	return sum / (4 * math.Pi)
}

// solidAngle is the signed solid angle of triangle t seen from p, by
// Van Oosterom and Strackee (1983, IEEE Trans. Biomed. Eng. 30(2) 125–126):
// tan(Ω/2) = a·(b×c) / (|a||b||c| + (a·b)|c| + (a·c)|b| + (b·c)|a|).
func solidAngle(t [3]vec, p vec) float64 {
	a, bb, c := sub(t[0], p), sub(t[1], p), sub(t[2], p)
	la, lb, lc := norm(a), norm(bb), norm(c)
	num := dot(a, cross(bb, c))
	if num == 0 {
		return 0 // p in the triangle's plane: on the surface it counts half by symmetry
	}
	den := la*lb*lc + dot(a, bb)*lc + dot(a, c)*lb + dot(bb, c)*la
	return 2 * math.Atan2(num, den)
}

// SurfaceNormal returns the outward unit normal of the triangle nearest p.
// Where the nearest point is an edge or corner, it is the normal of one of
// the triangles meeting there.
func (b *Body) SurfaceNormal(p [3]float64) [3]float64 {
	n, _ := b.SurfaceAt(p)
	return n
}

// SurfaceAt returns the outward unit normal of the triangle nearest p and
// the index of its face group (see FaceGroups).
func (b *Body) SurfaceAt(p [3]float64) (normal [3]float64, group int) {
	t := &b.tris[b.nearest(p)]
	return t.normal, int(t.group)
}

// nearest returns the index of the triangle closest to p.
func (b *Body) nearest(p vec) int {
	best, bestD2 := 0, math.Inf(1)
	stack := make([]int32, 1, 64)
	for len(stack) > 0 {
		nd := &b.nodes[stack[len(stack)-1]]
		stack = stack[:len(stack)-1]
		if boxDist2(nd.lo, nd.hi, p) >= bestD2 {
			continue
		}
		if nd.count == 0 {
			l, r := nd.first, nd.first+1
			// Visit the nearer child first (pushed last) to prune more.
			if boxDist2(b.nodes[l].lo, b.nodes[l].hi, p) < boxDist2(b.nodes[r].lo, b.nodes[r].hi, p) {
				l, r = r, l
			}
			stack = append(stack, l, r)
			continue
		}
		for i := nd.first; i < nd.first+nd.count; i++ {
			q := closestOnTriangle(b.tris[i].v, p)
			if d2 := dot(sub(q, p), sub(q, p)); d2 < bestD2 {
				best, bestD2 = int(i), d2
			}
		}
	}
	return best
}

func boxDist2(lo, hi, p vec) float64 {
	var d2 float64
	for k := range 3 {
		if p[k] < lo[k] {
			d2 += sq(lo[k] - p[k])
		} else if p[k] > hi[k] {
			d2 += sq(p[k] - hi[k])
		}
	}
	return d2
}

// closestOnTriangle returns the point of triangle t nearest p, by the
// Voronoi-region method (Ericson, Real-Time Collision Detection, 2005, §5.1.5).
func closestOnTriangle(t [3]vec, p vec) vec {
	a, bb, c := t[0], t[1], t[2]
	ab, ac, ap := sub(bb, a), sub(c, a), sub(p, a)
	d1, d2 := dot(ab, ap), dot(ac, ap)
	if d1 <= 0 && d2 <= 0 {
		return a
	}
	bp := sub(p, bb)
	d3, d4 := dot(ab, bp), dot(ac, bp)
	if d3 >= 0 && d4 <= d3 {
		return bb
	}
	vc := d1*d4 - d3*d2
	if vc <= 0 && d1 >= 0 && d3 <= 0 {
		return add(a, scale(ab, d1/(d1-d3)))
	}
	cp := sub(p, c)
	d5, d6 := dot(ab, cp), dot(ac, cp)
	if d6 >= 0 && d5 <= d6 {
		return c
	}
	vb := d5*d2 - d1*d6
	if vb <= 0 && d2 >= 0 && d6 <= 0 {
		return add(a, scale(ac, d2/(d2-d6)))
	}
	va := d3*d6 - d5*d4
	if va <= 0 && d4-d3 >= 0 && d5-d6 >= 0 {
		return add(bb, scale(sub(c, bb), (d4-d3)/((d4-d3)+(d5-d6))))
	}
	den := va + vb + vc
	if den == 0 { // degenerate triangle: fall back to its corners
		return a
	}
	return add(a, add(scale(ab, vb/den), scale(ac, vc/den)))
}

// build sorts the triangles into a BVH by median splits along the longest
// axis of their centroids' box.
func (b *Body) build() {
	cents := make([]vec, len(b.tris))
	order := make([]int32, len(b.tris))
	for i, t := range b.tris {
		cents[i] = centroid(t.v)
		order[i] = int32(i)
	}
	b.nodes = make([]bvhNode, 1, 2*len(b.tris)/leafSize+2)
	type job struct{ node, lo, hi int32 }
	jobs := []job{{0, 0, int32(len(order))}}
	for len(jobs) > 0 {
		j := jobs[len(jobs)-1]
		jobs = jobs[:len(jobs)-1]
		span := order[j.lo:j.hi]
		if len(span) <= leafSize {
			b.nodes[j.node].first, b.nodes[j.node].count = j.lo, int32(len(span))
			continue
		}
		clo, chi := cents[span[0]], cents[span[0]]
		for _, i := range span {
			for k := range 3 {
				clo[k], chi[k] = min(clo[k], cents[i][k]), max(chi[k], cents[i][k])
			}
		}
		axis := 0
		for k := 1; k < 3; k++ {
			if chi[k]-clo[k] > chi[axis]-clo[axis] {
				axis = k
			}
		}
		half := len(span) / 2
		selectNth(span, half, func(i int32) float64 { return cents[i][axis] })
		first := int32(len(b.nodes))
		b.nodes = append(b.nodes, bvhNode{}, bvhNode{})
		b.nodes[j.node].first = first
		mid := j.lo + int32(half)
		jobs = append(jobs, job{first, j.lo, mid}, job{first + 1, mid, j.hi})
	}
	sorted := make([]triangle, len(b.tris))
	for i, o := range order {
		sorted[i] = b.tris[o]
	}
	b.tris = sorted
	b.summarise(0)
}

// summarise fills the box, centroid, area vector, area and radius of node
// i and its subtree, children first. An inner node's radius is bounded
// through its children's spheres, which keeps the build linear.
func (b *Body) summarise(i int32) {
	nd := &b.nodes[i]
	if nd.count == 0 {
		b.summarise(nd.first)
		b.summarise(nd.first + 1)
		l, r := &b.nodes[nd.first], &b.nodes[nd.first+1]
		for k := range 3 {
			nd.lo[k], nd.hi[k] = min(l.lo[k], r.lo[k]), max(l.hi[k], r.hi[k])
		}
		nd.areaNormal = add(l.areaNormal, r.areaNormal)
		nd.area = l.area + r.area
		nd.centre = scale(add(nd.lo, nd.hi), 0.5)
		if nd.area > 0 {
			nd.centre = scale(add(scale(l.centre, l.area), scale(r.centre, r.area)), 1/nd.area)
		}
		nd.radius = max(l.radius+norm(sub(l.centre, nd.centre)), r.radius+norm(sub(r.centre, nd.centre)))
		return
	}
	tris := b.tris[nd.first : nd.first+nd.count]
	nd.lo, nd.hi = tris[0].v[0], tris[0].v[0]
	var weighted vec
	for _, t := range tris {
		for _, v := range t.v {
			for k := range 3 {
				nd.lo[k], nd.hi[k] = min(nd.lo[k], v[k]), max(nd.hi[k], v[k])
			}
		}
		av := areaVector(t.v)
		a := norm(av)
		nd.areaNormal = add(nd.areaNormal, av)
		weighted = add(weighted, scale(centroid(t.v), a))
		nd.area += a
	}
	nd.centre = scale(add(nd.lo, nd.hi), 0.5)
	if nd.area > 0 {
		nd.centre = scale(weighted, 1/nd.area)
	}
	for _, t := range tris {
		for _, v := range t.v {
			nd.radius = max(nd.radius, norm(sub(v, nd.centre)))
		}
	}
}

// selectNth partially orders s so that s[n] has the n-th smallest key,
// smaller keys before it and larger after (Hoare's quickselect).
func selectNth(s []int32, n int, key func(int32) float64) {
	lo, hi := 0, len(s)-1
	for lo < hi {
		pivot := key(s[(lo+hi)/2])
		i, j := lo, hi
		for i <= j {
			for key(s[i]) < pivot {
				i++
			}
			for key(s[j]) > pivot {
				j--
			}
			if i <= j {
				s[i], s[j] = s[j], s[i]
				i++
				j--
			}
		}
		switch {
		case n <= j:
			hi = j
		case n >= i:
			lo = i
		default:
			return
		}
	}
}
