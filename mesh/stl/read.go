// Package stl owns parts given as STL triangle meshes: reading binary and
// ASCII STL into a welded mesh in metres, checking the mesh for the defects
// that make a part's inside ambiguous (open edges, non-manifold edges,
// flipped or degenerate triangles, inside-out surfaces), closing small
// holes on request, and the solid Body the voxeliser asks whether a point
// is inside, what the surface normal is, and how large volume and area are.
package stl

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
)

// Limits applied when Options leaves them at zero.
const (
	DefaultMaxTriangles = 10_000_000
	DefaultMaxBytes     = 1 << 30
)

// Sentinel errors, to be checked with errors.Is.
var (
	// ErrFormat marks a file that is not valid STL.
	ErrFormat = errors.New("not a valid STL file")
	// ErrLimit marks a file larger than Options allows.
	ErrLimit = errors.New("STL file exceeds a limit")
	// ErrOptions marks a bad Options value.
	ErrOptions = errors.New("bad STL options")
	// ErrNotSolid marks a mesh that does not bound a solid.
	ErrNotSolid = errors.New("STL mesh does not bound a solid")
)

// Options says how to read an STL file and place it in the part's frame.
type Options struct {
	// Units is the length unit of the file's coordinates: "m", "mm" or
	// "in". STL itself carries no unit. Empty means "m".
	Units string
	// RotateDeg turns the part about the file's origin: first about x,
	// then about y, then about z, in degrees (right-hand rule).
	RotateDeg [3]float64
	// Translate moves the part after the rotation, in Units.
	Translate [3]float64
	// MaxTriangles refuses larger files; 0 means DefaultMaxTriangles.
	MaxTriangles int
	// MaxBytes refuses larger files; 0 means DefaultMaxBytes.
	MaxBytes int64
	// RepairHoles, when positive, closes every hole whose boundary loop
	// has at most this many edges with a fan of triangles.
	RepairHoles int
}

// Mesh is a triangle mesh in metres with welded vertices.
type Mesh struct {
	// Vertices are the distinct corner points, m, after units and placement.
	Vertices [][3]float64
	// Triangles index Vertices; corners run counter-clockwise seen from
	// outside (the STL convention), so the right-hand normal points out.
	Triangles [][3]int32
	// Solid gives, per triangle, its index into SolidNames.
	Solid []uint16
	// SolidNames are the names of the file's solid blocks (ASCII), or the
	// one name of a binary file: its header text, else "body".
	SolidNames []string
	// Format is "ascii" or "binary".
	Format string
	// RepairedHoles and AddedTriangles count what Options.RepairHoles did.
	RepairedHoles  int
	AddedTriangles int

	place placement
}

// Triangle returns the corners of triangle t, m.
func (m *Mesh) Triangle(t int) [3][3]float64 {
	c := m.Triangles[t]
	return [3][3]float64{m.Vertices[c[0]], m.Vertices[c[1]], m.Vertices[c[2]]}
}

// placement maps file coordinates to metres in the part frame and back,
// so that reports can speak in the coordinates the CAD user knows.
type placement struct {
	units string
	scale float64       // metres per file unit
	rot   [3][3]float64 // rotation applied to scaled coordinates
	shift [3]float64    // m, added after rotation
}

var unitScale = map[string]float64{"m": 1, "mm": 1e-3, "in": 0.0254}

// UnitScale returns the metres per file unit of units ("m", "mm" or "in";
// "" is "m"), and false for any other unit.
func UnitScale(units string) (float64, bool) {
	if units == "" {
		units = "m"
	}
	s, ok := unitScale[units]
	return s, ok
}

func (o Options) placement() (placement, error) {
	units := o.Units
	if units == "" {
		units = "m"
	}
	s, ok := unitScale[units]
	if !ok {
		return placement{}, fmt.Errorf("%w: units: must be \"m\", \"mm\" or \"in\", got %q", ErrOptions, o.Units)
	}
	for i, v := range append(o.RotateDeg[:], o.Translate[:]...) {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			field := "rotate_deg"
			if i >= 3 {
				field, i = "translate", i-3
			}
			return placement{}, fmt.Errorf("%w: %s[%d]: must be finite, got %v", ErrOptions, field, i, v)
		}
	}
	if o.MaxTriangles < 0 || o.MaxBytes < 0 || o.RepairHoles < 0 {
		return placement{}, fmt.Errorf("%w: max_triangles, max_bytes and repair_holes must not be negative, got %d, %d, %d",
			ErrOptions, o.MaxTriangles, o.MaxBytes, o.RepairHoles)
	}
	p := placement{units: units, scale: s}
	p.rot = RotationXYZ(o.RotateDeg)
	for i := range 3 {
		p.shift[i] = o.Translate[i] * s
	}
	return p, nil
}

