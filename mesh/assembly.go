package mesh

import (
	"errors"
	"fmt"
	"math"
)

// maxBodies is the most bodies an assembly may hold: cells record the
// deciding body in a uint16, with 0 for none.
const maxBodies = math.MaxUint16 - 1

// Body is one solid of an Assembly, already placed in the part's frame.
type Body struct {
	Name  string
	Solid Solid
	// Subtract removes the body's cells from the part instead of adding them.
	Subtract bool
	// Region is the material region (1 or more) of the cells a union body
	// adds; a subtracting body has none.
	Region uint8
}

// Assembly is a part built from bodies applied in order: a union body adds
// the cells whose centre it contains, giving them its region (so a later
// body overrides an earlier one where they overlap: an insert in a
// housing), and a subtracting body removes the cells whose centre it
// contains. The faces of the cavity a subtracting body leaves belong to
// that body.
type Assembly struct {
	Bodies []Body
}

// Contains implements Solid.
func (a *Assembly) Contains(p [3]float64) bool {
	inside := false
	for _, b := range a.Bodies {
		if b.Solid.Contains(p) {
			inside = !b.Subtract
		}
	}
	return inside
}

// Bounds implements Solid: the box around the union bodies.
func (a *Assembly) Bounds() (lo, hi [3]float64) {
	lo = [3]float64{math.Inf(1), math.Inf(1), math.Inf(1)}
	hi = [3]float64{math.Inf(-1), math.Inf(-1), math.Inf(-1)}
	for _, b := range a.Bodies {
		if b.Subtract {
			continue
		}
		blo, bhi := b.Solid.Bounds()
		for d := range 3 {
			lo[d], hi[d] = min(lo[d], blo[d]), max(hi[d], bhi[d])
		}
	}
	return lo, hi
}

// SurfaceNormal implements Solid with the normal of the last body that
// contains p (turned inward for a subtracting body), or of the last union
// body when none does. Near a seam between bodies this is one of the
// candidate normals, not necessarily the nearest surface's.
func (a *Assembly) SurfaceNormal(p [3]float64) [3]float64 {
	last := -1
	for i, b := range a.Bodies {
		if b.Solid.Contains(p) || (last < 0 && !b.Subtract) {
			last = i
		}
	}
	if last < 0 {
		return axisVector(PlusZ)
	}
	b := a.Bodies[last]
	n := b.Solid.SurfaceNormal(p)
	if b.Subtract {
		return scale(n, -1)
	}
	return n
}

// Volume implements Solid as the union bodies' volumes less the
// subtracting bodies' volumes. That is the part's volume only when union
// bodies do not overlap one another and each subtracting body lies within
// the union bodies without overlapping another; the voxel model's own
// volume does not depend on it.
func (a *Assembly) Volume() float64 {
	v := 0.0
	for _, b := range a.Bodies {
		if b.Subtract {
			v -= b.Solid.Volume()
		} else {
			v += b.Solid.Volume()
		}
	}
	return v
}

// Area implements Solid as the sum of the bodies' own areas: an upper
// bound of the part's area wherever bodies overlap or cut each other.
// Voxelise reports the surface groups' areas of the assembled part.
func (a *Assembly) Area() float64 {
	s := 0.0
	for _, b := range a.Bodies {
		s += b.Solid.Area()
	}
	return s
}

// Validate reports an empty assembly, one that starts by subtracting, a
// union body without a region, duplicate or missing names and every
// body's own problems, each named by the body's index.
func (a *Assembly) Validate() error {
	var errs []error
	switch {
	case len(a.Bodies) == 0:
		return errors.New("bodies: none given")
	case len(a.Bodies) > maxBodies:
		return fmt.Errorf("bodies: at most %d allowed, got %d", maxBodies, len(a.Bodies))
	case a.Bodies[0].Subtract:
		errs = append(errs, errors.New("bodies[0].subtract: the first body must add to the part; there is nothing to subtract from yet"))
	}
	seen := map[string]int{}
	for i, b := range a.Bodies {
		path := fmt.Sprintf("bodies[%d]", i)
		if b.Name == "" {
			errs = append(errs, fmt.Errorf("%s.name: required", path))
		} else if first, dup := seen[b.Name]; dup {
			errs = append(errs, fmt.Errorf("%s.name: %q already names bodies[%d]", path, b.Name, first))
		} else {
			seen[b.Name] = i
		}
		if b.Solid == nil {
			errs = append(errs, fmt.Errorf("%s.solid: missing", path))
			continue
		}
		if !b.Subtract && b.Region == 0 {
			errs = append(errs, fmt.Errorf("%s.region: a body that adds cells needs a region of 1 or more", path))
		}
		for _, err := range checkSolid(b.Solid) {
			errs = append(errs, fmt.Errorf("%s: %w", path, err))
		}
	}
	return errors.Join(errs...)
}

// bodiesOf returns s's bodies: an assembly's own, or s as the one union
// body "part" of region 1.
func bodiesOf(s Solid) []Body {
	if a, ok := s.(*Assembly); ok {
		return a.Bodies
	}
	return []Body{{Name: "part", Solid: s, Region: 1}}
}
