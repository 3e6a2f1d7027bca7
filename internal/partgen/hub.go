package partgen

import (
	"fmt"
	"math"
)

// Hub is a flanged hub: a flange disc from z = 0 to FlangeThickness with
// bolt holes through it, a hub cylinder on top of it up to Height, and a
// bore through both. All circles are regular polygons inscribed in them:
// Segments corners for the bore, hub and flange circles, HoleSegments for
// each bolt hole.
type Hub struct {
	BoreRadius, HubRadius, FlangeRadius float64
	FlangeThickness, Height             float64
	BoltCircleRadius, BoltHoleRadius    float64
	Bolts, Segments, HoleSegments       int
	// BlockCells is the half-width, in angular segments, of the patch of
	// flange that surrounds each bolt hole; BlockInner and BlockOuter are
	// its radii.
	BlockCells             int
	BlockInner, BlockOuter float64
}

// StandardHub is the hub of the shared test parts, in millimetres.
func StandardHub() Hub {
	return Hub{
		BoreRadius: 15, HubRadius: 30, FlangeRadius: 60,
		FlangeThickness: 12, Height: 50,
		BoltCircleRadius: 45, BoltHoleRadius: 5,
		Bolts: 6, Segments: 96, HoleSegments: 24,
		BlockCells: 3, BlockInner: 37, BlockOuter: 53,
	}
}

func (h Hub) validate() error {
	ok := 0 < h.BoreRadius && h.BoreRadius < h.HubRadius && h.HubRadius < h.BlockInner &&
		h.BlockInner < h.BoltCircleRadius-h.BoltHoleRadius && h.BoltCircleRadius+h.BoltHoleRadius < h.BlockOuter &&
		h.BlockOuter < h.FlangeRadius && 0 < h.FlangeThickness && h.FlangeThickness < h.Height &&
		h.Bolts > 0 && h.Segments%h.Bolts == 0 && 2*h.BlockCells < h.Segments/h.Bolts && h.HoleSegments >= 3 &&
		h.BoltCircleRadius*math.Sin(2*math.Pi*float64(h.BlockCells)/float64(h.Segments)) > h.BoltHoleRadius
	if !ok {
		return fmt.Errorf("partgen: hub dimensions do not nest: %+v", h)
	}
	return nil
}

// Triangles builds the hub's closed surface.
func (h Hub) Triangles() ([]Triangle, error) {
	if err := h.validate(); err != nil {
		return nil, err
	}
	n := h.Segments
	var inner, outer [][3]point2 // inside and outside the hub radius
	var out []Triangle
	for i := range n {
		inner = append(inner, ring(h.BoreRadius, h.HubRadius, i, n)...)
		outer = append(outer, ring(h.HubRadius, h.BlockInner, i, n)...)
		outer = append(outer, ring(h.BlockOuter, h.FlangeRadius, i, n)...)
		out = append(out, wall(polar(h.BoreRadius, i+1, n), polar(h.BoreRadius, i, n), 0, h.Height)...)
		out = append(out, wall(polar(h.HubRadius, i, n), polar(h.HubRadius, i+1, n), h.FlangeThickness, h.Height)...)
		out = append(out, wall(polar(h.FlangeRadius, i, n), polar(h.FlangeRadius, i+1, n), 0, h.FlangeThickness)...)
	}
	// Between the block radii: plain cells, except a patch about each
	// bolt hole where the hole is zipped to the patch's outline.
	per := n / h.Bolts
	for i := range n {
		if d := (i + per/2) % per; d >= per/2-h.BlockCells && d < per/2+h.BlockCells {
			continue // inside a bolt patch
		}
		outer = append(outer, ring(h.BlockInner, h.BoltCircleRadius, i, n)...)
		outer = append(outer, ring(h.BoltCircleRadius, h.BlockOuter, i, n)...)
	}
	for b := range h.Bolts {
		patch, hole := h.boltPatch(b * per)
		outer = append(outer, zip(patch, hole)...)
		for j := range hole {
			out = append(out, wall(hole[(j+1)%len(hole)], hole[j], 0, h.FlangeThickness)...)
		}
	}
	out = append(out, face(inner, h.Height, true)...)
	out = append(out, face(outer, h.FlangeThickness, true)...)
	out = append(out, face(inner, 0, false)...)
	return append(out, face(outer, 0, false)...), nil
}

// boltPatch returns the counter-clockwise outline of the patch of flange
// about the bolt at angle index centre, and the hole polygon, also
// counter-clockwise, starting at the corner facing outward.
func (h Hub) boltPatch(centre int) (patch, hole []point2) {
	n, i0, i1 := h.Segments, centre-h.BlockCells, centre+h.BlockCells
	radii := []float64{h.BlockInner, h.BoltCircleRadius, h.BlockOuter}
	for _, r := range radii[:2] {
		patch = append(patch, polar(r, i0, n))
	}
	for i := i0; i < i1; i++ {
		patch = append(patch, polar(h.BlockOuter, i, n))
	}
	for _, r := range []float64{h.BlockOuter, h.BoltCircleRadius} {
		patch = append(patch, polar(r, i1, n))
	}
	for i := i1; i > i0; i-- {
		patch = append(patch, polar(h.BlockInner, i, n))
	}
	c := polar(h.BoltCircleRadius, centre, n)
	a0 := 2 * math.Pi * float64(centre) / float64(n)
	for j := range h.HoleSegments {
		a := a0 + 2*math.Pi*float64(j)/float64(h.HoleSegments)
		hole = append(hole, point2{c[0] + h.BoltHoleRadius*math.Cos(a), c[1] + h.BoltHoleRadius*math.Sin(a)})
	}
	return patch, hole
}

// zip triangulates the region between a counter-clockwise outline and a
// counter-clockwise hole inside it, both star-shaped about the hole's
// centre, by walking both in angle order and always advancing the one
// whose next corner comes first.
func zip(outline, hole []point2) [][3]point2 {
	var c point2
	for _, p := range hole {
		c[0], c[1] = c[0]+p[0]/float64(len(hole)), c[1]+p[1]/float64(len(hole))
	}
	angles := func(ps []point2, from float64) []float64 {
		out := make([]float64, len(ps)+1)
		for i, p := range ps {
			a := math.Atan2(p[1]-c[1], p[0]-c[0])
			for a < from {
				a += 2 * math.Pi
			}
			for a >= from+2*math.Pi {
				a -= 2 * math.Pi
			}
			out[i] = a
		}
		return out
	}
	// Start both walks at the hole's first corner's angle.
	start := math.Atan2(hole[0][1]-c[1], hole[0][0]-c[0])
	ao := angles(outline, start)
	first := 0
	for i := range outline {
		if ao[i] < ao[first] {
			first = i
		}
	}
	outline = append(outline[first:len(outline):len(outline)], outline[:first]...)
	ao = angles(outline, start)
	ah := angles(hole, start)
	ao[len(outline)], ah[len(hole)] = start+2*math.Pi+1e-9, start+2*math.Pi
	var out [][3]point2
	i, j := 0, 0
	for i < len(outline) || j < len(hole) {
		oi, hj := outline[i%len(outline)], hole[j%len(hole)]
		if j == len(hole) || (i < len(outline) && ao[i+1] < ah[j+1]) {
			out = append(out, [3]point2{hj, oi, outline[(i+1)%len(outline)]})
			i++
		} else {
			out = append(out, [3]point2{hj, oi, hole[(j+1)%len(hole)]})
			j++
		}
	}
	return out
}