// RotationXYZ returns the rotation matrix Rz·Ry·Rx for angles in degrees
// about x, y and z: the rotation about x is applied first. Exact quarter
// turns give exact zeros.
func RotationXYZ(deg [3]float64) [3][3]float64 {
	rx, ry, rz := deg[0]*math.Pi/180, deg[1]*math.Pi/180, deg[2]*math.Pi/180
	cx, sx := math.Cos(rx), math.Sin(rx)
	cy, sy := math.Cos(ry), math.Sin(ry)
	cz, sz := math.Cos(rz), math.Sin(rz)
	// Exact quarter turns keep axis-aligned parts axis-aligned.
	for _, v := range []*float64{&cx, &sx, &cy, &sy, &cz, &sz} {
		if math.Abs(*v) < 1e-15 {
			*v = 0
		}
	}
	return [3][3]float64{
		{cz * cy, cz*sy*sx - sz*cx, cz*sy*cx + sz*sx},
		{sz * cy, sz*sy*sx + cz*cx, sz*sy*cx - cz*sx},
		{-sy, cy * sx, cy * cx},
	}
}

func (p placement) toPart(v [3]float64) [3]float64 {
	var out [3]float64
	for i := range 3 {
		out[i] = p.scale*(p.rot[i][0]*v[0]+p.rot[i][1]*v[1]+p.rot[i][2]*v[2]) + p.shift[i]
	}
	return out
}

// toFile inverts toPart (the rotation is orthonormal).
func (p placement) toFile(v [3]float64) [3]float64 {
	d := [3]float64{v[0] - p.shift[0], v[1] - p.shift[1], v[2] - p.shift[2]}
	var out [3]float64
	for i := range 3 {
		out[i] = (p.rot[0][i]*d[0] + p.rot[1][i]*d[1] + p.rot[2][i]*d[2]) / p.scale
	}
	return out
}

// rawMesh is what a parser produces: unwelded triangles in file units.
type rawMesh struct {
	tris   [][3][3]float64
	solid  []uint16
	names  []string
	format string
}

// addName returns the index of a solid name, adding it when new.
func (r *rawMesh) addName(name string) (uint16, error) {
	for i, n := range r.names {
		if n == name {
			return uint16(i), nil
		}
	}
	if len(r.names) > math.MaxUint16 {
		return 0, fmt.Errorf("%w: more than %d distinct solid names", ErrFormat, math.MaxUint16+1)
	}
	r.names = append(r.names, name)
	return uint16(len(r.names) - 1), nil
}

// Read reads a binary or ASCII STL file and returns its welded mesh in
// metres, placed as opt says.
func Read(r io.Reader, opt Options) (*Mesh, error) {
	place, err := opt.placement()
	if err != nil {
		return nil, err
	}
	maxBytes := opt.MaxBytes
	if maxBytes == 0 {
		maxBytes = DefaultMaxBytes
	}
	maxTris := opt.MaxTriangles
	if maxTris == 0 {
		maxTris = DefaultMaxTriangles
	}
	data, err := io.ReadAll(io.LimitReader(r, maxBytes+1))
	if err != nil {
		return nil, fmt.Errorf("reading STL: %w", err)
	}
	if int64(len(data)) > maxBytes {
		return nil, fmt.Errorf("%w: file is larger than %d bytes (max_bytes); raise max_bytes to read it", ErrLimit, maxBytes)
	}
	var raw *rawMesh
	if isBinary(data) {
		raw, err = parseBinary(data, maxTris)
	} else {
		raw, err = parseASCII(data, maxTris)
	}
	if err != nil {
		return nil, err
	}
	if len(raw.tris) == 0 {
		return nil, fmt.Errorf("%w: %s STL holds no triangles", ErrFormat, raw.format)
	}
	m := weld(raw, place)
	lo, hi := m.bounds()
	if d := sub(hi, lo); math.IsInf(dot(d, d), 0) {
		return nil, fmt.Errorf("%w: %s STL coordinates span from %v to %v m, too large to compute with", ErrFormat, raw.format, lo, hi)
	}
	if opt.RepairHoles > 0 {
		m.repairHoles(opt.RepairHoles)
	}
	return m, nil
}

