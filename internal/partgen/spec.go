package partgen

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// HubSpecs returns two job specs of the same heat-up of the hub in
// millimetres as the STL test parts: one builds the part from bodies
// (flange and hub cylinders, bore and bolt holes subtracted), the other
// reads hub.stl. Only the part differs, so their results can be compared.
func (h Hub) HubSpecs() (bodies, mesh []byte) {
	num := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	m := func(mm float64) string { return num(mm / 1000) }
	cyl := func(name string, radius, z0, z1, x, y float64, subtract bool) string {
		line := fmt.Sprintf("    - {name: %s, cylinder: {diameter_m: %s, length_m: %s}, place: {translate_m: [%s, %s, %s]}",
			name, m(2*radius), m(z1-z0), m(x), m(y), m((z0+z1)/2))
		if subtract {
			line += ", subtract: true"
		}
		return line + "}\n"
	}
	var parts strings.Builder
	parts.WriteString("  bodies:\n")
	parts.WriteString(cyl("flange", h.FlangeRadius, 0, h.FlangeThickness, 0, 0, false))
	parts.WriteString(cyl("hub", h.HubRadius, h.FlangeThickness, h.Height, 0, 0, false))
	parts.WriteString(cyl("bore", h.BoreRadius, 0, h.Height, 0, 0, true))
	per := h.Segments / h.Bolts
	for b := range h.Bolts {
		a := 2 * math.Pi * float64(b*per) / float64(h.Segments)
		parts.WriteString(cyl(fmt.Sprintf("bolt-hole-%d", b+1), h.BoltHoleRadius, 0, h.FlangeThickness,
			h.BoltCircleRadius*math.Cos(a), h.BoltCircleRadius*math.Sin(a), true))
	}
	// Probes: mid-thickness in the flange between two bolts, and in the
	// middle of the hub's wall.
	between := math.Pi / float64(h.Bolts)
	flange := [3]float64{h.BoltCircleRadius * math.Cos(between), h.BoltCircleRadius * math.Sin(between), h.FlangeThickness / 2}
	wall := [3]float64{(h.BoreRadius + h.HubRadius) / 2, 0, (h.FlangeThickness + h.Height) / 2}
	spec := func(name, part string) []byte {
		return []byte(fmt.Sprintf(`# Written by internal/partgen; hub-bodies.yaml and hub-stl.yaml differ only in the part.
name: %s
part:
%scell_size_m: 0.002
material: {density_kg_m3: 7850, conductivity_w_mk: 45, specific_heat_j_kgk: 480}
initial_c: 20
exposure:
  - {surfaces: all, h_w_m2k: 120, fluid_c: 620}
  - {facing: ["-z"], h_w_m2k: 15, fluid_c: 620}
end_s: 600
probes:
  - {name: flange, at_m: [%s, %s, %s]}
  - {name: hub-wall, at_m: [%s, %s, %s]}
`, name, part, m(flange[0]), m(flange[1]), m(flange[2]), m(wall[0]), m(wall[1]), m(wall[2])))
	}
	return spec("hub-bodies", parts.String()),
		spec("hub-stl", "  bodies:\n    - {name: hub, stl: {file: hub.stl, units: mm}}\n")
}
