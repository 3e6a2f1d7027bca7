package jobspec

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"unicode"

	"google.golang.org/protobuf/reflect/protoreflect"

	"soakfarm/mesh"
	soakv1 "soakfarm/proto/soak/v1"
)

// AbsoluteZeroC is absolute zero in degrees Celsius; every temperature in a
// spec must lie above it.
const AbsoluteZeroC = -273.15

// Bounds of cells_across: below the minimum a part is a few blocks and the
// result meaningless; the maximum only guards against typing slips, since
// the memory limit binds well before it on any solid shape.
const (
	MinCellsAcross = 4
	MaxCellsAcross = 2000
)

// maxTextLen bounds names, which end up in file headers and logs.
const maxTextLen = 200

// Limits are the resources a job may ask for. A zero field means no limit.
type Limits struct {
	// MaxMemoryBytes bounds the grid's memory estimate (mesh.EstimateBytes).
	MaxMemoryBytes int64
	// MaxCells bounds the number of cells of the grid box.
	MaxCells int64
	// MaxSteps bounds the fewest time steps the spec implies
	// (end_s / time_stepping.max_step_s).
	MaxSteps int64
}

// DefaultLimits are the limits of `soak run` and the farm unless raised.
func DefaultLimits() Limits {
	return Limits{
		MaxMemoryBytes: 4 << 30,
		MaxCells:       64_000_000,
		MaxSteps:       1_000_000,
	}
}

// Problem is one thing wrong with a spec.
type Problem struct {
	// Field is the path of the key: "exposure[1].emissivity",
	// "material.conductivity_table[2].temp_c"; "" for the spec as a whole.
	Field string
	// Value is the offending value as text, "" when none applies (a
	// missing key, a clash between keys).
	Value string
	// Message says what is wrong, without the field or the value.
	Message string
	// Line is the line of the spec file the problem is on, 0 when unknown
	// (Validate works on the decoded spec and has no lines).
	Line int
}

// String formats the problem as one line:
// "exposure[1].emissivity: must be in [0, 1], got 1.4".
func (p Problem) String() string {
	var b strings.Builder
	if p.Line > 0 {
		fmt.Fprintf(&b, "line %d: ", p.Line)
	}
	if p.Field != "" {
		b.WriteString(p.Field)
		b.WriteString(": ")
	}
	b.WriteString(p.Message)
	if p.Value != "" {
		b.WriteString(", got ")
		b.WriteString(p.Value)
	}
	return b.String()
}

// ValidationError lists every problem found in a spec.
type ValidationError struct {
	Problems []Problem
}

// Error joins the problems, one per line.
func (e *ValidationError) Error() string {
	lines := make([]string, len(e.Problems))
	for i, p := range e.Problems {
		lines[i] = p.String()
	}
	return strings.Join(lines, "\n")
}

// Validate checks the spec's values and reports every problem at once as a
// *ValidationError; it returns nil for a spec the pipeline can run. Whether
// each probe lies in the part is checked against the analytic shape grown
// by half a cell; the pipeline checks the voxel mesh itself.
func Validate(spec *soakv1.JobSpec, lim Limits) error {
	c := &checker{}
	if spec == nil {
		c.add("", "", "no spec")
		return c.err()
	}
	c.finite(spec.ProtoReflect(), "")
	c.text("name", spec.GetName())
	c.part(spec)
	c.grid(spec, lim)
	if spec.GetMaterial() != nil || needsTopMaterial(spec.GetPart()) {
		c.material("material", spec.GetMaterial())
	}
	c.materials(spec)
	if spec.InitialC == nil {
		c.add("initial_c", "", "required: the part's uniform starting temperature, °C")
	} else {
		c.temperature("initial_c", *spec.InitialC)
	}
	end := spec.GetEndS()
	switch {
	case end == 0:
		c.add("end_s", "", "required: the simulated time to stop at, s")
	case finite(end) && end < 0:
		c.add("end_s", num(end), "must be greater than 0")
	}
	for i, e := range spec.GetExposure() {
		c.exposure(fmt.Sprintf("exposure[%d]", i), e, end)
		c.selection(fmt.Sprintf("exposure[%d]", i), e, spec.GetPart())
	}
	probes := c.probes(spec)
	c.milestones(spec.GetMilestones(), probes)
	c.timeStepping(spec.GetTimeStepping(), end, lim)
	for i, t := range spec.GetSnapshotsS() {
		if finite(t) && finite(end) && (t < 0 || t > end) {
			c.add(fmt.Sprintf("snapshots_s[%d]", i), num(t), fmt.Sprintf("must be in [0, end_s] = [0, %s] s", num(end)))
		}
	}
	return c.err()
}