// isBinary decides the format. Many binary files also begin with "solid",
// so the exact size 84 + 50·n decides first; only then the text prefix.
func isBinary(data []byte) bool {
	if len(data) >= 84 {
		n := uint64(binary.LittleEndian.Uint32(data[80:84]))
		if 84+50*n == uint64(len(data)) {
			return true
		}
	}
	head := data[:min(len(data), 512)]
	trimmed := bytes.TrimLeft(bytes.TrimPrefix(head, []byte("\xef\xbb\xbf")), " \t\r\n")
	if !bytes.HasPrefix(bytes.ToLower(trimmed), []byte("solid")) {
		return len(data) > 0
	}
	// A "solid" prefix followed by binary bytes is a binary file with a
	// wrong size; report it as such rather than as broken text.
	return bytes.IndexByte(head, 0) >= 0
}

func parseBinary(data []byte, maxTris int) (*rawMesh, error) {
	if len(data) < 84 {
		return nil, fmt.Errorf("%w: file has %d bytes, fewer than a binary STL's 84-byte header, and does not begin with \"solid\" as ASCII STL does", ErrFormat, len(data))
	}
	n := uint64(binary.LittleEndian.Uint32(data[80:84]))
	if n > uint64(maxTris) {
		return nil, fmt.Errorf("%w: binary STL announces %d triangles, more than max_triangles = %d; raise max_triangles to read it", ErrLimit, n, maxTris)
	}
	want := 84 + 50*n
	if got := uint64(len(data)); got < want {
		return nil, fmt.Errorf("%w: binary STL: header announces %d triangles (%d bytes) but the file has %d bytes; triangle %d is cut off (truncated file?)",
			ErrFormat, n, want, got, (got-84)/50)
	} else if got > want {
		return nil, fmt.Errorf("%w: binary STL: header announces %d triangles (%d bytes) but the file has %d bytes (%d extra)",
			ErrFormat, n, want, got, got-want)
	}
	raw := &rawMesh{format: "binary", tris: make([][3][3]float64, n), solid: make([]uint16, n)}
	_, _ = raw.addName(binaryName(data[:80]))
	for t := range raw.tris {
		rec := data[84+50*t:]
		for c := range 3 {
			for k := range 3 {
				off := 12 + 12*c + 4*k // skip the stored normal: the corner order defines it
				v := float64(math.Float32frombits(binary.LittleEndian.Uint32(rec[off:])))
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return nil, fmt.Errorf("%w: binary STL: triangle %d, corner %d: coordinate %c is %v", ErrFormat, t, c+1, "xyz"[k], v)
				}
				raw.tris[t][c][k] = v
			}
		}
	}
	return raw, nil
}

// binaryName takes the header's leading printable text as the solid name.
func binaryName(header []byte) string {
	if i := bytes.IndexByte(header, 0); i >= 0 {
		header = header[:i]
	}
	s := strings.TrimSpace(string(header))
	for _, r := range s {
		if r < 0x20 || r > 0x7e {
			return "body"
		}
	}
	if rest, ok := strings.CutPrefix(s, "solid"); ok && (rest == "" || rest[0] == ' ') {
		s = strings.TrimSpace(rest)
	}
	if s == "" {
		return "body"
	}
	return s
}

