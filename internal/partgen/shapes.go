// Package partgen designs soakfarm's own test parts as triangle meshes and
// writes them as STL (and the hub also as a spec of bodies): finely tessellated sphere, cylinder and tube, a
// flanged hub with bolt holes, a ribbed bracket, a torus for benchmarks,
// and small deliberately broken files for the reader's error tests.
//
// Every shape is built so that corners shared by neighbouring triangles
// are computed by the same expression and so come out bit-identical.
package partgen

//go:generate go run ./cmd/partgen -out ../../testdata/parts

import "math"

// Triangle is three corners in counter-clockwise order seen from outside.
type Triangle [3][3]float64

// Block is a named solid block of an ASCII STL file.
type Block struct {
	Name      string
	Triangles []Triangle
}

type point2 = [2]float64

// wall is the side quad over the 2-D edge p→q, from z0 to z1, for a solid
// lying on the left of p→q: its normal points to the right.
func wall(p, q point2, z0, z1 float64) []Triangle {
	a, b := [3]float64{p[0], p[1], z0}, [3]float64{q[0], q[1], z0}
	c, d := [3]float64{q[0], q[1], z1}, [3]float64{p[0], p[1], z1}
	return []Triangle{{a, b, c}, {a, c, d}}
}

// face lifts counter-clockwise 2-D triangles to height z, facing +z when
// up, else −z.
func face(tris [][3]point2, z float64, up bool) []Triangle {
	out := make([]Triangle, len(tris))
	for i, t := range tris {
		p := [3][3]float64{{t[0][0], t[0][1], z}, {t[1][0], t[1][1], z}, {t[2][0], t[2][1], z}}
		if !up {
			p[1], p[2] = p[2], p[1]
		}
		out[i] = p
	}
	return out
}

// polar is the corner at radius r and angle 2π·i/n, i taken modulo n.
func polar(r float64, i, n int) point2 {
	a := 2 * math.Pi * float64((i%n+n)%n) / float64(n)
	return point2{r * math.Cos(a), r * math.Sin(a)}
}

// ring triangulates the annulus r1 < r2 between angles i and i+1 of n.
func ring(r1, r2 float64, i, n int) [][3]point2 {
	a, b, c, d := polar(r1, i, n), polar(r2, i, n), polar(r2, i+1, n), polar(r1, i+1, n)
	return [][3]point2{{a, b, c}, {a, c, d}}
}

// Cylinder is a regular prism of the given segments inscribed in a
// cylinder of the radius, axis z, from z = 0 to height; caps are fans
// about the axis.
func Cylinder(radius, height float64, segments int) []Triangle {
	var out []Triangle
	var caps [][3]point2
	for i := range segments {
		p, q := polar(radius, i, segments), polar(radius, i+1, segments)
		out = append(out, wall(p, q, 0, height)...)
		caps = append(caps, [3]point2{{0, 0}, p, q})
	}
	out = append(out, face(caps, height, true)...)
	return append(out, face(caps, 0, false)...)
}

// Tube is a thick-walled tube along z from 0 to length between regular
// polygons inscribed in the inner and outer circles.
func Tube(outer, inner, length float64, segments int) []Triangle {
	var out []Triangle
	var ends [][3]point2
	for i := range segments {
		out = append(out, wall(polar(outer, i, segments), polar(outer, i+1, segments), 0, length)...)
		out = append(out, wall(polar(inner, i+1, segments), polar(inner, i, segments), 0, length)...)
		ends = append(ends, ring(inner, outer, i, segments)...)
	}
	out = append(out, face(ends, length, true)...)
	return append(out, face(ends, 0, false)...)
}

