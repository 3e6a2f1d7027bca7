package solver

import (
	"math"

	"soakfarm/mesh"
)

// testPart describes a part for testGrid, a small voxeliser of the tests'
// own: a cell belongs to the part when its centre is inside.
type testPart struct {
	n      [3]int
	cell   float64
	origin [3]float64
	inside func(p [3]float64) bool
	// normal is the true outward unit normal of the surface near face
	// centre p (the face's axis direction on flat faces).
	normal func(p [3]float64, dir int) [3]float64
	// insulated marks faces on symmetry planes or insulated ends.
	insulated func(p [3]float64, dir int) bool
	// exposedArea, when positive, is the exact area of the exposed surface:
	// the corrected face areas are scaled to sum to it.
	exposedArea float64
}

var faceOffsets = [6][3]int{{-1, 0, 0}, {1, 0, 0}, {0, -1, 0}, {0, 1, 0}, {0, 0, -1}, {0, 0, 1}}

func axisNormal(dir int) [3]float64 {
	var n [3]float64
	n[dir/2] = float64(faceOffsets[dir][dir/2])
	return n
}

// testGrid voxelises a part. Group 0 holds the exposed faces and group 1
// the insulated ones; each face's area is Δx²/(|nx|+|ny|+|nz|) with the
// true normal, so that the staircase carries the true area.
func testGrid(tp testPart) *mesh.Grid {
	g := &mesh.Grid{N: tp.n, CellSize: tp.cell, Origin: tp.origin, Region: make([]uint8, tp.n[0]*tp.n[1]*tp.n[2])}
	for k := range tp.n[2] {
		for j := range tp.n[1] {
			for i := range tp.n[0] {
				if tp.inside(g.Centre(i, j, k)) {
					g.Region[g.Index(i, j, k)] = 1
				}
			}
		}
	}
	exposed := 0.0
	for k := range tp.n[2] {
		for j := range tp.n[1] {
			for i := range tp.n[0] {
				if !g.Inside(i, j, k) {
					continue
				}
				for dir, o := range faceOffsets {
					if g.Inside(i+o[0], j+o[1], k+o[2]) {
						continue
					}
					p := g.Centre(i, j, k)
					for a := range 3 {
						p[a] += 0.5 * tp.cell * float64(o[a])
					}
					f := mesh.BoundaryFace{Cell: int32(g.Index(i, j, k)), Dir: uint8(dir), Area: tp.cell * tp.cell}
					if tp.insulated != nil && tp.insulated(p, dir) {
						f.Group = 1
						f.Normal = axisNormal(dir)
					} else {
						f.Normal = axisNormal(dir)
						if tp.normal != nil {
							f.Normal = tp.normal(p, dir)
						}
						f.Area /= math.Abs(f.Normal[0]) + math.Abs(f.Normal[1]) + math.Abs(f.Normal[2])
						exposed += f.Area
					}
					g.Faces = append(g.Faces, f)
				}
			}
		}
	}
	if tp.exposedArea > 0 {
		scale := tp.exposedArea / exposed
		for i := range g.Faces {
			if g.Faces[i].Group == 0 {
				g.Faces[i].Area *= scale
			}
		}
	}
	g.Groups = []mesh.Group{{Name: "exposed", Exposure: 0}, {Name: "insulated", Exposure: -1}}
	for _, f := range g.Faces {
		gr := &g.Groups[f.Group]
		gr.VoxelArea += tp.cell * tp.cell
		gr.ModelArea += f.Area
	}
	return g
}

// sphereOctant is one eighth of a sphere of radius cells·Δx centred on the
// grid origin; the three symmetry planes are insulated.
func sphereOctant(cells int, radius float64) testPart {
	return testPart{
		n: [3]int{cells, cells, cells}, cell: radius / float64(cells),
		inside:      func(p [3]float64) bool { return norm(p) < radius },
		normal:      func(p [3]float64, _ int) [3]float64 { return scale(p, 1/norm(p)) },
		insulated:   onSymmetryPlanes,
		exposedArea: math.Pi * radius * radius / 2,
	}
}

