package mesh

import (
	"errors"
	"fmt"
	"math"
)

// Solid is a part's geometry as the voxeliser needs it. Lengths are in m.
type Solid interface {
	// Contains reports whether p lies inside the solid (surface included).
	Contains(p [3]float64) bool
	// Bounds returns the solid's axis-aligned bounding box.
	Bounds() (lo, hi [3]float64)
	// SurfaceNormal returns the outward unit normal of the surface point
	// nearest p.
	SurfaceNormal(p [3]float64) [3]float64
	// Volume returns the true volume, m³.
	Volume() float64
	// Area returns the true surface area, m².
	Area() float64
}

// FacingAreaSolid is a Solid that knows exactly how its surface splits by
// normal direction, so that the true area of any exposure selection is exact.
type FacingAreaSolid interface {
	Solid
	// FacingAreas returns, for each direction MinusX … PlusZ, the area of
	// the surface whose outward normal lies within 45° of that direction,
	// and the area of the rest. The seven pieces do not overlap (45° cones
	// around two different axes meet only along a line) and sum to Area().
	FacingAreas() (facing [6]float64, rest float64)
}

// FaceNormalSolid is a Solid whose nearest-surface normal can mislead at a
// voxel face: next to an edge or rim the nearest surface may be one the face
// does not stair along (a +x face beside a cylinder's end lies closer to the
// flat end than to the curved side). FaceNormal returns the outward unit
// normal of the surface that the voxel face at p, on side dir of its cell,
// stands for.
type FaceNormalSolid interface {
	Solid
	FaceNormal(p [3]float64, dir int) [3]float64
}

// Sphere is a ball centred on the origin.
type Sphere struct {
	Diameter float64 // m
}

// Cylinder is a round bar centred on the origin along axis Axis (0, 1, 2
// for x, y, z).
type Cylinder struct {
	Diameter float64 // m
	Length   float64 // m
	Axis     int
}

// Box is a rectangular block centred on the origin with edges along the axes.
type Box struct {
	Size [3]float64 // edge lengths along x, y, z, m
}

// cos45 is the cosine of the half-angle of a facing cone.
const cos45 = math.Sqrt2 / 2

// Contains implements Solid.
func (s Sphere) Contains(p [3]float64) bool {
	r := s.Diameter / 2
	return p[0]*p[0]+p[1]*p[1]+p[2]*p[2] <= r*r
}

// Bounds implements Solid.
func (s Sphere) Bounds() (lo, hi [3]float64) {
	r := s.Diameter / 2
	return [3]float64{-r, -r, -r}, [3]float64{r, r, r}
}

// SurfaceNormal implements Solid.
func (s Sphere) SurfaceNormal(p [3]float64) [3]float64 {
	if l := norm(p); l > 0 {
		return scale(p, 1/l)
	}
	return axisVector(PlusZ) // every surface point is equally near the centre
}

// Volume implements Solid.
func (s Sphere) Volume() float64 { return math.Pi * s.Diameter * s.Diameter * s.Diameter / 6 }

// Area implements Solid.
func (s Sphere) Area() float64 { return math.Pi * s.Diameter * s.Diameter }

// FacingAreas implements FacingAreaSolid: each 45° cone cuts a spherical cap
// of height R(1 − cos45°), whose area is 2πR·height.
func (s Sphere) FacingAreas() (facing [6]float64, rest float64) {
	r := s.Diameter / 2
	c := 2 * math.Pi * r * r * (1 - cos45)
	for d := range facing {
		facing[d] = c
	}
	return facing, s.Area() - 6*c
}

// Validate reports a size that is not a positive length.
func (s Sphere) Validate() error { return checkLength("Sphere.Diameter", s.Diameter) }

// split returns p's coordinate along the cylinder axis and its offset from
// the axis.
func (c Cylinder) split(p [3]float64) (axial float64, radial [3]float64) {
	axial = p[c.Axis]
	radial = p
	radial[c.Axis] = 0
	return axial, radial
}

// Contains implements Solid.
func (c Cylinder) Contains(p [3]float64) bool {
	a, rad := c.split(p)
	r := c.Diameter / 2
	return dot(rad, rad) <= r*r && math.Abs(a) <= c.Length/2
}

// Bounds implements Solid.
func (c Cylinder) Bounds() (lo, hi [3]float64) {
	for d := range hi {
		hi[d] = c.Diameter / 2
	}
	hi[c.Axis] = c.Length / 2
	return scale(hi, -1), hi
}

// radialNormal is the outward normal of the curved side at p (any radial
// direction on the axis itself).
func (c Cylinder) radialNormal(p [3]float64) [3]float64 {
	_, rad := c.split(p)
	if r := norm(rad); r > 0 {
		return scale(rad, 1/r)
	}
	return axisVector(2 * ((c.Axis + 1) % 3))
}

// endNormal is the outward normal of the flat end on p's side.
func (c Cylinder) endNormal(p [3]float64) [3]float64 {
	return axisVector(2*c.Axis + positiveSide(p[c.Axis]))
}

// SurfaceNormal implements Solid. Beyond the rim, the nearest surface point
// is on the rim itself, where the normal is taken along the shortest way
// out of the solid.
func (c Cylinder) SurfaceNormal(p [3]float64) [3]float64 {
	a, rad := c.split(p)
	outRadial := norm(rad) - c.Diameter/2 // > 0 beyond the curved side
	outAxial := math.Abs(a) - c.Length/2  // > 0 beyond an end
	radial, end := c.radialNormal(p), c.endNormal(p)
	switch {
	case outRadial > 0 && outAxial > 0:
		return unit(add(scale(radial, outRadial), scale(end, outAxial)))
	case outRadial > outAxial:
		return radial
	default:
		return end
	}
}

