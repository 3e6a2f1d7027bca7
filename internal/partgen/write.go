package partgen

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"strconv"
)

// WriteASCII writes blocks as ASCII STL, one "solid … endsolid" each.
// Coordinates use the shortest text that reads back to the same float64.
func WriteASCII(w io.Writer, blocks []Block) error {
	bw := bufio.NewWriter(w)
	num := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	for _, b := range blocks {
		fmt.Fprintf(bw, "solid %s\n", b.Name)
		for _, t := range b.Triangles {
			n := unitNormal(t)
			fmt.Fprintf(bw, "  facet normal %s %s %s\n    outer loop\n", num(n[0]), num(n[1]), num(n[2]))
			for _, v := range t {
				fmt.Fprintf(bw, "      vertex %s %s %s\n", num(v[0]), num(v[1]), num(v[2]))
			}
			bw.WriteString("    endloop\n  endfacet\n")
		}
		fmt.Fprintf(bw, "endsolid %s\n", b.Name)
	}
	return bw.Flush()
}

// WriteBinary writes triangles as binary STL with an 80-byte header text.
func WriteBinary(w io.Writer, header string, tris []Triangle) error {
	buf := make([]byte, 84, 84+50*len(tris))
	copy(buf[:80], header)
	binary.LittleEndian.PutUint32(buf[80:], uint32(len(tris)))
	for _, t := range tris {
		n := unitNormal(t)
		rec := [12]float64{n[0], n[1], n[2]}
		for c := range 3 {
			copy(rec[3+3*c:], t[c][:])
		}
		for _, v := range rec {
			buf = binary.LittleEndian.AppendUint32(buf, math.Float32bits(float32(v)))
		}
		buf = append(buf, 0, 0) // attribute byte count
	}
	_, err := w.Write(buf)
	return err
}

func unitNormal(t Triangle) [3]float64 {
	n := cross(sub(t[1], t[0]), sub(t[2], t[0]))
	l := math.Sqrt(n[0]*n[0] + n[1]*n[1] + n[2]*n[2])
	if l == 0 {
		return n
	}
	return [3]float64{n[0] / l, n[1] / l, n[2] / l}
}

// File is one generated test file.
type File struct {
	Name string
	Data []byte
}

// Standard dimensions of the shared parts, mm.
const (
	SphereRadius    = 50.0
	SphereLevel     = 4
	CylinderRadius  = 25.0
	CylinderHeight  = 80.0
	CylinderSides   = 128
	TubeOuter       = 40.0
	TubeInner       = 32.0
	TubeLength      = 120.0
	TubeSides       = 64
	BrokenCubeEdge  = 10.0
	TruncateAtBytes = 84 + 50*7 + 20
)

// TestParts returns the files of testdata/parts, all in millimetres, and
// the two specs of the hub (see HubSpecs).
func TestParts() ([]File, error) {
	var files []File
	ascii := func(name string, blocks ...Block) error {
		var b bytes.Buffer
		if err := WriteASCII(&b, blocks); err != nil {
			return err
		}
		files = append(files, File{name, b.Bytes()})
		return nil
	}
	bin := func(name, header string, tris []Triangle) []byte {
		var b bytes.Buffer
		_ = WriteBinary(&b, header, tris) // a bytes.Buffer does not fail
		files = append(files, File{name, b.Bytes()})
		return b.Bytes()
	}
	hub, err := StandardHub().Triangles()
	if err != nil {
		return nil, err
	}
	bodies, mesh := StandardHub().HubSpecs()
	files = append(files, File{"hub-bodies.yaml", bodies}, File{"hub-stl.yaml", mesh})
	bin("sphere.stl", "solid sphere", Icosphere(SphereRadius, SphereLevel))
	bin("hub.stl", "flanged hub", hub)
	bin("tube.stl", "", Tube(TubeOuter, TubeInner, TubeLength, TubeSides))
	cube := Cube(BrokenCubeEdge)
	full := bin("broken_truncated.stl", "cube", cube)
	files[len(files)-1].Data = full[:TruncateAtBytes]

	flipped := append([]Triangle(nil), cube...)
	flipped[5][1], flipped[5][2] = flipped[5][2], flipped[5][1]
	inside := make([]Triangle, len(cube))
	for i, t := range cube {
		inside[i] = Triangle{t[0], t[2], t[1]}
	}
	second := make([]Triangle, len(cube))
	for i, t := range cube { // a second cube touching the first along one edge
		for c := range 3 {
			second[i][c] = [3]float64{t[c][0] + BrokenCubeEdge, t[c][1] + BrokenCubeEdge, t[c][2]}
		}
	}
	for _, f := range []struct {
		name   string
		blocks []Block
	}{
		{"cylinder.stl", []Block{{"cylinder", Cylinder(CylinderRadius, CylinderHeight, CylinderSides)}}},
		{"bracket.stl", Bracket()},
		{"broken_open_edge.stl", []Block{{"cube", cube[1:]}}},
		{"broken_nonmanifold_edge.stl", []Block{{"cube", cube}, {"neighbour", second}}},
		{"broken_flipped_triangle.stl", []Block{{"cube", flipped}}},
		{"broken_degenerate_triangle.stl", []Block{{"cube", sliver(cube)}}},
		{"broken_inside_out.stl", []Block{{"cube", inside}}},
	} {
		if err := ascii(f.name, f.blocks...); err != nil {
			return nil, err
		}
	}
	files = append(files, File{"broken_garbage.stl", []byte(
		"solid cube\n  facet normal 0 0 1\n    outer loop\n      vertex 0 0 10\n      vertex 10 0 banana\n")})
	var unclosed bytes.Buffer
	if err := WriteASCII(&unclosed, []Block{{"cube", cube}}); err != nil {
		return nil, err
	}
	files = append(files, File{"broken_no_endsolid.stl", bytes.TrimSuffix(unclosed.Bytes(), []byte("endsolid cube\n"))})
	return files, nil
}

// sliver splits the first triangle of a closed mesh at the midpoint of
// its first edge and closes the split with a zero-area triangle, so the
// mesh stays closed and consistently oriented.
func sliver(tris []Triangle) []Triangle {
	a, b, c := tris[0][0], tris[0][1], tris[0][2]
	m := [3]float64{(a[0] + b[0]) / 2, (a[1] + b[1]) / 2, (a[2] + b[2]) / 2}
	return append([]Triangle{{a, m, c}, {m, b, c}, {b, m, a}}, tris[1:]...)
}