// parseASCII reads one or more "solid name … endsolid" blocks.
func parseASCII(data []byte, maxTris int) (*rawMesh, error) {
	raw := &rawMesh{format: "ascii"}
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))
	lineNo := 0
	// next returns the next non-blank line split in words.
	next := func() ([]string, bool) {
		for len(data) > 0 {
			var line []byte
			line, data, _ = bytes.Cut(data, []byte("\n"))
			lineNo++
			if f := strings.Fields(string(line)); len(f) > 0 {
				return f, true
			}
		}
		return nil, false
	}
	fail := func(format string, args ...any) error {
		return fmt.Errorf("%w: ASCII STL line %d: %s", ErrFormat, lineNo, fmt.Sprintf(format, args...))
	}
	expect := func(words ...string) error {
		f, ok := next()
		if !ok {
			return fail("file ends where %q was expected", strings.Join(words, " "))
		}
		if len(f) != len(words) || !equalFold(f, words) {
			return fail("expected %q, found %q", strings.Join(words, " "), strings.Join(f, " "))
		}
		return nil
	}
	for {
		f, ok := next()
		if !ok {
			return raw, nil
		}
		if !strings.EqualFold(f[0], "solid") {
			return nil, fail("expected \"solid name\", found %q", strings.Join(f, " "))
		}
		name := strings.Join(f[1:], " ")
		if name == "" {
			name = "body"
		}
		solid, err := raw.addName(name)
		if err != nil {
			return nil, fail("%v", err)
		}
		openedAt := lineNo
	block:
		for {
			f, ok := next()
			if !ok {
				return nil, fail("file ends inside solid %q opened on line %d (missing \"endsolid\")", name, openedAt)
			}
			switch strings.ToLower(f[0]) {
			case "endsolid":
				break block
			case "facet":
			default:
				return nil, fail("expected \"facet normal nx ny nz\" or \"endsolid\", found %q", strings.Join(f, " "))
			}
			if len(raw.tris) >= maxTris {
				return nil, fmt.Errorf("%w: ASCII STL line %d: more than max_triangles = %d triangles; raise max_triangles to read it", ErrLimit, lineNo, maxTris)
			}
			if err := expect("outer", "loop"); err != nil {
				return nil, err
			}
			var tri [3][3]float64
			for c := range 3 {
				f, ok := next()
				if !ok || !strings.EqualFold(f[0], "vertex") || len(f) != 4 {
					return nil, fail("expected \"vertex x y z\" (corner %d of triangle %d), found %q", c+1, len(raw.tris), strings.Join(f, " "))
				}
				for k := range 3 {
					v, err := strconv.ParseFloat(f[k+1], 64)
					if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
						return nil, fail("vertex coordinate %c is %q, not a finite number", "xyz"[k], f[k+1])
					}
					tri[c][k] = v
				}
			}
			if err := expect("endloop"); err != nil {
				return nil, err
			}
			if err := expect("endfacet"); err != nil {
				return nil, err
			}
			raw.tris = append(raw.tris, tri)
			raw.solid = append(raw.solid, solid)
		}
	}
}

func equalFold(a, b []string) bool {
	for i := range a {
		if !strings.EqualFold(a[i], b[i]) {
			return false
		}
	}
	return true
}

// weldTolerance is the snap size relative to the bounding-box diagonal:
// far below any real feature, far above float32 rounding of a coordinate
// written twice.
const weldTolerance = 1e-9

// weld merges corners that coincide after snapping to a grid of
// weldTolerance times the bounding-box diagonal, then places the vertices.
func weld(raw *rawMesh, place placement) *Mesh {
	lo, hi := raw.tris[0][0], raw.tris[0][0]
	for _, t := range raw.tris {
		for _, v := range t {
			for k := range 3 {
				lo[k], hi[k] = min(lo[k], v[k]), max(hi[k], v[k])
			}
		}
	}
	snap := weldTolerance * math.Sqrt(sq(hi[0]-lo[0])+sq(hi[1]-lo[1])+sq(hi[2]-lo[2]))
	if snap == 0 {
		snap = 1
	}
	m := &Mesh{
		Triangles:  make([][3]int32, len(raw.tris)),
		Solid:      raw.solid,
		SolidNames: raw.names,
		Format:     raw.format,
		place:      place,
	}
	index := make(map[[3]int64]int32, len(raw.tris)/2+8)
	for t, tri := range raw.tris {
		for c, v := range tri {
			key := [3]int64{
				int64(math.Round((v[0] - lo[0]) / snap)),
				int64(math.Round((v[1] - lo[1]) / snap)),
				int64(math.Round((v[2] - lo[2]) / snap)),
			}
			i, ok := index[key]
			if !ok {
				i = int32(len(m.Vertices))
				index[key] = i
				m.Vertices = append(m.Vertices, place.toPart(v))
			}
			m.Triangles[t][c] = i
		}
	}
	return m
}

func sq(x float64) float64 { return x * x }