// FaceNormal implements FaceNormalSolid: the curved side has no component
// along the axis, so faces along the axis stand for the flat ends and all
// other faces for the curved side.
func (c Cylinder) FaceNormal(p [3]float64, dir int) [3]float64 {
	if dir/2 == c.Axis {
		return axisVector(dir)
	}
	return c.radialNormal(p)
}

// Volume implements Solid.
func (c Cylinder) Volume() float64 {
	return math.Pi * c.Diameter * c.Diameter / 4 * c.Length
}

// Area implements Solid.
func (c Cylinder) Area() float64 {
	return math.Pi*c.Diameter*c.Length + math.Pi*c.Diameter*c.Diameter/2
}

// FacingAreas implements FacingAreaSolid: the flat ends face along the axis;
// the curved side splits into four quarters, one around each other direction.
func (c Cylinder) FacingAreas() (facing [6]float64, rest float64) {
	for d := range facing {
		if d/2 == c.Axis {
			facing[d] = math.Pi * c.Diameter * c.Diameter / 4
		} else {
			facing[d] = math.Pi * c.Diameter * c.Length / 4
		}
	}
	return facing, 0
}

// Validate reports sizes that are not positive lengths and an unknown axis.
func (c Cylinder) Validate() error {
	var errs []error
	errs = append(errs, checkLength("Cylinder.Diameter", c.Diameter), checkLength("Cylinder.Length", c.Length))
	if c.Axis < 0 || c.Axis > 2 {
		errs = append(errs, fmt.Errorf("Cylinder.Axis: must be 0, 1 or 2 (x, y or z), got %d", c.Axis))
	}
	return errors.Join(errs...)
}

// Contains implements Solid.
func (b Box) Contains(p [3]float64) bool {
	for d := range p {
		if math.Abs(p[d]) > b.Size[d]/2 {
			return false
		}
	}
	return true
}

// Bounds implements Solid.
func (b Box) Bounds() (lo, hi [3]float64) {
	hi = scale(b.Size, 0.5)
	return scale(hi, -1), hi
}

// SurfaceNormal implements Solid. Beyond an edge or corner the normal is
// taken along the shortest way out of the box.
func (b Box) SurfaceNormal(p [3]float64) [3]float64 {
	var out, beyond [3]float64
	nearest, anyBeyond := 0, false
	for d := range p {
		out[d] = math.Abs(p[d]) - b.Size[d]/2
		if out[d] > 0 {
			anyBeyond = true
			beyond[d] = math.Copysign(out[d], p[d])
		}
		if out[d] > out[nearest] {
			nearest = d
		}
	}
	if anyBeyond {
		return unit(beyond)
	}
	return axisVector(2*nearest + positiveSide(p[nearest]))
}

// FaceNormal implements FaceNormalSolid: every voxel face of a box stands
// for the box face on the same side.
func (b Box) FaceNormal(_ [3]float64, dir int) [3]float64 { return axisVector(dir) }

// Volume implements Solid.
func (b Box) Volume() float64 { return b.Size[0] * b.Size[1] * b.Size[2] }

// Area implements Solid.
func (b Box) Area() float64 {
	f, _ := b.FacingAreas()
	return f[PlusX] + f[MinusX] + f[PlusY] + f[MinusY] + f[PlusZ] + f[MinusZ]
}

// FacingAreas implements FacingAreaSolid: each face has its own direction.
func (b Box) FacingAreas() (facing [6]float64, rest float64) {
	for d := range facing {
		a := d / 2
		facing[d] = b.Size[(a+1)%3] * b.Size[(a+2)%3]
	}
	return facing, 0
}

// Validate reports edges that are not positive lengths.
func (b Box) Validate() error {
	errs := make([]error, 3)
	for d := range b.Size {
		errs[d] = checkLength(fmt.Sprintf("Box.Size[%d]", d), b.Size[d])
	}
	return errors.Join(errs...)
}

// checkLength reports a length that is not positive and finite.
func checkLength(field string, v float64) error {
	if v > 0 && !math.IsInf(v, 1) {
		return nil
	}
	return fmt.Errorf("%s: must be a positive length in m, got %g", field, v)
}

// positiveSide is 1 for v ≥ 0 and 0 otherwise: the offset from a minus
// direction (MinusX, …) to the one facing v's side.
func positiveSide(v float64) int {
	if v >= 0 {
		return 1
	}
	return 0
}

// axisVector returns the unit vector of direction dir (MinusX … PlusZ).
func axisVector(dir int) [3]float64 {
	var v [3]float64
	v[dir/2] = float64(2*(dir%2) - 1)
	return v
}

func dot(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

func norm(a [3]float64) float64 { return math.Sqrt(dot(a, a)) }

func scale(a [3]float64, f float64) [3]float64 { return [3]float64{a[0] * f, a[1] * f, a[2] * f} }

func add(a, b [3]float64) [3]float64 { return [3]float64{a[0] + b[0], a[1] + b[1], a[2] + b[2]} }

func unit(a [3]float64) [3]float64 { return scale(a, 1/norm(a)) }