// Icosphere is an icosahedron subdivided level times, every corner pushed
// onto the sphere of the radius about the origin: a convex polyhedron
// inscribed in the sphere with 20·4^level triangles.
func Icosphere(radius float64, level int) []Triangle {
	t := (1 + math.Sqrt(5)) / 2
	v := [][3]float64{
		{-1, t, 0}, {1, t, 0}, {-1, -t, 0}, {1, -t, 0},
		{0, -1, t}, {0, 1, t}, {0, -1, -t}, {0, 1, -t},
		{t, 0, -1}, {t, 0, 1}, {-t, 0, -1}, {-t, 0, 1},
	}
	idx := [20][3]int{
		{0, 11, 5}, {0, 5, 1}, {0, 1, 7}, {0, 7, 10}, {0, 10, 11},
		{1, 5, 9}, {5, 11, 4}, {11, 10, 2}, {10, 7, 6}, {7, 1, 8},
		{3, 9, 4}, {3, 4, 2}, {3, 2, 6}, {3, 6, 8}, {3, 8, 9},
		{4, 9, 5}, {2, 4, 11}, {6, 2, 10}, {8, 6, 7}, {9, 8, 1},
	}
	onSphere := func(p [3]float64) [3]float64 {
		s := radius / math.Sqrt(p[0]*p[0]+p[1]*p[1]+p[2]*p[2])
		return [3]float64{p[0] * s, p[1] * s, p[2] * s}
	}
	tris := make([]Triangle, 20)
	for i, f := range idx {
		tris[i] = Triangle{onSphere(v[f[0]]), onSphere(v[f[1]]), onSphere(v[f[2]])}
	}
	// a+b = b+a in floating point, so both triangles of an edge get the
	// same midpoint.
	mid := func(a, b [3]float64) [3]float64 {
		return onSphere([3]float64{a[0] + b[0], a[1] + b[1], a[2] + b[2]})
	}
	for range level {
		next := make([]Triangle, 0, 4*len(tris))
		for _, t := range tris {
			ab, bc, ca := mid(t[0], t[1]), mid(t[1], t[2]), mid(t[2], t[0])
			next = append(next, Triangle{t[0], ab, ca}, Triangle{ab, t[1], bc}, Triangle{ca, bc, t[2]}, Triangle{ab, bc, ca})
		}
		tris = next
	}
	// The sphere is convex about the origin: outward means away from it.
	for i, t := range tris {
		n := cross(sub(t[1], t[0]), sub(t[2], t[0]))
		if n[0]*t[0][0]+n[1]*t[0][1]+n[2]*t[0][2] < 0 {
			tris[i][1], tris[i][2] = t[2], t[1]
		}
	}
	return tris
}

// Torus is a ring torus about the z axis with nu segments around the axis
// and nv around the tube: 2·nu·nv triangles.
func Torus(major, minor float64, nu, nv int) []Triangle {
	at := func(i, j int) [3]float64 {
		u := 2 * math.Pi * float64(i%nu) / float64(nu)
		v := 2 * math.Pi * float64(j%nv) / float64(nv)
		r := major + minor*math.Cos(v)
		return [3]float64{r * math.Cos(u), r * math.Sin(u), minor * math.Sin(v)}
	}
	out := make([]Triangle, 0, 2*nu*nv)
	for i := range nu {
		for j := range nv {
			// ∂/∂u × ∂/∂v points out of the tube, so (u, v) order is outward.
			a, b, c, d := at(i, j), at(i+1, j), at(i+1, j+1), at(i, j+1)
			out = append(out, Triangle{a, b, c}, Triangle{a, c, d})
		}
	}
	return out
}

// Cube is the box [0, size]³ as 12 triangles.
func Cube(size float64) []Triangle {
	sq := [][3]point2{{{0, 0}, {size, 0}, {size, size}}, {{0, 0}, {size, size}, {0, size}}}
	out := append(face(sq, size, true), face(sq, 0, false)...)
	corners := []point2{{0, 0}, {size, 0}, {size, size}, {0, size}}
	for i := range corners {
		out = append(out, wall(corners[i], corners[(i+1)%4], 0, size)...)
	}
	return out
}

func sub(a, b [3]float64) [3]float64 { return [3]float64{a[0] - b[0], a[1] - b[1], a[2] - b[2]} }

func cross(a, b [3]float64) [3]float64 {
	return [3]float64{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}
