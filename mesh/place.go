package mesh

import (
	"math"

	"soakfarm/mesh/stl"
)

// Placed is a solid turned and moved into the part's frame: a point p of
// the part is inner point Rᵀ(p − Shift). Make one with Place.
type Placed struct {
	Inner    Solid
	Rotation [3][3]float64 // inner frame to part frame
	Shift    [3]float64    // m
	// axisMap[d] is the inner direction that part direction d comes from
	// when the rotation maps axes onto axes (quarter turns); nil otherwise.
	axisMap []int
}

// Place turns s about its own origin by rotateDeg (about x first, then y,
// then z, right-hand rule, as STL bodies are turned) and then moves it by
// translate (m). It returns s itself when both are zero.
func Place(s Solid, rotateDeg, translate [3]float64) Solid {
	if rotateDeg == [3]float64{} && translate == [3]float64{} {
		return s
	}
	p := &Placed{Inner: s, Rotation: stl.RotationXYZ(rotateDeg), Shift: translate}
	p.axisMap = quarterTurnMap(p.Rotation)
	return p
}

// quarterTurnMap returns, for a rotation that maps each axis direction onto
// an axis direction, which inner direction each part direction comes from;
// nil for any other rotation.
func quarterTurnMap(r [3][3]float64) []int {
	m := make([]int, 6)
	for d := MinusX; d <= PlusZ; d++ {
		// Inner direction Rᵀ·e_d must be an axis direction.
		v := axisVector(d)
		var in [3]float64
		for i := range 3 {
			in[i] = r[0][i]*v[0] + r[1][i]*v[1] + r[2][i]*v[2]
		}
		m[d] = -1
		for e := MinusX; e <= PlusZ; e++ {
			if dot(in, axisVector(e)) > 1-1e-12 {
				m[d] = e
			}
		}
		if m[d] < 0 {
			return nil
		}
	}
	return m
}

func (p *Placed) toInner(q [3]float64) [3]float64 {
	d := [3]float64{q[0] - p.Shift[0], q[1] - p.Shift[1], q[2] - p.Shift[2]}
	var out [3]float64
	for i := range 3 {
		out[i] = p.Rotation[0][i]*d[0] + p.Rotation[1][i]*d[1] + p.Rotation[2][i]*d[2]
	}
	return out
}

func (p *Placed) turn(v [3]float64) [3]float64 {
	var out [3]float64
	for i := range 3 {
		out[i] = p.Rotation[i][0]*v[0] + p.Rotation[i][1]*v[1] + p.Rotation[i][2]*v[2]
	}
	return out
}

// Contains implements Solid.
func (p *Placed) Contains(q [3]float64) bool { return p.Inner.Contains(p.toInner(q)) }

// Bounds implements Solid: the box around the turned corners of the inner
// solid's box (exact for quarter turns, larger otherwise).
func (p *Placed) Bounds() (lo, hi [3]float64) {
	ilo, ihi := p.Inner.Bounds()
	lo = [3]float64{math.Inf(1), math.Inf(1), math.Inf(1)}
	hi = [3]float64{math.Inf(-1), math.Inf(-1), math.Inf(-1)}
	for c := range 8 {
		corner := ilo
		for d := range 3 {
			if c>>d&1 == 1 {
				corner[d] = ihi[d]
			}
		}
		q := add(p.turn(corner), p.Shift)
		for d := range 3 {
			lo[d], hi[d] = min(lo[d], q[d]), max(hi[d], q[d])
		}
	}
	return lo, hi
}

// SurfaceNormal implements Solid.
func (p *Placed) SurfaceNormal(q [3]float64) [3]float64 {
	return p.turn(p.Inner.SurfaceNormal(p.toInner(q)))
}

// FaceNormal implements FaceNormalSolid. Under a quarter turn a voxel face
// is a voxel face of the inner solid too, so the inner solid's own rule
// applies; otherwise the nearest surface's normal is used.
func (p *Placed) FaceNormal(q [3]float64, dir int) [3]float64 {
	if fs, ok := p.Inner.(FaceNormalSolid); ok && p.axisMap != nil {
		return p.turn(fs.FaceNormal(p.toInner(q), p.axisMap[dir]))
	}
	return nearestFaceNormal(p, q, dir)
}

// Volume implements Solid.
func (p *Placed) Volume() float64 { return p.Inner.Volume() }

// Area implements Solid.
func (p *Placed) Area() float64 { return p.Inner.Area() }

// Validate passes on the inner solid's own check.
func (p *Placed) Validate() error {
	if v, ok := p.Inner.(interface{ Validate() error }); ok {
		return v.Validate()
	}
	return nil
}

// facingAreas implements facingSplitter: a quarter turn only renames the
// directions of an inner split.
func (p *Placed) facingAreas() (facing [6]float64, rest float64, ok bool) {
	inner, rest, ok := facingAreas(p.Inner)
	if !ok || p.axisMap == nil {
		return facing, 0, false
	}
	for d := range facing {
		facing[d] = inner[p.axisMap[d]]
	}
	return facing, rest, true
}

// facingSplitter is a solid that can split its surface by direction only
// in some configurations.
type facingSplitter interface {
	facingAreas() (facing [6]float64, rest float64, ok bool)
}

// facingAreas returns the split of s's surface by direction (see
// FacingAreaSolid), and false when s cannot tell.
func facingAreas(s Solid) (facing [6]float64, rest float64, ok bool) {
	switch fs := s.(type) {
	case facingSplitter:
		return fs.facingAreas()
	case FacingAreaSolid:
		facing, rest = fs.FacingAreas()
		return facing, rest, true
	}
	return facing, 0, false
}

// nearestFaceNormal is the normal of the surface nearest q, for a solid
// with no rule of its own; a face cannot stand for surface turned away
// from its side, so such a normal gives way to the face's own direction.
func nearestFaceNormal(s Solid, q [3]float64, dir int) [3]float64 {
	n := s.SurfaceNormal(q)
	if dot(n, axisVector(dir)) <= 0 {
		return axisVector(dir)
	}
	return n
}
