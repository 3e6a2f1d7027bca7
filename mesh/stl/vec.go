package stl

import "math"

type vec = [3]float64

func sub(a, b vec) vec           { return vec{a[0] - b[0], a[1] - b[1], a[2] - b[2]} }
func add(a, b vec) vec           { return vec{a[0] + b[0], a[1] + b[1], a[2] + b[2]} }
func scale(a vec, s float64) vec { return vec{a[0] * s, a[1] * s, a[2] * s} }
func dot(a, b vec) float64       { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }
func norm(a vec) float64         { return math.Sqrt(dot(a, a)) }

func cross(a, b vec) vec {
	return vec{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}

// areaVector is (b−a)×(c−a)/2: the triangle's area times its unit normal.
func areaVector(t [3]vec) vec { return scale(cross(sub(t[1], t[0]), sub(t[2], t[0])), 0.5) }

// signedVolume is the volume of the tetrahedron (origin, a, b, c); summed
// over a closed surface it is the enclosed volume (divergence theorem).
func signedVolume(t [3]vec, origin vec) float64 {
	return dot(sub(t[0], origin), cross(sub(t[1], origin), sub(t[2], origin))) / 6
}