// checker collects problems. Rule checks skip NaN and infinities, which
// finite reports once for every field.
type checker struct {
	problems []Problem
}

func (c *checker) add(field, value, msg string) {
	c.problems = append(c.problems, Problem{Field: field, Value: value, Message: msg})
}

func (c *checker) err() error {
	if len(c.problems) == 0 {
		return nil
	}
	return &ValidationError{Problems: c.problems}
}

// finite reports every NaN or infinite number in m and its sub-messages,
// so that no field, present or future, lets one through.
func (c *checker) finite(m protoreflect.Message, path string) {
	fields := m.Descriptor().Fields()
	for i := range fields.Len() {
		fd := fields.Get(i)
		if !m.Has(fd) {
			continue
		}
		fpath := join(path, string(fd.Name()))
		if fd.IsMap() {
			m.Get(fd).Map().Range(func(k protoreflect.MapKey, v protoreflect.Value) bool {
				c.finiteValue(fd.MapValue(), v, fpath+"."+k.String())
				return true
			})
			continue
		}
		if !fd.IsList() {
			c.finiteValue(fd, m.Get(fd), fpath)
			continue
		}
		list := m.Get(fd).List()
		for j := range list.Len() {
			c.finiteValue(fd, list.Get(j), fmt.Sprintf("%s[%d]", fpath, j))
		}
	}
}