// onSymmetryPlanes marks the faces on the planes x = 0, y = 0 and z = 0
// of an octant model with its corner at the origin.
func onSymmetryPlanes(_ [3]float64, dir int) bool {
	return dir == mesh.MinusX || dir == mesh.MinusY || dir == mesh.MinusZ
}

// blockOctant is one eighth of a block with half-sizes cells[i]·cell,
// centred on the grid origin.
func blockOctant(cells [3]int, cell float64) testPart {
	return testPart{n: cells, cell: cell, inside: func([3]float64) bool { return true }, insulated: onSymmetryPlanes}
}

// shortCylinderOctant is one eighth of a cylinder of radius `radius` and
// half-length halfLength (a whole number of cells of radius/cells), axis
// along z, centred on the grid origin.
func shortCylinderOctant(cells int, radius, halfLength float64) testPart {
	h := radius / float64(cells)
	return testPart{
		n: [3]int{cells, cells, int(math.Round(halfLength / h))}, cell: h,
		inside: func(p [3]float64) bool { return math.Hypot(p[0], p[1]) < radius },
		normal: func(p [3]float64, dir int) [3]float64 {
			if dir == mesh.PlusZ {
				return axisNormal(dir)
			}
			r := math.Hypot(p[0], p[1])
			return [3]float64{p[0] / r, p[1] / r, 0}
		},
		insulated:   onSymmetryPlanes,
		exposedArea: math.Pi * radius * (radius/4 + halfLength/2),
	}
}

// cylinderSlice is a slice one cell thick of an infinite cylinder of
// radius `radius` resolved with `across` cells over the diameter; its ends
// are insulated.
func cylinderSlice(across int, radius float64) testPart {
	h := 2 * radius / float64(across)
	return testPart{
		n: [3]int{across, across, 1}, cell: h, origin: [3]float64{-radius, -radius, 0},
		inside: func(p [3]float64) bool { return math.Hypot(p[0], p[1]) < radius },
		normal: func(p [3]float64, _ int) [3]float64 {
			r := math.Hypot(p[0], p[1])
			return [3]float64{p[0] / r, p[1] / r, 0}
		},
		insulated:   func(_ [3]float64, dir int) bool { return dir == mesh.MinusZ || dir == mesh.PlusZ },
		exposedArea: 2 * math.Pi * radius * h,
	}
}

// wallColumn is a column of `across` cells through a plane wall of
// half-thickness half; only its two x faces are exposed.
func wallColumn(across int, half float64) testPart {
	h := 2 * half / float64(across)
	return testPart{
		n: [3]int{across, 1, 1}, cell: h, origin: [3]float64{-half, 0, 0},
		inside:    func([3]float64) bool { return true },
		insulated: func(_ [3]float64, dir int) bool { return dir >= mesh.MinusY },
	}
}

func norm(p [3]float64) float64 { return math.Sqrt(p[0]*p[0] + p[1]*p[1] + p[2]*p[2]) }

func scale(p [3]float64, s float64) [3]float64 { return [3]float64{p[0] * s, p[1] * s, p[2] * s} }

// convection returns one exposure phase of pure convection.
func convection(h, fluid float64) Exposure {
	return Exposure{Phases: []ExposurePhase{{H: h, Fluid: fluid}}}
}

var insulatedExposure = Exposure{Phases: []ExposurePhase{{}}}

// constantMaterial is a material with temperature-independent properties.
func constantMaterial(k, rho, cp float64) Material {
	return Material{Density: rho, Conductivity: Constant(k), SpecificHeat: Constant(cp)}
}

// problemFor builds a problem on a test grid with one exposure for group 0.
func problemFor(g *mesh.Grid, m Material, e Exposure, initial, end float64) *Problem {
	return &Problem{
		Grid: g, Materials: []Material{m}, Exposures: []Exposure{e, insulatedExposure},
		Initial: initial, End: end,
	}
}