func (c *checker) finiteValue(fd protoreflect.FieldDescriptor, v protoreflect.Value, path string) {
	switch fd.Kind() {
	case protoreflect.MessageKind:
		c.finite(v.Message(), path)
	case protoreflect.DoubleKind, protoreflect.FloatKind:
		if f := v.Float(); !finite(f) {
			c.add(path, num(f), "must be a finite number")
		}
	}
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// num formats a number as briefly as it round-trips.
func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

func (c *checker) positive(path string, v float64) {
	if finite(v) && v <= 0 {
		c.add(path, num(v), "must be greater than 0")
	}
}

func (c *checker) nonNegative(path string, v float64) {
	if finite(v) && v < 0 {
		c.add(path, num(v), "must be 0 or more")
	}
}

func (c *checker) temperature(path string, v float64) {
	if finite(v) && v <= AbsoluteZeroC {
		c.add(path, num(v), "must be above absolute zero, -273.15 °C")
	}
}

// text checks free text that ends up in reports and file headers.
func (c *checker) text(path, s string) {
	switch {
	case s != "" && strings.TrimSpace(s) == "":
		c.add(path, strconv.Quote(s), "must not be only spaces")
	case len(s) > maxTextLen:
		c.add(path, "", fmt.Sprintf("must be at most %d bytes long, got %d", maxTextLen, len(s)))
	case strings.IndexFunc(s, unicode.IsControl) >= 0:
		c.add(path, strconv.Quote(s), "must not hold control characters (line breaks, tabs)")
	}
}

// label checks the name of a probe or milestone: required, unique within
// its list (seen maps each name to its field path).
func (c *checker) label(path, name string, seen map[string]string) {
	if strings.TrimSpace(name) == "" {
		c.add(path, "", "required: a name")
		return
	}
	c.text(path, name)
	if first, dup := seen[name]; dup {
		c.add(path, strconv.Quote(name), "name already used by "+first)
		return
	}
	seen[name] = path
}

func (c *checker) part(spec *soakv1.JobSpec) {
	p := spec.GetPart()
	if len(p.GetBodies()) > 0 {
		if p.GetShape() != nil {
			c.add("part.bodies", "", "set either one shape (sphere, cylinder, box) or bodies, not both")
		}
		c.bodies(spec)
		return
	}
	if !c.shape("part", p.GetSphere(), p.GetCylinder(), p.GetBox()) {
		c.add("part", "", "required: one shape, sphere, cylinder or box, or a list of bodies")
	}
}

// shape checks the one primitive set among sphere, cylinder and box; it
// reports false when none is set.
func (c *checker) shape(path string, sphere *soakv1.Sphere, cyl *soakv1.Cylinder, box *soakv1.Box) bool {
	switch {
	case sphere != nil:
		c.positive(path+".sphere.diameter_m", sphere.GetDiameterM())
	case cyl != nil:
		c.positive(path+".cylinder.diameter_m", cyl.GetDiameterM())
		c.positive(path+".cylinder.length_m", cyl.GetLengthM())
		if axis := cyl.GetAxis(); AxisIndex(axis) < 0 {
			c.add(path+".cylinder.axis", strconv.Quote(axis), `must be "x", "y" or "z"`)
		}
	case box != nil:
		sizes := box.GetSizeM()
		if len(sizes) != 3 {
			c.add(path+".box.size_m", strconv.Itoa(len(sizes))+" lengths", "must hold 3 lengths (x, y, z), m")
		}
		for i, v := range sizes {
			c.positive(fmt.Sprintf("%s.box.size_m[%d]", path, i), v)
		}
	default:
		return false
	}
	return true
}

// AxisIndex returns 0, 1 or 2 for a cylinder axis "x", "y" or "z" ("" is
// "z"), and -1 for anything else.
func AxisIndex(axis string) int {
	switch axis {
	case "x":
		return 0
	case "y":
		return 1
	case "", "z":
		return 2
	}
	return -1
}

// Extents returns the part's bounding box edge lengths along x, y and z, m,
// and false when they are unknown: the shape is missing or its sizes are
// not positive and finite, or a body is an STL file whose data the spec
// does not carry.
func Extents(p *soakv1.Part) ([3]float64, bool) {
	lo, hi, ok := Bounds(p)
	return [3]float64{hi[0] - lo[0], hi[1] - lo[1], hi[2] - lo[2]}, ok
}

// Bounds returns the part's bounding box, m, as Extents.
func Bounds(p *soakv1.Part) (lo, hi [3]float64, ok bool) {
	var s mesh.Solid
	var err error
	if len(p.GetBodies()) > 0 {
		s, err = mesh.AssemblyFromSpec(p, func(string) (uint8, bool) { return 1, true }, stlBounds)
	} else {
		s, err = mesh.SolidFromSpec(p)
	}
	if err != nil {
		return lo, hi, false
	}
	lo, hi = s.Bounds()
	for d := range 3 {
		if e := hi[d] - lo[d]; !finite(e) || e <= 0 {
			return lo, hi, false
		}
	}
	return lo, hi, true
}

// CellSize returns the edge of the grid's cubic cells, m: cell_size_m, or
// the part's smallest extent divided by cells_across. It returns 0 when
// neither gives a positive finite size.
func CellSize(spec *soakv1.JobSpec) float64 {
	h := spec.GetCellSizeM()
	if spec.GetCellSizeM() == 0 && spec.GetCellsAcross() > 0 {
		if ext, ok := Extents(spec.GetPart()); ok {
			h = min(ext[0], ext[1], ext[2]) / float64(spec.GetCellsAcross())
		}
	}
	if !finite(h) || h <= 0 {
		return 0
	}
	return h
}

func (c *checker) grid(spec *soakv1.JobSpec, lim Limits) {
	var field, value string
	switch across, size := spec.CellsAcross, spec.CellSizeM; {
	case across == nil && size == nil:
		c.add("cells_across", "", "set one of cells_across and cell_size_m")
		return
	case across != nil && size != nil:
		c.add("cell_size_m", num(*size), "set only one of cells_across and cell_size_m")
		return
	case across != nil:
		field, value = "cells_across", strconv.FormatUint(uint64(*across), 10)
		if *across < MinCellsAcross || *across > MaxCellsAcross {
			c.add(field, value, fmt.Sprintf("must be from %d to %d", MinCellsAcross, MaxCellsAcross))
			return
		}
	default:
		field, value = "cell_size_m", num(*size)
		c.positive(field, *size)
	}
	ext, ok := Extents(spec.GetPart())
	h := CellSize(spec)
	if !ok || h == 0 {
		return
	}
	smallest := min(ext[0], ext[1], ext[2])
	if across := smallest / h; across < MinCellsAcross*(1-1e-9) {
		c.add(field, value, fmt.Sprintf("leaves %.3g cells across the part's smallest extent (%s m); need at least %d", across, num(smallest), MinCellsAcross))
		return
	}
	// Cells of the grid box around the part; the rounding slack keeps an
	// exact multiple (cells_across on the smallest extent) from gaining a
	// cell to round-off.
	var n [3]float64
	for i, e := range ext {
		n[i] = math.Ceil(e / h * (1 - 1e-12))
	}
	cells := n[0] * n[1] * n[2]
	// The setting is in the message rather than in Value: it is not wrong
	// by itself, only too fine for the limits.
	grid := fmt.Sprintf("%s %s makes a grid of %.0f × %.0f × %.0f = %s cells", field, value, n[0], n[1], n[2], countText(cells))
	if spec.GetRefine() {
		// Refining solves again at half the cell size: eight times the cells.
		cells *= 8
		grid = fmt.Sprintf("%s %s with refine: true makes a second grid of %.0f × %.0f × %.0f = %s cells", field, value, 2*n[0], 2*n[1], 2*n[2], countText(cells))
	}
	const coarsen = "coarsen the grid (fewer cells_across or a larger cell_size_m)"
	if lim.MaxCells > 0 && cells > float64(lim.MaxCells) {
		c.add(field, "", fmt.Sprintf("%s, over the limit of %s cells; %s", grid, countText(float64(lim.MaxCells)), coarsen))
	}
	// The mesh's own estimate (grid and solver arrays); past what an int64
	// holds the grid is hopeless anyway, so the plain product stands in.
	bytes := cells * 1e3
	if cells < 1<<40 {
		bytes = float64(mesh.EstimateBytes([3]int{int(n[0]), int(n[1]), int(n[2])}))
	}
	if lim.MaxMemoryBytes > 0 && bytes > float64(lim.MaxMemoryBytes) {
		c.add(field, "", fmt.Sprintf("%s needing about %s, over the %s memory limit; %s or raise the limit with the --max-memory flag of soak run",
			grid, bytesText(bytes), bytesText(float64(lim.MaxMemoryBytes)), coarsen))
	}
}

func countText(n float64) string {
	switch {
	case n < 1e6:
		return fmt.Sprintf("%.0f", n)
	case n < 1e8:
		return fmt.Sprintf("%.3g M", n/1e6)
	}
	return fmt.Sprintf("%.0f M", n/1e6)
}

func bytesText(b float64) string {
	if b < 1<<30 {
		return fmt.Sprintf("%.0f MiB", b/(1<<20))
	}
	return fmt.Sprintf("%.1f GiB", b/(1<<30))
}

func (c *checker) material(path string, m *soakv1.Material) {
	if m == nil {
		c.add(path, "", "required: density, conductivity and specific heat")
		return
	}
	if d := m.GetDensityKgM3(); d == 0 {
		c.add(path+".density_kg_m3", "", "required: density, kg/m³")
	} else {
		c.positive(path+".density_kg_m3", d)
	}
	c.property(path, "conductivity_w_mk", m.ConductivityWMk, "conductivity_table", m.GetConductivityTable())
	c.property(path, "specific_heat_j_kgk", m.SpecificHeatJKgk, "specific_heat_table", m.GetSpecificHeatTable())
}

// property checks a material property given as a constant or a table.
func (c *checker) property(mpath, constName string, constant *float64, tableName string, table []*soakv1.TablePoint) {
	switch {
	case constant == nil && len(table) == 0:
		c.add(mpath+"."+constName, "", fmt.Sprintf("set one of %s and %s", constName, tableName))
	case constant != nil && len(table) > 0:
		c.add(mpath+"."+tableName, "", fmt.Sprintf("set only one of %s and %s", constName, tableName))
	case constant != nil:
		c.positive(mpath+"."+constName, *constant)
	default:
		for i, p := range table {
			path := fmt.Sprintf("%s.%s[%d]", mpath, tableName, i)
			t := p.GetTempC()
			c.temperature(path+".temp_c", t)
			if prev := table[max(i-1, 0)].GetTempC(); i > 0 && finite(t) && finite(prev) && t <= prev {
				c.add(path+".temp_c", num(t), fmt.Sprintf("must be above the previous point's %s °C (temperatures strictly increasing)", num(prev)))
			}
			c.positive(path+".value", p.GetValue())
		}
	}
}

// exposureState is an exposure's values in force at some time, for the
// checks that depend on earlier values of its schedule.
type exposureState struct {
	h, emissivity         float64
	hasFluid, hasSurround bool
	// set once the matching problem is reported, so a schedule does not
	// repeat it at every change
	fluidReported, surroundReported bool
}

func (c *checker) exposure(path string, e *soakv1.Exposure, end float64) {
	others := len(e.GetSolids()) > 0 || len(e.GetBodies()) > 0 || e.GetRegion() != nil
	switch surfaces, facing := e.GetSurfaces(), e.GetFacing(); {
	case surfaces == "" && len(facing) == 0 && !others:
		c.add(path, "", "set surfaces, or one or more of facing, solids, bodies and region")
	case surfaces != "" && (len(facing) > 0 || others):
		c.add(path+".surfaces", strconv.Quote(surfaces), "set either surfaces or facing, solids, bodies and region, not both")
	case surfaces != "":
		if surfaces != "all" {
			c.add(path+".surfaces", strconv.Quote(surfaces), `must be "all" (pick sides with facing)`)
		}
	default:
		seen := map[string]bool{}
		for j, d := range facing {
			fpath := fmt.Sprintf("%s.facing[%d]", path, j)
			switch {
			case !validDirection(d):
				c.add(fpath, strconv.Quote(d), "must be one of +x, -x, +y, -y, +z, -z")
			case seen[d]:
				c.add(fpath, strconv.Quote(d), "direction given twice")
			}
			seen[d] = true
		}
	}

	st := exposureState{h: e.GetHWM2K(), emissivity: e.GetEmissivity(), hasFluid: e.FluidC != nil, hasSurround: e.SurroundingsC != nil}
	// A NaN counts as exchanging heat: it is reported already.
	exchanges := st.h != 0 || st.emissivity != 0
	c.nonNegative(path+".h_w_m2k", st.h)
	c.exposureValues(path, e.FluidC, e.Emissivity, e.SurroundingsC)
	c.needs(path, &st, "")

	var prevAt float64
	hasPrev := false
	for j, ch := range e.GetSchedule() {
		spath := fmt.Sprintf("%s.schedule[%d]", path, j)
		at := ch.GetAtS()
		if finite(at) {
			switch {
			case at <= 0:
				c.add(spath+".at_s", num(at), "must be greater than 0 (the exposure's own values apply from time 0)")
			case hasPrev && at <= prevAt:
				c.add(spath+".at_s", num(at), fmt.Sprintf("must be later than the previous change, at %s s", num(prevAt)))
			case finite(end) && end > 0 && at >= end:
				c.add(spath+".at_s", num(at), fmt.Sprintf("must be before end_s, %s s", num(end)))
			}
			prevAt, hasPrev = at, true
		}
		if ch.HWM2K == nil && ch.FluidC == nil && ch.Emissivity == nil && ch.SurroundingsC == nil {
			c.add(spath, "", "changes nothing: set at least one of h_w_m2k, fluid_c, emissivity, surroundings_c")
		}
		if ch.HWM2K != nil {
			st.h = *ch.HWM2K
			exchanges = exchanges || st.h != 0
			c.nonNegative(spath+".h_w_m2k", st.h)
		}
		if ch.Emissivity != nil {
			st.emissivity = *ch.Emissivity
			exchanges = exchanges || st.emissivity != 0
		}
		st.hasFluid = st.hasFluid || ch.FluidC != nil
		st.hasSurround = st.hasSurround || ch.SurroundingsC != nil
		c.exposureValues(spath, ch.FluidC, ch.Emissivity, ch.SurroundingsC)
		c.needs(spath, &st, " (not set at this change or before)")
	}
	if !exchanges {
		c.add(path, "", "exchanges no heat: h_w_m2k is 0 and emissivity is unset or 0 throughout; faces without an exposure are insulated already")
	}
}

// exposureValues checks the values an exposure and its changes share.
func (c *checker) exposureValues(path string, fluid, emissivity, surround *float64) {
	if fluid != nil {
		c.temperature(path+".fluid_c", *fluid)
	}
	if emissivity != nil && finite(*emissivity) && (*emissivity < 0 || *emissivity > 1) {
		c.add(path+".emissivity", num(*emissivity), "must be in [0, 1]")
	}
	if surround != nil {
		c.temperature(path+".surroundings_c", *surround)
	}
}

// needs reports a temperature the exposure's values in force call for but
// nobody has set: the fluid's once there is convection, the surroundings'
// (which default to the fluid's) once there is radiation.
func (c *checker) needs(path string, st *exposureState, where string) {
	if st.h > 0 && !st.hasFluid && !st.fluidReported {
		c.add(path+".fluid_c", "", "required when h_w_m2k > 0"+where)
		st.fluidReported = true
	}
	if st.emissivity > 0 && !st.hasSurround && !st.hasFluid && !st.surroundReported {
		c.add(path+".surroundings_c", "", "required when emissivity > 0 and no fluid_c is set"+where)
		st.surroundReported = true
	}
}

func validDirection(d string) bool {
	switch d {
	case "+x", "-x", "+y", "-y", "+z", "-z":
		return true
	}
	return false
}

// probes checks the probes and returns their names.
func (c *checker) probes(spec *soakv1.JobSpec) map[string]string {
	names := map[string]string{}
	lo, hi, shapeOK := Bounds(spec.GetPart())
	tolerance := CellSize(spec) / 2
	for i, p := range spec.GetProbes() {
		path := fmt.Sprintf("probes[%d]", i)
		c.label(path+".name", p.GetName(), names)
		if strings.ContainsAny(p.GetName(), ",\"") {
			c.add(path+".name", strconv.Quote(p.GetName()), "must not hold commas or double quotes: it heads a column of probes.csv")
		}
		at := p.GetAtM()
		if len(at) != 3 {
			c.add(path+".at_m", strconv.Itoa(len(at))+" numbers", "must hold 3 coordinates (x, y, z), m")
			continue
		}
		point := [3]float64(at)
		if !shapeOK || !finite(point[0]) || !finite(point[1]) || !finite(point[2]) {
			continue
		}
		if !inside(spec.GetPart(), lo, hi, point, tolerance) {
			where := "the part (centred on the origin)"
			if len(spec.GetPart().GetBodies()) > 0 {
				where = fmt.Sprintf("the box around the part's bodies, (%s, %s, %s) to (%s, %s, %s) m,",
					num(lo[0]), num(lo[1]), num(lo[2]), num(hi[0]), num(hi[1]), num(hi[2]))
			}
			c.add(path+".at_m", fmt.Sprintf("(%s, %s, %s)", num(point[0]), num(point[1]), num(point[2])),
				fmt.Sprintf("must lie in %s or within half a cell, %s m, of it", where, num(tolerance)))
		}
	}
	return names
}

// inside reports whether p lies in the part, grown by tolerance, whose
// bounding box is lo to hi. For a part of bodies only the box is checked.
func inside(part *soakv1.Part, lo, hi, p [3]float64, tolerance float64) bool {
	for i := range 3 {
		if p[i] < lo[i]-tolerance || p[i] > hi[i]+tolerance {
			return false
		}
	}
	switch s := part.GetShape().(type) {
	case *soakv1.Part_Sphere:
		r := s.Sphere.GetDiameterM()/2 + tolerance
		return p[0]*p[0]+p[1]*p[1]+p[2]*p[2] <= r*r
	case *soakv1.Part_Cylinder:
		axis := AxisIndex(s.Cylinder.GetAxis())
		r := s.Cylinder.GetDiameterM()/2 + tolerance
		radial := 0.0
		for i := range 3 {
			if i != axis {
				radial += p[i] * p[i]
			}
		}
		return radial <= r*r
	}
	return true // a box is its bounding box
}

func (c *checker) milestones(milestones []*soakv1.Milestone, probes map[string]string) {
	names := map[string]string{}
	for i, m := range milestones {
		path := fmt.Sprintf("milestones[%d]", i)
		c.label(path+".name", m.GetName(), names)
		byProbe := m.GetProbe() != "" || m.ReachesC != nil
		byEnergy := m.EnergyFraction != nil
		switch {
		case byProbe && byEnergy:
			c.add(path, "", "set either probe with reaches_c, or energy_fraction, not both")
		case byEnergy:
			if f := *m.EnergyFraction; finite(f) && (f <= 0 || f >= 1) {
				c.add(path+".energy_fraction", num(f), "must be between 0 and 1, both excluded")
			}
		case !byProbe:
			c.add(path, "", "set probe with reaches_c, or energy_fraction")
		default:
			if m.GetProbe() == "" {
				c.add(path+".probe", "", "required with reaches_c")
			} else if _, ok := probes[m.GetProbe()]; !ok {
				c.add(path+".probe", strconv.Quote(m.GetProbe()), "no probe has this name")
			}
			if m.ReachesC == nil {
				c.add(path+".reaches_c", "", "required with probe")
			} else {
				c.temperature(path+".reaches_c", *m.ReachesC)
			}
		}
	}
}

func (c *checker) timeStepping(ts *soakv1.TimeStepping, end float64, lim Limits) {
	if ts == nil {
		return
	}
	switch ts.GetScheme() {
	case "", "backward-euler", "bdf2":
	default:
		c.add("time_stepping.scheme", strconv.Quote(ts.GetScheme()), `must be "backward-euler" or "bdf2"`)
	}
	if ts.MaxChangeK != nil {
		c.positive("time_stepping.max_change_k", *ts.MaxChangeK)
	}
	if ts.FirstStepS != nil {
		c.positive("time_stepping.first_step_s", *ts.FirstStepS)
	}
	if ts.MaxStepS == nil {
		return
	}
	maxStep := *ts.MaxStepS
	c.positive("time_stepping.max_step_s", maxStep)
	if !finite(maxStep) || maxStep <= 0 {
		return
	}
	if first := ts.GetFirstStepS(); finite(first) && first > maxStep {
		c.add("time_stepping.first_step_s", num(first), fmt.Sprintf("must not exceed max_step_s, %s s", num(maxStep)))
	}
	if steps := end / maxStep; lim.MaxSteps > 0 && finite(end) && steps > float64(lim.MaxSteps) {
		c.add("time_stepping.max_step_s", num(maxStep), fmt.Sprintf("means at least end_s / max_step_s = %.3g steps, over the limit of %d; lengthen max_step_s or shorten end_s", steps, lim.MaxSteps))
	}
}
